//! Concentrations to molecule counts and back.
//!
//! A concentration `x` in the model's unit `u` (so many mol/L) in a volume
//! `V` litres holds `x · u · N_A · V` molecules; `u · N_A · V` is the number
//! of molecules per concentration unit, written Ω here. Counts are rounded
//! to the nearest whole number, a value exactly halfway going to the even
//! neighbour (so that rounding has no bias on average); counts above 2^53
//! are refused, since an f64 can no longer tell neighbouring counts apart.

/// The Avogadro constant in 1/mol: exact by the 2019 SI definition, the
/// CODATA 2018 value (Tiesinga et al., Rev. Mod. Phys. 93, 025010, 2021).
pub const AVOGADRO: f64 = 6.022_140_76e23;

/// The largest count handled: 2^53, the last whole number up to which every
/// integer is an f64.
pub const MAX_COUNT: f64 = 9_007_199_254_740_992.0;

/// Volume units accepted by `parse_volume`, with their size in litres.
pub const VOLUME_UNITS: [(&str, f64); 8] = [
    ("L", 1.0),
    ("mL", 1e-3),
    ("uL", 1e-6),
    ("µL", 1e-6),
    ("μL", 1e-6),
    ("nL", 1e-9),
    ("pL", 1e-12),
    ("fL", 1e-15),
];

/// Parses a volume such as `1 pL`, `2.5fL` or `1e-15 L` into litres. A
/// unit is required: a bare number could be meant in any of them.
pub fn parse_volume(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let split = t
        .char_indices()
        .find(|(_, c)| c.is_alphabetic() && *c != 'e' && *c != 'E')
        .map(|(i, _)| i)
        .unwrap_or(t.len());
    let (number, unit) = (t[..split].trim(), t[split..].trim());
    let Ok(value) = number.parse::<f64>() else {
        return Err(format!(
            "`{text}` is not a volume (a number and a unit: L, mL, uL, nL, pL or fL)"
        ));
    };
    if unit.is_empty() {
        return Err(format!(
            "`{text}` has no unit; write it with one of L, mL, uL, nL, pL, fL (`{number} fL`)"
        ));
    }
    let Some((_, litres)) = VOLUME_UNITS.iter().find(|(u, _)| *u == unit) else {
        return Err(format!(
            "`{unit}` is not a volume unit (use L, mL, uL, nL, pL or fL)"
        ));
    };
    let v = value * litres;
    if !(v.is_finite() && v > 0.0) {
        return Err(format!(
            "`{text}`: the volume must be a positive finite number"
        ));
    }
    Ok(v)
}

/// Ω: molecules per concentration unit (`molar` mol/L) in `litres`.
pub fn molecules_per_unit(molar: f64, litres: f64) -> f64 {
    molar * AVOGADRO * litres
}

/// The count for `value` concentration units at Ω molecules per unit,
/// rounded half to even; `None` if not finite, negative or above 2^53.
pub fn count_of(value: f64, omega: f64) -> Option<i64> {
    let x = value * omega;
    if !(0.0..=MAX_COUNT).contains(&x) {
        return None;
    }
    Some(x.round_ties_even() as i64)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn volumes_need_a_known_unit() {
        let close = |text: &str, litres: f64| {
            let v = parse_volume(text).unwrap();
            assert!((v - litres).abs() <= 1e-15 * litres, "{text}: {v}");
        };
        close("1 pL", 1e-12);
        close("2.5fL", 2.5e-15);
        close("1e-15 L", 1e-15);
        close("3 µL", 3e-6);
        close("4 mL", 4e-3);
        assert!(parse_volume("1").unwrap_err().contains("no unit"));
        assert!(
            parse_volume("1 kg")
                .unwrap_err()
                .contains("not a volume unit")
        );
        assert!(parse_volume("-1 L").is_err());
        assert!(parse_volume("0 L").is_err());
        assert!(parse_volume("abc").is_err());
    }

    #[test]
    fn counts_round_half_to_even_and_refuse_the_unrepresentable() {
        // 1 nM in 1 fL: 1e-9 · 6.02214076e23 · 1e-15 = 0.602214076 molecules.
        let omega = molecules_per_unit(1e-9, 1e-15);
        assert!((omega - 0.602_214_076).abs() < 1e-15);
        assert_eq!(count_of(10.0, omega), Some(6));
        assert_eq!(count_of(2.5, 1.0), Some(2));
        assert_eq!(count_of(3.5, 1.0), Some(4));
        assert_eq!(count_of(-1.0, 1.0), None);
        assert_eq!(count_of(1e20, 1.0), None);
        assert_eq!(count_of(f64::NAN, 1.0), None);
    }
}
