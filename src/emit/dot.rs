//! DOT target: the reaction graph as a bipartite directed graph. Species
//! (ellipses; fixed species grey) and steps (boxes) are nodes; an edge runs
//! from each reactant to its step and from the step to each product,
//! labelled with the stoichiometric coefficient. Reversible steps have a
//! double border and two-headed edges; species a rate law reads without
//! being changed by the step (modifiers) join it with a dashed edge.
//! `--reduced` does not apply (the graph is the reactions themselves).

use super::system::System;
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::diagnostics::Diagnostic;
use crate::model::{Rate, Sym};
use std::collections::BTreeSet;
use std::fmt::Write;

pub struct Dot;

impl Target for Dot {
    fn name(&self) -> &'static str {
        "dot"
    }
    fn extension(&self) -> &'static str {
        "dot"
    }
    fn supports_reduced(&self) -> bool {
        false
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.dot", options.stem),
            contents: source(sys, options),
        }])
    }
}

/// A DOT double-quoted id or label.
fn q(s: &str) -> String {
    format!(
        "\"{}\"",
        s.replace('\\', "\\\\")
            .replace('"', "\\\"")
            .replace('\n', " ")
    )
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let node = |s: Sym| match s {
        Sym::Fixed(i) => q(&format!("fixed:{}", m.fixed[i].name)),
        other => q(&format!("species:{}", m.name_of(other))),
    };
    let mut o = String::new();
    let _ = writeln!(o, "// {}", banner(sys, options, "dot"));
    let _ = writeln!(
        o,
        "digraph {} {{",
        q(m.name.as_deref().unwrap_or(&options.stem))
    );
    o.push_str("  rankdir=LR;\n  node [fontsize=12];\n  edge [fontsize=10];\n");
    for (i, s) in m.species.iter().enumerate() {
        let _ = writeln!(
            o,
            "  {} [label={}, shape=ellipse];",
            node(Sym::Species(i)),
            q(&s.name)
        );
    }
    for (i, f) in m.fixed.iter().enumerate() {
        let _ = writeln!(
            o,
            "  {} [label={}, shape=ellipse, style=filled, fillcolor=lightgrey];",
            node(Sym::Fixed(i)),
            q(&format!("{} (fixed)", f.name))
        );
    }
    for s in &m.steps {
        let id = q(&format!("step:{}", s.name));
        let (label, extra) = if s.reversible {
            (format!("{} ⇌", s.name), ", peripheries=2")
        } else {
            (s.name.clone(), "")
        };
        let _ = writeln!(o, "  {id} [label={}, shape=box{extra}];", q(&label));
        let dir = if s.reversible { ", dir=both" } else { "" };
        for t in &s.reactants {
            let _ = writeln!(
                o,
                "  {} -> {id} [label={}{dir}];",
                node(t.sym),
                q(&t.coefficient.to_string())
            );
        }
        for t in &s.products {
            let _ = writeln!(
                o,
                "  {id} -> {} [label={}{dir}];",
                node(t.sym),
                q(&t.coefficient.to_string())
            );
        }
        if let Rate::Law(law) = &s.rate {
            let on_sides: BTreeSet<Sym> = s
                .reactants
                .iter()
                .chain(&s.products)
                .map(|t| t.sym)
                .collect();
            for sym in law.names() {
                if matches!(sym, Sym::Species(_) | Sym::Fixed(_)) && !on_sides.contains(&sym) {
                    let _ = writeln!(o, "  {} -> {id} [style=dashed, arrowhead=odot];", node(sym));
                }
            }
        }
    }
    o.push_str("}\n");
    o
}
