//! The Model: the typed intermediate representation every later stage reads.
//!
//! Invariants (established by lowering, relied on downstream):
//! - every name is unique across all kinds and resolved to a [`Sym`];
//! - all numbers are in the model's default units (`units`);
//! - `param_order` lists every param after the params its expression uses,
//!   and every `Param::value` is its evaluated, finite value;
//! - every species' `initial` is finite and non-negative, and totals given a
//!   value agree with the initial values;
//! - step terms refer to dynamic or fixed species only, coefficients are
//!   positive, and a mass-action step has a reverse constant iff reversible;
//! - every item keeps the span of its statement.

use super::expr::{BinOp, Expr};
use super::units::{Dim, Units};
use super::value_error::ValueError;
use crate::diagnostics::Span;
use num_rational::Rational64;
use num_traits::{One, ToPrimitive, Zero};

/// The name `--set` and `scan` use for the assay temperature (kelvin).
pub const TEMPERATURE: &str = "temperature";

/// A stoichiometric coefficient (exact).
pub type Coef = Rational64;

/// A resolved reference to a named item; the index is into the matching
/// vector of [`Model`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
pub enum Sym {
    Species(usize),
    Fixed(usize),
    Param(usize),
    Total(usize),
    Observable(usize),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Species {
    pub name: String,
    /// Initial value in default concentration units.
    pub initial: f64,
    /// Whether the initial value was written (or follows from a total's value).
    pub initial_given: bool,
    pub description: Option<String>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Fixed {
    pub name: String,
    pub value: f64,
    pub description: Option<String>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub enum ParamDef {
    /// A number (already converted to default units).
    Value(f64),
    /// An expression over other params (and `pi`).
    Expr(Expr),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Param {
    pub name: String,
    pub definition: ParamDef,
    /// The evaluated value in default units.
    pub value: f64,
    /// The dimension, when written as a unit or inferable from the parts.
    pub dim: Option<Dim>,
    pub description: Option<String>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Term {
    /// `Sym::Species` or `Sym::Fixed`.
    pub sym: Sym,
    pub coefficient: Coef,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub enum Rate {
    /// Forward constant and, for a reversible step, the reverse constant.
    MassAction {
        forward: Expr,
        reverse: Option<Expr>,
    },
    /// An explicit net forward rate.
    Law(Expr),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Step {
    pub name: String,
    pub reactants: Vec<Term>,
    pub products: Vec<Term>,
    pub reversible: bool,
    pub rate: Rate,
    pub description: Option<String>,
    pub span: Span,
    /// Span of the rate part (`with ...` or `law ...`).
    pub rate_span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Total {
    pub name: String,
    /// Dynamic species and their (non-zero) coefficients.
    pub terms: Vec<(usize, Coef)>,
    /// The value: as written, or computed from the initial values.
    pub value: f64,
    pub value_given: bool,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Observable {
    pub name: String,
    pub expr: Expr,
    pub span: Span,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum EventKind {
    Add,
    Remove,
    Set,
}

/// When an event happens.
#[derive(Debug, Clone, PartialEq)]
pub enum Timing {
    /// At a time (default units). `every` lines are lowered to one event
    /// per repetition.
    At(f64),
    /// Each time `rising` crosses zero from below (the condition becomes
    /// true); never at t = 0 for a condition already true at the start.
    When(Trigger),
}

/// A state-triggered event's condition, as `rising > 0`.
#[derive(Debug, Clone, PartialEq)]
pub struct Trigger {
    /// `lhs - rhs` for `lhs > rhs`, `rhs - lhs` for `lhs < rhs`.
    pub rising: Expr,
    /// The condition as written (for messages and emitted comments).
    pub text: String,
}

/// What an event does.
#[derive(Debug, Clone, PartialEq)]
pub enum Action {
    /// A first-round change of one species' concentration (no volume change).
    Species {
        kind: EventKind,
        /// Index of a dynamic species.
        species: usize,
        /// Amount added or removed, or the value set (default units).
        amount: f64,
    },
    /// `add V of STOCK`: every species and fixed species is diluted by
    /// V_old/(V_old+V), then each stock component adds c·V/(V_old+V).
    Stock {
        /// Volume added, in the model's volume unit.
        volume: f64,
        /// Stock components: `Sym::Species` or `Sym::Fixed`, with their
        /// concentration in the stock (default units).
        contents: Vec<(Sym, f64)>,
    },
    /// `remove V`: the volume falls, concentrations stay.
    Withdraw {
        /// Volume withdrawn, in the model's volume unit.
        volume: f64,
    },
}

#[derive(Debug, Clone, PartialEq)]
pub struct Event {
    pub timing: Timing,
    pub action: Action,
    pub span: Span,
}

impl Event {
    /// The time of a timed event.
    pub fn time(&self) -> Option<f64> {
        match &self.timing {
            Timing::At(t) => Some(*t),
            Timing::When(_) => None,
        }
    }
    /// A timed first-round species change, as (time, kind, species, amount).
    pub fn timed_species_change(&self) -> Option<(f64, EventKind, usize, f64)> {
        match (&self.timing, &self.action) {
            (
                Timing::At(t),
                Action::Species {
                    kind,
                    species,
                    amount,
                },
            ) => Some((*t, *kind, *species, *amount)),
            _ => None,
        }
    }
    /// Species whose concentration the event can raise above zero.
    pub fn species_raised(&self) -> Vec<usize> {
        match &self.action {
            Action::Species {
                kind: EventKind::Add | EventKind::Set,
                species,
                amount,
            } if *amount > 0.0 => vec![*species],
            Action::Species { .. } | Action::Withdraw { .. } => vec![],
            Action::Stock { contents, .. } => contents
                .iter()
                .filter_map(|(s, c)| match s {
                    Sym::Species(i) if *c > 0.0 => Some(*i),
                    _ => None,
                })
                .collect(),
        }
    }
    /// Whether the event changes the volume or waits for a condition
    /// (what the first-round consumers cannot express).
    pub fn is_second_round(&self) -> bool {
        self.timed_species_change().is_none()
    }
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Assumptions {
    /// Species under the quasi-steady-state assumption.
    pub steady: Vec<(usize, Span)>,
    /// Steps assumed at rapid equilibrium.
    pub equilibrium: Vec<(usize, Span)>,
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Model {
    pub name: Option<String>,
    pub description: Option<String>,
    pub units: Units,
    pub species: Vec<Species>,
    pub fixed: Vec<Fixed>,
    pub params: Vec<Param>,
    /// Params in evaluation order (dependencies first).
    pub param_order: Vec<usize>,
    pub steps: Vec<Step>,
    pub totals: Vec<Total>,
    pub observables: Vec<Observable>,
    pub events: Vec<Event>,
    pub assumptions: Assumptions,
    /// The reaction mixture's starting volume, if declared, in the unit it
    /// was declared in (`volume_unit`); volume changes of events are in the
    /// same unit (converted exactly), so `200 uL` plus `10 uL` is 210.
    pub volume: Option<f64>,
    /// The unit of `volume` as written, and its size in litres.
    pub volume_unit: Option<(String, f64)>,
    /// The assay temperature in kelvin, if declared (or set).
    pub temperature: Option<f64>,
    /// Params given at a reference temperature (index into `params`).
    pub temperature_laws: Vec<(usize, super::lab_units::TemperatureDependence)>,
}

impl Model {
    /// The starting volume in litres.
    pub fn volume_litres(&self) -> Option<f64> {
        Some(self.volume? * self.volume_unit.as_ref()?.1)
    }

    /// The volume unit's symbol (`uL`), or `L` when none is declared.
    pub fn volume_symbol(&self) -> &str {
        self.volume_unit
            .as_ref()
            .map(|u| u.0.as_str())
            .unwrap_or("L")
    }

    /// Finds a named item of any kind.
    /// The dimension a value given for `name` must have: concentration for
    /// species, fixed species and totals; a param's own dimension when it
    /// is known; `None` when nothing is known (observables, unknown names).
    pub fn dimension_of(&self, name: &str) -> Option<super::Dim> {
        match self.lookup(name)? {
            Sym::Species(_) | Sym::Fixed(_) | Sym::Total(_) => Some(super::Dim::CONC),
            Sym::Param(i) => self.params[i].dim,
            Sym::Observable(_) => None,
        }
    }

    /// Refuses a value written with a unit whose dimension is not the one
    /// `name` needs (`--set E_t=3 min`); a bare number is in the model's
    /// default units and always fits.
    pub fn check_value_dimension(
        &self,
        name: &str,
        text: &str,
        given: Option<super::Dim>,
    ) -> Result<(), ValueError> {
        match (given, self.dimension_of(name)) {
            (Some(given), Some(needed)) if given != needed => Err(ValueError::WrongDimension {
                text: text.trim().to_string(),
                name: name.to_string(),
                needed: needed.display_in(self.units),
                given,
            }),
            _ => Ok(()),
        }
    }

    pub fn lookup(&self, name: &str) -> Option<Sym> {
        if let Some(i) = self.species.iter().position(|s| s.name == name) {
            return Some(Sym::Species(i));
        }
        if let Some(i) = self.fixed.iter().position(|s| s.name == name) {
            return Some(Sym::Fixed(i));
        }
        if let Some(i) = self.params.iter().position(|s| s.name == name) {
            return Some(Sym::Param(i));
        }
        if let Some(i) = self.totals.iter().position(|s| s.name == name) {
            return Some(Sym::Total(i));
        }
        if let Some(i) = self.observables.iter().position(|s| s.name == name) {
            return Some(Sym::Observable(i));
        }
        None
    }

    pub fn step_index(&self, name: &str) -> Option<usize> {
        self.steps.iter().position(|s| s.name == name)
    }

    pub fn name_of(&self, sym: Sym) -> &str {
        match sym {
            Sym::Species(i) => &self.species[i].name,
            Sym::Fixed(i) => &self.fixed[i].name,
            Sym::Param(i) => &self.params[i].name,
            Sym::Total(i) => &self.totals[i].name,
            Sym::Observable(i) => &self.observables[i].name,
        }
    }

    /// Value of a constant name (fixed species, param, total) or, for a
    /// species, its initial value; observables evaluate at the initial state.
    pub fn initial_value(&self, sym: Sym) -> f64 {
        match sym {
            Sym::Species(i) => self.species[i].initial,
            Sym::Fixed(i) => self.fixed[i].value,
            Sym::Param(i) => self.params[i].value,
            Sym::Total(i) => self.totals[i].value,
            Sym::Observable(i) => self.observables[i]
                .expr
                .eval(&|s| self.initial_value(s), 0.0),
        }
    }

    /// Evaluates an expression at a state `y` (dynamic species, in order) and time `t`.
    pub fn eval_at(&self, expr: &Expr, y: &[f64], t: f64) -> f64 {
        expr.eval(&|s| self.value_at(s, y, t), t)
    }

    /// The value of a name at state `y` and time `t`.
    pub fn value_at(&self, sym: Sym, y: &[f64], t: f64) -> f64 {
        match sym {
            Sym::Species(i) => y[i],
            Sym::Observable(i) => self.eval_at(&self.observables[i].expr, y, t),
            other => self.initial_value(other),
        }
    }

    /// Initial state of the dynamic species.
    pub fn initial_state(&self) -> Vec<f64> {
        self.species.iter().map(|s| s.initial).collect()
    }

    /// Net change of each dynamic species when `step` fires once forward:
    /// (species index, coefficient), species in order, zeros omitted.
    pub fn net_change(&self, step: usize) -> Vec<(usize, Coef)> {
        let mut acc: Vec<(usize, Coef)> = Vec::new();
        let s = &self.steps[step];
        let mut put = |i: usize, c: Coef| match acc.iter_mut().find(|(j, _)| *j == i) {
            Some((_, v)) => *v += c,
            None => acc.push((i, c)),
        };
        for t in &s.reactants {
            if let Sym::Species(i) = t.sym {
                put(i, -t.coefficient);
            }
        }
        for t in &s.products {
            if let Sym::Species(i) = t.sym {
                put(i, t.coefficient);
            }
        }
        acc.retain(|(_, c)| !c.is_zero());
        acc.sort_by_key(|(i, _)| *i);
        acc
    }

    /// Stoichiometric matrix (species × steps) as a dense exact matrix.
    pub fn stoichiometry(&self) -> Vec<Vec<Coef>> {
        let mut n = vec![vec![Coef::zero(); self.steps.len()]; self.species.len()];
        for (j, _) in self.steps.iter().enumerate() {
            for (i, c) in self.net_change(j) {
                n[i][j] = c;
            }
        }
        n
    }

    /// The net forward rate of a step as an expression: for mass action
    /// `kf * prod(reactants^coef) - kr * prod(products^coef)`; for a law, the law.
    pub fn step_rate(&self, step: usize) -> Expr {
        let s = &self.steps[step];
        match &s.rate {
            Rate::Law(e) => e.clone(),
            Rate::MassAction { forward, reverse } => {
                let fwd = mass_action_term(forward, &s.reactants);
                match reverse {
                    Some(r) => Expr::bin(BinOp::Sub, fwd, mass_action_term(r, &s.products)),
                    None => fwd,
                }
            }
        }
    }

    /// The forward and (if reversible mass action) reverse rate separately.
    pub fn step_rate_parts(&self, step: usize) -> (Expr, Option<Expr>) {
        let s = &self.steps[step];
        match &s.rate {
            Rate::Law(e) => (e.clone(), None),
            Rate::MassAction { forward, reverse } => (
                mass_action_term(forward, &s.reactants),
                reverse.as_ref().map(|r| mass_action_term(r, &s.products)),
            ),
        }
    }

    /// Total reactant order of a side (dynamic and fixed species count).
    pub fn order(terms: &[Term]) -> Coef {
        terms
            .iter()
            .map(|t| t.coefficient)
            .fold(Coef::zero(), |a, b| a + b)
    }

    /// Right-hand side d(species)/dt as one expression per species
    /// (sum over steps of coefficient × step rate), unsimplified.
    pub fn rhs_exprs(&self) -> Vec<Expr> {
        let rates: Vec<Expr> = (0..self.steps.len()).map(|j| self.step_rate(j)).collect();
        let mut rhs: Vec<Option<Expr>> = vec![None; self.species.len()];
        for (j, rate) in rates.iter().enumerate() {
            for (i, c) in self.net_change(j) {
                let term = if c == Coef::one() {
                    rate.clone()
                } else if c == -Coef::one() {
                    Expr::Neg(Box::new(rate.clone()))
                } else {
                    Expr::mul(Expr::Number(coef_f64(c)), rate.clone())
                };
                rhs[i] = Some(match rhs[i].take() {
                    None => term,
                    Some(acc) => match term {
                        Expr::Neg(inner) => Expr::sub(acc, *inner),
                        t => Expr::add(acc, t),
                    },
                });
            }
        }
        rhs.into_iter()
            .map(|e| e.unwrap_or(Expr::Number(0.0)))
            .collect()
    }

    /// Returns a copy with values replaced by name (params, species initial
    /// values, fixed species, total values), re-evaluating derived params and
    /// recomputing totals and the initial values that follow from them.
    /// Values are in default units.
    pub fn with_overrides(&self, overrides: &[(String, f64)]) -> Result<Model, ValueError> {
        let mut m = self.clone();
        let mut set_totals = Vec::new();
        let mut set_species = Vec::new();
        for (name, value) in overrides {
            if !value.is_finite() {
                return Err(ValueError::NotFinite { name: name.clone() });
            }
            if name == TEMPERATURE && m.lookup(name).is_none() {
                if *value <= 0.0 {
                    return Err(ValueError::NotFinite { name: name.clone() });
                }
                m.temperature = Some(*value);
                continue;
            }
            match m.lookup(name) {
                Some(Sym::Param(i)) => {
                    // A value set by hand replaces the temperature law.
                    m.temperature_laws.retain(|(p, _)| *p != i);
                    m.params[i].definition = ParamDef::Value(*value)
                }
                Some(Sym::Species(i)) => {
                    if *value < 0.0 {
                        return Err(ValueError::NegativeInitial { name: name.clone() });
                    }
                    m.species[i].initial = *value;
                    m.species[i].initial_given = true;
                    set_species.push(i);
                }
                Some(Sym::Fixed(i)) => m.fixed[i].value = *value,
                Some(Sym::Total(i)) => set_totals.push((i, *value)),
                Some(Sym::Observable(_)) => {
                    return Err(ValueError::NotSettable { name: name.clone() });
                }
                None => {
                    let names = m.all_names();
                    let suggestion =
                        crate::diagnostics::did_you_mean(name, names.iter().map(|s| s.as_str()))
                            .map(str::to_string);
                    return Err(ValueError::UnknownName {
                        name: name.clone(),
                        suggestion,
                    });
                }
            }
        }
        m.evaluate_params()?;
        for (i, v) in set_totals.iter().copied() {
            m.totals[i].value = v;
            m.totals[i].value_given = true;
            m.apply_total_value(i)?;
        }
        // A total whose value the file gives keeps it when one of its
        // species is set, as if the new start value had been written in the
        // file: a species of the total that was not set takes up the
        // difference (the one without a written value first).
        for i in 0..m.totals.len() {
            let touched = m.totals[i]
                .terms
                .iter()
                .any(|(k, _)| set_species.contains(k));
            if !m.totals[i].value_given || !touched || set_totals.iter().any(|&(t, _)| t == i) {
                continue;
            }
            let free = |given: bool| {
                m.totals[i]
                    .terms
                    .iter()
                    .find(|(k, c)| {
                        !set_species.contains(k)
                            && !c.is_zero()
                            && self.species[*k].initial_given == given
                    })
                    .map(|(k, _)| *k)
            };
            let Some(k) = free(false).or_else(|| free(true)) else {
                // Every species of the total was set: the total follows them.
                m.totals[i].value = m.total_from_initial(i);
                continue;
            };
            m.adjust_for_total(i, k)?;
        }
        for i in 0..m.totals.len() {
            if !m.totals[i].value_given {
                m.totals[i].value = m.total_from_initial(i);
            }
        }
        if let Some((j, direction, v)) = m.negative_rate_constant() {
            return Err(ValueError::NegativeRateConstant {
                step: m.steps[j].name.clone(),
                direction,
                value: v,
            });
        }
        Ok(m)
    }

    /// The first mass-action constant that evaluates below zero, as
    /// (step, direction, value). Mass action makes a rate proportional to its
    /// constant, so a negative one runs a step backwards against its
    /// reactants' depletion and drives concentrations below zero.
    pub fn negative_rate_constant(&self) -> Option<(usize, &'static str, f64)> {
        self.steps.iter().enumerate().find_map(|(j, step)| {
            let Rate::MassAction { forward, reverse } = &step.rate else {
                return None;
            };
            [(Some(forward), "forward"), (reverse.as_ref(), "reverse")]
                .into_iter()
                .find_map(|(constant, direction)| {
                    let v = constant?.eval(&|s| self.initial_value(s), 0.0);
                    (v < 0.0).then_some((j, direction, v))
                })
        })
    }

    /// Re-evaluates every param in `param_order`.
    pub fn evaluate_params(&mut self) -> Result<(), ValueError> {
        for (i, law) in &self.temperature_laws {
            let kelvin = self.temperature.unwrap_or(law.reference);
            self.params[*i].definition = ParamDef::Value(law.at(kelvin));
        }
        for &i in &self.param_order.clone() {
            let v = match &self.params[i].definition {
                ParamDef::Value(v) => *v,
                ParamDef::Expr(e) => e.eval(&|s| self.initial_value(s), 0.0),
            };
            if !v.is_finite() {
                return Err(ValueError::ParamNotFinite {
                    name: self.params[i].name.clone(),
                    value: v,
                });
            }
            self.params[i].value = v;
        }
        Ok(())
    }

    /// The value of a total computed from the species' initial values.
    pub fn total_from_initial(&self, total: usize) -> f64 {
        self.totals[total]
            .terms
            .iter()
            .map(|(i, c)| coef_f64(*c) * self.species[*i].initial)
            .sum()
    }

    /// Makes the initial values agree with a total's given value by adjusting
    /// the total's dependent species (see [`Model::total_adjusted_species`]).
    pub fn apply_total_value(&mut self, total: usize) -> Result<(), ValueError> {
        let t = &self.totals[total];
        let Some(k) = self.total_adjusted_species(total) else {
            return Err(ValueError::TotalWithoutSpecies {
                total: t.name.clone(),
            });
        };
        self.adjust_for_total(total, k)
    }

    /// Sets species `k`'s start value so that the total's terms add up to
    /// its value.
    fn adjust_for_total(&mut self, total: usize, k: usize) -> Result<(), ValueError> {
        let t = &self.totals[total];
        let ck = t
            .terms
            .iter()
            .find(|(i, _)| *i == k)
            .map(|(_, c)| coef_f64(*c))
            .unwrap_or(1.0);
        let others: f64 = t
            .terms
            .iter()
            .filter(|(i, _)| *i != k)
            .map(|(i, c)| coef_f64(*c) * self.species[*i].initial)
            .sum();
        let v = (t.value - others) / ck;
        if v < -1e-12 * t.value.abs().max(1.0) {
            return Err(ValueError::TotalTooSmall {
                total: t.name.clone(),
                value: t.value,
                species: self.species[k].name.clone(),
                would_start_at: v,
            });
        }
        self.species[k].initial = v.max(0.0);
        Ok(())
    }

    /// The species of a total whose start value follows from the total's
    /// value: the first with no written initial value, else the first.
    pub fn total_adjusted_species(&self, total: usize) -> Option<usize> {
        let t = &self.totals[total];
        t.terms
            .iter()
            .find(|(i, c)| !self.species[*i].initial_given && !c.is_zero())
            .or_else(|| t.terms.first())
            .map(|(i, _)| *i)
    }

    /// Every declared name (all kinds).
    pub fn all_names(&self) -> Vec<String> {
        let mut v: Vec<String> = Vec::new();
        v.extend(self.species.iter().map(|s| s.name.clone()));
        v.extend(self.fixed.iter().map(|s| s.name.clone()));
        v.extend(self.params.iter().map(|s| s.name.clone()));
        v.extend(self.totals.iter().map(|s| s.name.clone()));
        v.extend(self.observables.iter().map(|s| s.name.clone()));
        v
    }
}

fn mass_action_term(constant: &Expr, terms: &[Term]) -> Expr {
    let mut e = constant.clone();
    for t in terms {
        let base = Expr::Name(t.sym);
        let factor = if t.coefficient == Coef::one() {
            base
        } else {
            Expr::pow(base, Expr::Number(coef_f64(t.coefficient)))
        };
        e = Expr::mul(e, factor);
    }
    e
}

/// A coefficient as a float.
pub fn coef_f64(c: Coef) -> f64 {
    c.to_f64().unwrap_or(f64::NAN)
}

impl Model {
    /// A copy with every span cleared: two models that mean the same and
    /// differ only in layout compare equal after this.
    pub fn without_spans(&self) -> Model {
        let mut m = self.clone();
        let none = Span::default();
        m.species.iter_mut().for_each(|s| s.span = none);
        m.fixed.iter_mut().for_each(|s| s.span = none);
        m.params.iter_mut().for_each(|s| s.span = none);
        for s in &mut m.steps {
            s.span = none;
            s.rate_span = none;
            s.reactants
                .iter_mut()
                .chain(s.products.iter_mut())
                .for_each(|t| t.span = none);
        }
        m.totals.iter_mut().for_each(|s| s.span = none);
        m.observables.iter_mut().for_each(|s| s.span = none);
        m.events.iter_mut().for_each(|s| s.span = none);
        m.assumptions.steady.iter_mut().for_each(|s| s.1 = none);
        m.assumptions
            .equilibrium
            .iter_mut()
            .for_each(|s| s.1 = none);
        m
    }
}
