//! JSON target: the whole compiled model (species, params, steps,
//! stoichiometry, rate expressions, conservation laws, reduction, the
//! right-hand side and the Jacobian of the emitted system). The schema is
//! documented in docs/emit.md; `format_version` changes whenever a field
//! changes meaning or goes away (adding a field keeps the version).

use super::system::System;
use super::{EmitOptions, EmittedFile, Target};
use crate::algebra::print::{Syntax, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Action, Coef, EventKind, Expr, ParamDef, Rate, Sym, Timing};
use num_traits::ToPrimitive;
use serde_json::{Value, json};

pub struct Json;

/// Bumped when a field changes meaning or is removed.
pub const FORMAT_VERSION: u32 = 1;

impl Target for Json {
    fn name(&self) -> &'static str {
        "json"
    }
    fn extension(&self) -> &'static str {
        "json"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        let value = document(sys)?;
        let mut contents = serde_json::to_string_pretty(&value).unwrap_or_default();
        contents.push('\n');
        Ok(vec![EmittedFile {
            name: format!("{}.json", options.stem),
            contents,
        }])
    }
}

/// An exact coefficient: an integer as a JSON integer, else `"p/q"`.
fn exact(c: Coef) -> Value {
    if *c.denom() == 1 {
        json!(*c.numer())
    } else {
        json!(format!("{}/{}", c.numer(), c.denom()))
    }
}

fn document(sys: &System) -> Result<Value, Diagnostic> {
    let m = &sys.model;
    let text = |e: &Expr| print_expr(e, &|s| m.name_of(s).to_string(), Syntax::Mech);
    let species_name = |i: usize| m.species[i].name.clone();
    let term = |t: &crate::model::Term| json!({ "species": m.name_of(t.sym), "fixed": matches!(t.sym, Sym::Fixed(_)), "coefficient": exact(t.coefficient) });
    let steps: Vec<Value> = m
        .steps
        .iter()
        .enumerate()
        .map(|(j, s)| {
            let (kind, forward, reverse, law) = match &s.rate {
                Rate::MassAction { forward, reverse } => (
                    "mass_action",
                    Some(text(forward)),
                    reverse.as_ref().map(text),
                    None,
                ),
                Rate::Law(e) => ("law", None, None, Some(text(e))),
            };
            json!({
                "name": s.name,
                "reactants": s.reactants.iter().map(term).collect::<Vec<_>>(),
                "products": s.products.iter().map(term).collect::<Vec<_>>(),
                "reversible": s.reversible,
                "kind": kind,
                "forward_constant": forward,
                "reverse_constant": reverse,
                "law": law,
                "rate": text(&sys.rates[j]),
                "description": s.description,
            })
        })
        .collect();
    // Sparse (column-major, zeros omitted): a dense matrix of a large
    // network would be most of the file and of the memory.
    let entries: Vec<Value> = (0..m.steps.len())
        .flat_map(|j| {
            m.net_change(j)
                .into_iter()
                .map(move |(i, c)| json!([i, j, exact(c)]))
        })
        .collect();
    let reduction = crate::network::reduce(m)?;
    let laws: Vec<Value> = reduction
        .laws
        .iter()
        .map(|l| {
            let coefficients: serde_json::Map<String, Value> =
                l.coefficients.iter().map(|(i, c)| (species_name(*i), c.to_i64().map(|v| json!(v)).unwrap_or_else(|| json!(c.to_string())))).collect();
            json!({ "name": l.name, "coefficients": coefficients, "value": l.value, "user_total": l.user_total.filter(|&t| t < sys.written_totals).map(|t| m.totals[t].name.clone()) })
        })
        .collect();
    let rm = &reduction.model;
    let dependent: Vec<Value> = reduction
        .dependent
        .iter()
        .map(|d| {
            json!({
                "species": rm.species[d.species].name,
                "total": rm.totals[d.total].name,
                "formula": print_expr(&d.formula, &|s| rm.name_of(s).to_string(), Syntax::Mech),
            })
        })
        .collect();
    let state: Vec<String> = sys.state.iter().map(|&i| species_name(i)).collect();
    Ok(json!({
        "format": "ratewright-model",
        "format_version": FORMAT_VERSION,
        "name": m.name,
        "description": m.description,
        "units": { "concentration": m.units.concentration.symbol(), "time": m.units.time.symbol() },
        "species": m.species.iter().map(|s| json!({ "name": s.name, "initial": s.initial, "description": s.description })).collect::<Vec<_>>(),
        "fixed": m.fixed.iter().map(|f| json!({ "name": f.name, "value": f.value, "description": f.description })).collect::<Vec<_>>(),
        "params": m.params.iter().map(|p| json!({
            "name": p.name,
            "value": p.value,
            "expression": match &p.definition { ParamDef::Expr(e) => Some(text(e)), ParamDef::Value(_) => None },
            "dimension": p.dim.map(|d| json!({ "concentration": d.conc, "time": d.time })),
            "unit": p.dim.map(|d| d.display_in(m.units)),
            "description": p.description,
        })).collect::<Vec<_>>(),
        "param_order": m.param_order.iter().map(|&i| m.params[i].name.clone()).collect::<Vec<_>>(),
        "steps": steps,
        "stoichiometry": {
            "species": m.species.iter().map(|s| s.name.clone()).collect::<Vec<_>>(),
            "steps": m.steps.iter().map(|s| s.name.clone()).collect::<Vec<_>>(),
            "entries": entries,
        },
        "totals": m.totals.iter().map(|t| json!({
            "name": t.name,
            "coefficients": t.terms.iter().map(|(i, c)| (species_name(*i), exact(*c))).collect::<serde_json::Map<_, _>>(),
            "value": t.value,
            "value_given": t.value_given,
        })).collect::<Vec<_>>(),
        "observables": m.observables.iter().map(|o| json!({ "name": o.name, "expression": text(&o.expr) })).collect::<Vec<_>>(),
        "events": m.events.iter().map(|e| {
            let mut entry = match &e.action {
                Action::Species { kind, species, amount } => json!({
                    "kind": match kind { EventKind::Add => "add", EventKind::Remove => "remove", EventKind::Set => "set" },
                    "species": species_name(*species),
                    "amount": amount,
                }),
                Action::Stock { volume, contents } => json!({
                    "kind": "add_stock",
                    "volume": volume,
                    "stock": contents.iter().map(|(s, c)| (m.name_of(*s).to_string(), json!(c))).collect::<serde_json::Map<_, _>>(),
                }),
                Action::Withdraw { volume } => json!({ "kind": "withdraw", "volume": volume }),
            };
            match &e.timing {
                Timing::At(t) => entry["time"] = json!(t),
                Timing::When(trigger) => {
                    entry["when"] = json!(trigger.text);
                    entry["rising"] = json!(text(&trigger.rising));
                }
            }
            entry
        }).collect::<Vec<_>>(),
        "volume": m.volume,
        "volume_unit": m.volume_unit.as_ref().map(|u| u.0.clone()),
        "temperature_kelvin": m.temperature,
        "assumptions": {
            "steady": m.assumptions.steady.iter().map(|(i, _)| species_name(*i)).collect::<Vec<_>>(),
            "equilibrium": m.assumptions.equilibrium.iter().map(|(j, _)| m.steps[*j].name.clone()).collect::<Vec<_>>(),
        },
        "conservation_laws": laws,
        "reduction": {
            "independent": reduction.independent.iter().map(|&i| rm.species[i].name.clone()).collect::<Vec<_>>(),
            "dependent": dependent,
        },
        "system": {
            "reduced": sys.reduced,
            "state": state,
            "rhs": sys.rhs_exprs.iter().map(text).collect::<Vec<_>>(),
            "jacobian": sys.jac.iter().map(|e| json!({
                "row": species_name(sys.state[e.row]),
                "column": species_name(sys.state[e.col]),
                "expression": text(&e.expr),
            })).collect::<Vec<_>>(),
        },
    }))
}
