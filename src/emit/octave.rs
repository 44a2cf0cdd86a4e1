//! Octave target: one function file `<stem>.m`. Calling `m = <stem>()`
//! returns a struct with the parameters `p`, the initial state `y0`, the
//! names, the events, handles `rhs(t, y, p)`, `jac(t, y, p)` and
//! `full_state(y, p)`, and `options`: an `odeset` with the analytic
//! Jacobian set, ready for ode15s:
//! `[t, y] = ode15s(@(t, y) m.rhs(t, y, m.p), [0 T], m.y0, m.options);`

use super::names::{Names, OCTAVE_RESERVED};
use super::system::{Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{EventKind, Expr, Sym};
use std::fmt::Write;

pub struct Octave;

impl Target for Octave {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "octave"
    }
    fn extension(&self) -> &'static str {
        "m"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.m", options.stem),
            contents: source(sys, options),
        }])
    }
}

/// A single-quoted Octave string.
fn sq(s: &str) -> String {
    format!("'{}'", s.replace('\'', "''").replace('\n', " "))
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let stem = &options.stem;
    let mut reserved: Vec<&str> = OCTAVE_RESERVED.to_vec();
    reserved.push(stem);
    reserved.extend(["rhs", "jac", "full_state", "v"]);
    let names = Names::new(m, &reserved);
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::Octave);
    let mut o = String::new();
    let _ = writeln!(o, "function model = {stem}()");
    let _ = writeln!(o, "  % {}", banner(sys, options, "octave"));
    let _ = writeln!(
        o,
        "  % Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    let _ = writeln!(
        o,
        "  % Use: m = {stem}(); [t, y] = ode15s(@(t, y) m.rhs(t, y, m.p), [0 T], m.y0, m.options);"
    );
    o.push_str(
        "  % (after changing m.p, set m.options = odeset('Jacobian', @(t, y) m.jac(t, y, m.p)).)\n",
    );
    let cells = |v: Vec<String>| v.iter().map(|s| sq(s)).collect::<Vec<_>>().join(", ");
    let _ = writeln!(
        o,
        "  model.species_names = {{{}}};",
        cells(m.species.iter().map(|s| s.name.clone()).collect())
    );
    let _ = writeln!(
        o,
        "  model.state_names = {{{}}};",
        cells(
            sys.state
                .iter()
                .map(|&i| m.species[i].name.clone())
                .collect()
        )
    );
    o.push_str(
        "  % Params with a value, fixed species and totals (default units).\n  p = struct();\n",
    );
    for c in &sys.constants {
        let _ = writeln!(o, "  p.{} = {};", names.get(c.sym), float_literal(c.value));
    }
    o.push_str("  model.p = p;\n");
    let init: Vec<String> = sys
        .initial_state()
        .iter()
        .map(|v| float_literal(*v))
        .collect();
    let _ = writeln!(o, "  model.y0 = [{}];", init.join("; "));
    o.push_str("  % Timed events: time, kind (1 add, 2 remove, 3 set), species index, amount.\n");
    let rows: Vec<String> = sys
        .events
        .iter()
        .map(|e| {
            let kind = match e.kind {
                EventKind::Add => 1,
                EventKind::Remove => 2,
                EventKind::Set => 3,
            };
            format!(
                "{}, {kind}, {}, {}",
                float_literal(e.time),
                e.species + 1,
                float_literal(e.amount)
            )
        })
        .collect();
    let _ = writeln!(o, "  model.events = zeros(0, 4);");
    if !rows.is_empty() {
        let _ = writeln!(o, "  model.events = [{}];", rows.join("; "));
    }
    o.push_str("  model.rhs = @rhs;\n  model.jac = @jac;\n  model.full_state = @full_state;\n");
    // Octave's automatic first step can fail the error test on a fast
    // initial transient; a step scaled by the fastest rate at the start works.
    // (Where the Jacobian is not finite at the start, e.g. sqrt(B) at B = 0,
    // Octave's own choice is left in place.)
    o.push_str("  h0 = 1e-4 / max(1, norm(jac(0, model.y0, p), Inf));\n");
    o.push_str(
        "  if isfinite(h0) && h0 > 0\n    model.options = odeset('Jacobian', @(t, y) jac(t, y, p), 'InitialStep', h0);\n  else\n    model.options = odeset('Jacobian', @(t, y) jac(t, y, p));\n  end\nend\n",
    );

    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    o.push_str("\nfunction dydt = rhs(t, y, p)\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  v = zeros({}, 1);", m.steps.len().max(1));
    for &j in &steps {
        let _ = writeln!(
            o,
            "  v({}) = {};  % {}",
            j + 1,
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    let _ = writeln!(o, "  dydt = zeros({}, 1);", sys.n());
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        if !terms.is_empty() {
            let body = super::python::combination(terms, |j| format!("v({})", j + 1));
            let _ = writeln!(
                o,
                "  dydt({}) = {body};  % {}",
                r + 1,
                m.species[sys.state[r]].name
            );
        }
    }
    o.push_str("end\n");

    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    o.push_str("\nfunction J = jac(t, y, p)\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  J = zeros({n}, {n});", n = sys.n());
    for e in &sys.jac {
        let _ = writeln!(o, "  J({}, {}) = {};", e.row + 1, e.col + 1, ex(&e.expr));
    }
    o.push_str("end\n");

    o.push_str("\nfunction x = full_state(y, p)\n");
    prelude(&mut o, sys, &names, &sys.full_state_needs());
    let all = sys.full_state_terms(m, &|s| names.get(s));
    let _ = writeln!(o, "  x = [{}];\nend", all.join("; "));
    o
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "  {} = y({});",
            names.get(Sym::Species(sys.state[r])),
            r + 1
        );
    }
    for &k in &needs.constants {
        let _ = writeln!(o, "  {0} = p.{0};", names.get(sys.constants[k].sym));
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "  {} = {};",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::Octave)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "  {} = {};",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::Octave)
        );
    }
}
