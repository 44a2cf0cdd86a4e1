//! Local sensitivities of a time course: ∂y/∂p for every species and
//! observable y and each chosen param, fixed species, total (reduced
//! system) or initial value p, with their normalised forms and a ranking.
//!
//! Why a stage of its own: it names what a sensitivity is taken to (the
//! user's `--to` list), chooses the full or reduced system, and turns the
//! forward-sensitivity run (`sim::forward`, on diffsol's sensitivity
//! solvers with ∂f/∂p compiled symbolically by `numeric::derivatives`) into
//! per-output, per-parameter series; the command line only formats them.
//!
//! Invariants: `values[output][parameter][time]` is ∂output/∂parameter in
//! the model's units at `times[time]`; the trajectory is the one `run`
//! gives for the same model and settings.

use crate::diagnostics::{Code, Diagnostic};
use crate::model::{Model, ParamDef, Sym};
use crate::sim::forward::{SensitivityRunner, Wrt};
use crate::sim::{Prepared, Settings, SimError};

/// What a sensitivity is taken with respect to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Parameter {
    /// A param with a value, or a fixed species.
    Constant(Sym),
    /// A total of the reduced system (the amount a conservation law keeps).
    Total(usize),
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
            Some(Sym::Total(j)) => Ok(Parameter::Total(j)),
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
            Parameter::Total(j) => model.totals[*j].name.clone(),
            Parameter::Initial(i) => format!("{}(0)", model.species[*i].name),
        }
    }

    /// The value of the parameter in the model.
    pub fn value(&self, model: &Model) -> f64 {
        match self {
            Parameter::Constant(s) => model.initial_value(*s),
            Parameter::Total(j) => model.initial_value(Sym::Total(*j)),
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
    /// defined normalised sensitivities over the given outputs and every
    /// time, largest first.
    pub fn ranking(&self, outputs: &[usize]) -> Vec<(String, f64)> {
        let mut out: Vec<(String, f64)> = (0..self.parameters.len())
            .map(|k| {
                let mut sum = 0.0;
                let mut n = 0usize;
                for &o in outputs {
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

/// Sensitivities of every species and observable of `model` to
/// `parameters` at `times` at the file's values, on the full system or the
/// reduced one (where dependent species follow their totals, and a total
/// can be a parameter).
pub fn sensitivities(
    model: &Model,
    parameters: &[Parameter],
    settings: &Settings,
    times: &[f64],
    reduced: bool,
) -> Result<Sensitivities, SensitivityError> {
    let compiled = SensitivityModel::new(model, parameters, reduced)?;
    let values: Vec<f64> = parameters.iter().map(|p| p.value(model)).collect();
    compiled.at(&values, settings, times)
}

/// A model compiled once for sensitivities to a fixed list of parameters,
/// evaluated at any values of them: the library call a fit of progress
/// curves makes at every trial point (trajectory and gradients together).
#[derive(Debug, Clone)]
pub struct SensitivityModel {
    prepared: Prepared,
    runner: SensitivityRunner,
    parameters: Vec<Parameter>,
    /// The name each parameter is set by (`--set` style).
    targets: Vec<String>,
    labels: Vec<String>,
}

impl SensitivityModel {
    pub fn new(
        model: &Model,
        parameters: &[Parameter],
        reduced: bool,
    ) -> Result<SensitivityModel, SensitivityError> {
        let prepared = if reduced {
            Prepared::reduced(model).map_err(SensitivityError::Model)?
        } else {
            if let Some(Parameter::Total(j)) =
                parameters.iter().find(|p| matches!(p, Parameter::Total(_)))
            {
                return Err(SensitivityError::Model(
                    Diagnostic::error(
                        Code::BadNumericInput,
                        format!(
                            "a sensitivity to the total `{}` needs the reduced system, where the total is a constant",
                            model.totals[*j].name
                        ),
                    )
                    .with_label(model.totals[*j].span, "this total")
                    .with_help("add --reduced, or take the sensitivity to an initial value `NAME(0)`"),
                ));
            }
            Prepared::full(model)?
        };
        let wrt: Vec<Wrt> = parameters
            .iter()
            .map(|p| match p {
                Parameter::Constant(s) => Wrt::Constant(*s),
                Parameter::Total(j) => Wrt::Constant(Sym::Total(*j)),
                Parameter::Initial(i) => Wrt::Initial(*i),
            })
            .collect();
        let runner = SensitivityRunner::new(&prepared, &wrt)?;
        let targets = parameters
            .iter()
            .map(|p| match p {
                Parameter::Constant(s) => model.name_of(*s).to_string(),
                Parameter::Total(j) => model.totals[*j].name.clone(),
                Parameter::Initial(i) => model.species[*i].name.clone(),
            })
            .collect();
        Ok(SensitivityModel {
            labels: parameters.iter().map(|p| p.label(model)).collect(),
            prepared,
            runner,
            parameters: parameters.to_vec(),
            targets,
        })
    }

    pub fn parameters(&self) -> &[Parameter] {
        &self.parameters
    }

    /// The time course and its sensitivities with the parameters at
    /// `values` (one per parameter, in the model's units).
    pub fn at(
        &self,
        values: &[f64],
        settings: &Settings,
        times: &[f64],
    ) -> Result<Sensitivities, SensitivityError> {
        self.at_with(values, &[], settings, times)
    }

    /// As [`Self::at`], with further names set first (the conditions of one
    /// series of a fit).
    pub fn at_with(
        &self,
        values: &[f64],
        conditions: &[(String, f64)],
        settings: &Settings,
        times: &[f64],
    ) -> Result<Sensitivities, SensitivityError> {
        let mut overrides = conditions.to_vec();
        overrides.extend(self.targets.iter().cloned().zip(values.iter().copied()));
        let model = self
            .prepared
            .model
            .with_overrides(&overrides)
            .map_err(|e| SensitivityError::Run(SimError::input(e)))?;
        let run = self.runner.run(&model, settings, times)?;
        let m = self.parameters.len();
        let outputs: Vec<String> = model
            .species
            .iter()
            .map(|s| s.name.clone())
            .chain(model.observables.iter().map(|o| o.name.clone()))
            .collect();
        let tr = &run.trajectory;
        let trajectory = (0..outputs.len())
            .map(|o| tr.rows.iter().map(|r| r[o]).collect())
            .collect();
        let sens = (0..outputs.len())
            .map(|o| {
                (0..m)
                    .map(|k| run.sensitivities.iter().map(|s| s[o * m + k]).collect())
                    .collect()
            })
            .collect();
        Ok(Sensitivities {
            times: tr.times.clone(),
            outputs,
            parameters: self.labels.clone(),
            trajectory,
            values: sens,
            parameter_values: values.to_vec(),
        })
    }
}
