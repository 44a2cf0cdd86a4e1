//! Declarations: the first pass, which gives every name its kind and
//! index and stores the values that need no other names.
//!
//! Invariants: one namespace for every kind; a reserved or repeated name
//! is an error at the second declaration and is not declared; the IR's
//! index of an item is its declaration order.

use super::*;
use crate::diagnostics::{Code, Diagnostic, FileId, Span};
use crate::model::expr::Expr;
use crate::model::ir::*;
use crate::syntax::{Ident, StatementKind};

/// Names the language keeps for itself (time and π).
pub(super) const RESERVED: [&str; 2] = ["t", "pi"];

/// What a declared name is, with where it was declared.
#[derive(Clone, Copy)]
pub(super) enum Decl {
    Sym(Sym),
    Step(usize),
}

impl Lowerer<'_> {
    pub(super) fn declare(&mut self, ident: &Ident, decl: Decl) -> bool {
        if RESERVED.contains(&ident.name.as_str()) {
            self.error(
                Diagnostic::error(
                    Code::ReservedName,
                    format!("`{}` is a reserved name", ident.name),
                )
                .with_label(ident.span, "reserved")
                .with_help(
                    "`t` is time and `pi` is the constant π in expressions; choose another name",
                ),
            );
            return false;
        }
        // The words that end a step's sides cannot name what a step lists.
        if matches!(ident.name.as_str(), "with" | "law") {
            self.error(
                Diagnostic::error(
                    Code::ReservedName,
                    format!("`{}` cannot be a name", ident.name),
                )
                .with_label(ident.span, "a word of the step statement")
                .with_help("`with` and `law` start a step's rate, so a step could not list this name; choose another"),
            );
            return false;
        }
        if let Some((_, first)) = self.names.get(&ident.name) {
            let first = *first;
            self.error(
                Diagnostic::error(Code::DuplicateName, format!("`{}` is declared more than once", ident.name))
                    .with_label(ident.span, "declared again here")
                    .with_label(first, "first declared here")
                    .with_help("every species, fixed species, param, step, total and observable needs its own name"),
            );
            return false;
        }
        self.names.insert(ident.name.clone(), (decl, ident.span));
        true
    }

    /// First pass: every name, with values that need no other names.
    pub(super) fn declare_all(&mut self, items: &[Item], main: FileId) {
        let mut mechanism_seen: Option<Span> = None;
        for item in items {
            match item.kind {
                StatementKind::Mechanism { name, description } => {
                    if item.span.file != main {
                        continue; // an included file's name does not rename the model
                    }
                    if let Some(first) = mechanism_seen {
                        self.error(
                            Diagnostic::error(
                                Code::DuplicateStatement,
                                "`mechanism` is given more than once",
                            )
                            .with_label(item.span, "second name")
                            .with_label(first, "first name")
                            .with_help("a file names its mechanism at most once"),
                        );
                    }
                    mechanism_seen = Some(item.span);
                    self.model.name = Some(name.name.clone());
                    self.model.description = description.clone();
                }
                StatementKind::Species(decls) => {
                    for d in decls {
                        let idx = self.model.species.len();
                        if !self.declare(&d.name, Decl::Sym(Sym::Species(idx))) {
                            continue;
                        }
                        let (initial, given) = match &d.value {
                            Some(q) => {
                                let value = self.initial_concentration(
                                    q,
                                    &d.conversions,
                                    item.units,
                                    "an initial value",
                                );
                                if value.is_none() {
                                    self.initial_refused.insert(idx);
                                }
                                (value.unwrap_or(0.0), true)
                            }
                            None => (0.0, false),
                        };
                        if initial < 0.0 {
                            self.negative_value(
                                &d.name,
                                d.value.as_ref().map(|q| q.span).unwrap_or(d.name.span),
                            );
                        }
                        let span = d
                            .value
                            .as_ref()
                            .map(|q| d.name.span.join(q.span))
                            .unwrap_or(d.name.span);
                        let span = if decls.len() == 1 { item.span } else { span };
                        self.model.species.push(Species {
                            name: d.name.name.clone(),
                            initial,
                            initial_given: given,
                            description: d.description.clone(),
                            span,
                        });
                    }
                }
                StatementKind::Fixed(d) => {
                    let idx = self.model.fixed.len();
                    if !self.declare(&d.name, Decl::Sym(Sym::Fixed(idx))) {
                        continue;
                    }
                    let value = d
                        .value
                        .as_ref()
                        .and_then(|q| {
                            self.initial_concentration(
                                q,
                                &d.conversions,
                                item.units,
                                "a fixed concentration",
                            )
                        })
                        .unwrap_or(0.0);
                    if value < 0.0 {
                        self.negative_value(
                            &d.name,
                            d.value.as_ref().map(|q| q.span).unwrap_or(d.name.span),
                        );
                    }
                    self.model.fixed.push(Fixed {
                        name: d.name.name.clone(),
                        value,
                        description: d.description.clone(),
                        span: item.span,
                    });
                }
                StatementKind::Param {
                    name,
                    value,
                    description,
                } => {
                    let idx = self.model.params.len();
                    if !self.declare(name, Decl::Sym(Sym::Param(idx))) {
                        continue;
                    }
                    self.model.params.push(Param {
                        name: name.name.clone(),
                        definition: ParamDef::Value(0.0),
                        value: 0.0,
                        dim: None,
                        description: description.clone(),
                        span: item.span,
                    });
                    self.param_sources.push((value.clone(), item.units));
                }
                StatementKind::Step { name, .. } => {
                    let idx = self.model.steps.len();
                    if self.declare(name, Decl::Step(idx)) {
                        // Placeholder entry keeps indices aligned; filled by lower_step.
                        self.model.steps.push(Step {
                            name: name.name.clone(),
                            reactants: vec![],
                            products: vec![],
                            reversible: false,
                            rate: Rate::Law(Expr::Number(0.0)),
                            description: None,
                            span: item.span,
                            rate_span: item.span,
                        });
                    }
                }
                StatementKind::Total { name, .. } => {
                    let idx = self.model.totals.len();
                    if self.declare(name, Decl::Sym(Sym::Total(idx))) {
                        self.model.totals.push(Total {
                            name: name.name.clone(),
                            terms: vec![],
                            value: 0.0,
                            value_given: false,
                            span: item.span,
                        });
                    }
                }
                StatementKind::Observe { name, .. } => {
                    let idx = self.model.observables.len();
                    if self.declare(name, Decl::Sym(Sym::Observable(idx))) {
                        self.model.observables.push(Observable {
                            name: name.name.clone(),
                            expr: Expr::Number(0.0),
                            span: item.span,
                        });
                    }
                }
                // Declare nothing: read in later passes (units per file).
                StatementKind::Units(_)
                | StatementKind::AssumeSteady(_)
                | StatementKind::AssumeEquilibrium(_)
                | StatementKind::Event { .. }
                | StatementKind::Volume(_)
                | StatementKind::Temperature(_)
                | StatementKind::Use { .. } => {}
            }
        }
    }

    pub(super) fn negative_value(&mut self, name: &Ident, span: Span) {
        self.error(
            Diagnostic::error(Code::NegativeInitial, format!("`{}` cannot start at a negative concentration", name.name))
                .with_label(span, "negative value")
                .with_help("concentrations are zero or positive; to take material away during a run use `remove ... at TIME`"),
        );
    }
}
