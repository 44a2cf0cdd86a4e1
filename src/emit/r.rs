//! R target: `rhs <- function(t, y, parms)` returning `list(dydt)` (the
//! convention of R's ODE solvers), `jacobian(t, y, parms)` returning the
//! dense matrix, named vectors `parms` and `y0`, the events as a data
//! frame, and `full_state(y, parms)`.

use super::names::{Names, R_RESERVED, quoted};
use super::system::{Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{EventKind, Expr, Sym};
use std::fmt::Write;

pub struct R;

impl Target for R {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "r"
    }
    fn extension(&self) -> &'static str {
        "R"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.R", options.stem),
            contents: source(sys, options),
        }])
    }
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let mut reserved: Vec<&str> = R_RESERVED.to_vec();
    reserved.extend(["rhs", "jacobian", "full_state", "parms", "events", "v", "x"]);
    let names = Names::new(m, &reserved);
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::R);
    let mut o = String::new();
    let _ = writeln!(o, "# {}", banner(sys, options, "r"));
    let _ = writeln!(
        o,
        "# Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    o.push_str(
        "# rhs(t, y, parms) returns list(dydt); jacobian(t, y, parms) the dense Jacobian.\n\n",
    );
    let named = |pairs: Vec<(String, String)>| {
        pairs
            .into_iter()
            .map(|(k, v)| format!("{} = {v}", quoted(&k)))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(
        o,
        "# Params with a value, fixed species and totals (default units).\nparms <- c({})",
        named(
            sys.constants
                .iter()
                .map(|c| (m.name_of(c.sym).to_string(), float_literal(c.value)))
                .collect()
        )
    );
    let _ = writeln!(
        o,
        "y0 <- c({})",
        named(
            sys.state
                .iter()
                .zip(sys.initial_state())
                .map(|(&i, v)| (m.species[i].name.clone(), float_literal(v)))
                .collect()
        )
    );
    let _ = writeln!(
        o,
        "species_names <- c({})",
        m.species
            .iter()
            .map(|s| quoted(&s.name))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let col = |f: &dyn Fn(&super::system::EventRow) -> String| {
        sys.events.iter().map(f).collect::<Vec<_>>().join(", ")
    };
    let _ = writeln!(
        o,
        "# Timed events, in order.\nevents <- data.frame(time = c({}), kind = c({}), species = c({}), amount = c({}), stringsAsFactors = FALSE)",
        col(&|e| float_literal(e.time)),
        col(&|e| quoted(match e.kind {
            EventKind::Add => "add",
            EventKind::Remove => "remove",
            EventKind::Set => "set",
        })),
        col(&|e| quoted(&m.species[e.species].name)),
        col(&|e| float_literal(e.amount))
    );

    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    o.push_str("\nrhs <- function(t, y, parms) {\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  v <- numeric({})", m.steps.len().max(1));
    for &j in &steps {
        let _ = writeln!(
            o,
            "  v[{}] <- {}  # {}",
            j + 1,
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    let _ = writeln!(o, "  dydt <- numeric({})", sys.n());
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        if !terms.is_empty() {
            let body = super::python::combination(terms, |j| format!("v[{}]", j + 1));
            let _ = writeln!(
                o,
                "  dydt[{}] <- {body}  # {}",
                r + 1,
                m.species[sys.state[r]].name
            );
        }
    }
    o.push_str("  list(dydt)\n}\n");

    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    o.push_str("\njacobian <- function(t, y, parms) {\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  J <- matrix(0, nrow = {n}, ncol = {n})", n = sys.n());
    for e in &sys.jac {
        let _ = writeln!(o, "  J[{}, {}] <- {}", e.row + 1, e.col + 1, ex(&e.expr));
    }
    o.push_str("  J\n}\n");

    o.push_str("\nfull_state <- function(y, parms) {\n");
    prelude(&mut o, sys, &names, &sys.full_state_needs());
    let all: Vec<String> = sys
        .full_state_terms(m, &|s| names.get(s))
        .into_iter()
        .zip(&m.species)
        .map(|(v, species)| format!("{} = {v}", quoted(&species.name)))
        .collect();
    let _ = writeln!(o, "  c({})\n}}", all.join(", "));
    o
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "  {} <- y[[{}]]",
            names.get(Sym::Species(sys.state[r])),
            r + 1
        );
    }
    for &k in &needs.constants {
        let sym = sys.constants[k].sym;
        let _ = writeln!(
            o,
            "  {} <- parms[[{}]]",
            names.get(sym),
            quoted(sys.model.name_of(sym))
        );
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "  {} <- {}",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::R)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "  {} <- {}",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::R)
        );
    }
}
