//! Totals (conservation statements): their terms, and the start values a
//! valued total sets.
//!
//! Invariants: after `apply_total_values` every valued total agrees with
//! the initial values, and every initial value is still finite and
//! non-negative.

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::ir::*;
use crate::syntax::{Ident, Quantity, StepTerm};
use num_traits::Zero;
use std::collections::HashMap;

impl Lowerer<'_> {
    /// A `total` statement (`item`): its name, terms and value if given.
    pub(super) fn lower_total(
        &mut self,
        item: &Item,
        name: &Ident,
        terms: &[StepTerm],
        value: &Option<Quantity>,
    ) {
        let Some(Decl::Sym(Sym::Total(i))) = self.lookup(&name.name) else {
            return;
        };
        if self.model.totals[i].span != item.span {
            return;
        }
        let mut lowered: Vec<(usize, Coef)> = Vec::new();
        for t in terms {
            let Some(sym) = self.participant(&t.name, "a term of a total") else {
                continue;
            };
            let Sym::Species(k) = sym else {
                self.error(
                    Diagnostic::error(
                        Code::WrongKind,
                        format!(
                            "`{}` is a fixed species; totals sum dynamic species",
                            t.name.name
                        ),
                    )
                    .with_label(t.name.span, "fixed")
                    .with_help("a fixed species never changes, so it needs no total"),
                );
                continue;
            };
            let Some(mut c) = self.coefficient(t) else {
                continue;
            };
            if t.negative {
                c = -c;
            }
            match lowered.iter_mut().find(|(j, _)| *j == k) {
                Some((_, x)) => *x += c,
                None => lowered.push((k, c)),
            }
        }
        lowered.retain(|(_, c)| !c.is_zero());
        if lowered.is_empty() {
            self.error(
                Diagnostic::error(
                    Code::TotalEmpty,
                    format!("total `{}` sums no species", name.name),
                )
                .with_label(item.span, "empty")
                .with_help("write the species it sums, e.g. `total E_t = E + ES`"),
            );
            return;
        }
        // Conserved by every step?
        for (j, step) in self.model.steps.iter().enumerate() {
            let change: Coef = self
                .model
                .net_change(j)
                .iter()
                .map(|(k, c)| {
                    lowered
                        .iter()
                        .find(|(x, _)| x == k)
                        .map(|(_, w)| *w * *c)
                        .unwrap_or_else(Coef::zero)
                })
                .fold(Coef::zero(), |a, b| a + b);
            if !change.is_zero() {
                let d = Diagnostic::error(Code::TotalNotConserved, format!("total `{}` is not conserved: step `{}` changes it by {} per firing", name.name, step.name, change))
                    .with_label(item.span, "this total")
                    .with_label(step.span, "changes the total")
                    .with_help("a total must sum species whose amounts the steps only move between each other; check the coefficients or drop the total");
                self.diags.push(d);
                break;
            }
        }
        let mut given = None;
        if let Some(q) = value
            && let Some(v) = self.concentration(q, item.units, "a total")
        {
            if v < 0.0 {
                self.negative_value(name, q.span);
            }
            given = Some(v);
        }
        let t = &mut self.model.totals[i];
        t.terms = lowered;
        t.value_given = given.is_some();
        t.value = given.unwrap_or(0.0);
    }

    /// Sets the start value of each valued total's adjusted species, then
    /// checks every total against the initial values.
    pub(super) fn apply_total_values(&mut self) {
        let mut adjusted: HashMap<usize, usize> = HashMap::new();
        // Totals already reported here are not reported again below.
        let mut reported: Vec<usize> = Vec::new();
        for i in 0..self.model.totals.len() {
            if !self.model.totals[i].value_given {
                continue;
            }
            let Some(k) = self.model.total_adjusted_species(i) else {
                continue;
            };
            if self.model.species[k].initial_given || adjusted.contains_key(&k) {
                continue; // all given: only checked below
            }
            match self.model.apply_total_value(i) {
                Ok(()) => {
                    adjusted.insert(k, i);
                    self.model.species[k].initial_given = true;
                }
                Err(msg) => {
                    reported.push(i);
                    let span = self.model.totals[i].span;
                    self.error(
                        Diagnostic::error(Code::TotalInconsistent, msg.to_string())
                            .with_label(span, "this total")
                            .with_help(
                                "raise the total or lower the initial values of its species",
                            ),
                    );
                }
            }
        }
        for i in 0..self.model.totals.len() {
            let t = &self.model.totals[i];
            let from_initial = self.model.total_from_initial(i);
            if !t.value_given {
                self.model.totals[i].value = from_initial;
                continue;
            }
            let scale = t.value.abs().max(from_initial.abs()).max(1e-300);
            if (t.value - from_initial).abs() > 1e-9 * scale && !reported.contains(&i) {
                let mut d = Diagnostic::error(
                    Code::TotalInconsistent,
                    format!(
                        "total `{}` is given as {} but its species start at a sum of {}",
                        t.name,
                        fmt_num(t.value),
                        fmt_num(from_initial)
                    ),
                )
                .with_label(t.span, "this total");
                for (k, _) in &t.terms {
                    let s = &self.model.species[*k];
                    if s.initial_given {
                        d = d.with_label(
                            s.span,
                            format!("`{}` starts at {}", s.name, fmt_num(s.initial)),
                        );
                    }
                }
                self.diags.push(d.with_help("leave out one species' initial value so it follows from the total, or correct the numbers"));
            }
        }
    }
}
