//! The units of the bench that are not powers of concentration and time:
//! volumes, amounts, mass concentrations and molar masses, enzyme activity,
//! molar energies and entropies, and temperatures.
//!
//! Why a module of its own: these quantities appear only in a few places of
//! a file (`volume`, a species' value and its `mass`/`activity`, a param's
//! temperature law, the volume of an addition), where lowering turns them
//! into concentrations, litres, J/mol or kelvin at once. They never enter
//! the dimension algebra of rate constants, so `units.rs` stays about
//! concentration and time.
//!
//! Invariants: every factor is an exact fraction of the SI unit, taken from
//! the definitions (SI Brochure, 9th edition, 2019: litre, mole, gram and
//! the decimal prefixes; dalton = g/mol; IUBMB 1961 enzyme unit
//! 1 U = 1 µmol/min; thermochemical calorie 4.184 J); temperatures are
//! affine (0 °C = 273.15 K) and handled apart from the factors.

/// An exact fraction num/den.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Factor {
    pub num: i128,
    pub den: i128,
}

impl Factor {
    const ONE: Factor = Factor { num: 1, den: 1 };
    fn new(num: i128, den: i128) -> Factor {
        let g = gcd(num, den);
        Factor {
            num: num / g,
            den: den / g,
        }
    }
    fn mul(self, o: Factor) -> Option<Factor> {
        Some(Factor::new(
            self.num.checked_mul(o.num)?,
            self.den.checked_mul(o.den)?,
        ))
    }
    fn div(self, o: Factor) -> Option<Factor> {
        self.mul(Factor {
            num: o.den,
            den: o.num,
        })
    }
    /// This unit in units of `other` (exact).
    pub fn ratio(self, other: Factor) -> Option<Factor> {
        self.div(other)
    }
    /// `value` in this unit, in the SI base (one multiplication and one
    /// division, so `1 mg/mL` is exactly `1 g/L`).
    pub fn apply(self, value: f64) -> f64 {
        match (self.num, self.den) {
            (1, 1) => value,
            (n, 1) => value * n as f64,
            (1, d) => value / d as f64,
            (n, d) => value * n as f64 / d as f64,
        }
    }
}

fn gcd(mut a: i128, mut b: i128) -> i128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a.abs().max(1)
}

/// What a lab unit measures, with the SI unit its factor converts to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LabKind {
    /// litres
    Volume,
    /// moles
    Amount,
    /// grams per litre
    MassConcentration,
    /// grams per mole
    MolarMass,
    /// enzyme units per litre (1 U = 1 µmol/min)
    ActivityConcentration,
    /// enzyme units per gram
    SpecificActivity,
    /// joules per mole
    MolarEnergy,
    /// joules per mole per kelvin
    MolarEntropy,
}

impl LabKind {
    /// How a user would write one, for messages.
    pub fn example(self) -> &'static str {
        match self {
            LabKind::Volume => "a volume (L, mL, uL, nL, pL, fL)",
            LabKind::Amount => "an amount (mol, mmol, umol, nmol, pmol, fmol)",
            LabKind::MassConcentration => "a mass concentration (g/L, mg/mL, ug/mL, ...)",
            LabKind::MolarMass => "a molar mass (g/mol, Da, kDa, MDa)",
            LabKind::ActivityConcentration => "an activity concentration (U/mL, mU/mL, U/L)",
            LabKind::SpecificActivity => "a specific activity (U/mg, U/g, mU/mg)",
            LabKind::MolarEnergy => "a molar energy (J/mol, kJ/mol, cal/mol, kcal/mol)",
            LabKind::MolarEntropy => "a molar entropy (J/mol/K, cal/mol/K)",
        }
    }
}

/// Decimal prefixes (SI Brochure, 9th edition, table 7).
fn prefixed(word: &str, base: &str) -> Option<Factor> {
    let prefix = word.strip_suffix(base)?;
    Some(match prefix {
        "" => Factor::ONE,
        "k" => Factor::new(1_000, 1),
        "M" => Factor::new(1_000_000, 1),
        "m" => Factor::new(1, 1_000),
        "u" | "µ" | "μ" => Factor::new(1, 1_000_000),
        "n" => Factor::new(1, 1_000_000_000),
        "p" => Factor::new(1, 1_000_000_000_000),
        "f" => Factor::new(1, 1_000_000_000_000_000),
        _ => return None,
    })
}

fn litres(word: &str) -> Option<Factor> {
    // `l` as well as `L` (both are SI symbols for the litre), but no mega-
    // or kilo-litres in a well.
    let f = prefixed(word, "L").or_else(|| prefixed(word, "l"))?;
    (f.num == 1).then_some(f)
}
fn moles(word: &str) -> Option<Factor> {
    prefixed(word, "mol")
}
fn grams(word: &str) -> Option<Factor> {
    // `Mg` (megagram) is not a lab mass, and `mg` must not read as M + g.
    if word == "Mg" {
        return None;
    }
    prefixed(word, "g")
}
fn enzyme_units(word: &str) -> Option<Factor> {
    if word == "MU" {
        return None;
    }
    prefixed(word, "U")
}
fn joules(word: &str) -> Option<Factor> {
    match word {
        "cal" => Some(Factor::new(4_184, 1_000)),
        "kcal" => Some(Factor::new(4_184, 1)),
        _ => prefixed(word, "J").filter(|f| f.num <= 1_000 && f.den == 1),
    }
}
fn daltons(word: &str) -> Option<Factor> {
    // 1 Da = 1 g/mol (the molar mass of a molecule of mass 1 Da, to the
    // precision the 2019 SI redefinition leaves: 1 - 3.5e-10).
    match word {
        "Da" => Some(Factor::ONE),
        "kDa" => Some(Factor::new(1_000, 1)),
        "MDa" => Some(Factor::new(1_000_000, 1)),
        _ => None,
    }
}

/// Reads `unit` as one of the lab kinds: the factor to its SI unit.
pub fn lab_unit(unit: &str) -> Option<(LabKind, Factor)> {
    let parts: Vec<&str> = unit.trim().split('/').collect();
    match parts.as_slice() {
        [w] => {
            if let Some(f) = litres(w) {
                return Some((LabKind::Volume, f));
            }
            if let Some(f) = moles(w) {
                return Some((LabKind::Amount, f));
            }
            daltons(w).map(|f| (LabKind::MolarMass, f))
        }
        [a, b] => {
            if let (Some(m), Some(v)) = (grams(a), litres(b)) {
                return Some((LabKind::MassConcentration, m.div(v)?));
            }
            if let (Some(m), Some(n)) = (grams(a), moles(b)) {
                return Some((LabKind::MolarMass, m.div(n)?));
            }
            if let (Some(u), Some(v)) = (enzyme_units(a), litres(b)) {
                return Some((LabKind::ActivityConcentration, u.div(v)?));
            }
            if let (Some(u), Some(m)) = (enzyme_units(a), grams(b)) {
                return Some((LabKind::SpecificActivity, u.div(m)?));
            }
            if let (Some(e), Some(n)) = (joules(a), moles(b)) {
                return Some((LabKind::MolarEnergy, e.div(n)?));
            }
            None
        }
        [a, b, c] => {
            let (Some(e), Some(n)) = (joules(a), moles(b).or(moles(c))) else {
                return None;
            };
            let kelvin = [*b, *c].contains(&"K");
            kelvin.then(|| (LabKind::MolarEntropy, e.div(n).unwrap_or(e)))
        }
        _ => None,
    }
}

/// A temperature in kelvin from a number and its unit (`K`, `C` or `°C`).
pub fn kelvin(value: f64, unit: &str) -> Option<f64> {
    match unit.trim() {
        "K" => Some(value),
        // 0 °C = 273.15 K exactly (SI Brochure, 9th edition, 2.3.1).
        "C" | "°C" | "degC" => Some(value + 273.15),
        _ => None,
    }
}

/// A temperature as given to `--set temperature=...` or a scan (`37 C`,
/// `310.15 K`), in kelvin.
pub fn parse_temperature(text: &str) -> Result<f64, String> {
    let text = text.trim();
    let split = text
        .find(|c: char| !(c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E')))
        .unwrap_or(text.len());
    let (number, unit) = text.split_at(split);
    let value: f64 = number
        .trim()
        .parse()
        .map_err(|_| format!("`{text}` is not a temperature such as `37 C` or `310.15 K`"))?;
    match kelvin(value, unit) {
        Some(k) if k > 0.0 && k.is_finite() => Ok(k),
        Some(_) => Err(format!("`{text}` is at or below absolute zero")),
        None => Err(format!(
            "`{text}`: give the temperature with its unit, `C` or `K` (e.g. `37 C`)"
        )),
    }
}

/// Physical constants, CODATA 2018 (exact in the 2019 SI).
pub mod constants {
    /// Boltzmann constant, J/K.
    pub const BOLTZMANN: f64 = 1.380_649e-23;
    /// Planck constant, J·s.
    pub const PLANCK: f64 = 6.626_070_15e-34;
    /// Avogadro constant, 1/mol.
    pub const AVOGADRO: f64 = 6.022_140_76e23;
    /// Molar gas constant R = N_A·k, J/(mol·K).
    pub const GAS: f64 = 8.314_462_618_153_24;
}

/// How a rate constant depends on the temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TemperatureLaw {
    /// k(T) = k_ref · exp(−Ea/R · (1/T − 1/T_ref)) (Arrhenius 1889).
    Arrhenius { energy: f64 },
    /// k(T) = k_ref · (T/T_ref) · exp(−ΔH‡/R · (1/T − 1/T_ref)), the
    /// Eyring–Polanyi equation (Eyring 1935) relative to the reference; with
    /// an entropy given, the absolute form
    /// k(T) = (k_B·T/h) · exp(ΔS‡/R) · exp(−ΔH‡/(R·T)).
    Eyring { enthalpy: f64, entropy: Option<f64> },
}

/// A param whose value is given at a reference temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TemperatureDependence {
    /// The value as written, at `reference` (model units).
    pub reference_value: f64,
    /// Kelvin.
    pub reference: f64,
    pub law: TemperatureLaw,
    /// For the absolute Eyring form: the factor from 1/s (times the
    /// standard concentration 1 M to the power the constant's order needs)
    /// to the param's model units.
    pub absolute_scale: f64,
}

impl TemperatureDependence {
    /// The value at `kelvin`.
    pub fn at(&self, kelvin: f64) -> f64 {
        use constants::*;
        let (t, t0) = (kelvin, self.reference);
        match self.law {
            TemperatureLaw::Arrhenius { energy } => {
                self.reference_value * (-energy / GAS * (1.0 / t - 1.0 / t0)).exp()
            }
            TemperatureLaw::Eyring {
                enthalpy,
                entropy: None,
            } => self.reference_value * (t / t0) * (-enthalpy / GAS * (1.0 / t - 1.0 / t0)).exp(),
            TemperatureLaw::Eyring {
                enthalpy,
                entropy: Some(entropy),
            } => {
                self.absolute_scale
                    * (BOLTZMANN * t / PLANCK)
                    * (entropy / GAS).exp()
                    * (-enthalpy / (GAS * t)).exp()
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn factors_follow_the_si_definitions() {
        // SI Brochure, 9th edition (2019): 1 L = 1e-3 m³ and the decimal
        // prefixes; 1 mg/mL = 1 g/L exactly; dalton as g/mol.
        assert_eq!(
            lab_unit("uL"),
            Some((LabKind::Volume, Factor::new(1, 1_000_000)))
        );
        assert_eq!(lab_unit("µL"), lab_unit("uL"));
        assert_eq!(
            lab_unit("fL").unwrap().1,
            Factor::new(1, 1_000_000_000_000_000)
        );
        assert_eq!(
            lab_unit("mg/mL"),
            Some((LabKind::MassConcentration, Factor::ONE))
        );
        assert_eq!(lab_unit("ug/mL").unwrap().1, Factor::new(1, 1_000));
        assert_eq!(
            lab_unit("kDa"),
            Some((LabKind::MolarMass, Factor::new(1_000, 1)))
        );
        assert_eq!(lab_unit("kg/mol"), lab_unit("kDa"));
        assert_eq!(
            lab_unit("nmol"),
            Some((LabKind::Amount, Factor::new(1, 1_000_000_000)))
        );
        // IUBMB (1961): 1 U = 1 µmol/min; U/mL is 1000 U/L.
        assert_eq!(
            lab_unit("U/mL"),
            Some((LabKind::ActivityConcentration, Factor::new(1_000, 1)))
        );
        assert_eq!(
            lab_unit("U/mg"),
            Some((LabKind::SpecificActivity, Factor::new(1_000, 1)))
        );
        // Thermochemical calorie: 4.184 J exactly (ISO 80000-5).
        assert_eq!(
            lab_unit("kcal/mol"),
            Some((LabKind::MolarEnergy, Factor::new(4_184, 1)))
        );
        assert_eq!(
            lab_unit("J/mol/K"),
            Some((LabKind::MolarEntropy, Factor::ONE))
        );
        assert_eq!(lab_unit("uM"), None);
        assert_eq!(lab_unit("Mg/mL"), None);
        assert_eq!(kelvin(25.0, "C"), Some(298.15));
    }

    #[test]
    fn the_gas_constant_is_avogadro_times_boltzmann() {
        // CODATA 2018: R = N_A k exactly.
        let r = constants::AVOGADRO * constants::BOLTZMANN;
        assert!((r - constants::GAS).abs() < 1e-12 * r);
    }
}
