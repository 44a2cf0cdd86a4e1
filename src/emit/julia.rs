//! Julia target: in-place `f!(du, u, p, t)` and `jac!(J, u, p, t)` in the
//! calling convention of Julia's ODE solvers, a named parameter tuple
//! `PARAMS`, the initial state `u0`, names, events, and (always)
//! `full_state(u, p)` that rebuilds every species from the state (the
//! dependent species of the reduced system from the totals).

use super::names::{JULIA_RESERVED, Names};
use super::system::{Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{EventKind, Expr, Sym};
use std::fmt::Write;

pub struct Julia;

impl Target for Julia {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "julia"
    }
    fn extension(&self) -> &'static str {
        "jl"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.jl", options.stem),
            contents: source(sys, options),
        }])
    }
}

/// A Julia string literal (`$` would interpolate).
fn jq(s: &str) -> String {
    super::names::quoted(s).replace('$', "\\$")
}

/// Reserved names plus the rate locals `v_1 … v_n`.
pub(crate) fn reserved_with_rates(base: &[&str], steps: usize) -> Vec<String> {
    let mut v: Vec<String> = base.iter().map(|s| s.to_string()).collect();
    v.extend((1..=steps).map(|j| format!("v_{j}")));
    v
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let reserved = reserved_with_rates(JULIA_RESERVED, m.steps.len());
    let reserved: Vec<&str> = reserved.iter().map(String::as_str).collect();
    let names = Names::new(m, &reserved);
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::Julia);
    let mut o = String::new();
    let _ = writeln!(o, "# {}", banner(sys, options, "julia"));
    if let Some(d) = &m.description {
        let _ = writeln!(o, "# {}", d.replace('\n', " "));
    }
    let _ = writeln!(
        o,
        "# Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    o.push_str("# f!(du, u, p, t) and jac!(J, u, p, t) are in place, with p a named tuple\n# like PARAMS; build an ODE problem from f!, jac!, u0, a time span and PARAMS.\n\n");
    let list = |v: Vec<String>| v.iter().map(|s| jq(s)).collect::<Vec<_>>().join(", ");
    let _ = writeln!(
        o,
        "const SPECIES = [{}]",
        list(m.species.iter().map(|s| s.name.clone()).collect())
    );
    let _ = writeln!(
        o,
        "const STATE = [{}]",
        list(
            sys.state
                .iter()
                .map(|&i| m.species[i].name.clone())
                .collect()
        )
    );
    let _ = writeln!(
        o,
        "const OBSERVABLES = [{}]",
        list(m.observables.iter().map(|s| s.name.clone()).collect())
    );
    o.push_str(
        "\n# Params with a value, fixed species and totals (default units).\nconst PARAMS = (",
    );
    let fields: Vec<String> = sys
        .constants
        .iter()
        .map(|c| format!("{} = {}", names.get(c.sym), float_literal(c.value)))
        .collect();
    o.push_str(&fields.join(", "));
    if fields.len() == 1 {
        o.push(',');
    }
    o.push_str(")\n\n# Initial state (STATE order).\n");
    let init: Vec<String> = sys
        .initial_state()
        .iter()
        .map(|v| float_literal(*v))
        .collect();
    let _ = writeln!(o, "const u0 = Float64[{}]", init.join(", "));
    o.push_str("\n# Timed events (apply in order; totals change with them).\nconst EVENTS = [\n");
    for e in &sys.events {
        let kind = match e.kind {
            EventKind::Add => "add",
            EventKind::Remove => "remove",
            EventKind::Set => "set",
        };
        let _ = writeln!(
            o,
            "    (time = {}, kind = :{kind}, species = {}, amount = {}),",
            float_literal(e.time),
            jq(&m.species[e.species].name),
            float_literal(e.amount)
        );
    }
    o.push_str("]\n");

    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    o.push_str("\nfunction f!(du, u, p, t)\n");
    prelude(&mut o, sys, &names, &needs);
    for &j in &steps {
        let _ = writeln!(
            o,
            "    v_{} = {}  # {}",
            j + 1,
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        let body = if terms.is_empty() {
            "0.0".into()
        } else {
            super::python::combination(terms, |j| format!("v_{}", j + 1))
        };
        let _ = writeln!(
            o,
            "    du[{}] = {body}  # {}",
            r + 1,
            m.species[sys.state[r]].name
        );
    }
    o.push_str("    return nothing\nend\n");

    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    o.push_str("\n# The analytic Jacobian J[i, j] = d f_i / d u_j.\nfunction jac!(J, u, p, t)\n");
    prelude(&mut o, sys, &names, &needs);
    o.push_str("    fill!(J, zero(eltype(J)))\n");
    for e in &sys.jac {
        let _ = writeln!(o, "    J[{}, {}] = {}", e.row + 1, e.col + 1, ex(&e.expr));
    }
    o.push_str("    return nothing\nend\n");

    o.push_str("\n# Every species (SPECIES order) from the state u.\nfunction full_state(u, p)\n");
    prelude(&mut o, sys, &names, &sys.full_state_needs());
    let all = sys.full_state_terms(m, &|s| names.get(s));
    let _ = writeln!(o, "    return [{}]\nend", all.join(", "));
    o
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "    {} = u[{}]",
            names.get(Sym::Species(sys.state[r])),
            r + 1
        );
    }
    for &k in &needs.constants {
        let _ = writeln!(o, "    {0} = p.{0}", names.get(sys.constants[k].sym));
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "    {} = {}",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::Julia)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "    {} = {}",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::Julia)
        );
    }
}
