//! The rate that is asked for: a species' rate of change from the slow
//! steps' fluxes, and the overall reaction (its species and integer
//! coefficients, from the null space of the forms' stoichiometry).
//!
//! Invariant: the overall reaction is unique up to sign, or no overall rate
//! is derived (E0602).

use super::build::*;
use super::{Overall, unknown_name};
use crate::algebra::poly::Poly;
use crate::algebra::rational::RationalFunction;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::{Model, Sym};
use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, Zero};

/// d(species)/dt divided by `nu`, from the steps' net rates weighted by
/// [`slow_step_weights`].
pub(super) fn species_rate(
    weights: &[BigRational],
    rates: &[Part],
    nu: &BigRational,
    qs: &[Poly],
) -> RationalFunction {
    let mut parts = Vec::new();
    for (w, r) in weights.iter().zip(rates) {
        if !w.is_zero() {
            let c = w / nu;
            parts.push(Part {
                num: r.num.scale(&c),
                den: r.den.clone(),
                component: r.component,
            });
        }
    }
    sum_parts(parts, qs)
}

pub(super) fn exact(c: crate::model::Coef) -> BigRational {
    BigRational::new(BigInt::from(*c.numer()), BigInt::from(*c.denom()))
}

/// The rate of change of `target` at the steady state as weights on the
/// steps' net rates. A rapid-equilibrium step's mass-action net rate
/// vanishes at equilibrium, but its flux does not: it carries whatever the
/// slow steps feed it, so reading a rate from it gives 0. Adding multiples
/// y_k of the forms' balances (each zero at the steady state),
/// d[target]/dt = Σ_j (ν_target,j + Σ_k y_k ν_kj) v_j, with y chosen so
/// that every fast step's weight is zero: only slow steps remain, whose
/// net rates are the fluxes through the lumped graph. Any such y gives the
/// same rate, since the forms' balances hold. `None` when no y exists (a
/// fast step changes `target` with no form to balance it).
pub(super) fn slow_step_weights(
    model: &Model,
    target: usize,
    is_form: &[bool],
    equilibrium: &[usize],
) -> Option<Vec<BigRational>> {
    let forms: Vec<usize> = (0..model.species.len()).filter(|&i| is_form[i]).collect();
    let column = |j: usize| -> (BigRational, Vec<BigRational>) {
        let mut own = BigRational::zero();
        let mut by_form = vec![BigRational::zero(); forms.len()];
        for (i, c) in model.net_change(j) {
            if i == target {
                own += exact(c);
            } else if let Ok(k) = forms.binary_search(&i) {
                by_form[k] += exact(c);
            }
        }
        (own, by_form)
    };
    // Rows: one per fast step, Σ_k ν_kf y_k = −ν_target,f.
    let mut rows: Vec<(Vec<BigRational>, BigRational)> = equilibrium
        .iter()
        .map(|&f| {
            let (own, by_form) = column(f);
            (by_form, -own)
        })
        .collect();
    let mut y = vec![BigRational::zero(); forms.len()];
    let mut pivots: Vec<(usize, usize)> = Vec::new();
    let mut r = 0;
    for c in 0..forms.len() {
        let Some(p) = (r..rows.len()).find(|&i| !rows[i].0[c].is_zero()) else {
            continue;
        };
        rows.swap(r, p);
        let inv = rows[r].0[c].recip();
        for x in rows[r].0.iter_mut() {
            *x = &*x * &inv;
        }
        rows[r].1 = &rows[r].1 * &inv;
        let pivot = rows[r].clone();
        for (i, row) in rows.iter_mut().enumerate() {
            if i != r && !row.0[c].is_zero() {
                let f = row.0[c].clone();
                for (x, q) in row.0.iter_mut().zip(&pivot.0) {
                    *x = &*x - &f * q;
                }
                row.1 = &row.1 - &f * &pivot.1;
            }
        }
        pivots.push((r, c));
        r += 1;
    }
    if rows[r..].iter().any(|(_, b)| !b.is_zero()) {
        return None;
    }
    for (row, c) in pivots {
        y[c] = rows[row].1.clone();
    }
    Some(
        (0..model.steps.len())
            .map(|j| {
                if equilibrium.contains(&j) {
                    return BigRational::zero();
                }
                let (own, by_form) = column(j);
                by_form.iter().zip(&y).fold(own, |acc, (n, w)| acc + n * w)
            })
            .collect(),
    )
}

/// The dynamic, non-intermediate species `name` names, for `--species`.
pub(super) fn species_asked_for(
    model: &Model,
    name: &str,
    is_form: &[bool],
) -> Result<usize, Diagnostic> {
    match model.lookup(name) {
        Some(Sym::Species(i)) if is_form[i] => Err(Diagnostic::error(
            Code::BadDerivationRequest,
            format!("`{name}` is an intermediate: at steady state its rate of change is zero"),
        )
        .with_help("choose a substrate or product, or a step with --flux")),
        Some(Sym::Species(i)) => Ok(i),
        Some(_) => Err(Diagnostic::error(
            Code::BadDerivationRequest,
            format!("`{name}` is not a dynamic species"),
        )),
        None => Err(unknown_name(
            "species",
            name,
            &model
                .species
                .iter()
                .map(|s| s.name.clone())
                .collect::<Vec<_>>(),
        )),
    }
}

pub(super) fn no_overall(model: &Model) -> Diagnostic {
    let _ = model;
    Diagnostic::error(
        Code::NoOverallReaction,
        "the steady-state fluxes change no species other than the intermediates",
    )
    .with_help("there is no overall reaction to give a rate for; use --flux STEP for a step's rate")
}

/// The overall reaction: the net change of the non-intermediate species
/// over the steady-state flux modes (the null space of the intermediates'
/// stoichiometry). Exactly one is required.
pub(super) fn overall_reaction(model: &Model, is_form: &[bool]) -> Result<Overall, Diagnostic> {
    let n = model.stoichiometry();
    let to_big = |c: num_rational::Rational64| {
        BigRational::new(BigInt::from(*c.numer()), BigInt::from(*c.denom()))
    };
    let steps = model.steps.len();
    let internal: Vec<Vec<BigRational>> = (0..model.species.len())
        .filter(|&i| is_form[i])
        .map(|i| n[i].iter().map(|c| to_big(*c)).collect())
        .collect();
    let basis = null_space(internal, steps);
    let external: Vec<usize> = (0..model.species.len()).filter(|&i| !is_form[i]).collect();
    let image = |b: &[BigRational]| -> Vec<BigRational> {
        external
            .iter()
            .map(|&i| {
                (0..steps)
                    .map(|j| to_big(n[i][j]) * &b[j])
                    .fold(BigRational::zero(), |a, x| a + x)
            })
            .collect()
    };
    let images: Vec<(Vec<BigRational>, &Vec<BigRational>)> = basis
        .iter()
        .map(|b| (image(b), b))
        .filter(|(v, _)| v.iter().any(|x| !x.is_zero()))
        .collect();
    let rank = null_space(
        images.iter().map(|(v, _)| v.clone()).collect(),
        external.len(),
    );
    let dim = external.len() - rank.len();
    if dim == 0 {
        return Err(no_overall(model));
    }
    if dim > 1 {
        // A basis of the overall reactions: keep each image that raises the rank.
        let mut basis: Vec<Vec<BigRational>> = Vec::new();
        let mut list: Vec<String> = Vec::new();
        for (v, _) in &images {
            let mut trial = basis.clone();
            trial.push(v.clone());
            if external.len() - null_space(trial.clone(), external.len()).len() > basis.len() {
                basis = trial;
                list.push(reaction_text(model, &external, v));
            }
        }
        return Err(Diagnostic::error(
            Code::NoOverallReaction,
            format!("the mechanism has {dim} independent overall reactions ({}), so there is no single rate", list.join("; ")),
        )
        .with_help("choose a rate with --species NAME (rate of change of one species) or --flux STEP (net rate of one step)"));
    }
    let (v, b) = &images[0];
    let flip = b
        .iter()
        .fold(BigRational::zero(), |a, x| a + x)
        .is_negative();
    // Scale to coprime integers.
    let lcm = v.iter().fold(BigInt::one(), |a, x| a.lcm(x.denom()));
    let ints: Vec<BigInt> = v
        .iter()
        .map(|x| (x * BigRational::from_integer(lcm.clone())).to_integer())
        .collect();
    let g = ints.iter().fold(BigInt::zero(), |a, x| a.gcd(x));
    let mut overall = Overall::default();
    for (k, x) in ints.iter().enumerate() {
        let x = if flip { -x / &g } else { x / &g };
        if x.is_positive() {
            overall.products.push((external[k], x));
        } else if x.is_negative() {
            overall.reactants.push((external[k], -x));
        }
    }
    Ok(overall)
}

pub(super) fn reaction_text(model: &Model, external: &[usize], v: &[BigRational]) -> String {
    let side = |pos: bool| {
        let parts: Vec<String> = v
            .iter()
            .enumerate()
            .filter(|(_, x)| {
                if pos {
                    x.is_positive()
                } else {
                    x.is_negative()
                }
            })
            .map(|(k, x)| {
                let c = x.abs();
                let name = &model.species[external[k]].name;
                if c.is_one() {
                    name.clone()
                } else {
                    format!("{c} {name}")
                }
            })
            .collect();
        if parts.is_empty() {
            "0".to_string()
        } else {
            parts.join(" + ")
        }
    };
    format!("{} -> {}", side(false), side(true))
}

/// A basis of the null space of a matrix given by rows (exact).
pub(super) fn null_space(mut rows: Vec<Vec<BigRational>>, cols: usize) -> Vec<Vec<BigRational>> {
    let mut pivots = Vec::new();
    let mut r = 0;
    for c in 0..cols {
        let Some(p) = (r..rows.len()).find(|&i| !rows[i][c].is_zero()) else {
            continue;
        };
        rows.swap(r, p);
        let inv = rows[r][c].recip();
        for x in rows[r].iter_mut() {
            *x = &*x * &inv;
        }
        for i in 0..rows.len() {
            if i != r && !rows[i][c].is_zero() {
                let f = rows[i][c].clone();
                let pivot_row = rows[r].clone();
                for (x, y) in rows[i].iter_mut().zip(&pivot_row) {
                    *x = &*x - &f * y;
                }
            }
        }
        pivots.push(c);
        r += 1;
        if r == rows.len() {
            break;
        }
    }
    let free: Vec<usize> = (0..cols).filter(|c| !pivots.contains(c)).collect();
    free.iter()
        .map(|&f| {
            let mut v = vec![BigRational::zero(); cols];
            v[f] = BigRational::one();
            for (k, &p) in pivots.iter().enumerate() {
                v[p] = -rows[k][f].clone();
            }
            v
        })
        .collect()
}

pub(super) struct UnionFind(pub(super) Vec<usize>);

impl UnionFind {
    pub(super) fn new(n: usize) -> UnionFind {
        UnionFind((0..n).collect())
    }
    pub(super) fn find(&mut self, x: usize) -> usize {
        let mut r = x;
        while self.0[r] != r {
            r = self.0[r];
        }
        let mut y = x;
        while self.0[y] != r {
            let next = self.0[y];
            self.0[y] = r;
            y = next;
        }
        r
    }
    pub(super) fn union(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra != rb {
            let (lo, hi) = if ra < rb { (ra, rb) } else { (rb, ra) };
            self.0[hi] = lo;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn null_space_of_a_two_form_cycle() {
        // E: bind -1, cleave +1; ES: bind +1, cleave -1 (Michaelis–Menten
        // cycle, common practice): one flux mode, both steps forward.
        let one = || BigRational::one();
        let rows = vec![vec![-one(), one()], vec![one(), -one()]];
        let b = null_space(rows, 2);
        assert_eq!(b, vec![vec![one(), one()]]);
    }
}
