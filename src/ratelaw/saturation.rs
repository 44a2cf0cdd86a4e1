//! Half-saturation concentration and Hill number of laws of higher degree.
//!
//! Why: where the rate is of degree two or more in a substrate (two sites,
//! concerted binding, the squared terms of a random steady state), there
//! is no Michaelis constant; what an experimenter reads off a saturation
//! curve is the concentration of half the limiting rate, K0.5, and the Hill
//! number there, nH = d ln(v / (V - v)) / d ln S = 4 S v'(S) / V at v = V/2
//! (common practice). Where the substrate inhibits (the rate falls at high
//! concentration), V is the rate's peak instead, and K0.5 lies on the
//! rising side.
//!
//! Invariant: values come from the law at the file's params, with the
//! other species at their initial values and the products absent; each is
//! reported only where the rate is positive and the half level is crossed.

use super::Derivation;
use crate::algebra::poly::{Poly, Var};
use crate::model::Model;

/// The saturation curve of one substrate.
#[derive(Clone, Debug)]
pub struct HalfSaturation {
    pub species: String,
    /// The rate the half refers to: the limit at saturation, or the peak.
    pub reference_rate: f64,
    /// Whether `reference_rate` is a peak (the substrate inhibits).
    pub peak: bool,
    /// Where the peak is, when it is one.
    pub peak_at: Option<f64>,
    /// K0.5, in the model's concentration unit.
    pub k_half: f64,
    pub hill: f64,
}

/// The curves of every substrate in which the law is of degree two or
/// more.
pub fn half_saturation(d: &Derivation, model: &Model) -> Vec<HalfSaturation> {
    let Some((substrates, products)) = d.reaction_vars(model) else {
        return Vec::new();
    };
    let absent = |v: Var| products.contains(&v);
    let (num, den) = (d.rate.num.set_zero(&absent), d.rate.den.set_zero(&absent));
    let mut out = Vec::new();
    for &s in &substrates {
        if num.degree_in(s).max(den.degree_in(s)) < 2 {
            continue;
        }
        if let Some(h) = curve(d, model, &num, &den, s) {
            out.push(h);
        }
    }
    out
}

fn curve(d: &Derivation, model: &Model, num: &Poly, den: &Poly, s: Var) -> Option<HalfSaturation> {
    let value_at = |x: f64| {
        let at = |v: Var| {
            if v == s {
                x
            } else {
                super::constants_form::variable_value(d, model, v)
            }
        };
        num.eval(&at) / den.eval(&at)
    };
    // The scale of the curve: from 1e-9 to 1e9 times the file's value (or
    // one unit), on a logarithmic grid.
    let initial = super::constants_form::variable_value(d, model, s);
    let scale = if initial > 0.0 { initial } else { 1.0 };
    let grid: Vec<f64> = (-180..=180)
        .map(|k| scale * 10f64.powf(k as f64 / 20.0))
        .collect();
    let rates: Vec<f64> = grid.iter().map(|&x| value_at(x)).collect();
    if rates.iter().any(|r| !r.is_finite()) {
        return None;
    }
    let (n_deg, d_deg) = (num.degree_in(s), den.degree_in(s));
    let (reference, peak, peak_at) = if n_deg == d_deg {
        let top = |p: &Poly| p.coeff_of_power(s, n_deg);
        let at = |v: Var| super::constants_form::variable_value(d, model, v);
        (top(num).eval(&at) / top(den).eval(&at), false, None)
    } else {
        let (k, &best) = rates.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))?;
        // Golden-section search in ln S between the grid's neighbours.
        let (mut a, mut b) = (
            grid[k.saturating_sub(1)].ln(),
            grid[(k + 1).min(grid.len() - 1)].ln(),
        );
        let ratio = (5f64.sqrt() - 1.0) / 2.0;
        for _ in 0..200 {
            let (c, e) = (b - ratio * (b - a), a + ratio * (b - a));
            if value_at(c.exp()) > value_at(e.exp()) {
                b = e;
            } else {
                a = c;
            }
        }
        let at = (0.5 * (a + b)).exp();
        (value_at(at).max(best), true, Some(at))
    };
    if !(reference.is_finite() && reference > 0.0) {
        return None;
    }
    let half = reference / 2.0;
    let k = rates.iter().position(|&r| r >= half)?;
    if k == 0 {
        return None;
    }
    // Bisection in ln S between the grid points around the crossing.
    let (mut lo, mut hi) = (grid[k - 1].ln(), grid[k].ln());
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if value_at(mid.exp()) < half {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let k_half = (0.5 * (lo + hi)).exp();
    let h = k_half * 1e-6;
    let slope = (value_at(k_half + h) - value_at(k_half - h)) / (2.0 * h);
    Some(HalfSaturation {
        species: d.vars.name(s).to_string(),
        reference_rate: reference,
        peak,
        peak_at,
        k_half,
        hill: 4.0 * k_half * slope / reference,
    })
}
