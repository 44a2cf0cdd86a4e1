//! Lints: warnings about a model that lowered without errors.
//!
//! Invariants: lints run only when there are no errors (they would mostly
//! describe an error's consequences); a lint never changes the model.

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::ir::*;
use num_traits::Signed;

impl Lowerer<'_> {
    /// Names written with different Unicode code points that read the same
    /// (`Å` as one code point and as `A` with a combining ring) are two
    /// names to the compiler but one to a reader: a warning at both.
    fn lint_normalisation(&mut self) {
        use unicode_normalization::UnicodeNormalization;
        let m = &self.model;
        let mut names: Vec<(&str, crate::diagnostics::Span)> = Vec::new();
        names.extend(m.species.iter().map(|s| (s.name.as_str(), s.span)));
        names.extend(m.fixed.iter().map(|f| (f.name.as_str(), f.span)));
        names.extend(m.params.iter().map(|p| (p.name.as_str(), p.span)));
        names.extend(m.observables.iter().map(|o| (o.name.as_str(), o.span)));
        names.extend(m.totals.iter().map(|t| (t.name.as_str(), t.span)));
        names.extend(m.steps.iter().map(|s| (s.name.as_str(), s.span)));
        let mut seen: std::collections::HashMap<String, (&str, crate::diagnostics::Span)> =
            std::collections::HashMap::new();
        let mut found = Vec::new();
        for (name, span) in names {
            if name.is_ascii() {
                continue;
            }
            let normal: String = name.nfc().collect();
            match seen.get(&normal) {
                Some((other, other_span)) if *other != name => {
                    found.push((name.to_string(), span, other.to_string(), *other_span));
                }
                Some(_) => {}
                None => {
                    seen.insert(normal, (name, span));
                }
            }
        }
        for (name, span, other, other_span) in found {
            self.diags.push(
                Diagnostic::warning(
                    Code::NamesEqualWhenNormalized,
                    format!("`{name}` and `{other}` look the same but are written with different Unicode code points, so they are two names"),
                )
                .with_label(span, "this one")
                .with_label(other_span, "and this one")
                .with_help("write both the same way (NFC: one code point per accented letter), or rename one"),
            );
        }
    }

    pub(super) fn lint(&mut self) {
        self.lint_normalisation();
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
            for i in e.species_raised() {
                produced[i] = true;
            }
            if let Action::Species { species, .. } = e.action {
                produced[species] = true;
            }
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
