//! Checks a [`Model`] against the invariants stated at the head of
//! [`super::ir`], which every later stage relies on without checking.
//!
//! Why: lowering establishes these facts in many places; a test that runs
//! this over every model and fixture finds the one place that stops doing
//! so. Nothing here changes the model; each broken invariant is reported,
//! not only the first.

use super::expr::Expr;
use super::ir::*;
use std::collections::HashMap;
use std::fmt;

/// One broken invariant: which item, and what is wrong with it.
#[derive(Debug, Clone, PartialEq)]
pub struct Violation {
    pub item: String,
    pub problem: String,
}

impl fmt::Display for Violation {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.item, self.problem)
    }
}

struct Checker<'m> {
    model: &'m Model,
    found: Vec<Violation>,
}

impl Checker<'_> {
    fn broken(&mut self, item: impl Into<String>, problem: impl Into<String>) {
        self.found.push(Violation {
            item: item.into(),
            problem: problem.into(),
        });
    }

    /// A name the IR holds points at an item that exists.
    fn sym_exists(&self, s: Sym) -> bool {
        let m = self.model;
        match s {
            Sym::Species(i) => i < m.species.len(),
            Sym::Fixed(i) => i < m.fixed.len(),
            Sym::Param(i) => i < m.params.len(),
            Sym::Total(i) => i < m.totals.len(),
            Sym::Observable(i) => i < m.observables.len(),
        }
    }

    fn expr_resolved(&mut self, item: &str, e: &Expr) {
        let mut missing = Vec::new();
        e.visit_names(&mut |s| {
            if !self.sym_exists(s) {
                missing.push(s);
            }
        });
        for s in missing {
            self.broken(item, format!("refers to {s:?}, which does not exist"));
        }
    }

    fn names(&mut self) {
        let m = self.model;
        let mut seen: HashMap<&str, usize> = HashMap::new();
        let step_names = m.steps.iter().map(|s| s.name.as_str());
        for name in m
            .species
            .iter()
            .map(|s| s.name.as_str())
            .chain(m.fixed.iter().map(|s| s.name.as_str()))
            .chain(m.params.iter().map(|s| s.name.as_str()))
            .chain(m.totals.iter().map(|s| s.name.as_str()))
            .chain(m.observables.iter().map(|s| s.name.as_str()))
            .chain(step_names)
        {
            *seen.entry(name).or_default() += 1;
        }
        let mut repeated: Vec<&str> = seen
            .iter()
            .filter(|(_, n)| **n > 1)
            .map(|(name, _)| *name)
            .collect();
        repeated.sort();
        for name in repeated {
            self.broken(format!("`{name}`"), "is declared more than once");
        }
        let syms = (0..m.species.len())
            .map(Sym::Species)
            .chain((0..m.fixed.len()).map(Sym::Fixed))
            .chain((0..m.params.len()).map(Sym::Param))
            .chain((0..m.totals.len()).map(Sym::Total))
            .chain((0..m.observables.len()).map(Sym::Observable));
        for s in syms {
            let name = m.name_of(s);
            if m.lookup(name) != Some(s) {
                self.broken(format!("`{name}`"), format!("does not look up to {s:?}"));
            }
        }
    }

    fn params(&mut self) {
        let m = self.model;
        let mut position = vec![None; m.params.len()];
        for (at, &i) in m.param_order.iter().enumerate() {
            match position.get_mut(i) {
                Some(slot @ None) => *slot = Some(at),
                Some(Some(_)) => self.broken(format!("param #{i}"), "is twice in param_order"),
                None => self.broken(format!("param #{i}"), "in param_order does not exist"),
            }
        }
        for (i, p) in m.params.iter().enumerate() {
            let item = format!("param `{}`", p.name);
            if !p.value.is_finite() {
                self.broken(&item, format!("has the value {}", p.value));
            }
            let Some(at) = position[i] else {
                self.broken(&item, "is missing from param_order");
                continue;
            };
            match &p.definition {
                ParamDef::Value(v) => {
                    if v.to_bits() != p.value.to_bits() {
                        self.broken(
                            &item,
                            format!("is written {v} but has the value {}", p.value),
                        );
                    }
                }
                ParamDef::Expr(e) => {
                    self.expr_resolved(&item, e);
                    for s in e.names() {
                        if let Sym::Param(j) = s
                            && position.get(j).copied().flatten().is_none_or(|aj| aj >= at)
                        {
                            self.broken(
                                &item,
                                format!("uses param #{j}, which does not come before it"),
                            );
                        }
                    }
                }
            }
        }
    }

    fn values(&mut self) {
        let m = self.model;
        for s in &m.species {
            if !(s.initial.is_finite() && s.initial >= 0.0) {
                self.broken(
                    format!("species `{}`", s.name),
                    format!("starts at {}", s.initial),
                );
            }
        }
        for (i, t) in m.totals.iter().enumerate() {
            let item = format!("total `{}`", t.name);
            if let Some((k, _)) = t.terms.iter().find(|(k, _)| *k >= m.species.len()) {
                self.broken(&item, format!("names species #{k}, which does not exist"));
                continue;
            }
            let from_initial = m.total_from_initial(i);
            let scale = t.value.abs().max(from_initial.abs()).max(1e-300);
            if (t.value - from_initial).abs() > 1e-9 * scale {
                self.broken(
                    &item,
                    format!("is {} but the initial values give {from_initial}", t.value),
                );
            }
        }
    }

    fn steps(&mut self) {
        let m = self.model;
        for s in &m.steps {
            let item = format!("step `{}`", s.name);
            for t in s.reactants.iter().chain(&s.products) {
                if !matches!(t.sym, Sym::Species(_) | Sym::Fixed(_)) || !self.sym_exists(t.sym) {
                    self.broken(&item, format!("has the term {:?}", t.sym));
                }
                if t.coefficient <= Coef::from_integer(0) {
                    self.broken(&item, format!("has the coefficient {}", t.coefficient));
                }
            }
            match &s.rate {
                Rate::MassAction { forward, reverse } => {
                    if reverse.is_some() != s.reversible {
                        self.broken(
                            &item,
                            "has a reverse constant but is not reversible, or the other way",
                        );
                    }
                    self.expr_resolved(&item, forward);
                    if let Some(r) = reverse {
                        self.expr_resolved(&item, r);
                    }
                }
                Rate::Law(e) => self.expr_resolved(&item, e),
            }
        }
    }

    fn others(&mut self) {
        let m = self.model;
        for o in &m.observables {
            self.expr_resolved(&format!("observable `{}`", o.name), &o.expr);
        }
        for (i, e) in m.events.iter().enumerate() {
            let item = format!("event #{i}");
            let sym_ok = |s: &Sym| match s {
                Sym::Species(k) => *k < m.species.len(),
                Sym::Fixed(k) => *k < m.fixed.len(),
                _ => false,
            };
            let (targets_ok, amount) = match &e.action {
                Action::Species {
                    species, amount, ..
                } => (*species < m.species.len(), *amount),
                Action::Stock { volume, contents } => (
                    contents
                        .iter()
                        .all(|(s, c)| sym_ok(s) && c.is_finite() && *c >= 0.0)
                        && m.volume.is_some(),
                    *volume,
                ),
                Action::Withdraw { volume } => (m.volume.is_some(), *volume),
            };
            if !targets_ok {
                self.broken(&item, "changes something that does not exist".to_string());
            }
            let time_ok = match &e.timing {
                Timing::At(t) => t.is_finite() && *t >= 0.0,
                Timing::When(trigger) => {
                    self.expr_resolved(&item, &trigger.rising);
                    true
                }
            };
            if !time_ok || !amount.is_finite() {
                self.broken(&item, format!("is {amount} at {:?}", e.time()));
            }
        }
        for &(k, _) in &m.assumptions.steady {
            if k >= m.species.len() {
                self.broken("assume steady", format!("names species #{k}"));
            }
        }
        for &(j, _) in &m.assumptions.equilibrium {
            if j >= m.steps.len() {
                self.broken("assume equilibrium", format!("names step #{j}"));
            }
        }
    }

    /// Every item keeps its statement's span: a span that covers text.
    fn spans(&mut self) {
        let m = self.model;
        let spans = m
            .species
            .iter()
            .map(|s| (format!("species `{}`", s.name), s.span))
            .chain(
                m.fixed
                    .iter()
                    .map(|s| (format!("fixed `{}`", s.name), s.span)),
            )
            .chain(
                m.params
                    .iter()
                    .map(|s| (format!("param `{}`", s.name), s.span)),
            )
            .chain(
                m.steps
                    .iter()
                    .map(|s| (format!("step `{}`", s.name), s.span)),
            )
            .chain(
                m.steps
                    .iter()
                    .map(|s| (format!("rate of `{}`", s.name), s.rate_span)),
            )
            .chain(
                m.totals
                    .iter()
                    .map(|s| (format!("total `{}`", s.name), s.span)),
            )
            .chain(
                m.observables
                    .iter()
                    .map(|s| (format!("observable `{}`", s.name), s.span)),
            )
            .chain(
                m.events
                    .iter()
                    .enumerate()
                    .map(|(i, e)| (format!("event #{i}"), e.span)),
            )
            .collect::<Vec<_>>();
        for (item, span) in spans {
            if span.start >= span.end {
                self.broken(
                    item,
                    format!("has the empty span {}..{}", span.start, span.end),
                );
            }
        }
    }
}

/// Every broken invariant of `model`, or `Ok` when it keeps them all.
pub fn validate(model: &Model) -> Result<(), Vec<Violation>> {
    let mut c = Checker {
        model,
        found: Vec::new(),
    };
    c.names();
    c.params();
    c.values();
    c.steps();
    c.others();
    c.spans();
    if c.found.is_empty() {
        Ok(())
    } else {
        Err(c.found)
    }
}
