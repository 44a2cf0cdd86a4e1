//! What the item changes imply for the network as a whole: rank,
//! conservation laws, the dimension of the reduced system, deficiency, and
//! (where both files carry `assume` lines) the derived rate law.
//!
//! Conservation laws are compared as spaces, not as lists: a basis can be
//! written in many ways, so a law counts as gained when it is not a linear
//! combination of the old laws (species identified through the pairing),
//! checked with exact rational elimination. Rate laws are compared exactly:
//! both are rational functions over params, fixed species, non-intermediate
//! species and enzyme totals; with paired names identified, `a/b = c/d`
//! holds iff `a·d − c·b` is the zero polynomial.

use super::sameness::{Context, Key, Side};
use crate::algebra::poly::{Monomial, Poly, Var, Vars};
use crate::model::{Model, Sym};
use crate::network::{self, Analysis};
use crate::ratelaw::{self, Derivation, VarKind};
use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{One, Signed, Zero};
use std::collections::{BTreeMap, BTreeSet};

/// A fact on both sides.
#[derive(Debug, Clone, PartialEq)]
pub struct Both<T> {
    pub old: T,
    pub new: T,
}

impl<T: PartialEq> Both<T> {
    pub fn changed(&self) -> bool {
        self.old != self.new
    }
}

/// A conservation law gained or lost, as written on the side that has it.
#[derive(Debug, Clone, PartialEq)]
pub struct LawChange {
    pub name: String,
    /// e.g. `E + ES`.
    pub combination: String,
}

#[derive(Debug, Clone, PartialEq)]
pub struct NetworkFacts {
    pub rank: Both<usize>,
    /// Number of independent species (the size of the reduced system).
    pub reduced_dimension: Both<usize>,
    pub conservation_laws: Both<usize>,
    pub deficiency: Both<i64>,
    pub weakly_reversible: Both<bool>,
    pub gained: Vec<LawChange>,
    pub lost: Vec<LawChange>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RateLawStatus {
    Unchanged,
    Changed,
    /// Only one side carries `assume` lines, or a derivation failed.
    NotCompared,
}

#[derive(Debug, Clone, PartialEq)]
pub struct RateLawComparison {
    pub status: RateLawStatus,
    /// The derived rates in the mechanism language, where derived.
    pub old: Option<String>,
    pub new: Option<String>,
    pub reason: Option<String>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Consequences {
    /// `Err` with the reason when the network analysis failed on a side.
    pub network: Result<NetworkFacts, String>,
    /// Present when at least one side carries `assume` lines.
    pub rate_law: Option<RateLawComparison>,
}

/// `equivalent`: no item changed, so both sides have the same network and
/// rate law, and the old side's are computed once (the network analysis
/// dominates the time of a large diff).
pub fn compare(ctx: &Context, equivalent: bool) -> Consequences {
    if equivalent {
        return Consequences {
            network: same_network(ctx.old),
            rate_law: same_rate_law(ctx.old),
        };
    }
    Consequences {
        network: network_facts(ctx),
        rate_law: rate_law(ctx),
    }
}

fn same_network(m: &Model) -> Result<NetworkFacts, String> {
    let a = network::analyze(m).map_err(|d| d.message)?;
    let both = |v| Both { old: v, new: v };
    Ok(NetworkFacts {
        rank: both(a.rank),
        reduced_dimension: both(a.reduced.independent.len()),
        conservation_laws: both(a.reduced.laws.len()),
        deficiency: Both {
            old: a.structure.deficiency,
            new: a.structure.deficiency,
        },
        weakly_reversible: Both {
            old: a.structure.weakly_reversible,
            new: a.structure.weakly_reversible,
        },
        gained: vec![],
        lost: vec![],
    })
}

fn same_rate_law(m: &Model) -> Option<RateLawComparison> {
    if !has_assumptions(m) {
        return None;
    }
    Some(match ratelaw::derive(m, &ratelaw::Request::default()) {
        Ok(d) => {
            let text = ratelaw::output::json(&d, m)
                .get("rate")
                .and_then(|v| v.as_str())
                .map(str::to_string);
            RateLawComparison {
                status: RateLawStatus::Unchanged,
                old: text.clone(),
                new: text,
                reason: None,
            }
        }
        Err(d) => RateLawComparison {
            status: RateLawStatus::NotCompared,
            old: None,
            new: None,
            reason: Some(format!("cannot derive the rate law: {}", d.message)),
        },
    })
}

fn network_facts(ctx: &Context) -> Result<NetworkFacts, String> {
    let a = network::analyze(ctx.old).map_err(|d| format!("old side: {}", d.message))?;
    let b = network::analyze(ctx.new).map_err(|d| format!("new side: {}", d.message))?;
    let laws = |side: Side, an: &Analysis| -> Vec<BTreeMap<Key, BigRational>> {
        an.reduced
            .laws
            .iter()
            .map(|l| {
                l.coefficients
                    .iter()
                    .map(|(i, c)| {
                        (
                            ctx.key(side, Sym::Species(*i)),
                            BigRational::from_integer(c.clone()),
                        )
                    })
                    .collect()
            })
            .collect()
    };
    let (la, lb) = (laws(Side::Old, &a), laws(Side::New, &b));
    let describe = |m: &Model, an: &Analysis, i: usize| {
        let l = &an.reduced.laws[i];
        LawChange {
            name: l.name.clone(),
            combination: combination_text(m, &l.coefficients),
        }
    };
    let lost = (0..la.len())
        .filter(|&i| !in_span(&lb, &la[i]))
        .map(|i| describe(ctx.old, &a, i))
        .collect();
    let gained = (0..lb.len())
        .filter(|&i| !in_span(&la, &lb[i]))
        .map(|i| describe(ctx.new, &b, i))
        .collect();
    Ok(NetworkFacts {
        rank: Both {
            old: a.rank,
            new: b.rank,
        },
        reduced_dimension: Both {
            old: a.reduced.independent.len(),
            new: b.reduced.independent.len(),
        },
        conservation_laws: Both {
            old: a.reduced.laws.len(),
            new: b.reduced.laws.len(),
        },
        deficiency: Both {
            old: a.structure.deficiency,
            new: b.structure.deficiency,
        },
        weakly_reversible: Both {
            old: a.structure.weakly_reversible,
            new: b.structure.weakly_reversible,
        },
        gained,
        lost,
    })
}

/// `2 A2 + A`, `E + ES`, `A - B`.
pub fn combination_text(m: &Model, coefficients: &[(usize, BigInt)]) -> String {
    let mut out = String::new();
    for (n, (i, c)) in coefficients.iter().enumerate() {
        let name = &m.species[*i].name;
        let mag = c.abs();
        let term = if mag.is_one() {
            name.clone()
        } else {
            format!("{mag} {name}")
        };
        match (n, c.is_negative()) {
            (0, false) => out.push_str(&term),
            (0, true) => out.push_str(&format!("-{term}")),
            (_, false) => out.push_str(&format!(" + {term}")),
            (_, true) => out.push_str(&format!(" - {term}")),
        }
    }
    out
}

/// Whether `v` is a linear combination of `basis` (exact).
fn in_span(basis: &[BTreeMap<Key, BigRational>], v: &BTreeMap<Key, BigRational>) -> bool {
    let columns: Vec<Key> = basis
        .iter()
        .flat_map(|r| r.keys().copied())
        .chain(v.keys().copied())
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect();
    let dense = |r: &BTreeMap<Key, BigRational>| {
        columns
            .iter()
            .map(|k| r.get(k).cloned().unwrap_or_else(BigRational::zero))
            .collect::<Vec<_>>()
    };
    let mut rows: Vec<Vec<BigRational>> = basis.iter().map(dense).collect();
    let without = rank(rows.clone());
    rows.push(dense(v));
    rank(rows) == without
}

/// Rank of a rational matrix by Gaussian elimination.
fn rank(mut rows: Vec<Vec<BigRational>>) -> usize {
    let width = rows.first().map(Vec::len).unwrap_or(0);
    let mut r = 0;
    for col in 0..width {
        let Some(p) = (r..rows.len()).find(|&i| !rows[i][col].is_zero()) else {
            continue;
        };
        rows.swap(r, p);
        let pivot_row = rows[r].clone();
        for (i, row) in rows.iter_mut().enumerate() {
            if i != r && !row[col].is_zero() {
                let f = row[col].clone() / pivot_row[col].clone();
                for (v, p) in row.iter_mut().zip(&pivot_row).skip(col) {
                    *v -= p * &f;
                }
            }
        }
        r += 1;
    }
    r
}

fn has_assumptions(m: &Model) -> bool {
    !m.assumptions.steady.is_empty() || !m.assumptions.equilibrium.is_empty()
}

fn rate_law(ctx: &Context) -> Option<RateLawComparison> {
    let (ho, hn) = (has_assumptions(ctx.old), has_assumptions(ctx.new));
    if !ho && !hn {
        return None;
    }
    let not_compared =
        |reason: String, old: Option<String>, new: Option<String>| RateLawComparison {
            status: RateLawStatus::NotCompared,
            old,
            new,
            reason: Some(reason),
        };
    let derive = |m: &Model| ratelaw::derive(m, &ratelaw::Request::default());
    let text = |d: &Derivation, m: &Model| {
        ratelaw::output::json(d, m)
            .get("rate")
            .and_then(|v| v.as_str())
            .map(str::to_string)
    };
    if !(ho && hn) {
        let (side, m) = if ho {
            ("old", ctx.old)
        } else {
            ("new", ctx.new)
        };
        let shown = derive(m).ok().and_then(|d| text(&d, m));
        let reason = format!("only the {side} file has `assume` lines");
        return Some(if ho {
            not_compared(reason, shown, None)
        } else {
            not_compared(reason, None, shown)
        });
    }
    let (a, b) = match (derive(ctx.old), derive(ctx.new)) {
        (Ok(a), Ok(b)) => (a, b),
        (ra, rb) => {
            let reason = [("old", &ra), ("new", &rb)]
                .iter()
                .filter_map(|(side, r)| {
                    r.as_ref()
                        .err()
                        .map(|d| format!("cannot derive the {side} rate law: {}", d.message))
                })
                .collect::<Vec<_>>()
                .join("; ");
            let shown_a = ra.as_ref().ok().and_then(|d| text(d, ctx.old));
            let shown_b = rb.as_ref().ok().and_then(|d| text(d, ctx.new));
            return Some(not_compared(reason, shown_a, shown_b));
        }
    };
    let mut vars = Vars::new();
    let (na, da) = remapped(ctx, Side::Old, &a, &mut vars);
    let (nb, db) = remapped(ctx, Side::New, &b, &mut vars);
    let same = na.mul(&db).sub(&nb.mul(&da)).is_zero();
    Some(RateLawComparison {
        status: if same {
            RateLawStatus::Unchanged
        } else {
            RateLawStatus::Changed
        },
        old: text(&a, ctx.old),
        new: text(&b, ctx.new),
        reason: None,
    })
}

/// The numerator and denominator over variables shared by both sides.
fn remapped(ctx: &Context, side: Side, d: &Derivation, vars: &mut Vars) -> (Poly, Poly) {
    let mut map: BTreeMap<Var, Var> = BTreeMap::new();
    for v in 0..d.vars.len() as Var {
        let key = match d.kind(v) {
            Some(VarKind::Param(i)) => format!("{:?}", ctx.key(side, Sym::Param(i))),
            Some(VarKind::Fixed(i)) => format!("{:?}", ctx.key(side, Sym::Fixed(i))),
            Some(VarKind::Species(i)) => format!("{:?}", ctx.key(side, Sym::Species(i))),
            // A total is identified by the forms it sums, whatever it is called.
            Some(VarKind::Total(t)) => {
                let forms: BTreeSet<Key> = d
                    .totals
                    .get(t)
                    .map(|ft| {
                        ft.forms
                            .iter()
                            .map(|&i| ctx.key(side, Sym::Species(i)))
                            .collect()
                    })
                    .unwrap_or_default();
                format!("total {forms:?}")
            }
            None => format!("{side:?} {}", d.vars.name(v)),
        };
        map.insert(v, vars.intern(&key));
    }
    let remap = |p: &Poly| {
        let mut out = Poly::zero();
        for (m, c) in p.terms() {
            out.add_term(
                c.clone(),
                Monomial::from_pairs(m.pairs().iter().map(|&(v, e)| (map[&v], e))),
            );
        }
        out
    };
    (remap(&d.rate.num), remap(&d.rate.den))
}
