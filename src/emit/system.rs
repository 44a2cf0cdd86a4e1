//! The facts every target prints, computed once: the state vector, the
//! parameter vector, the step rates, the right-hand side and the sparse
//! analytic Jacobian.
//!
//! Invariants: `rhs_exprs[r]` equals Σ coefficient × `rates[step]` over
//! `rhs_terms[r]`; dependent species (reduced system) appear in rates and
//! right-hand sides as names that the emitted code computes first from
//! their formulas, while `jac` is the derivative of the right-hand side with
//! those formulas substituted (the chain rule through the conservation
//! laws), so `jac` is the exact Jacobian of the state the code integrates.
//! Observables used inside rate laws are inlined. Jacobian entries are the
//! structural non-zeros, sorted column-major (the order of compressed
//! sparse column storage).

use crate::algebra::calculus::{derivative, is_zero, simplify};
use crate::diagnostics::{Code, Diagnostic};
use crate::model::{Coef, Event, EventKind, Expr, Model, ParamDef, Sym, Timing, Trigger, coef_f64};
use std::collections::BTreeSet;

/// Inlined expressions larger than this are refused (a model whose
/// observables nest exponentially would otherwise emit unbounded text).
const MAX_EXPR_SIZE: usize = 200_000;

/// A species eliminated by a conservation law.
#[derive(Debug, Clone)]
pub struct Dependent {
    pub species: usize,
    pub total: usize,
    /// Over `Sym::Total` and state species.
    pub formula: Expr,
}

/// One structural non-zero of the Jacobian: d rhs[row] / d state[col].
#[derive(Debug, Clone)]
pub struct JacEntry {
    pub row: usize,
    pub col: usize,
    pub expr: Expr,
}

/// What a constant of the parameter vector is in the model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ConstantKind {
    Param,
    Fixed,
    Total,
}

#[derive(Debug, Clone)]
pub struct Constant {
    pub sym: Sym,
    pub kind: ConstantKind,
    pub value: f64,
}

/// A timed event of the protocol, in state terms.
#[derive(Debug, Clone)]
pub struct EventRow {
    pub time: f64,
    pub kind: EventKind,
    pub species: usize,
    pub amount: f64,
}

#[derive(Debug, Clone)]
pub struct System {
    /// The model; for the reduced system, the model with every
    /// conservation law present as a total.
    pub model: Model,
    pub reduced: bool,
    /// How many of `model.totals` the user wrote (the reduction appends
    /// the laws it found after them).
    pub written_totals: usize,
    /// Species index of each state slot.
    pub state: Vec<usize>,
    pub dependent: Vec<Dependent>,
    /// The parameter vector: params with a value, fixed species, totals (in
    /// that order; totals only when something uses them).
    pub constants: Vec<Constant>,
    /// Params defined by expressions, in evaluation order.
    pub derived: Vec<usize>,
    /// Net forward rate of each step, simplified, observables inlined.
    pub rates: Vec<Expr>,
    /// For each state slot: (step, coefficient) of every step that changes it.
    pub rhs_terms: Vec<Vec<(usize, Coef)>>,
    /// For each state slot, d/dt as one expression (dependents as names).
    pub rhs_exprs: Vec<Expr>,
    pub jac: Vec<JacEntry>,
    /// Each observable, inlined (over species, constants and `t`).
    pub observables: Vec<Expr>,
    pub events: Vec<EventRow>,
    /// The rising function of each `when` event (model event order),
    /// observables inlined.
    pub triggers: Vec<Expr>,
}

impl System {
    /// The full system: every dynamic species is a state variable.
    pub fn full(model: &Model) -> Result<System, Diagnostic> {
        let state: Vec<usize> = (0..model.species.len()).collect();
        System::build(model.clone(), false, state, Vec::new(), model.totals.len())
    }

    /// The reduced system of `network::reduce`: the independent species are
    /// the state; the dependent ones follow from the totals.
    pub fn reduced(model: &Model) -> Result<System, Diagnostic> {
        let r = crate::network::reduce(model)?;
        let dependent = r
            .dependent
            .iter()
            .map(|d| Dependent {
                species: d.species,
                total: d.total,
                formula: simplify(&d.formula),
            })
            .collect();
        System::build(r.model, true, r.independent, dependent, model.totals.len())
    }

    fn build(
        model: Model,
        reduced: bool,
        state: Vec<usize>,
        dependent: Vec<Dependent>,
        written_totals: usize,
    ) -> Result<System, Diagnostic> {
        let observables = (0..model.observables.len())
            .map(|i| inline(&model, &Expr::Name(Sym::Observable(i)), 0))
            .collect::<Result<Vec<_>, _>>()?;
        let triggers = model
            .events
            .iter()
            .filter_map(|e| match &e.timing {
                crate::model::Timing::When(t) => Some(inline(&model, &t.rising, 0)),
                crate::model::Timing::At(_) => None,
            })
            .collect::<Result<Vec<_>, _>>()?;
        let rates: Vec<Expr> = (0..model.steps.len())
            .map(|j| {
                let rate = inline(&model, &model.step_rate(j), 0)?;
                let rate = simplify(&rate);
                check_size(&model, &rate, j)?;
                Ok(rate)
            })
            .collect::<Result<_, Diagnostic>>()?;

        let mut slots: Vec<Option<usize>> = vec![None; model.species.len()];
        for (r, &i) in state.iter().enumerate() {
            slots[i] = Some(r);
        }
        let slot_of = |species: usize| slots.get(species).copied().flatten();
        let mut rhs_terms: Vec<Vec<(usize, Coef)>> = vec![Vec::new(); state.len()];
        for j in 0..model.steps.len() {
            for (i, c) in model.net_change(j) {
                if let Some(r) = slot_of(i) {
                    rhs_terms[r].push((j, c));
                }
            }
        }
        let rhs_exprs: Vec<Expr> = rhs_terms
            .iter()
            .map(|terms| {
                let mut acc = Expr::Number(0.0);
                for (j, c) in terms {
                    acc = Expr::add(
                        acc,
                        Expr::mul(Expr::Number(coef_f64(*c)), rates[*j].clone()),
                    );
                }
                simplify(&acc)
            })
            .collect();

        // Jacobian: substitute the dependent species, then differentiate by
        // every state species the row mentions.
        let substituted: Vec<Expr> = rhs_exprs
            .iter()
            .map(|e| {
                simplify(&e.substitute(&|s| {
                    match s {
                        Sym::Species(i) => dependent
                            .iter()
                            .find(|d| d.species == i)
                            .map(|d| d.formula.clone()),
                        _ => None,
                    }
                }))
            })
            .collect();
        let mut jac = Vec::new();
        for (row, e) in substituted.iter().enumerate() {
            for sym in e.names() {
                let Sym::Species(i) = sym else { continue };
                let Some(col) = slot_of(i) else { continue };
                let d = derivative(e, sym);
                if !is_zero(&d) {
                    jac.push(JacEntry { row, col, expr: d });
                }
            }
        }
        jac.sort_by_key(|e| (e.col, e.row));

        // The first-round protocol (timed species changes); volume changes
        // and triggers are read from the model by the targets that write
        // them (`Target::writes_assay_protocol`).
        let events = model
            .events
            .iter()
            .filter_map(Event::timed_species_change)
            .map(|(time, kind, species, amount)| EventRow {
                time,
                kind,
                species,
                amount,
            })
            .collect();

        let mut system = System {
            model,
            reduced,
            written_totals,
            state,
            dependent,
            constants: Vec::new(),
            derived: Vec::new(),
            rates,
            rhs_terms,
            rhs_exprs,
            jac,
            observables,
            events,
            triggers,
        };
        system.collect_constants();
        Ok(system)
    }

    fn collect_constants(&mut self) {
        let m = &self.model;
        let mut used_totals: BTreeSet<usize> = BTreeSet::new();
        let mut note = |e: &Expr| {
            e.visit_names(&mut |s| {
                if let Sym::Total(i) = s {
                    used_totals.insert(i);
                }
            })
        };
        self.rates.iter().for_each(&mut note);
        self.observables.iter().for_each(&mut note);
        self.triggers.iter().for_each(&mut note);
        self.dependent.iter().for_each(|d| note(&d.formula));
        let mut constants = Vec::new();
        for (i, p) in m.params.iter().enumerate() {
            if let ParamDef::Value(v) = p.definition {
                constants.push(Constant {
                    sym: Sym::Param(i),
                    kind: ConstantKind::Param,
                    value: v,
                });
            }
        }
        for (i, f) in m.fixed.iter().enumerate() {
            constants.push(Constant {
                sym: Sym::Fixed(i),
                kind: ConstantKind::Fixed,
                value: f.value,
            });
        }
        for (i, t) in m.totals.iter().enumerate() {
            if self.reduced || used_totals.contains(&i) {
                constants.push(Constant {
                    sym: Sym::Total(i),
                    kind: ConstantKind::Total,
                    value: t.value,
                });
            }
        }
        self.constants = constants;
        self.derived = m
            .param_order
            .iter()
            .copied()
            .filter(|&i| matches!(m.params[i].definition, ParamDef::Expr(_)))
            .collect();
    }

    /// Number of state variables.
    pub fn n(&self) -> usize {
        self.state.len()
    }

    /// The state slot of a species, if it is a state variable.
    pub fn slot(&self, species: usize) -> Option<usize> {
        self.state.iter().position(|&s| s == species)
    }

    /// Initial value of each state variable.
    pub fn initial_state(&self) -> Vec<f64> {
        self.state
            .iter()
            .map(|&i| self.model.species[i].initial)
            .collect()
    }

    /// The position of a symbol in the parameter vector.
    pub fn constant_index(&self, sym: Sym) -> Option<usize> {
        self.constants.iter().position(|c| c.sym == sym)
    }

    /// The expression of a derived param.
    pub fn derived_expr(&self, param: usize) -> Option<&Expr> {
        match &self.model.params[param].definition {
            ParamDef::Expr(e) => Some(e),
            ParamDef::Value(_) => None,
        }
    }

    /// Which names code computing `exprs` must define first: state slots,
    /// constants, derived params (in evaluation order, with what they use),
    /// and dependent species (with what their formulas use).
    pub fn needs<'a>(&self, exprs: impl IntoIterator<Item = &'a Expr>) -> Needs {
        self.needs_with(exprs, true)
    }

    /// What a `full_state` function must define: every state slot and every
    /// dependent species (with what the formulas use).
    pub fn full_state_needs(&self) -> Needs {
        let needs = self.needs(self.dependent.iter().map(|d| &d.formula));
        Needs {
            state: (0..self.n()).collect(),
            dependent: (0..self.dependent.len()).collect(),
            ..needs
        }
    }

    /// Every species (model order) as `full_state` returns it: the name of a
    /// state or dependent species, or the constant start value of a species
    /// that no step changes (not in the state).
    pub fn full_state_terms(&self, model: &Model, name_of: &dyn Fn(Sym) -> String) -> Vec<String> {
        (0..model.species.len())
            .map(|i| {
                if self.slot(i).is_some() || self.dependent_of(i).is_some() {
                    name_of(Sym::Species(i))
                } else {
                    crate::algebra::print::plain_literal(model.species[i].initial)
                }
            })
            .collect()
    }

    /// Like [`System::needs`] for code that reads every species from a full
    /// species vector: dependent species are not computed from formulas.
    pub fn needs_over_full<'a>(&self, exprs: impl IntoIterator<Item = &'a Expr>) -> Needs {
        let n = self.needs_with(exprs, false);
        Needs {
            state: Vec::new(),
            dependent: Vec::new(),
            ..n
        }
    }

    fn needs_with<'a>(
        &self,
        exprs: impl IntoIterator<Item = &'a Expr>,
        expand_dependents: bool,
    ) -> Needs {
        let mut syms: BTreeSet<Sym> = BTreeSet::new();
        let mut pending: Vec<Sym> = Vec::new();
        let mut mentions_time = false;
        for e in exprs {
            mentions_time |= e.mentions_time();
            e.visit_names(&mut |s| pending.push(s));
        }
        while let Some(s) = pending.pop() {
            if !syms.insert(s) {
                continue;
            }
            match s {
                Sym::Param(i) => {
                    if let Some(e) = self.derived_expr(i) {
                        e.visit_names(&mut |s| pending.push(s));
                    }
                }
                Sym::Species(i) if expand_dependents => {
                    if let Some(d) = self.dependent.iter().find(|d| d.species == i) {
                        d.formula.visit_names(&mut |s| pending.push(s));
                    }
                }
                _ => {}
            }
        }
        let state = (0..self.n())
            .filter(|&r| syms.contains(&Sym::Species(self.state[r])))
            .collect();
        let constants = (0..self.constants.len())
            .filter(|&k| syms.contains(&self.constants[k].sym))
            .collect();
        let derived = self
            .derived
            .iter()
            .copied()
            .filter(|&i| syms.contains(&Sym::Param(i)))
            .collect();
        let dependent = (0..self.dependent.len())
            .filter(|&k| syms.contains(&Sym::Species(self.dependent[k].species)))
            .collect();
        Needs {
            state,
            constants,
            derived,
            dependent,
            time: mentions_time,
        }
    }

    /// Steps whose rate some state variable's right-hand side uses.
    pub fn used_steps(&self) -> Vec<usize> {
        let set: BTreeSet<usize> = self.rhs_terms.iter().flatten().map(|(j, _)| *j).collect();
        set.into_iter().collect()
    }

    /// The species a function over the full species vector reads for
    /// `exprs` (model order).
    pub fn species_read<'a>(&self, exprs: impl IntoIterator<Item = &'a Expr>) -> Vec<usize> {
        let mut set = BTreeSet::new();
        for e in exprs {
            e.visit_names(&mut |s| {
                if let Sym::Species(i) = s {
                    set.insert(i);
                }
            });
        }
        set.into_iter().collect()
    }

    /// The timed events in the order the protocol applies them: by time,
    /// file order at one time (as `run` orders them).
    pub fn timed_events(&self) -> Vec<(f64, &Event)> {
        let mut v: Vec<(f64, &Event)> = self
            .model
            .events
            .iter()
            .filter_map(|e| e.time().map(|t| (t, e)))
            .collect();
        v.sort_by(|a, b| a.0.total_cmp(&b.0));
        v
    }

    /// The `when` events (file order) with their condition and their
    /// rising function (observables inlined).
    pub fn when_events(&self) -> Vec<(&Event, &Trigger, &Expr)> {
        self.model
            .events
            .iter()
            .filter_map(|e| match &e.timing {
                Timing::When(t) => Some((e, t)),
                Timing::At(_) => None,
            })
            .zip(&self.triggers)
            .map(|((e, t), rising)| (e, t, rising))
            .collect()
    }

    /// The functions of the protocol over the full species vector, each
    /// target printing them in its syntax: `observables` (every observable,
    /// model order), then `rising_1`, `rising_2`, … (each `when` event's
    /// rising function, file order, with its condition as written).
    pub fn functions_over_full(&self) -> Vec<FullFunction<'_>> {
        let mut v = vec![FullFunction {
            name: "observables".into(),
            condition: None,
            exprs: self.observables.iter().collect(),
        }];
        for (k, (_, trigger, rising)) in self.when_events().into_iter().enumerate() {
            v.push(FullFunction {
                name: format!("rising_{}", k + 1),
                condition: Some(trigger.text.replace('\n', " ")),
                exprs: vec![rising],
            });
        }
        v
    }

    /// The totals in the parameter vector, which an event recomputes from
    /// their species: (total, its species, their coefficients).
    pub fn totals_after_events(&self) -> Vec<(usize, Vec<usize>, Vec<f64>)> {
        self.constants
            .iter()
            .filter_map(|c| match c.sym {
                Sym::Total(i) => Some(i),
                Sym::Param(_) | Sym::Fixed(_) | Sym::Species(_) | Sym::Observable(_) => None,
            })
            .map(|i| {
                let terms = &self.model.totals[i].terms;
                (
                    i,
                    terms.iter().map(|(s, _)| *s).collect(),
                    terms.iter().map(|(_, c)| coef_f64(*c)).collect(),
                )
            })
            .collect()
    }

    /// Species that are dependent (reduced system).
    pub fn dependent_of(&self, species: usize) -> Option<&Dependent> {
        self.dependent.iter().find(|d| d.species == species)
    }
}

/// A function of the emitted protocol over the full species vector.
pub struct FullFunction<'a> {
    /// `observables` or `rising_K`, the same in every target.
    pub name: String,
    /// The `when` condition as written, for a rising function.
    pub condition: Option<String>,
    pub exprs: Vec<&'a Expr>,
}

impl FullFunction<'_> {
    /// The species the function reads from the full vector.
    pub fn species(&self, sys: &System) -> Vec<usize> {
        sys.species_read(self.exprs.iter().copied())
    }
    /// What it must define before its body (constants and derived params).
    pub fn needs(&self, sys: &System) -> Needs {
        sys.needs_over_full(self.exprs.iter().copied())
    }
}

/// Names a piece of emitted code must define, by kind (indices into the
/// matching vectors of [`System`]).
#[derive(Debug, Clone, Default)]
pub struct Needs {
    pub state: Vec<usize>,
    pub constants: Vec<usize>,
    pub derived: Vec<usize>,
    pub dependent: Vec<usize>,
    pub time: bool,
}

/// Replaces observables by their definitions, recursively.
fn inline(model: &Model, e: &Expr, depth: usize) -> Result<Expr, Diagnostic> {
    Ok(match e {
        Expr::Name(Sym::Observable(i)) => {
            if depth > 64 {
                return Err(Diagnostic::error(
                    Code::ExpressionTooLarge,
                    "observables nest more than 64 levels deep",
                ));
            }
            inline(model, &model.observables[*i].expr, depth + 1)?
        }
        Expr::Number(_) | Expr::Name(_) | Expr::Time => e.clone(),
        Expr::Neg(a) => Expr::Neg(Box::new(inline(model, a, depth)?)),
        Expr::Binary(op, a, b) => {
            Expr::bin(*op, inline(model, a, depth)?, inline(model, b, depth)?)
        }
        Expr::Call(f, args) => Expr::Call(
            *f,
            args.iter()
                .map(|a| inline(model, a, depth))
                .collect::<Result<_, _>>()?,
        ),
    })
}

fn check_size(model: &Model, e: &Expr, step: usize) -> Result<(), Diagnostic> {
    if e.size() > MAX_EXPR_SIZE {
        let s = &model.steps[step];
        return Err(Diagnostic::error(
            Code::ExpressionTooLarge,
            format!("the rate of step `{}` has more than {MAX_EXPR_SIZE} terms once observables are inlined", s.name),
        )
        .with_label(s.rate_span, "this rate"));
    }
    Ok(())
}

impl System {
    /// The full species vector (declaration order) from a state vector:
    /// dependent species from their formulas.
    pub fn full_values(&self, y: &[f64]) -> Vec<f64> {
        let mut full = self.model.initial_state();
        for (r, &i) in self.state.iter().enumerate() {
            if let Some(v) = y.get(r) {
                full[i] = *v;
            }
        }
        let snapshot = full.clone();
        for d in &self.dependent {
            full[d.species] = self.model.eval_at(&d.formula, &snapshot, 0.0);
        }
        full
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// The protease assay of LANGUAGE.md, loaded by the front end.
    pub(crate) fn protease() -> Model {
        let text = include_str!("../../models/protease_assay.mech");
        let loaded = crate::model::load_str(text, std::path::Path::new("protease_assay.mech"));
        loaded.model.expect("the demo model loads")
    }

    #[test]
    fn jacobian_matches_central_differences_of_rhs() {
        for reduced in [false, true] {
            let m = protease();
            let sys = if reduced {
                System::reduced(&m).unwrap()
            } else {
                System::full(&m).unwrap()
            };
            let y: Vec<f64> = (0..sys.n()).map(|i| 0.3 + 0.7 * i as f64).collect();
            let eval = |e: &Expr, y: &[f64]| {
                let full = sys.full_values(y);
                sys.model.eval_at(e, &full, 0.0)
            };
            let f = |y: &[f64]| -> Vec<f64> { sys.rhs_exprs.iter().map(|e| eval(e, y)).collect() };
            for c in 0..sys.n() {
                let h = 1e-6;
                let (mut yp, mut ym) = (y.clone(), y.clone());
                yp[c] += h;
                ym[c] -= h;
                let (fp, fm) = (f(&yp), f(&ym));
                for r in 0..sys.n() {
                    // Central difference, O(h²) error (common practice).
                    let fd = (fp[r] - fm[r]) / (2.0 * h);
                    let exact = sys
                        .jac
                        .iter()
                        .find(|e| e.row == r && e.col == c)
                        .map(|e| eval(&e.expr, &y))
                        .unwrap_or(0.0);
                    assert!(
                        (fd - exact).abs() <= 1e-6 * fd.abs().max(1.0),
                        "J[{r},{c}] {exact} vs {fd} (reduced {reduced})"
                    );
                }
            }
        }
    }
}
