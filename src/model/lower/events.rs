//! Events: additions, removals and settings at given times.
//!
//! Invariants: an event's time is finite and non-negative, in model
//! units; its target is a dynamic species.

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::ir::*;
use crate::syntax::{Ident, Quantity};

impl Lowerer<'_> {
    /// An `add`, `remove` or `set` statement (`item`), taken apart.
    pub(super) fn lower_event(
        &mut self,
        item: &Item,
        kind: EventKind,
        target: &Ident,
        amount: &Quantity,
        time: &Quantity,
    ) {
        let species = match self.lookup(&target.name) {
            Some(Decl::Sym(Sym::Species(k))) => Some(k),
            Some(Decl::Sym(s)) => {
                self.error(
                    Diagnostic::error(Code::EventTarget, format!("`{}` is {}; events change species only", target.name, kind_word(s)))
                        .with_label(target.span, "not a species")
                        .with_help("timed additions, withdrawals and resets act on `species`; to change a param use `--set` or a scan"),
                );
                None
            }
            Some(Decl::Step(_)) => {
                self.error(
                    Diagnostic::error(
                        Code::EventTarget,
                        format!("`{}` is a step; events change species only", target.name),
                    )
                    .with_label(target.span, "not a species")
                    .with_help("name a species"),
                );
                None
            }
            None => {
                self.unknown_name(target, "a species");
                None
            }
        };
        let amount_v = self.concentration(amount, item.units, "an amount");
        let time_v = self.time(time, item.units);
        if let Some(v) = amount_v
            && v < 0.0
        {
            self.error(
                Diagnostic::error(Code::BadEvent, "event amounts cannot be negative")
                    .with_label(amount.span, "negative")
                    .with_help("use `remove` to take material away"),
            );
        }
        if let Some(t) = time_v
            && t < 0.0
        {
            self.error(
                Diagnostic::error(Code::BadEvent, "events cannot happen before time 0")
                    .with_label(time.span, "negative time")
                    .with_help("runs start at t = 0"),
            );
        }
        if let (Some(species), Some(amount), Some(time)) = (species, amount_v, time_v) {
            self.model.events.push(Event {
                kind,
                species,
                amount,
                time,
                span: item.span,
            });
        }
    }
}
