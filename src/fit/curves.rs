//! Progress curves as a least-squares problem: each series is simulated
//! from its own start and compared with its measurements at their times.
//!
//! Why a stage of its own: a table with a `t` column is a set of time
//! courses, not a set of independent rates; each series has its own
//! conditions (`NAME(0)` initial values, params and fixed species held
//! within the series) and one compiled system serves every series and
//! every trial point.
//!
//! The Jacobian comes from forward sensitivities (one compiled
//! [`SensitivityModel`] over the free values' targets, one run per series
//! giving the trajectory and its gradients together); where a free value is
//! something a sensitivity is not taken to (a total, a derived param), by
//! central differences of simulations at tight tolerances (relative 1e-10).
//!
//! Invariants: conditions are constant within a series; times within a
//! series do not go backwards; measured columns are species or
//! observables; every value is in the model's default units.

use super::data::Table;
use super::lm::Residuals;
use super::rates::Weight;
use crate::diagnostics::{Code, Diagnostic, did_you_mean};
use crate::model::ParamDef;
use crate::model::{Dim, Model, Sym};
use crate::numeric::CompiledSystem;
use crate::sensitivity::{Parameter, SensitivityModel};
use crate::sim::{Settings, simulate};

/// One sensitivity model over the distinct targets of the free values
/// (params with a value, fixed species, initial values).
fn sensitivity_model(model: &Model, free: &[FreeValue]) -> Option<(SensitivityModel, Vec<usize>)> {
    let mut targets: Vec<&str> = Vec::new();
    let mut index = Vec::with_capacity(free.len());
    for f in free {
        let k = match targets.iter().position(|t| *t == f.target) {
            Some(k) => k,
            None => {
                targets.push(&f.target);
                targets.len() - 1
            }
        };
        index.push(k);
    }
    let parameters = targets
        .iter()
        .map(|t| match model.lookup(t)? {
            Sym::Param(i) if matches!(model.params[i].definition, ParamDef::Value(_)) => {
                Some(Parameter::Constant(Sym::Param(i)))
            }
            s @ Sym::Fixed(_) => Some(Parameter::Constant(s)),
            Sym::Species(i) => Some(Parameter::Initial(i)),
            _ => None,
        })
        .collect::<Option<Vec<Parameter>>>()?;
    let compiled = SensitivityModel::new(model, &parameters, false).ok()?;
    Some((compiled, index))
}

/// What a free name sets.
#[derive(Clone, Debug)]
pub struct FreeValue {
    /// The name given to the model's overrides (a species for `S(0)`).
    pub target: String,
    pub log_scale: bool,
    /// The one series this value is for (`NAME[series]`), or all.
    pub series: Option<String>,
}

/// One series: its conditions and its measurements.
#[derive(Clone, Debug)]
pub struct Series {
    pub name: String,
    /// The `series` cell's value as written ("1" without the column).
    pub key: String,
    pub conditions: Vec<(String, f64)>,
    pub times: Vec<f64>,
    /// (index into `times`, output column, observed, weight, data line).
    pub measurements: Vec<(usize, usize, f64, f64, usize)>,
}

pub struct CurveProblem<'a> {
    pub model: &'a Model,
    pub system: CompiledSystem,
    /// Sensitivities to the free values' distinct targets, and the target
    /// of each free value; None where some target has none.
    /// (Built at the first evaluation: the free values are set after
    /// construction.)
    sensitivity: std::sync::OnceLock<Option<(SensitivityModel, Vec<usize>)>>,
    pub free: Vec<FreeValue>,
    pub series: Vec<Series>,
    pub settings: Settings,
    pub count: usize,
}

impl<'a> CurveProblem<'a> {
    pub fn new(model: &'a Model, free: Vec<FreeValue>) -> Result<CurveProblem<'a>, Diagnostic> {
        let system = CompiledSystem::full(model).map_err(|e| {
            Diagnostic::error(
                Code::FitFailed,
                format!("the model could not be compiled: {}", e.0),
            )
        })?;
        Ok(CurveProblem {
            model,
            system,
            sensitivity: std::sync::OnceLock::new(),
            free,
            series: Vec::new(),
            settings: Settings {
                rtol: 1e-10,
                atol: 1e-14,
                ..Settings::default()
            },
            count: 0,
        })
    }

    pub fn values(&self, x: &[f64]) -> Vec<f64> {
        self.free
            .iter()
            .zip(x)
            .map(|(f, v)| if f.log_scale { v.exp() } else { *v })
            .collect()
    }

    /// Reads a table with a `t` column into series.
    pub fn add_table(&mut self, table: &Table, weight: &Weight) -> Result<(), Vec<Diagnostic>> {
        let model = self.model;
        let mut errors = Vec::new();
        let t_col = table
            .column("t")
            .expect("a progress-curve table has a t column");
        let series_col = table.column("series");
        let weight_col = match weight {
            Weight::Column(name) => Some(table.named_column(name, "weight")?),
            _ => None,
        };
        let factor = |k: usize, dim: Option<Dim>, errors: &mut Vec<Diagnostic>| {
            table.unit_factor(k, dim, model.units, errors)
        };
        let t_factor = factor(t_col, Some(Dim::TIME), &mut errors);
        // Columns: measured outputs, initial values, conditions.
        let mut measured = Vec::new();
        let mut conditions = Vec::new();
        for (k, column) in table.columns.iter().enumerate() {
            if k == t_col || Some(k) == series_col || Some(k) == weight_col {
                continue;
            }
            let name = column.name.as_str();
            if let Some(species) = name.strip_suffix("(0)") {
                match model.lookup(species) {
                    Some(Sym::Species(_)) => {
                        conditions.push((
                            k,
                            species.to_string(),
                            factor(k, Some(Dim::CONC), &mut errors),
                        ));
                    }
                    _ => errors.push(
                        Diagnostic::error(
                            Code::BadData,
                            format!("`{name}` in {}: `{species}` is not a species", table.label),
                        )
                        .with_label(column.span, "an initial value names a species"),
                    ),
                }
                continue;
            }
            match model.lookup(name) {
                Some(Sym::Species(i)) => {
                    measured.push((k, i, factor(k, Some(Dim::CONC), &mut errors)))
                }
                Some(Sym::Observable(j)) => {
                    measured.push((k, model.species.len() + j, factor(k, None, &mut errors)))
                }
                Some(Sym::Param(i)) => conditions.push((
                    k,
                    name.to_string(),
                    factor(k, model.params[i].dim, &mut errors),
                )),
                Some(Sym::Fixed(_)) => {
                    conditions.push((k, name.to_string(), factor(k, Some(Dim::CONC), &mut errors)))
                }
                _ => {
                    let names = model.all_names();
                    let mut d = Diagnostic::error(
                        Code::BadData,
                        format!("column `{name}` of {} is not a species, observable, initial value NAME(0), param or fixed species", table.label),
                    )
                    .with_label(column.span, "unknown name");
                    if let Some(h) = did_you_mean(name, names.iter().map(String::as_str)) {
                        d = d.with_help(format!("did you mean `{h}`?"));
                    }
                    errors.push(d);
                }
            }
        }
        if measured.is_empty() {
            errors.push(
                Diagnostic::error(
                    Code::BadData,
                    format!("{} measures no species or observable", table.label),
                )
                .with_label(table.columns[0].span, "the header"),
            );
        }
        let first = self.series.len();
        for row in &table.rows {
            let Some(t) = row.cells[t_col].value else {
                continue;
            };
            let t = t * t_factor;
            let key = series_col
                .and_then(|k| row.cells[k].value)
                .map(|v| format!("{v}"))
                .unwrap_or_else(|| "1".into());
            let label = format!("{}[{key}]", table.label);
            let index = match self.series[first..].iter().position(|s| s.name == label) {
                Some(k) => first + k,
                None => {
                    let mut set = Vec::new();
                    for &(k, ref name, f) in &conditions {
                        if let Some(v) = row.cells[k].value {
                            set.push((name.clone(), v * f));
                        }
                    }
                    self.series.push(Series {
                        name: label.clone(),
                        key: key.clone(),
                        conditions: set,
                        times: Vec::new(),
                        measurements: Vec::new(),
                    });
                    self.series.len() - 1
                }
            };
            let series = &mut self.series[index];
            for &(k, ref name, f) in &conditions {
                if let Some(v) = row.cells[k].value {
                    let held = series
                        .conditions
                        .iter()
                        .find(|(n, _)| n == name)
                        .map(|c| c.1);
                    if held.is_some_and(|h| (h - v * f).abs() > 1e-12 * h.abs().max(v.abs() * f)) {
                        errors.push(
                            Diagnostic::error(Code::BadData, format!("`{}` changes within series {key} of {}", table.columns[k].name, table.label))
                                .with_label(row.cells[k].span, "differs from the series' first row")
                                .with_help("a condition holds for a whole series; start a new series for a new value"),
                        );
                    }
                }
            }
            if series.times.last().is_some_and(|last| t < *last) {
                errors.push(
                    Diagnostic::error(
                        Code::BadData,
                        format!("time goes backwards in series {key} of {}", table.label),
                    )
                    .with_label(row.cells[t_col].span, "earlier than the row before"),
                );
                continue;
            }
            if t < 0.0 {
                errors.push(
                    Diagnostic::error(Code::BadData, format!("negative time in {}", table.label))
                        .with_label(row.cells[t_col].span, "t < 0"),
                );
                continue;
            }
            if series.times.last() != Some(&t) {
                series.times.push(t);
            }
            let ti = series.times.len() - 1;
            for &(k, output, f) in &measured {
                let Some(v) = row.cells[k].value else {
                    continue;
                };
                let w = match weight {
                    Weight::None => 1.0,
                    Weight::Relative if v != 0.0 => 1.0 / (v * f).abs(),
                    Weight::Relative => continue,
                    Weight::Column(_) => match weight_col.and_then(|c| row.cells[c].value) {
                        Some(sd) if sd > 0.0 => 1.0 / (sd * f),
                        _ => continue,
                    },
                };
                series.measurements.push((ti, output, v * f, w, row.line));
                self.count += 1;
            }
        }
        if errors.is_empty() {
            Ok(())
        } else {
            Err(errors)
        }
    }

    /// Series `k` simulated at `times` with params `values`.
    pub fn trajectory(
        &self,
        values: &[f64],
        k: usize,
        times: &[f64],
    ) -> Result<crate::sim::Trajectory, String> {
        let s = &self.series[k];
        let mut overrides = s.conditions.clone();
        overrides.extend(
            self.free
                .iter()
                .zip(values)
                .filter(|(f, _)| f.series.as_ref().is_none_or(|key| *key == s.name))
                .map(|(f, v)| (f.target.clone(), *v)),
        );
        let m = self
            .model
            .with_overrides(&overrides)
            .map_err(|e| e.to_string())?;
        simulate(&m, &self.system, &self.settings, times).map_err(|e| e.to_string())
    }

    /// The simulated outputs of every measurement at params `values`.
    pub fn predictions(&self, values: &[f64]) -> Result<Vec<f64>, String> {
        let mut out = Vec::with_capacity(self.count);
        for s in &self.series {
            let mut overrides = s.conditions.clone();
            overrides.extend(
                self.free
                    .iter()
                    .zip(values)
                    .filter(|(f, _)| f.series.as_ref().is_none_or(|k| *k == s.name))
                    .map(|(f, v)| (f.target.clone(), *v)),
            );
            let m = self
                .model
                .with_overrides(&overrides)
                .map_err(|e| e.to_string())?;
            let trajectory =
                simulate(&m, &self.system, &self.settings, &s.times).map_err(|e| e.to_string())?;
            for &(ti, output, _, _, _) in &s.measurements {
                out.push(trajectory.rows[ti][output]);
            }
        }
        Ok(out)
    }

    fn weighted_residuals(&self, x: &[f64], r: &mut [f64]) -> Result<(), String> {
        let predicted = self.predictions(&self.values(x))?;
        let mut k = 0;
        for s in &self.series {
            for &(_, _, observed, w, _) in &s.measurements {
                r[k] = w * (predicted[k] - observed);
                k += 1;
            }
        }
        Ok(())
    }
}

impl CurveProblem<'_> {
    /// Residuals and their Jacobian from one sensitivity run per series:
    /// ∂r/∂x_j = w·∂y/∂(target of j)·(value_j on a log scale, else 1), and
    /// zero for a free value that is for another series.
    fn evaluate_by_sensitivities(
        &self,
        compiled: &SensitivityModel,
        index: &[usize],
        x: &[f64],
        r: &mut [f64],
        jacobian: &mut [f64],
    ) -> Result<(), String> {
        let values = self.values(x);
        let p = x.len();
        let mut row = 0;
        for s in &self.series {
            let base = self
                .model
                .with_overrides(&s.conditions)
                .map_err(|e| e.to_string())?;
            let mut targets: Vec<f64> = compiled
                .parameters()
                .iter()
                .map(|q| q.value(&base))
                .collect();
            let applies: Vec<bool> = self
                .free
                .iter()
                .map(|f| f.series.as_ref().is_none_or(|key| *key == s.name))
                .collect();
            for j in 0..p {
                if applies[j] {
                    targets[index[j]] = values[j];
                }
            }
            let run = compiled
                .at_with(&targets, &s.conditions, &self.settings, &s.times)
                .map_err(|e| match e {
                    crate::sensitivity::SensitivityError::Model(d) => d.message,
                    crate::sensitivity::SensitivityError::Run(e) => e.to_string(),
                })?;
            for &(ti, output, observed, w, _) in &s.measurements {
                r[row] = w * (run.trajectory[output][ti] - observed);
                for j in 0..p {
                    let chain = if self.free[j].log_scale {
                        values[j]
                    } else {
                        1.0
                    };
                    jacobian[row * p + j] = if applies[j] {
                        w * run.values[output][index[j]][ti] * chain
                    } else {
                        0.0
                    };
                }
                row += 1;
            }
        }
        Ok(())
    }
}

impl Residuals for CurveProblem<'_> {
    fn residual_count(&self) -> usize {
        self.count
    }
    fn evaluate(&self, x: &[f64], r: &mut [f64], jacobian: &mut [f64]) -> Result<(), String> {
        if let Some((compiled, index)) = self
            .sensitivity
            .get_or_init(|| sensitivity_model(self.model, &self.free))
        {
            return self.evaluate_by_sensitivities(compiled, index, x, r, jacobian);
        }
        self.weighted_residuals(x, r)?;
        let p = x.len();
        let (mut plus, mut minus) = (vec![0.0; r.len()], vec![0.0; r.len()]);
        for j in 0..p {
            // Central differences: the step balances truncation (h²) and the
            // integration error (1e-10 / h).
            let h = 1e-4
                * if self.free[j].log_scale {
                    1.0
                } else {
                    x[j].abs().max(1e-8)
                };
            let mut xp = x.to_vec();
            xp[j] += h;
            self.weighted_residuals(&xp, &mut plus)?;
            xp[j] = x[j] - h;
            self.weighted_residuals(&xp, &mut minus)?;
            for i in 0..r.len() {
                jacobian[i * p + j] = (plus[i] - minus[i]) / (2.0 * h);
            }
        }
        Ok(())
    }
    /// The geodesic step's probe needs no sensitivities: a plain run.
    fn residuals(&self, x: &[f64], r: &mut [f64]) -> Result<(), String> {
        self.weighted_residuals(x, r)
    }
}
