//! Assumptions: `assume steady` and `assume equilibrium`, which the
//! derivation of rate laws reads.
//!
//! Invariants: each assumption names existing species or steps of the
//! right kind.

use super::*;
use crate::diagnostics::{Code, Diagnostic, did_you_mean};
use crate::model::ir::*;
use crate::syntax::Ident;

impl Lowerer<'_> {
    /// `assume steady` of the species `names`.
    pub(super) fn lower_steady(&mut self, names: &[Ident]) {
        for n in names {
            match self.lookup(&n.name) {
                        Some(Decl::Sym(Sym::Species(k))) => self.model.assumptions.steady.push((k, n.span)),
                        Some(_) => self.error(Diagnostic::error(Code::BadAssumption, format!("`{}` is not a species", n.name)).with_label(n.span, "not a species").with_help("`assume steady` names the species (usually enzyme forms) held at quasi-steady state")),
                        None => self.unknown_name(n, "a species"),
                    }
        }
    }

    /// `assume equilibrium` of the steps `names`.
    pub(super) fn lower_equilibrium(&mut self, names: &[Ident]) {
        for n in names {
            match self.lookup(&n.name) {
                Some(Decl::Step(k)) => self.model.assumptions.equilibrium.push((k, n.span)),
                Some(_) => self.error(
                    Diagnostic::error(Code::BadAssumption, format!("`{}` is not a step", n.name))
                        .with_label(n.span, "not a step")
                        .with_help("`assume equilibrium` names the steps at rapid equilibrium"),
                ),
                None => {
                    let steps: Vec<&str> =
                        self.model.steps.iter().map(|s| s.name.as_str()).collect();
                    let hint = did_you_mean(&n.name, steps.iter().copied())
                        .map(|h| format!("did you mean `{h}`?"))
                        .unwrap_or_else(|| "name a declared step".into());
                    self.error(
                        Diagnostic::error(Code::UnknownName, format!("unknown step `{}`", n.name))
                            .with_label(n.span, "not a step")
                            .with_help(hint),
                    );
                }
            }
        }
    }
}
