//! Events: additions, removals and settings at given times, repeated
//! (`every`), or when a condition on the state becomes true (`when`);
//! additions of a stock and withdrawals of volume.
//!
//! Invariants: a timed event's time is finite and non-negative, in model
//! units; an `every` line becomes one timed event per repetition (at most
//! `MAX_REPETITIONS`); a species change targets a dynamic species; a stock
//! names species or fixed species; volume changes need a declared volume,
//! and the timed ones never withdraw more than the mixture holds.

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::expr::{BinOp, Expr};
use crate::model::ir::*;
use crate::syntax::{
    ActionAst, Comparison, ConditionSide, EventKindAst, Ident, Quantity, TimingAst,
};

/// Repetitions an `every` line may expand to.
pub(super) const MAX_REPETITIONS: usize = 100_000;

impl Lowerer<'_> {
    /// An event line (`item`): its action and when it acts.
    pub(super) fn lower_event(&mut self, item: &Item, action: &ActionAst, timing: &TimingAst) {
        let action = self.lower_action(item, action);
        let times: Vec<Timing> = match timing {
            TimingAst::At(q) => self
                .event_time(q, item.units)
                .map(Timing::At)
                .into_iter()
                .collect(),
            TimingAst::Every { period, from, to } => {
                self.repetitions(item, period, from.as_ref(), to)
            }
            TimingAst::When {
                lhs,
                comparison,
                rhs,
                span,
            } => self
                .trigger(item, lhs, *comparison, rhs, *span)
                .map(Timing::When)
                .into_iter()
                .collect(),
        };
        let Some(action) = action else { return };
        for timing in times {
            self.model.events.push(Event {
                timing,
                action: action.clone(),
                span: item.span,
            });
        }
    }

    fn lower_action(&mut self, item: &Item, action: &ActionAst) -> Option<Action> {
        match action {
            ActionAst::Change {
                kind,
                amount,
                target,
            } => {
                let kind = match kind {
                    EventKindAst::Add => EventKind::Add,
                    EventKindAst::Remove => EventKind::Remove,
                };
                self.species_change(item, kind, target, amount)
            }
            ActionAst::Set { target, value } => {
                self.species_change(item, EventKind::Set, target, value)
            }
            ActionAst::Stock { volume, contents } => {
                let litres = self.volume_change(volume, "an addition of a stock");
                let mut stock = Vec::new();
                for (amount, name) in contents {
                    let sym = match self.lookup(&name.name) {
                        Some(Decl::Sym(s @ (Sym::Species(_) | Sym::Fixed(_)))) => Some(s),
                        Some(_) => {
                            self.not_a_species(name, "a stock holds species");
                            None
                        }
                        None => {
                            self.unknown_name(name, "a species");
                            None
                        }
                    };
                    let c = self.concentration(amount, item.units, "a stock concentration");
                    if let Some(c) = c
                        && c < 0.0
                    {
                        self.negative_amount(amount);
                    }
                    if let (Some(sym), Some(c)) = (sym, c) {
                        stock.push((sym, c));
                    }
                }
                let litres = litres?;
                (stock.len() == contents.len()).then_some(Action::Stock {
                    volume: litres,
                    contents: stock,
                })
            }
            ActionAst::Withdraw { volume } => Some(Action::Withdraw {
                volume: self.volume_change(volume, "a withdrawal of volume")?,
            }),
        }
    }

    fn volume_change(&mut self, q: &Quantity, what: &str) -> Option<f64> {
        if self.model.volume.is_none() {
            self.needs_volume(q.span, what);
            return None;
        }
        self.volume_in_model_unit(q)
    }

    fn species_change(
        &mut self,
        item: &Item,
        kind: EventKind,
        target: &Ident,
        amount: &Quantity,
    ) -> Option<Action> {
        let species = match self.lookup(&target.name) {
            Some(Decl::Sym(Sym::Species(k))) => Some(k),
            Some(_) => {
                self.not_a_species(target, "events change species only");
                None
            }
            None => {
                self.unknown_name(target, "a species");
                None
            }
        };
        let amount_v = self.concentration(amount, item.units, "an amount");
        if let Some(v) = amount_v
            && v < 0.0
        {
            self.negative_amount(amount);
        }
        Some(Action::Species {
            kind,
            species: species?,
            amount: amount_v?,
        })
    }

    fn not_a_species(&mut self, target: &Ident, why: &str) {
        let what = match self.lookup(&target.name) {
            Some(Decl::Sym(s)) => kind_word(s),
            _ => "a step",
        };
        self.error(
            Diagnostic::error(Code::EventTarget, format!("`{}` is {what}; {why}", target.name))
                .with_label(target.span, "not a species")
                .with_help("timed additions, withdrawals and resets act on `species`; to change a param use `--set` or a scan"),
        );
    }

    fn negative_amount(&mut self, amount: &Quantity) {
        self.error(
            Diagnostic::error(Code::BadEvent, "event amounts cannot be negative")
                .with_label(amount.span, "negative")
                .with_help("use `remove` to take material away"),
        );
    }

    fn event_time(&mut self, q: &Quantity, units: Units) -> Option<f64> {
        let t = self.time(q, units)?;
        if t < 0.0 {
            self.error(
                Diagnostic::error(Code::BadEvent, "events cannot happen before time 0")
                    .with_label(q.span, "negative time")
                    .with_help("runs start at t = 0"),
            );
            return None;
        }
        Some(t)
    }

    /// `every PERIOD [from START] to END`: START, START + PERIOD, ... up to
    /// END inclusive (END itself when it falls on the grid, to a relative
    /// 1e-9 of the period, so `every 10 min from 0 s to 2 h` gives 13).
    fn repetitions(
        &mut self,
        item: &Item,
        period: &Quantity,
        from: Option<&Quantity>,
        to: &Quantity,
    ) -> Vec<Timing> {
        let p = self.time(period, item.units);
        let start = match from {
            Some(q) => self.event_time(q, item.units),
            None => Some(0.0),
        };
        let end = self.event_time(to, item.units);
        let (Some(p), Some(start), Some(end)) = (p, start, end) else {
            return Vec::new();
        };
        if p <= 0.0 {
            self.error(
                Diagnostic::error(
                    Code::BadEvent,
                    "the period of a repeated event must be positive",
                )
                .with_label(period.span, "not positive")
                .with_help("write e.g. `every 10 min from 0 s to 2 h: ...`"),
            );
            return Vec::new();
        }
        if end < start {
            self.error(
                Diagnostic::error(Code::BadEvent, "a repeated event ends before it starts")
                    .with_label(to.span, "before the start")
                    .with_help("the time after `to` must not come before the one after `from`"),
            );
            return Vec::new();
        }
        let count = ((end - start) / p * (1.0 + 1e-9)).floor();
        if !count.is_finite() || count >= MAX_REPETITIONS as f64 {
            self.error(
                Diagnostic::error(
                    Code::BadEvent,
                    format!("this repeated event happens more than {MAX_REPETITIONS} times"),
                )
                .with_label(item.span, "too many repetitions")
                .with_help("lengthen the period or shorten the time span"),
            );
            return Vec::new();
        }
        (0..=count as usize)
            .map(|k| Timing::At(start + k as f64 * p))
            .collect()
    }

    /// `when LHS > RHS`: the function that rises through zero when the
    /// condition becomes true.
    fn trigger(
        &mut self,
        item: &Item,
        lhs: &ConditionSide,
        comparison: Comparison,
        rhs: &ConditionSide,
        span: Span,
    ) -> Option<Trigger> {
        let allowed = |_: Sym| true;
        let side =
            |this: &mut Self, s: &ConditionSide| -> Option<(Expr, Option<crate::model::Dim>)> {
                match s {
                    ConditionSide::Expr(e) => {
                        let e = this.resolve(e, &allowed, "a condition")?;
                        let dim = this.infer_dim(&e);
                        Some((e, dim))
                    }
                    ConditionSide::Quantity(q) => {
                        let (v, dim) = this.quantity(q, item.units)?;
                        Some((Expr::Number(v), dim))
                    }
                }
            };
        let (l, ldim) = side(self, lhs)?;
        let (r, rdim) = side(self, rhs)?;
        // A number without a unit takes the other side's dimension, in the
        // file's default units (as a unitless value does everywhere).
        let unitless =
            |s: &ConditionSide| matches!(s, ConditionSide::Quantity(q) if q.unit.is_none());
        let l = match (unitless(lhs), l, rdim) {
            (true, Expr::Number(v), Some(d)) => Expr::Number(self.in_model_units(v, d, item.units)),
            (_, e, _) => e,
        };
        let r = match (unitless(rhs), r, ldim) {
            (true, Expr::Number(v), Some(d)) => Expr::Number(self.in_model_units(v, d, item.units)),
            (_, e, _) => e,
        };
        if let (Some(a), Some(b)) = (ldim, rdim)
            && a != b
            && !unitless(lhs)
            && !unitless(rhs)
        {
            let units = self.model.units;
            self.error(
                Diagnostic::error(
                    Code::BadCondition,
                    format!(
                        "a condition compares {} with {}",
                        a.display_in(units),
                        b.display_in(units)
                    ),
                )
                .with_label(lhs.span(), a.display_in(units))
                .with_label(rhs.span(), b.display_in(units))
                .with_help("both sides of a comparison need the same dimension"),
            );
            return None;
        }
        let changes = |e: &Expr| {
            e.mentions_time()
                || e.names()
                    .iter()
                    .any(|s| matches!(s, Sym::Species(_) | Sym::Observable(_) | Sym::Total(_)))
        };
        if !changes(&l) && !changes(&r) {
            self.error(
                Diagnostic::error(Code::BadCondition, "this condition names no species, so it never changes during a run")
                    .with_label(span, "constant")
                    .with_help("compare a species or an observable, e.g. `when P > 5 uM: ...`; for a time use `add ... at TIME`"),
            );
            return None;
        }
        let rising = match comparison {
            Comparison::Greater | Comparison::GreaterEqual => Expr::bin(BinOp::Sub, l, r),
            Comparison::Less | Comparison::LessEqual => Expr::bin(BinOp::Sub, r, l),
        };
        // The text is for messages and emitted comments: one space between
        // words, so the layout of the file (tabs, line breaks) is no part of
        // the model.
        let text = self
            .sources
            .snippet(span)
            .split_whitespace()
            .collect::<Vec<_>>()
            .join(" ");
        Some(Trigger { rising, text })
    }
}

impl Lowerer<'_> {
    /// Follows the volume through the timed additions and withdrawals (in
    /// time order, file order at one time) and refuses a withdrawal of
    /// more than the mixture holds then. Triggered ones are checked when
    /// they fire.
    pub(super) fn check_timed_volumes(&mut self) {
        let Some(mut volume) = self.model.volume else {
            return;
        };
        let mut timed: Vec<&Event> = self
            .model
            .events
            .iter()
            .filter(|e| e.time().is_some())
            .collect();
        timed.sort_by(|a, b| a.time().unwrap_or(0.0).total_cmp(&b.time().unwrap_or(0.0)));
        let mut refused = None;
        for e in timed {
            match &e.action {
                Action::Stock { volume: v, .. } => volume += v,
                Action::Withdraw { volume: v } => {
                    if *v >= volume * (1.0 - 1e-12) {
                        refused = Some((e.span, *v, volume));
                        break;
                    }
                    volume -= v;
                }
                Action::Species { .. } => {}
            }
        }
        if let Some((span, wanted, left)) = refused {
            self.error(
                Diagnostic::error(
                    Code::VolumeExhausted,
                    format!(
                        "this withdraws {} {unit}, but the mixture holds only {} {unit} by then",
                        fmt_num(wanted),
                        fmt_num(left),
                        unit = self.model.volume_symbol()
                    ),
                )
                .with_label(span, "more than is left")
                .with_help("withdraw less, or add liquid before; some liquid must remain"),
            );
        }
    }
}
