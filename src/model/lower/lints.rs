//! Lints: warnings about a model that lowered without errors.
//!
//! Invariants: lints run only when there are no errors (they would mostly
//! describe an error's consequences); a lint never changes the model.

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::ir::*;
use num_traits::Signed;

impl Lowerer<'_> {
    pub(super) fn lint(&mut self) {
        // Params used by totals' values? Totals carry numbers only; params
        // count as used when any expression mentions them.
        for (i, p) in self.model.params.iter().enumerate() {
            if !self.used.contains(&Sym::Param(i)) {
                self.diags.push(
                    Diagnostic::warning(
                        Code::UnusedParam,
                        format!("param `{}` is never used", p.name),
                    )
                    .with_label(p.span, "unused")
                    .with_help("use it in a rate, law, observable or another param, or remove it"),
                );
            }
        }
        let mut touched = vec![false; self.model.species.len()];
        let mut produced = vec![false; self.model.species.len()];
        let mut consumed = vec![false; self.model.species.len()];
        for (j, step) in self.model.steps.iter().enumerate() {
            for t in step.reactants.iter().chain(&step.products) {
                if let Sym::Species(k) = t.sym {
                    touched[k] = true;
                }
            }
            if let Rate::Law(e) = &step.rate {
                for s in e.names() {
                    if let Sym::Species(k) = s {
                        touched[k] = true;
                    }
                }
            }
            for (k, c) in self.model.net_change(j) {
                if c.is_positive() || step.reversible {
                    produced[k] = true;
                }
                if c.is_negative() || step.reversible {
                    consumed[k] = true;
                }
            }
            let sorted = |ts: &[Term]| {
                let mut v: Vec<(Sym, Coef)> = ts.iter().map(|t| (t.sym, t.coefficient)).collect();
                v.sort_by_key(|x| x.0);
                v
            };
            if sorted(&step.reactants) == sorted(&step.products) {
                self.diags.push(
                    Diagnostic::warning(Code::NoOpStep, format!("step `{}` has the same species on both sides", step.name))
                        .with_label(step.span, "changes nothing")
                        .with_help("a step whose sides are equal never changes any concentration; remove it or fix a side"),
                );
            }
        }
        for e in &self.model.events {
            produced[e.species] = true;
        }
        for (k, s) in self.model.species.iter().enumerate() {
            if !touched[k] {
                self.diags.push(
                    Diagnostic::warning(
                        Code::UntouchedSpecies,
                        format!("species `{}` takes part in no step", s.name),
                    )
                    .with_label(s.span, "never changes")
                    .with_help(
                        "use it in a step, declare it `fixed` if it is a constant, or remove it",
                    ),
                );
            } else if consumed[k]
                && !produced[k]
                && s.initial == 0.0
                && !self.initial_refused.contains(&k)
            {
                self.diags.push(
                    Diagnostic::warning(
                        Code::ConsumedOnly,
                        format!(
                            "species `{}` is consumed but starts at 0 and nothing produces it",
                            s.name
                        ),
                    )
                    .with_label(s.span, "no source")
                    .with_help(
                        "give it an initial value, an `add` event, or a step that produces it",
                    ),
                );
            }
        }
        let _ = self.sources;
    }
}
