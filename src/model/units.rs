//! Units of concentration and time, and dimensions (powers of concentration
//! and time). Conversion to the model's default units happens once, in
//! `model/`; later stages see plain numbers in default units.
//!
//! Scale factors are the SI definitions: 1 M = 1 mol/L, prefixes m = 1e-3,
//! u (µ) = 1e-6, n = 1e-9, p = 1e-12; 1 min = 60 s, 1 h = 3600 s, 1 d = 86 400 s, 1 ms = 1e-3 s
//! (SI Brochure, 9th edition, table 8: non-SI units accepted for use with the SI).

use crate::diagnostics::{Code, Diagnostic};
use std::fmt;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize)]
pub enum ConcUnit {
    M,
    MilliM,
    MicroM,
    NanoM,
    PicoM,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize)]
pub enum TimeUnit {
    S,
    Ms,
    Min,
    H,
    Day,
}

impl ConcUnit {
    /// Size of one unit in mol/L.
    pub fn molar(self) -> f64 {
        match self {
            ConcUnit::M => 1.0,
            ConcUnit::MilliM => 1e-3,
            ConcUnit::MicroM => 1e-6,
            ConcUnit::NanoM => 1e-9,
            ConcUnit::PicoM => 1e-12,
        }
    }
    pub fn symbol(self) -> &'static str {
        match self {
            ConcUnit::M => "M",
            ConcUnit::MilliM => "mM",
            ConcUnit::MicroM => "uM",
            ConcUnit::NanoM => "nM",
            ConcUnit::PicoM => "pM",
        }
    }
    pub fn parse(word: &str) -> Option<ConcUnit> {
        Some(match word {
            "M" => ConcUnit::M,
            "mM" => ConcUnit::MilliM,
            "uM" | "µM" | "μM" => ConcUnit::MicroM,
            "nM" => ConcUnit::NanoM,
            "pM" => ConcUnit::PicoM,
            _ => return None,
        })
    }
}

impl TimeUnit {
    /// Size of one unit in seconds.
    pub fn seconds(self) -> f64 {
        match self {
            TimeUnit::S => 1.0,
            TimeUnit::Ms => 1e-3,
            TimeUnit::Min => 60.0,
            TimeUnit::H => 3600.0,
            TimeUnit::Day => 86_400.0,
        }
    }
    pub fn symbol(self) -> &'static str {
        match self {
            TimeUnit::S => "s",
            TimeUnit::Ms => "ms",
            TimeUnit::Min => "min",
            TimeUnit::H => "h",
            TimeUnit::Day => "d",
        }
    }
    pub fn parse(word: &str) -> Option<TimeUnit> {
        Some(match word {
            "s" => TimeUnit::S,
            "ms" => TimeUnit::Ms,
            "min" => TimeUnit::Min,
            "h" => TimeUnit::H,
            "d" => TimeUnit::Day,
            _ => return None,
        })
    }
}

/// The model's default units.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub struct Units {
    pub concentration: ConcUnit,
    pub time: TimeUnit,
}

impl Default for Units {
    fn default() -> Self {
        Units {
            concentration: ConcUnit::MicroM,
            time: TimeUnit::S,
        }
    }
}

/// A dimension: concentration^conc · time^time.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, serde::Serialize)]
pub struct Dim {
    pub conc: i32,
    pub time: i32,
}

// `mul`/`div` combine dimensions as units multiply; plain methods keep
// call sites explicit (`a.mul(b)`) without importing operator traits.
#[allow(clippy::should_implement_trait)]
impl Dim {
    pub const NONE: Dim = Dim { conc: 0, time: 0 };
    pub const CONC: Dim = Dim { conc: 1, time: 0 };
    pub const TIME: Dim = Dim { conc: 0, time: 1 };
    pub fn new(conc: i32, time: i32) -> Dim {
        Dim { conc, time }
    }
    // Saturating: absurd powers (`uM^2147483647`) must give a dimension
    // that matches nothing, never an overflow.
    pub fn mul(self, o: Dim) -> Dim {
        Dim {
            conc: self.conc.saturating_add(o.conc),
            time: self.time.saturating_add(o.time),
        }
    }
    pub fn div(self, o: Dim) -> Dim {
        Dim {
            conc: self.conc.saturating_sub(o.conc),
            time: self.time.saturating_sub(o.time),
        }
    }
    pub fn powi(self, n: i32) -> Dim {
        Dim {
            conc: self.conc.saturating_mul(n),
            time: self.time.saturating_mul(n),
        }
    }
    /// The dimension a mass-action constant of total order `n` must have:
    /// concentration^(1-n) / time.
    pub fn mass_action_constant(order: i32) -> Dim {
        Dim {
            conc: 1 - order,
            time: -1,
        }
    }
    /// Concentration per time: the dimension of a rate.
    pub const RATE: Dim = Dim { conc: 1, time: -1 };

    /// Written in the given units, e.g. `/uM/s`, `uM`, `uM/s`, `1` for none.
    pub fn display_in(self, units: Units) -> String {
        let mut num = Vec::new();
        let mut den = Vec::new();
        let mut put = |sym: &str, p: i32| {
            let part = |p: i32| {
                if p.unsigned_abs() == 1 {
                    sym.to_string()
                } else {
                    format!("{sym}^{}", p.unsigned_abs())
                }
            };
            if p > 0 {
                num.push(part(p));
            } else if p < 0 {
                den.push(part(p));
            }
        };
        put(units.concentration.symbol(), self.conc);
        put(units.time.symbol(), self.time);
        let mut out = num.join("*");
        for d in den {
            out.push('/');
            out.push_str(&d);
        }
        if out.is_empty() {
            "1 (dimensionless)".into()
        } else {
            out
        }
    }
}

impl fmt::Display for Dim {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.display_in(Units::default()))
    }
}

/// A unit written after a number: a product of powers of one concentration
/// unit and one time unit (e.g. `/uM/s` = uM^-1 s^-1).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct UnitExpr {
    /// Factor to the base (mol/L and s) per unit, times the powers.
    pub conc: Option<(ConcUnit, i32)>,
    pub time: Option<(TimeUnit, i32)>,
}

impl UnitExpr {
    pub fn dim(&self) -> Dim {
        Dim {
            conc: self.conc.map(|c| c.1).unwrap_or(0),
            time: self.time.map(|t| t.1).unwrap_or(0),
        }
    }
    /// The factor that converts a value in this unit to the default units.
    pub fn factor_to(&self, units: Units) -> f64 {
        self.convert(1.0, units)
    }

    /// Converts a value in this unit to the default units. The unit sizes
    /// are exact rationals (powers of ten, 60, 3600), so the factor is
    /// formed exactly and applied as one multiplication and one division:
    /// `1 mM` becomes exactly `1000 uM` (a float factor of 1e-3/1e-6 would
    /// give 1000.0000000000001).
    pub fn convert(&self, value: f64, units: Units) -> f64 {
        let mut num: i128 = 1;
        let mut den: i128 = 1;
        let mut exact = true;
        let mut scale = |size: (i128, i128), default: (i128, i128), power: i32| {
            // (size / default)^power, as num/den.
            let (mut a, mut b) = (size.0 * default.1, size.1 * default.0);
            if power < 0 {
                std::mem::swap(&mut a, &mut b);
            }
            // Powers beyond what i128 can hold exactly (and absurd ones such
            // as `uM^2147483647`) fall back to floating point at once.
            if power.unsigned_abs() > 12 {
                exact = false;
                return;
            }
            for _ in 0..power.unsigned_abs() {
                match (num.checked_mul(a), den.checked_mul(b)) {
                    (Some(x), Some(y)) => {
                        num = x;
                        den = y;
                    }
                    _ => {
                        exact = false;
                        return;
                    }
                }
            }
        };
        if let Some((c, p)) = self.conc {
            scale(c.exact_molar(), units.concentration.exact_molar(), p);
        }
        if let Some((t, p)) = self.time {
            scale(t.exact_seconds(), units.time.exact_seconds(), p);
        }
        if !exact {
            let mut f = 1.0;
            if let Some((c, p)) = self.conc {
                f *= (c.molar() / units.concentration.molar()).powi(p);
            }
            if let Some((t, p)) = self.time {
                f *= (t.seconds() / units.time.seconds()).powi(p);
            }
            return value * f;
        }
        let g = gcd_i128(num, den);
        let (num, den) = (num / g, den / g);
        if num == 1 && den == 1 {
            value
        } else if den == 1 {
            value * num as f64
        } else if num == 1 {
            value / den as f64
        } else {
            value * num as f64 / den as f64
        }
    }
}

fn gcd_i128(mut a: i128, mut b: i128) -> i128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a.abs().max(1)
}

impl ConcUnit {
    /// Size in mol/L as an exact fraction.
    fn exact_molar(self) -> (i128, i128) {
        match self {
            ConcUnit::M => (1, 1),
            ConcUnit::MilliM => (1, 1_000),
            ConcUnit::MicroM => (1, 1_000_000),
            ConcUnit::NanoM => (1, 1_000_000_000),
            ConcUnit::PicoM => (1, 1_000_000_000_000),
        }
    }
}

impl TimeUnit {
    /// Size in seconds as an exact fraction.
    fn exact_seconds(self) -> (i128, i128) {
        match self {
            TimeUnit::S => (1, 1),
            TimeUnit::Ms => (1, 1_000),
            TimeUnit::Min => (60, 1),
            TimeUnit::H => (3_600, 1),
            TimeUnit::Day => (86_400, 1),
        }
    }
}

/// Why a unit or a quantity written as text cannot be read. The messages
/// are what users have always seen; each kind has a [`Code`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum UnitError {
    MissingUnit { text: String },
    BadPower { power: String, text: String },
    TwoConcentrationUnits { text: String },
    TwoTimeUnits { text: String },
    UnknownWord { word: String },
    UnexpectedSeparator { separator: String, text: String },
    NotAQuantity { text: String },
    NotFinite { text: String },
}

impl UnitError {
    pub fn code(&self) -> Code {
        match self {
            UnitError::MissingUnit { .. }
            | UnitError::BadPower { .. }
            | UnitError::TwoConcentrationUnits { .. }
            | UnitError::TwoTimeUnits { .. }
            | UnitError::UnknownWord { .. }
            | UnitError::UnexpectedSeparator { .. } => Code::UnknownUnit,
            UnitError::NotAQuantity { .. } | UnitError::NotFinite { .. } => Code::BadNumber,
        }
    }
}

impl fmt::Display for UnitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            UnitError::MissingUnit { text } => write!(f, "missing unit in `{text}`"),
            UnitError::BadPower { power, text } => write!(f, "bad power `{power}` in `{text}`"),
            UnitError::TwoConcentrationUnits { text } => {
                write!(f, "two different concentration units in `{text}`")
            }
            UnitError::TwoTimeUnits { text } => write!(f, "two different time units in `{text}`"),
            UnitError::UnknownWord { word } => write!(f, "unknown unit `{word}`"),
            UnitError::UnexpectedSeparator { separator, text } => {
                write!(f, "unexpected `{separator}` in unit `{text}`")
            }
            UnitError::NotAQuantity { text } => {
                write!(f, "`{text}` is not a number with an optional unit")
            }
            UnitError::NotFinite { text } => write!(f, "`{text}` is not a finite number"),
        }
    }
}

impl std::error::Error for UnitError {}

impl From<UnitError> for Diagnostic {
    fn from(e: UnitError) -> Self {
        Diagnostic::error(e.code(), e.to_string())
    }
}

/// Callers that report a unit error as text (a usage error) keep doing so.
impl From<UnitError> for String {
    fn from(e: UnitError) -> Self {
        e.to_string()
    }
}

/// Parses a unit such as `uM`, `/uM/s`, `1/s`, `uM*s`, `uM^-1`, `/M^2/s`.
/// Errors name the offending word.
pub fn parse_unit(text: &str) -> Result<UnitExpr, UnitError> {
    let text = text.trim();
    let mut out = UnitExpr::default();
    let mut rest = text;
    let mut sign = 1;
    if let Some(r) = rest.strip_prefix("1/") {
        rest = r;
        sign = -1;
    } else if let Some(r) = rest.strip_prefix('/') {
        rest = r;
        sign = -1;
    }
    loop {
        let rest_trim = rest.trim_start();
        let end = rest_trim
            .find(['/', '*', '·', ' '])
            .unwrap_or(rest_trim.len());
        let word_pow = &rest_trim[..end];
        if word_pow.is_empty() {
            return Err(UnitError::MissingUnit { text: text.into() });
        }
        let (word, power) = match word_pow.split_once('^') {
            Some((w, p)) => (
                w,
                p.parse::<i32>().map_err(|_| UnitError::BadPower {
                    power: p.into(),
                    text: text.into(),
                })?,
            ),
            None => (word_pow, 1),
        };
        let power = power.saturating_mul(sign);
        if let Some(c) = ConcUnit::parse(word) {
            match &mut out.conc {
                Some((u, p)) if *u == c => *p = p.saturating_add(power),
                Some(_) => return Err(UnitError::TwoConcentrationUnits { text: text.into() }),
                None => out.conc = Some((c, power)),
            }
        } else if let Some(t) = TimeUnit::parse(word) {
            match &mut out.time {
                Some((u, p)) if *u == t => *p = p.saturating_add(power),
                Some(_) => return Err(UnitError::TwoTimeUnits { text: text.into() }),
                None => out.time = Some((t, power)),
            }
        } else {
            return Err(UnitError::UnknownWord { word: word.into() });
        }
        let after = rest_trim[end..].trim_start();
        if after.is_empty() {
            break;
        }
        let (sep, tail) = after.split_at(after.chars().next().map(char::len_utf8).unwrap_or(1));
        sign = match sep {
            "/" => -1,
            "*" | "·" => 1,
            _ => {
                return Err(UnitError::UnexpectedSeparator {
                    separator: sep.into(),
                    text: text.into(),
                });
            }
        };
        rest = tail;
    }
    Ok(out)
}

/// A number with an optional unit, as written on the command line
/// (`20`, `5mM`, `20 min`, `1e6 /M/s`), converted to the default units.
/// Returns the value and the dimension of the unit, if one was written.
pub fn parse_quantity(text: &str, units: Units) -> Result<(f64, Option<Dim>), UnitError> {
    let text = text.trim();
    let split = text
        .char_indices()
        .find(|&(i, c)| {
            !(c.is_ascii_digit()
                || c == '.'
                || c == '+'
                || c == '-'
                || ((c == 'e' || c == 'E')
                    && i > 0
                    && text[i + 1..]
                        .starts_with(|d: char| d.is_ascii_digit() || d == '-' || d == '+')))
        })
        .map(|(i, _)| i)
        .unwrap_or(text.len());
    let (num, unit) = text.split_at(split);
    let value: f64 = num
        .trim()
        .parse()
        .map_err(|_| UnitError::NotAQuantity { text: text.into() })?;
    if !value.is_finite() {
        return Err(UnitError::NotFinite { text: text.into() });
    }
    let unit = unit.trim();
    if unit.is_empty() {
        return Ok((value, None));
    }
    let u = parse_unit(unit)?;
    Ok((u.convert(value, units), Some(u.dim())))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs().max(1.0)
    }

    // Check values: SI definitions of the units (BIPM SI Brochure, 9th ed.,
    // prefixes m = 1e-3, µ = 1e-6; minute = 60 s, hour = 3600 s; the molar is
    // mol/L).
    #[test]
    fn si_conversions() {
        let u = Units::default();
        assert!(close(parse_quantity("1 mM", u).unwrap().0, 1000.0));
        assert!(close(parse_quantity("300 nM", u).unwrap().0, 0.3));
        assert!(close(parse_quantity("1 min", u).unwrap().0, 60.0));
        assert!(close(parse_quantity("1 h", u).unwrap().0, 3600.0));
        assert!(close(parse_quantity("1e6 /M/s", u).unwrap().0, 1.0));
        assert!(close(parse_quantity("0.5 /min", u).unwrap().0, 0.5 / 60.0));
        assert!(close(parse_quantity("5mM", u).unwrap().0, 5000.0));
        let mm = Units {
            concentration: ConcUnit::MilliM,
            time: TimeUnit::Min,
        };
        assert!(close(parse_quantity("1 uM", mm).unwrap().0, 1e-3));
        assert!(close(
            parse_quantity("2 /uM/s", mm).unwrap().0,
            2.0 * 1000.0 * 60.0
        ));
    }

    #[test]
    fn decimal_prefixes_convert_exactly() {
        // SI prefixes are exact powers of ten: 1 mM is exactly 1000 uM and
        // 20 min exactly 1200 s, with no rounding left in the float.
        let u = Units::default();
        assert_eq!(parse_quantity("1 mM", u).unwrap().0, 1000.0);
        assert_eq!(parse_quantity("1.5 mM", u).unwrap().0, 1500.0);
        assert_eq!(parse_quantity("300 nM", u).unwrap().0, 0.3);
        assert_eq!(parse_quantity("20 min", u).unwrap().0, 1200.0);
        assert_eq!(parse_quantity("1e6 /M/s", u).unwrap().0, 1.0);
    }

    #[test]
    fn dimensions_of_units() {
        assert_eq!(parse_unit("/uM/s").unwrap().dim(), Dim::new(-1, -1));
        assert_eq!(parse_unit("uM").unwrap().dim(), Dim::CONC);
        assert_eq!(parse_unit("1/s").unwrap().dim(), Dim::new(0, -1));
        assert_eq!(parse_unit("uM^2/s").unwrap().dim(), Dim::new(2, -1));
        assert!(parse_unit("furlong").is_err());
        assert_eq!(Dim::mass_action_constant(2), Dim::new(-1, -1));
    }
}
