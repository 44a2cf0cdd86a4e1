//! Local sensitivities of a time course: ∂y/∂p for every species and
//! observable y and each chosen param, fixed species or initial value p.
//!
//! Why a stage of its own: the forward-sensitivity equations are built
//! symbolically from the model, as the Jacobian is: with J = ∂f/∂y and
//! F_p = ∂f/∂p (derived params and observables expanded, so a base param's
//! influence through them is kept), S_p' = J·S_p + F_p, S_p(0) = ∂y(0)/∂p.
//! They join the model as extra species, one per (species, parameter), so
//! the same compiler, the same diffsol BDF/ESDIRK integrator with error
//! control on the sensitivities, and the same event machinery solve them.
//! Through events: an addition adds a constant (sensitivities kept); a
//! dilution scales every species, sensitivities included, by V/(V+ΔV); a
//! withdrawal changes nothing; a `set` resets the set species'
//! sensitivities to 0 (the value set is a number). State-triggered events
//! would need the jump correction of the event time and are refused.
//!
//! Invariants: `values[output][parameter][time]` is ∂output/∂parameter in
//! the model's units at `times[time]`; the trajectory it came from is the
//! model's own (the augmented species do not feed back into the original
//! ones).

use crate::algebra::calculus::{derivative, is_zero, simplify};
use crate::diagnostics::{Code, Diagnostic};
use crate::model::{
    Action, Coef, Event, EventKind, Expr, Model, Observable, ParamDef, Rate, Species, Step, Sym,
    Term, Timing,
};
use crate::sim::{Prepared, Settings, SimError};

/// What a sensitivity is taken with respect to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Parameter {
    /// A param with a value, or a fixed species.
    Constant(Sym),
    /// The initial value of a species, written `NAME(0)`.
    Initial(usize),
}

impl Parameter {
    /// Reads `k1`, `E_t`-free names and `S(0)`.
    pub fn parse(model: &Model, text: &str) -> Result<Parameter, String> {
        let text = text.trim();
        if let Some(inner) = text.strip_suffix("(0)") {
            return match model.lookup(inner.trim()) {
                Some(Sym::Species(i)) => Ok(Parameter::Initial(i)),
                _ => Err(format!("`{text}`: `NAME(0)` needs a species name")),
            };
        }
        match model.lookup(text) {
            Some(Sym::Param(i)) if matches!(model.params[i].definition, ParamDef::Value(_)) => {
                Ok(Parameter::Constant(Sym::Param(i)))
            }
            Some(Sym::Param(_)) => Err(format!(
                "`{text}` is defined by an expression; take sensitivities to the params it uses"
            )),
            Some(s @ Sym::Fixed(_)) => Ok(Parameter::Constant(s)),
            Some(Sym::Species(_)) => Err(format!(
                "`{text}` is a species; for its initial value write `{text}(0)`"
            )),
            Some(_) => Err(format!(
                "`{text}` is not a param, fixed species or initial value `NAME(0)`"
            )),
            None => {
                let names = model.all_names();
                let hint = crate::diagnostics::did_you_mean(text, names.iter().map(String::as_str))
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                Err(format!("no param or fixed species named `{text}`{hint}"))
            }
        }
    }

    pub fn label(&self, model: &Model) -> String {
        match self {
            Parameter::Constant(s) => model.name_of(*s).to_string(),
            Parameter::Initial(i) => format!("{}(0)", model.species[*i].name),
        }
    }

    /// The value of the parameter in the model.
    pub fn value(&self, model: &Model) -> f64 {
        match self {
            Parameter::Constant(s) => model.initial_value(*s),
            Parameter::Initial(i) => model.species[*i].initial,
        }
    }

    /// Every param with a value (the default `--to`).
    pub fn all_params(model: &Model) -> Vec<Parameter> {
        (0..model.params.len())
            .filter(|&i| matches!(model.params[i].definition, ParamDef::Value(_)))
            .map(|i| Parameter::Constant(Sym::Param(i)))
            .collect()
    }
}

/// Sensitivities along a time course.
#[derive(Debug, Clone)]
pub struct Sensitivities {
    pub times: Vec<f64>,
    /// Output names: every species, then every observable.
    pub outputs: Vec<String>,
    pub parameters: Vec<String>,
    /// The outputs themselves, `[output][time]`.
    pub trajectory: Vec<Vec<f64>>,
    /// `[output][parameter][time]`, absolute (∂y/∂p).
    pub values: Vec<Vec<Vec<f64>>>,
    /// The parameters' values (for normalising).
    pub parameter_values: Vec<f64>,
}

impl Sensitivities {
    /// ∂ln y/∂ln p = (p / y)·∂y/∂p. Undefined (None) where y is zero or
    /// below 1e-9 of the largest |y| along the course, where the ratio is
    /// noise of the solver's absolute tolerance.
    pub fn normalized(&self, output: usize, parameter: usize, time: usize) -> Option<f64> {
        let y = self.trajectory[output][time];
        let scale = self.trajectory[output]
            .iter()
            .fold(0.0f64, |m, v| m.max(v.abs()));
        if y == 0.0 || y.abs() <= 1e-9 * scale || !y.is_finite() {
            return None;
        }
        Some(self.values[output][parameter][time] * self.parameter_values[parameter] / y)
    }

    /// Each parameter's overall influence: the root mean square of its
    /// defined normalised sensitivities over outputs and times, largest
    /// first.
    pub fn ranking(&self) -> Vec<(String, f64)> {
        let mut out: Vec<(String, f64)> = (0..self.parameters.len())
            .map(|k| {
                let mut sum = 0.0;
                let mut n = 0usize;
                for o in 0..self.outputs.len() {
                    for t in 0..self.times.len() {
                        if let Some(v) = self.normalized(o, k, t) {
                            sum += v * v;
                            n += 1;
                        }
                    }
                }
                let rms = if n == 0 { 0.0 } else { (sum / n as f64).sqrt() };
                (self.parameters[k].clone(), rms)
            })
            .collect();
        out.sort_by(|a, b| b.1.total_cmp(&a.1));
        out
    }
}

/// Why sensitivities could not be computed.
#[derive(Debug, Clone)]
pub enum SensitivityError {
    Model(Diagnostic),
    Run(SimError),
}

impl From<SimError> for SensitivityError {
    fn from(e: SimError) -> Self {
        SensitivityError::Run(e)
    }
}

/// Derived params and observables written out, so every expression is over
/// species, base params, fixed species, totals and `t`.
fn expanded(model: &Model, e: &Expr, depth: usize) -> Expr {
    if depth > 64 {
        return e.clone();
    }
    e.substitute(&|s| match s {
        Sym::Param(i) => match &model.params[i].definition {
            ParamDef::Expr(d) => Some(expanded(model, d, depth + 1)),
            ParamDef::Value(_) => None,
        },
        Sym::Observable(i) => Some(expanded(model, &model.observables[i].expr, depth + 1)),
        _ => None,
    })
}

fn sum(terms: Vec<Expr>) -> Expr {
    terms
        .into_iter()
        .filter(|t| !is_zero(t))
        .reduce(Expr::add)
        .unwrap_or(Expr::Number(0.0))
}

/// The model with the sensitivity equations added: species `i` has
/// sensitivity species `n + k·n + i` for parameter `k`; observable `o` has
/// derived observables `m + k·m + o`.
pub fn augmented(model: &Model, parameters: &[Parameter]) -> Result<Model, Diagnostic> {
    if let Some(e) = model
        .events
        .iter()
        .find(|e| matches!(e.timing, Timing::When(_)))
    {
        return Err(Diagnostic::error(
            Code::BadNumericInput,
            "sensitivities through state-triggered events are not computed (the event time moves with the parameters)",
        )
        .with_label(e.span, "a `when` event")
        .with_help("remove the `when` line, or write the protocol with timed events"));
    }
    let n = model.species.len();
    let rhs: Vec<Expr> = model
        .rhs_exprs()
        .iter()
        .map(|f| expanded(model, f, 0))
        .collect();
    // J[i][j] = ∂f_i/∂y_j, non-zero entries only.
    let jac: Vec<Vec<(usize, Expr)>> = rhs
        .iter()
        .map(|f| {
            let mut row: Vec<(usize, Expr)> = f
                .names()
                .into_iter()
                .filter_map(|s| match s {
                    Sym::Species(j) => Some(j),
                    _ => None,
                })
                .collect::<std::collections::BTreeSet<_>>()
                .into_iter()
                .map(|j| (j, simplify(&derivative(f, Sym::Species(j)))))
                .filter(|(_, d)| !is_zero(d))
                .collect();
            row.sort_by_key(|(j, _)| *j);
            row
        })
        .collect();
    let mut aug = model.clone();
    let sens_species = |k: usize, i: usize| n + k * n + i;
    for (k, p) in parameters.iter().enumerate() {
        for i in 0..n {
            aug.species.push(Species {
                name: format!(
                    "\u{2202}{}/\u{2202}{}",
                    model.species[i].name,
                    p.label(model)
                ),
                initial: if *p == Parameter::Initial(i) {
                    1.0
                } else {
                    0.0
                },
                initial_given: true,
                description: None,
                span: model.species[i].span,
            });
        }
        for i in 0..n {
            let mut terms: Vec<Expr> = jac[i]
                .iter()
                .map(|(j, d)| Expr::mul(d.clone(), Expr::Name(Sym::Species(sens_species(k, *j)))))
                .collect();
            if let Parameter::Constant(s) = p {
                terms.push(simplify(&derivative(&rhs[i], *s)));
            }
            let law = sum(terms);
            if is_zero(&law) {
                continue;
            }
            aug.steps.push(Step {
                name: format!("sensitivity {k} {i}"),
                reactants: vec![],
                products: vec![Term {
                    sym: Sym::Species(sens_species(k, i)),
                    coefficient: Coef::from_integer(1),
                    span: Default::default(),
                }],
                reversible: false,
                rate: Rate::Law(law),
                description: None,
                span: Default::default(),
                rate_span: Default::default(),
            });
        }
    }
    // Observables' sensitivities: Σ_i ∂o/∂y_i · S_i + ∂o/∂p.
    let nobs = model.observables.len();
    for (k, p) in parameters.iter().enumerate() {
        for o in 0..nobs {
            let expr = expanded(model, &model.observables[o].expr, 0);
            let mut terms: Vec<Expr> = (0..n)
                .map(|i| {
                    Expr::mul(
                        simplify(&derivative(&expr, Sym::Species(i))),
                        Expr::Name(Sym::Species(sens_species(k, i))),
                    )
                })
                .collect();
            if let Parameter::Constant(s) = p {
                terms.push(simplify(&derivative(&expr, *s)));
            }
            aug.observables.push(Observable {
                name: format!(
                    "\u{2202}{}/\u{2202}{}",
                    model.observables[o].name,
                    p.label(model)
                ),
                expr: simplify(&sum(terms)),
                span: model.observables[o].span,
            });
        }
    }
    // A `set` fixes a species at a number: its sensitivities restart at 0,
    // right after it (events at one time apply in file order).
    let mut events = Vec::new();
    for e in &model.events {
        events.push(e.clone());
        if let Action::Species {
            kind: EventKind::Set,
            species,
            ..
        } = e.action
        {
            for k in 0..parameters.len() {
                events.push(Event {
                    timing: e.timing.clone(),
                    action: Action::Species {
                        kind: EventKind::Set,
                        species: sens_species(k, species),
                        amount: 0.0,
                    },
                    span: e.span,
                });
            }
        }
    }
    aug.events = events;
    Ok(aug)
}

/// Sensitivities of every species and observable of `model` to
/// `parameters` at `times`.
pub fn sensitivities(
    model: &Model,
    parameters: &[Parameter],
    settings: &Settings,
    times: &[f64],
) -> Result<Sensitivities, SensitivityError> {
    let aug = augmented(model, parameters).map_err(SensitivityError::Model)?;
    let prepared = Prepared::full(&aug)?;
    let tr = prepared.simulate(settings, times)?;
    let n = model.species.len();
    let nobs = model.observables.len();
    let m = parameters.len();
    let naug = aug.species.len();
    let outputs: Vec<String> = model
        .species
        .iter()
        .map(|s| s.name.clone())
        .chain(model.observables.iter().map(|o| o.name.clone()))
        .collect();
    let column_of_output = |o: usize| if o < n { o } else { naug + (o - n) };
    let column_of_sensitivity = |o: usize, k: usize| {
        if o < n {
            n + k * n + o
        } else {
            naug + nobs + k * nobs + (o - n)
        }
    };
    let trajectory = (0..outputs.len())
        .map(|o| tr.rows.iter().map(|r| r[column_of_output(o)]).collect())
        .collect();
    let values = (0..outputs.len())
        .map(|o| {
            (0..m)
                .map(|k| {
                    tr.rows
                        .iter()
                        .map(|r| r[column_of_sensitivity(o, k)])
                        .collect()
                })
                .collect()
        })
        .collect();
    Ok(Sensitivities {
        times: tr.times.clone(),
        outputs,
        parameters: parameters.iter().map(|p| p.label(model)).collect(),
        trajectory,
        values,
        parameter_values: parameters.iter().map(|p| p.value(model)).collect(),
    })
}
