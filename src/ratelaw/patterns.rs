//! Product and dead-end inhibition patterns, read off the derived law.
//!
//! Why: an experimenter tells rival mechanisms apart by how each product
//! (added alone) and each dead-end inhibitor changes the double-reciprocal
//! plot of 1/v against 1/[varied substrate]: the slope, the intercept,
//! both, or neither (Cleland 1963; Segel 1975, ch. 9). The patterns with
//! the other substrates non-saturating and saturating are the table
//! compared with measured ones.
//!
//! Method: with the other products and inhibitors absent, the law is
//! `N / D`; terms of N with a product are the reverse reaction and are
//! dropped (initial rates, Cleland 1963). Saturation by the other
//! substrates takes the coefficients of their highest powers. Where N is
//! `A * n1` and D is `d0 + d1 * A` in the varied substrate A, the slope is
//! `d0 / n1` and the intercept `d1 / n1`; each is affected when it is not
//! the same rational function with the inhibitor at zero (exact).
//!
//! Invariant: a pattern is given only where 1/v is linear in 1/A; a law of
//! higher degree in A (substrate inhibition, squared terms) gives none.

use super::Derivation;
use crate::algebra::poly::{Poly, Var};
use crate::algebra::rational::RationalFunction;
use crate::model::Model;

/// The other substrates' concentration in a pattern.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Others {
    Nonsaturating,
    Saturating,
}

impl Others {
    pub fn word(self) -> &'static str {
        match self {
            Others::Nonsaturating => "nonsaturating",
            Others::Saturating => "saturating",
        }
    }
}

/// What an inhibitor does to the double-reciprocal plot.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Pattern {
    /// Slope only.
    Competitive,
    /// Intercept only.
    Uncompetitive,
    /// Slope and intercept (Cleland's sense; mixed included).
    Noncompetitive,
    /// Neither.
    None,
}

impl Pattern {
    pub fn word(self) -> &'static str {
        match self {
            Pattern::Competitive => "competitive",
            Pattern::Uncompetitive => "uncompetitive",
            Pattern::Noncompetitive => "noncompetitive",
            Pattern::None => "none",
        }
    }
}

#[derive(Clone, Debug)]
pub struct InhibitionPattern {
    pub inhibitor: String,
    pub varied: String,
    pub others: Others,
    pub pattern: Pattern,
}

/// The patterns of every product and dead-end modifier against every
/// substrate of the overall reaction.
pub fn inhibition_patterns(d: &Derivation, model: &Model) -> Vec<InhibitionPattern> {
    let Some((substrates, products)) = d.reaction_vars(model) else {
        return Vec::new();
    };
    let mut modifiers: Vec<Var> = d
        .rate
        .num
        .vars()
        .union(&d.rate.den.vars())
        .copied()
        .filter(|v| d.is_concentration(*v) && !substrates.contains(v) && !products.contains(v))
        .collect();
    modifiers.sort_unstable();
    let mut out = Vec::new();
    for &inhibitor in products.iter().chain(&modifiers) {
        let absent = |v: Var| v != inhibitor && (products.contains(&v) || modifiers.contains(&v));
        let forward = without_terms_in(&d.rate.num.set_zero(&absent), &products);
        let den = d.rate.den.set_zero(&absent);
        for &varied in &substrates {
            let others: Vec<Var> = substrates
                .iter()
                .copied()
                .filter(|&s| s != varied)
                .collect();
            for which in [Others::Nonsaturating, Others::Saturating] {
                let law = match which {
                    Others::Nonsaturating => Some((forward.clone(), den.clone())),
                    Others::Saturating => saturated(&forward, &den, &others),
                };
                let Some((n, dd)) = law else { continue };
                if let Some(pattern) = pattern_of(&n, &dd, varied, inhibitor) {
                    out.push(InhibitionPattern {
                        inhibitor: d.vars.name(inhibitor).to_string(),
                        varied: d.vars.name(varied).to_string(),
                        others: which,
                        pattern,
                    });
                }
            }
        }
    }
    out
}

/// The terms of `p` that contain none of `vars`.
fn without_terms_in(p: &Poly, vars: &[Var]) -> Poly {
    let mut out = Poly::zero();
    for (m, c) in p.terms() {
        if m.pairs().iter().all(|(v, _)| !vars.contains(v)) {
            out.add_term(c.clone(), m.clone());
        }
    }
    out
}

/// The law's limit as each of `others` grows without bound: the
/// coefficients of their highest powers, where numerator and denominator
/// reach the same power (otherwise the rate has no finite limit).
fn saturated(num: &Poly, den: &Poly, others: &[Var]) -> Option<(Poly, Poly)> {
    let (mut n, mut d) = (num.clone(), den.clone());
    for &s in others {
        let k = d.degree_in(s);
        if n.degree_in(s) != k {
            return None;
        }
        n = n.coeff_of_power(s, k);
        d = d.coeff_of_power(s, k);
    }
    (!n.is_zero() && !d.is_zero()).then_some((n, d))
}

fn pattern_of(num: &Poly, den: &Poly, varied: Var, inhibitor: Var) -> Option<Pattern> {
    if num.degree_in(varied) != 1
        || !num.coeff_of_power(varied, 0).is_zero()
        || den.degree_in(varied) > 1
    {
        return None;
    }
    let n1 = num.coeff_of_power(varied, 1);
    let slope = RationalFunction::new(den.coeff_of_power(varied, 0), n1.clone())?;
    let intercept = RationalFunction::new(den.coeff_of_power(varied, 1), n1)?;
    let affected = |r: &RationalFunction| {
        let at_zero = |p: &Poly| p.set_zero(&|v| v == inhibitor);
        let without = RationalFunction::raw(at_zero(&r.num), at_zero(&r.den));
        without.den.is_zero() || !r.equals(&without)
    };
    Some(match (affected(&slope), affected(&intercept)) {
        (true, true) => Pattern::Noncompetitive,
        (true, false) => Pattern::Competitive,
        (false, true) => Pattern::Uncompetitive,
        (false, false) => Pattern::None,
    })
}
