//! The rate law over its named kinetic constants, and their values.
//!
//! Why: what a practitioner fits to initial-rate data is the law in kcat,
//! the Michaelis and inhibition constants and Keq (Cleland's coefficient
//! form, Cleland 1963), not in rate constants that steady-state data cannot
//! separate. With the rate `E_t * N / D` collected by concentrations and
//! divided through by the denominator's coefficient of the saturating
//! monomial, every coefficient is a ratio of the microscopic coefficients;
//! each is written as a rational number times a product of named constants
//! (searched among products of up to six, smallest first), and a ratio no
//! product expresses gets a constant of its own (`C_<monomial>` in the
//! denominator, `N_<monomial>` in the numerator) defined by that ratio.
//!
//! Invariants: every coefficient of the form is proved equal to its ratio
//! by exact substitution of the constants' definitions, so the form is the
//! microscopic law exactly; the coefficient ratios are the law's
//! identifiable combinations, and their count is reported; the added
//! constants' names clash with no name of the model or of a named constant.

use super::{Constant, Derivation, Derived};
use crate::algebra::poly::{Monomial, Poly, Printer, Syntax, Var};
use crate::algebra::rational::RationalFunction;
use crate::model::{ConcUnit, Dim, Model};
use num_rational::BigRational;
use num_traits::{One, Signed, Zero};
use std::collections::BTreeMap;

/// One term of the constants form: `factor * prod(constant^exponent) *
/// concentrations`.
#[derive(Clone, Debug)]
pub struct FormTerm {
    pub factor: BigRational,
    /// Constant names with non-zero exponents.
    pub constants: Vec<(String, i32)>,
    pub concentrations: Monomial,
}

/// The rate as `total * (sum of numerator terms) / (sum of denominator
/// terms)`.
#[derive(Clone, Debug)]
pub struct ConstantsForm {
    /// The enzyme total the rate is proportional to.
    pub total: Var,
    pub numerator: Vec<FormTerm>,
    pub denominator: Vec<FormTerm>,
    /// Constants introduced for ratios no named constant expresses.
    pub added: Vec<Constant>,
    /// The number of coefficient ratios: the combinations steady-state
    /// rate data can identify (with the total known).
    pub identifiable: usize,
}

/// The largest number of named constants multiplied into one coefficient.
const MAX_FACTORS: usize = 6;

/// Builds the constants form of an overall rate whose constants are named;
/// `None` when the rate is not proportional to one enzyme total.
pub fn build(d: &Derivation, model: &Model) -> Option<ConstantsForm> {
    let Derived::Overall(_) = &d.derived else {
        return None;
    };
    if d.totals.len() != 1 {
        return None;
    }
    let total = d.vars.get(&d.totals[0].name)?;
    let num = d
        .rate
        .num
        .div_monomial(&Monomial::var(total))
        .filter(|n| n.degree_in(total) == 0 && d.rate.den.degree_in(total) == 0)?;
    let conc = |v: Var| d.is_concentration(v);
    let num_c = nonzero(num.collect(&conc));
    let den_c = nonzero(d.rate.den.collect(&conc));
    let norm = normalizing_monomial(&num_c, &den_c)?;
    let d_norm = den_c.get(&norm)?.clone();
    let search = Search::new(d);
    let mut taken: Vec<String> = model.all_names();
    taken.extend(d.constants.iter().map(|c| c.name.clone()));
    taken.extend((0..d.vars.len()).map(|v| d.vars.name(v as Var).to_string()));
    let mut added = Vec::new();
    let mut express = |m: &Monomial, coefficient: &Poly, prefix: &str, side: &str| {
        let ratio = RationalFunction::new(coefficient.clone(), d_norm.clone())?;
        if let Some((factor, constants)) = search.express(&ratio) {
            return Some(FormTerm {
                factor,
                constants,
                concentrations: m.clone(),
            });
        }
        let name = unused_name(&format!("{prefix}_{}", monomial_name(d, m)), &taken);
        taken.push(name.clone());
        let printer = Printer {
            vars: &d.vars,
            syntax: Syntax::Plain,
            is_concentration: &conc,
        };
        let (factor, value) = if ratio.num.leading().is_some_and(|(_, c)| c.is_negative()) {
            (-BigRational::one(), ratio.neg())
        } else {
            (BigRational::one(), ratio)
        };
        added.push(Constant {
            name: name.clone(),
            value,
            meaning: format!(
                "coefficient of {} in the {side}, over that of {} in the denominator (no product of named constants expresses it)",
                monomial_text(&printer, m),
                monomial_text(&printer, &norm)
            ),
        });
        Some(FormTerm {
            factor,
            constants: vec![(name, 1)],
            concentrations: m.clone(),
        })
    };
    let mut numerator = Vec::new();
    for (m, c) in ordered(&num_c) {
        numerator.push(express(m, c, "N", "numerator")?);
    }
    let mut denominator = Vec::new();
    for (m, c) in ordered(&den_c) {
        denominator.push(express(m, c, "C", "denominator")?);
    }
    let form = ConstantsForm {
        total,
        identifiable: num_c.len() + den_c.len() - 1,
        numerator,
        denominator,
        added,
    };
    form.proved(d, &num_c, &den_c, &d_norm).then_some(form)
}

fn nonzero(map: BTreeMap<Monomial, Poly>) -> BTreeMap<Monomial, Poly> {
    map.into_iter().filter(|(_, p)| !p.is_zero()).collect()
}

/// Terms by degree, then in the printers' order.
fn ordered(map: &BTreeMap<Monomial, Poly>) -> Vec<(&Monomial, &Poly)> {
    let mut list: Vec<(&Monomial, &Poly)> = map.iter().collect();
    list.sort_by(|a, b| {
        a.0.degree()
            .cmp(&b.0.degree())
            .then_with(|| b.0.grlex_cmp(a.0))
    });
    list
}

/// The denominator monomial the form divides by: the numerator's forward
/// (positive) term of highest degree that the denominator also has, so
/// that `kcat` multiplies it alone (Cleland 1963).
fn normalizing_monomial(
    num: &BTreeMap<Monomial, Poly>,
    den: &BTreeMap<Monomial, Poly>,
) -> Option<Monomial> {
    let unit = |_: Var| 1.0;
    let mut candidates: Vec<&Monomial> = num
        .iter()
        .filter(|(m, p)| p.eval(&unit) > 0.0 && den.contains_key(*m))
        .map(|(m, _)| m)
        .collect();
    if candidates.is_empty() {
        candidates = den.keys().collect();
    }
    candidates
        .into_iter()
        .max_by(|a, b| a.degree().cmp(&b.degree()).then_with(|| a.grlex_cmp(b)))
        .cloned()
}

/// Species names joined by `_`, a name repeated for each power; `1` for
/// the constant term.
fn monomial_name(d: &Derivation, m: &Monomial) -> String {
    if m.is_one() {
        return "1".into();
    }
    let mut parts = Vec::new();
    for &(v, e) in m.pairs() {
        for _ in 0..e {
            parts.push(d.vars.name(v).to_string());
        }
    }
    parts.join("_")
}

fn monomial_text(p: &Printer, m: &Monomial) -> String {
    if m.is_one() {
        "1".into()
    } else {
        p.monomial(m)
    }
}

fn unused_name(base: &str, taken: &[String]) -> String {
    if !taken.iter().any(|t| t == base) {
        return base.to_string();
    }
    (2..)
        .map(|k| format!("{base}_{k}"))
        .find(|n| !taken.iter().any(|t| t == n))
        .unwrap_or_default()
}

/// Finds a product of named constants equal to a ratio: a numeric filter
/// at three fixed points (products of up to three constants on each side of
/// a meet in the middle), then an exact check.
struct Search<'a> {
    constants: Vec<&'a Constant>,
    /// Products of exactly `k` signed constants (index `k`), sorted by the
    /// first log shift.
    products: Vec<Vec<Product>>,
}

/// A multiset of signed constants (`slot = 2 * index + (sign < 0)`),
/// non-decreasing, with the sum of its members' log shifts.
#[derive(Clone)]
struct Product {
    slots: Vec<usize>,
    shift: [f64; 2],
}

const HALF: usize = MAX_FACTORS / 2;

impl<'a> Search<'a> {
    fn new(d: &'a Derivation) -> Search<'a> {
        // Michaelis and inhibition constants first: a coefficient is then
        // written in the constants an experimenter reads off a plot.
        let rank = |name: &str| match name.split('_').next().unwrap_or("") {
            "Km" => 0,
            "Ki" => 1,
            "Kii" | "Ksi" => 2,
            "kcat" if name == "kcat" => 3,
            "kcat" => 4,
            "Keq" => 5,
            _ => 6,
        };
        let mut constants: Vec<&Constant> = d.constants.iter().collect();
        constants.sort_by_key(|c| rank(&c.name));
        let shifts: Vec<Option<[f64; 2]>> =
            constants.iter().map(|c| log_shifts(&c.value)).collect();
        let mut products = vec![vec![Product {
            slots: Vec::new(),
            shift: [0.0; 2],
        }]];
        for k in 1..=HALF {
            let mut next = Vec::new();
            for p in &products[k - 1] {
                let from = p.slots.last().copied().unwrap_or(0);
                for slot in from..2 * constants.len() {
                    let (index, sign) = (slot / 2, if slot % 2 == 0 { 1.0 } else { -1.0 });
                    let Some(shift) = shifts[index] else { continue };
                    // A constant and its reciprocal in one product cancel.
                    if p.slots.contains(&(slot ^ 1)) {
                        continue;
                    }
                    let mut slots = p.slots.clone();
                    slots.push(slot);
                    next.push(Product {
                        slots,
                        shift: [p.shift[0] + sign * shift[0], p.shift[1] + sign * shift[1]],
                    });
                }
            }
            products.push(next);
        }
        for list in &mut products {
            list.sort_by(|a, b| a.shift[0].total_cmp(&b.shift[0]));
        }
        Search {
            constants,
            products,
        }
    }

    /// The smallest product (then the first in preference order) whose
    /// quotient with the ratio is a rational number.
    fn express(&self, ratio: &RationalFunction) -> Option<(BigRational, Vec<(String, i32)>)> {
        let target = log_shifts(ratio)?;
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-9 * (1.0 + b.abs());
        for size in 0..=MAX_FACTORS {
            let left = size / 2;
            let right = size - left;
            if right > HALF {
                continue;
            }
            let mut candidates: Vec<Vec<usize>> = Vec::new();
            for l in &self.products[left] {
                let want = target[0] - l.shift[0];
                let list = &self.products[right];
                let start = list.partition_point(|r| r.shift[0] < want - 1e-9 * (1.0 + want.abs()));
                for r in list[start..].iter().take_while(|r| close(r.shift[0], want)) {
                    if !close(l.shift[1] + r.shift[1], target[1]) {
                        continue;
                    }
                    let mut slots: Vec<usize> = l.slots.iter().chain(&r.slots).copied().collect();
                    slots.sort_unstable();
                    if slots.windows(2).any(|w| w[1] == (w[0] ^ 1)) {
                        continue;
                    }
                    candidates.push(slots);
                }
            }
            candidates.sort();
            candidates.dedup();
            if let Some(found) = candidates.iter().find_map(|slots| self.check(ratio, slots)) {
                return Some(found);
            }
        }
        None
    }

    fn check(
        &self,
        ratio: &RationalFunction,
        slots: &[usize],
    ) -> Option<(BigRational, Vec<(String, i32)>)> {
        let mut exponents: BTreeMap<usize, i32> = BTreeMap::new();
        for &slot in slots {
            *exponents.entry(slot / 2).or_default() += if slot % 2 == 0 { 1 } else { -1 };
        }
        let mut product = RationalFunction::one();
        for (&k, &e) in &exponents {
            product = product.mul(&self.constants[k].value.powi(e as i64)?);
        }
        let factor = constant_quotient(ratio, &product)?;
        let names = exponents
            .into_iter()
            .map(|(k, e)| (self.constants[k].name.clone(), e))
            .collect();
        Some((factor, names))
    }
}

/// `a / b` when it is a non-zero rational number.
fn constant_quotient(a: &RationalFunction, b: &RationalFunction) -> Option<BigRational> {
    let num = a.num.mul(&b.den);
    let den = a.den.mul(&b.num);
    let (_, lead_num) = num.leading()?;
    let (_, lead_den) = den.leading()?;
    let c = lead_num / lead_den;
    (!c.is_zero() && num == den.scale(&c)).then_some(c)
}

/// A variable's value at one of three fixed points, in [0.5, 2).
fn point_value(v: Var, point: u64) -> f64 {
    let mut x = (v as u64 + 1)
        .wrapping_mul(0x9E37_79B9_7F4A_7C15)
        .wrapping_add(point.wrapping_mul(0xBF58_476D_1CE4_E5B9));
    x ^= x >> 31;
    x = x.wrapping_mul(0x94D0_49BB_1331_11EB);
    x ^= x >> 29;
    0.5 + 1.5 * ((x >> 11) as f64 / (1u64 << 53) as f64)
}

fn log_shifts(r: &RationalFunction) -> Option<[f64; 2]> {
    let at = |k: u64| r.eval(&|v| point_value(v, k)).abs().ln();
    let (a, b, c) = (at(0), at(1), at(2));
    [a, b, c]
        .iter()
        .all(|x| x.is_finite())
        .then_some([b - a, c - a])
}

impl FormTerm {
    /// The coefficient as a rational function of the rate constants.
    fn coefficient(
        &self,
        definitions: &dyn Fn(&str) -> Option<RationalFunction>,
    ) -> Option<RationalFunction> {
        let mut value = RationalFunction::constant(self.factor.clone());
        for (name, e) in &self.constants {
            value = value.mul(&definitions(name)?.powi(*e as i64)?);
        }
        Some(value)
    }

    /// The term in the mechanism language (or plain text), with `extra`
    /// multiplied in after the constants (the enzyme total).
    fn text(&self, p: &Printer, extra: Option<&str>) -> (bool, String) {
        let times = if p.syntax == Syntax::Plain { "·" } else { "*" };
        let power = |name: &str, e: i32| {
            if e.abs() == 1 {
                name.to_string()
            } else {
                format!("{name}^{}", e.abs())
            }
        };
        let mut parts: Vec<String> = Vec::new();
        let magnitude = self.factor.abs();
        if !magnitude.is_one() {
            if magnitude.is_integer() {
                parts.push(magnitude.numer().to_string());
            } else {
                parts.push(format!("{}/{}", magnitude.numer(), magnitude.denom()));
            }
        }
        parts.extend(
            self.constants
                .iter()
                .filter(|(_, e)| *e > 0)
                .map(|(n, e)| power(n, *e)),
        );
        parts.extend(extra.map(str::to_string));
        if !self.concentrations.is_one() {
            parts.push(p.monomial(&self.concentrations));
        }
        let mut text = if parts.is_empty() {
            "1".to_string()
        } else {
            parts.join(times)
        };
        let below: Vec<String> = self
            .constants
            .iter()
            .filter(|(_, e)| *e < 0)
            .map(|(n, e)| power(n, *e))
            .collect();
        match below.len() {
            0 => {}
            1 => text.push_str(&format!("/{}", below[0])),
            _ => text.push_str(&format!("/({})", below.join(times))),
        }
        (self.factor.is_negative(), text)
    }
}

fn sum_text(terms: &[FormTerm], p: &Printer, extra: Option<&str>) -> String {
    let mut out = String::new();
    for (i, t) in terms.iter().enumerate() {
        let (negative, body) = t.text(p, extra);
        match (i, negative) {
            (0, true) => out.push('-'),
            (0, false) => {}
            (_, true) => out.push_str(" - "),
            (_, false) => out.push_str(" + "),
        }
        out.push_str(&body);
    }
    out
}

impl ConstantsForm {
    /// Every coefficient equals its ratio exactly.
    fn proved(
        &self,
        d: &Derivation,
        num: &BTreeMap<Monomial, Poly>,
        den: &BTreeMap<Monomial, Poly>,
        d_norm: &Poly,
    ) -> bool {
        let definitions = |name: &str| {
            d.constants
                .iter()
                .chain(&self.added)
                .find(|c| c.name == name)
                .map(|c| c.value.clone())
        };
        let side_holds = |terms: &[FormTerm], coefficients: &BTreeMap<Monomial, Poly>| {
            terms.len() == coefficients.len()
                && terms.iter().all(|t| {
                    let expected = RationalFunction::raw(
                        coefficients
                            .get(&t.concentrations)
                            .cloned()
                            .unwrap_or_default(),
                        d_norm.clone(),
                    );
                    t.coefficient(&definitions)
                        .is_some_and(|c| c.equals(&expected))
                })
        };
        side_holds(&self.numerator, num) && side_holds(&self.denominator, den)
    }

    /// The rate as one expression, in the mechanism language (`Mech`) or
    /// for people (`Plain`).
    pub fn text(&self, d: &Derivation, syntax: Syntax) -> String {
        let conc = |v: Var| d.is_concentration(v);
        let p = Printer {
            vars: &d.vars,
            syntax,
            is_concentration: &conc,
        };
        let times = if syntax == Syntax::Plain { "·" } else { "*" };
        let total = d.vars.name(self.total);
        let numerator = if self.numerator.len() == 1 {
            sum_text(&self.numerator, &p, Some(total))
        } else {
            format!("{total}{times}({})", sum_text(&self.numerator, &p, None))
        };
        let single_den = self.denominator.len() == 1;
        let den = sum_text(&self.denominator, &p, None);
        if single_den && den == "1" {
            return numerator;
        }
        let numerator = if numerator.starts_with('-') {
            format!("({numerator})")
        } else {
            numerator
        };
        format!("{numerator}/({den})")
    }

    /// Every constant the form uses, named ones first.
    pub fn constants_used<'a>(&'a self, d: &'a Derivation) -> Vec<&'a Constant> {
        let used = |c: &&Constant| {
            self.numerator
                .iter()
                .chain(&self.denominator)
                .any(|t| t.constants.iter().any(|(n, _)| *n == c.name))
        };
        d.constants
            .iter()
            .filter(used)
            .chain(self.added.iter())
            .collect()
    }
}

/// A constant's value at the file's params and totals, in the model's
/// default units, with its dimension where every param's is known.
pub fn value_of(c: &Constant, d: &Derivation, model: &Model) -> (f64, Option<Dim>) {
    let value = c.value.eval(&|v| variable_value(d, model, v));
    let dim = poly_dim(&c.value.num, d, model)
        .zip(poly_dim(&c.value.den, d, model))
        .map(|(n, m)| n.div(m));
    (value, dim)
}

pub(crate) fn variable_value(d: &Derivation, model: &Model, v: Var) -> f64 {
    use super::VarKind;
    match d.kind(v) {
        Some(VarKind::Param(i)) => model.params[i].value,
        Some(VarKind::Fixed(i)) => model.fixed[i].value,
        Some(VarKind::Species(i)) => model.species[i].initial,
        Some(VarKind::Total(k)) => d.totals[k].value,
        None => f64::NAN,
    }
}

fn variable_dim(d: &Derivation, model: &Model, v: Var) -> Option<Dim> {
    use super::VarKind;
    match d.kind(v)? {
        VarKind::Param(i) => model.params[i].dim,
        VarKind::Fixed(_) | VarKind::Species(_) | VarKind::Total(_) => Some(Dim::CONC),
    }
}

/// The dimension of a polynomial's first term (a derived law's terms all
/// share one).
fn poly_dim(p: &Poly, d: &Derivation, model: &Model) -> Option<Dim> {
    let (m, _) = p.terms().next()?;
    m.pairs().iter().try_fold(Dim::NONE, |acc, &(v, e)| {
        Some(acc.mul(variable_dim(d, model, v)?.powi(e as i32)))
    })
}

/// A value with a unit a person reads at a glance: a concentration in the
/// prefix that puts it between 1 and 1000 (`9.52 uM`), anything else in
/// the model's units, three significant digits.
pub fn readable_value(value: f64, dim: Option<Dim>, model: &Model) -> String {
    let digits = |x: f64| {
        if x == 0.0 || !x.is_finite() {
            return format!("{x}");
        }
        let text = format!("{:.2e}", x);
        let (mantissa, exponent) = text.split_once('e').unwrap_or((&text, "0"));
        let exponent: i32 = exponent.parse().unwrap_or(0);
        if (-3..6).contains(&exponent) {
            let decimals = (2 - exponent).max(0) as usize;
            format!("{:.*}", decimals, x)
        } else {
            format!("{mantissa}e{exponent}")
        }
    };
    match dim {
        None => format!("{} (unit unknown)", digits(value)),
        Some(Dim::NONE) => digits(value),
        Some(Dim::CONC) => {
            let molar = value * model.units.concentration.molar();
            let unit = [
                ConcUnit::M,
                ConcUnit::MilliM,
                ConcUnit::MicroM,
                ConcUnit::NanoM,
                ConcUnit::PicoM,
            ]
            .into_iter()
            .find(|u| molar.abs() / u.molar() >= 1.0)
            .unwrap_or(ConcUnit::PicoM);
            format!("{} {}", digits(molar / unit.molar()), unit.symbol())
        }
        Some(dim) => format!("{} {}", digits(value), dim.display_in(model.units)),
    }
}
