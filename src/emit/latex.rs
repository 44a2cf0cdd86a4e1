//! LaTeX target: the ODE system (full or reduced) and the conservation laws
//! as `align` environments (amsmath) for a paper's supplement. Species print
//! as concentrations `[X]`; derived params and, for the reduced system, the
//! dependent species are listed with their definitions.

use super::system::System;
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, latex_name, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Expr, Sym};
use std::fmt::Write;

pub struct Latex;

impl Target for Latex {
    fn name(&self) -> &'static str {
        "latex"
    }
    fn extension(&self) -> &'static str {
        "tex"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.tex", options.stem),
            contents: source(sys, options)?,
        }])
    }
}

fn symbol(sys: &System, s: Sym) -> String {
    let name = latex_name(sys.model.name_of(s));
    match s {
        Sym::Species(_) | Sym::Fixed(_) => format!("[{name}]"),
        _ => name,
    }
}

fn source(sys: &System, options: &EmitOptions) -> Result<String, Diagnostic> {
    let m = &sys.model;
    let sym = |s: Sym| symbol(sys, s);
    let ex = |e: &Expr| print_expr(e, &sym, Syntax::Latex);
    let mut o = String::new();
    let _ = writeln!(o, "% {}", banner(sys, options, "latex"));
    let _ = writeln!(
        o,
        "% Requires amsmath. Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    o.push_str("\\begin{align}\n");
    let mut lines: Vec<String> = Vec::new();
    for (r, e) in sys.rhs_exprs.iter().enumerate() {
        let s = Sym::Species(sys.state[r]);
        lines.push(format!(
            "  \\frac{{\\mathrm{{d}}{}}}{{\\mathrm{{d}}t}} &= {}",
            sym(s),
            ex(e)
        ));
    }
    o.push_str(&lines.join(" \\\\\n"));
    o.push_str("\n\\end{align}\n");

    let mut defs: Vec<String> = Vec::new();
    for &i in &sys.derived {
        if let Some(e) = sys.derived_expr(i) {
            defs.push(format!("  {} &= {}", sym(Sym::Param(i)), ex(e)));
        }
    }
    for d in &sys.dependent {
        defs.push(format!(
            "  {} &= {}",
            sym(Sym::Species(d.species)),
            ex(&d.formula)
        ));
    }
    if !defs.is_empty() {
        o.push_str("where\n\\begin{align}\n");
        o.push_str(&defs.join(" \\\\\n"));
        o.push_str("\n\\end{align}\n");
    }

    let reduction = crate::network::reduce(m)?;
    if !reduction.laws.is_empty() {
        o.push_str("Conservation laws:\n\\begin{align}\n");
        let rm = &reduction.model;
        let laws: Vec<String> = reduction
            .laws
            .iter()
            .map(|l| {
                let mut lhs = Expr::Number(0.0);
                for (i, c) in &l.coefficients {
                    let c: f64 = c.to_string().parse().unwrap_or(f64::NAN);
                    lhs = Expr::add(
                        lhs,
                        Expr::mul(Expr::Number(c), Expr::Name(Sym::Species(*i))),
                    );
                }
                let lhs = crate::algebra::calculus::simplify(&lhs);
                let total = rm
                    .lookup(&l.name)
                    .map(|s| latex_name(rm.name_of(s)))
                    .unwrap_or_else(|| latex_name(&l.name));
                format!(
                    "  {} &= {total}",
                    print_expr(&lhs, &|s| symbol(sys, s), Syntax::Latex)
                )
            })
            .collect();
        o.push_str(&laws.join(" \\\\\n"));
        o.push_str("\n\\end{align}\n");
    }
    Ok(o)
}
