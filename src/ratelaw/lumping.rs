//! Planning the graph of forms: forms joined by rapid-equilibrium steps
//! are lumped (Cha 1968) and each connected set of forms gets its total.
//!
//! Invariant: every form is in exactly one lump; a lump's members are
//! shared by their equilibrium constants relative to one reference form.

use super::build::*;
use super::overall::*;
use super::trees::FormGraph;
use super::{FormTotal, VarKind};
use crate::algebra::poly::{Poly, Var};
use crate::algebra::rational::RationalFunction;
use crate::diagnostics::Diagnostic;
use crate::model::Model;
use num_traits::One;
use std::collections::BTreeMap;

/// The graph of lumps of one connected set of forms, with each form's share
/// of its lump and each lump's out-edge scale.
pub(super) struct Plan {
    pub(super) graph: FormGraph,
    pub(super) lump_of: BTreeMap<usize, usize>,
    pub(super) share: BTreeMap<usize, RationalFunction>,
    pub(super) scale: Vec<Poly>,
}

pub(super) fn plan_component(
    cx: &Context,
    forms: &[usize],
    views: &[StepView],
    equilibrium: &[usize],
    lump: &mut UnionFind,
    notes: &mut Vec<String>,
) -> Result<Plan, Diagnostic> {
    let model = cx.model;
    // Lumps in order of their first form.
    let mut roots: Vec<usize> = Vec::new();
    let mut lump_of = BTreeMap::new();
    for &f in forms {
        let r = lump.find(f);
        let idx = match roots.iter().position(|&x| x == r) {
            Some(i) => i,
            None => {
                roots.push(r);
                roots.len() - 1
            }
        };
        lump_of.insert(f, idx);
    }
    // Equilibrium shares within each lump (Cha 1968): relative amounts along
    // a spanning tree of the fast steps, then divided by the lump's sum.
    let mut share = BTreeMap::new();
    for g in 0..roots.len() {
        let members: Vec<usize> = forms.iter().copied().filter(|f| lump_of[f] == g).collect();
        let mut rel: BTreeMap<usize, RationalFunction> = BTreeMap::new();
        rel.insert(members[0], RationalFunction::one());
        let mut used = vec![false; views.len()];
        let mut changed = true;
        while changed {
            changed = false;
            for &j in equilibrium {
                let v = &views[j];
                let (Some(a), Some(b)) = (v.left, v.right) else {
                    continue;
                };
                if used[j] || !members.contains(&a) {
                    continue;
                }
                let reverse = v.reverse.as_ref().expect("checked fast step");
                match (rel.get(&a).cloned(), rel.get(&b).cloned()) {
                    (Some(x), None) => {
                        let k = v
                            .forward
                            .div(reverse)
                            .unwrap_or_else(RationalFunction::zero);
                        rel.insert(b, x.mul(&k));
                        used[j] = true;
                        changed = true;
                    }
                    (None, Some(y)) => {
                        let k = reverse
                            .div(&v.forward)
                            .unwrap_or_else(RationalFunction::zero);
                        rel.insert(a, y.mul(&k));
                        used[j] = true;
                        changed = true;
                    }
                    _ => {}
                }
            }
        }
        // Fast steps of this lump that the spanning tree left out: they
        // close cycles.
        let left_out: Vec<usize> = equilibrium
            .iter()
            .copied()
            .filter(|&j| !used[j] && views[j].left.is_some_and(|a| members.contains(&a)))
            .collect();
        let cyclic: Vec<&str> = left_out
            .iter()
            .map(|&j| model.steps[j].name.as_str())
            .collect();
        if !cyclic.is_empty() {
            let (steps, its) = if cyclic.len() == 1 {
                ("step", "its equilibrium constant equals the one")
            } else {
                ("steps", "their equilibrium constants equal the ones")
            };
            notes.push(format!(
                "the rapid equilibria among {} close a cycle; the derivation takes the ratios of these forms from the other equilibria and assumes that, for {steps} {}, {its} the other equilibria imply (detailed balance: the product of the equilibrium constants around the cycle is 1)",
                members.iter().map(|&f| model.species[f].name.as_str()).collect::<Vec<_>>().join(", "),
                cyclic.join(", ")
            ));
            // With the values given, check that assumption (Wegscheider's
            // condition). The ratio does not depend on concentrations (both
            // routes bind the same species), so they are set to 1.
            let value = |v: Var| match cx.kinds[v as usize] {
                VarKind::Param(i) => model.params[i].value,
                VarKind::Fixed(i) => model.fixed[i].value,
                VarKind::Species(_) | VarKind::Total(_) => 1.0,
            };
            for &j in &left_out {
                let v = &views[j];
                let (Some(ra), Some(rb), Some(reverse)) = (
                    v.left.and_then(|a| rel.get(&a)),
                    v.right.and_then(|b| rel.get(&b)),
                    v.reverse.as_ref(),
                ) else {
                    continue;
                };
                let implied = rb.eval(&value) / ra.eval(&value);
                let given = v.forward.eval(&value) / reverse.eval(&value);
                let factor = given / implied;
                if factor.is_finite() && (factor - 1.0).abs() > 1e-6 {
                    notes.push(format!(
                        "detailed balance does not hold with the values given: step {}'s equilibrium constant is {} times what the other equilibria of the cycle imply; the rate law follows the other equilibria, so check the constants (in a true equilibrium cycle their product around the cycle is 1)",
                        model.steps[j].name,
                        if (1e-3..1e4).contains(&factor.abs()) {
                            format!("{factor:.4}")
                        } else {
                            format!("{factor:.3e}")
                        }
                    ));
                }
            }
        }
        let mut sum = RationalFunction::zero();
        for r in rel.values() {
            sum = sum.add(r);
        }
        for (&f, r) in &rel {
            share.insert(f, r.div(&sum).unwrap_or_else(RationalFunction::zero));
        }
    }
    // Lumped edges with rational weights, then scaled to polynomials per source.
    let n = roots.len();
    let mut weights: Vec<BTreeMap<usize, RationalFunction>> = vec![BTreeMap::new(); n];
    for (j, v) in views.iter().enumerate() {
        if equilibrium.contains(&j) {
            continue;
        }
        let (Some(a), Some(b)) = (v.left, v.right) else {
            continue;
        };
        let (Some(&ga), Some(&gb)) = (lump_of.get(&a), lump_of.get(&b)) else {
            continue;
        };
        if ga == gb {
            continue;
        }
        let fw = v.forward.mul(&share[&a]);
        let e = weights[ga].entry(gb).or_insert_with(RationalFunction::zero);
        *e = e.add(&fw);
        if let Some(r) = &v.reverse {
            let rw = r.mul(&share[&b]);
            let e = weights[gb].entry(ga).or_insert_with(RationalFunction::zero);
            *e = e.add(&rw);
        }
    }
    let mut graph = FormGraph::new(n);
    let mut scale = Vec::with_capacity(n);
    for (g, out) in weights.iter().enumerate() {
        let mut c = Poly::one();
        for w in out.values() {
            let gcd = c.gcd(&w.den);
            c = c.mul(&w.den.div_exact(&gcd).unwrap_or_else(|| w.den.clone()));
        }
        for (&h, w) in out {
            let factor = c.div_exact(&w.den).unwrap_or_else(|| c.clone());
            graph.add_edge(g, h, &w.num.mul(&factor));
        }
        scale.push(c);
    }
    Ok(Plan {
        graph,
        lump_of,
        share,
        scale,
    })
}

pub(super) fn name_total(model: &Model, forms: &[usize], existing: &[FormTotal]) -> FormTotal {
    let value: f64 = forms.iter().map(|&f| model.species[f].initial).sum();
    for (ti, t) in model.totals.iter().enumerate() {
        let mut species: Vec<usize> = t.terms.iter().map(|(i, _)| *i).collect();
        species.sort_unstable();
        let unit = t.terms.iter().all(|(_, c)| c.is_one());
        if unit && species == forms {
            return FormTotal {
                name: t.name.clone(),
                forms: forms.to_vec(),
                declared: Some(ti),
                value: t.value,
            };
        }
    }
    let base = format!("{}_total", model.species[forms[0]].name);
    let mut name = base.clone();
    let mut k = 2;
    while model.lookup(&name).is_some() || existing.iter().any(|t| t.name == name) {
        name = format!("{base}{k}");
        k += 1;
    }
    FormTotal {
        name,
        forms: forms.to_vec(),
        declared: None,
        value,
    }
}
