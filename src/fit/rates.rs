//! Rate tables as a least-squares problem: one residual per row, the
//! model's rate at the row's conditions minus the measured rate.
//!
//! Why a stage of its own: the rate and its derivative with respect to
//! every free param are expressions computed once, symbolically (derived
//! params and observables inlined, then differentiated), and evaluated per
//! row; the Jacobian is therefore exact, not a finite difference.
//!
//! Invariants: every column is a name of the model (species, fixed
//! species, param), the response, the series or the weight column; every
//! condition value is in the model's default units; free params are never
//! also set by a column.

use super::data::Table;
use super::lm::Residuals;
use crate::algebra::calculus::{derivative, simplify};
use crate::diagnostics::{Code, Diagnostic, did_you_mean};
use crate::model::{Dim, Expr, Model, ParamDef, Sym};

/// How each residual is weighted.
#[derive(Clone, Debug, PartialEq)]
pub enum Weight {
    None,
    /// Residuals relative to the measured value.
    Relative,
    /// A column of standard deviations.
    Column(String),
}

/// One usable row: the condition values, the measured response and the
/// weight (the reciprocal of the residual's standard deviation).
#[derive(Clone, Debug)]
pub struct Point {
    pub table: usize,
    pub line: usize,
    pub conditions: Vec<(Sym, f64)>,
    pub observed: f64,
    pub weight: f64,
    /// The row's `series` value, if the table has the column.
    pub series: Option<String>,
}

/// A free param: its symbol, whether it is fitted on a log scale.
#[derive(Clone, Debug)]
pub struct FreeParam {
    pub sym: Sym,
    pub log_scale: bool,
    /// The one series this value is for (`NAME[series]`), or all.
    pub series: Option<String>,
}

impl FreeParam {
    fn applies_to(&self, point: &Point) -> bool {
        self.series
            .as_ref()
            .is_none_or(|k| point.series.as_ref() == Some(k))
    }
}

pub struct RateProblem<'a> {
    pub model: &'a Model,
    pub rate: Expr,
    pub derivatives: Vec<Expr>,
    pub free: Vec<FreeParam>,
    pub points: Vec<Point>,
}

/// Replaces derived params and observables by their definitions, so that
/// a derivative with respect to a base param sees every dependence.
pub fn inline(model: &Model, e: &Expr) -> Expr {
    e.substitute(&|s| match s {
        Sym::Param(i) => match &model.params[i].definition {
            ParamDef::Expr(def) => Some(inline(model, def)),
            ParamDef::Value(_) => None,
        },
        Sym::Observable(k) => Some(inline(model, &model.observables[k].expr)),
        _ => None,
    })
}

impl<'a> RateProblem<'a> {
    pub fn new(model: &'a Model, rate: &Expr, free: Vec<FreeParam>) -> RateProblem<'a> {
        let rate = simplify(&inline(model, rate));
        let derivatives = free.iter().map(|f| derivative(&rate, f.sym)).collect();
        RateProblem {
            model,
            rate,
            derivatives,
            free,
            points: Vec::new(),
        }
    }

    /// Replaces the free params (after per-series names are expanded).
    pub fn set_free(&mut self, free: Vec<FreeParam>) {
        self.derivatives = free.iter().map(|f| derivative(&self.rate, f.sym)).collect();
        self.free = free;
    }

    /// The params' values for a trial point `x` (log values where fitted
    /// on a log scale).
    pub fn values(&self, x: &[f64]) -> Vec<f64> {
        self.free
            .iter()
            .zip(x)
            .map(|(f, v)| if f.log_scale { v.exp() } else { *v })
            .collect()
    }

    fn value_of(&self, point: &Point, params: &[f64], s: Sym) -> f64 {
        if let Some(k) = self
            .free
            .iter()
            .position(|f| f.sym == s && f.applies_to(point))
        {
            return params[k];
        }
        if let Some((_, v)) = point.conditions.iter().find(|(c, _)| *c == s) {
            return *v;
        }
        match s {
            Sym::Species(i) => self.model.species[i].initial,
            Sym::Fixed(i) => self.model.fixed[i].value,
            Sym::Param(i) => self.model.params[i].value,
            Sym::Total(k) => self.model.totals[k].value,
            Sym::Observable(_) => f64::NAN,
        }
    }

    /// The model's rate at a point.
    pub fn rate_at(&self, point: &Point, params: &[f64]) -> f64 {
        self.rate.eval(&|s| self.value_of(point, params, s), 0.0)
    }

    /// Reads the rows of a table: conditions from the columns named after
    /// the model's species, fixed species and params; the response column;
    /// an optional `series` and weight column.
    pub fn add_table(
        &mut self,
        index: usize,
        table: &Table,
        response: &str,
        weight: &Weight,
        rate_dim: Option<Dim>,
    ) -> Result<(), Vec<Diagnostic>> {
        let model = self.model;
        let mut errors = Vec::new();
        let Some(response_col) = table.column(response) else {
            let names: Vec<&str> = table.columns.iter().map(|c| c.name.as_str()).collect();
            let mut d = Diagnostic::error(
                Code::BadData,
                format!("{} has no response column `{response}`", table.label),
            )
            .with_label(table.columns[0].span, "the header");
            d = match did_you_mean(response, names.iter().copied()) {
                Some(h) => d.with_help(format!(
                    "did you mean `{h}`? (or name it with --response {h}=...)"
                )),
                None => d.with_help("name the measured column with --response COLUMN=NAME"),
            };
            return Err(vec![d]);
        };
        let weight_col = match weight {
            Weight::Column(name) => Some(table.named_column(name, "weight")?),
            _ => None,
        };
        let factor_of = |k: usize, dim: Option<Dim>, errors: &mut Vec<Diagnostic>| {
            table.unit_factor(k, dim, model.units, errors)
        };
        let series_col = table.column("series");
        let mut conditions: Vec<(usize, Sym, f64)> = Vec::new();
        for (k, column) in table.columns.iter().enumerate() {
            if k == response_col || Some(k) == weight_col || column.name == "series" {
                continue;
            }
            let sym = model.lookup(&column.name);
            let dim = match sym {
                Some(Sym::Species(_) | Sym::Fixed(_)) => Some(Dim::CONC),
                Some(Sym::Param(i)) => {
                    if self.free.iter().any(|f| f.sym == Sym::Param(i)) {
                        errors.push(
                            Diagnostic::error(Code::BadData, format!("column `{}` of {} sets a param that is being fitted", column.name, table.label))
                                .with_label(column.span, "set by the data here")
                                .with_help("a free param cannot also be a condition; drop it from --free or from the table"),
                        );
                        continue;
                    }
                    model.params[i].dim
                }
                _ => {
                    let names = model.all_names();
                    let mut d = Diagnostic::error(
                        Code::BadData,
                        format!("column `{}` of {} is not a species, fixed species or param of the model", column.name, table.label),
                    )
                    .with_label(column.span, "unknown name");
                    if let Some(h) = did_you_mean(&column.name, names.iter().map(String::as_str)) {
                        d = d.with_help(format!("did you mean `{h}`?"));
                    }
                    errors.push(d);
                    continue;
                }
            };
            let factor = factor_of(k, dim, &mut errors);
            conditions.push((k, sym.unwrap_or(Sym::Param(0)), factor));
        }
        let response_factor = factor_of(response_col, rate_dim, &mut errors);
        let weight_factor = weight_col
            .map(|k| factor_of(k, rate_dim, &mut errors))
            .unwrap_or(1.0);
        for row in &table.rows {
            let Some(observed) = row.cells[response_col].value else {
                continue;
            };
            let observed = observed * response_factor;
            let mut values = Vec::new();
            let mut usable = true;
            for &(k, sym, factor) in &conditions {
                let cell = &row.cells[k];
                let Some(v) = cell.value else {
                    usable = false;
                    break;
                };
                if matches!(sym, Sym::Species(_) | Sym::Fixed(_)) && v < 0.0 {
                    errors.push(
                        Diagnostic::error(
                            Code::BadData,
                            format!(
                                "negative concentration {v} of `{}` in row {} of {}",
                                table.columns[k].name, row.line, table.label
                            ),
                        )
                        .with_label(cell.span, "a concentration cannot be negative"),
                    );
                    usable = false;
                    break;
                }
                values.push((sym, v * factor));
            }
            if !usable {
                continue;
            }
            let weight = match weight {
                Weight::None => 1.0,
                Weight::Relative => {
                    if observed == 0.0 {
                        errors.push(
                            Diagnostic::error(
                                Code::BadData,
                                format!(
                                    "row {} of {} measures 0, so a relative weight is undefined",
                                    row.line, table.label
                                ),
                            )
                            .with_label(row.cells[response_col].span, "zero")
                            .with_help("use --weight none, or a column of standard deviations"),
                        );
                        continue;
                    }
                    1.0 / observed.abs()
                }
                Weight::Column(_) => {
                    let k = weight_col.unwrap_or(0);
                    match row.cells[k].value {
                        Some(sd) if sd > 0.0 => 1.0 / (sd * weight_factor),
                        Some(_) => {
                            errors.push(
                                Diagnostic::error(
                                    Code::BadData,
                                    format!(
                                        "standard deviation in row {} of {} is not positive",
                                        row.line, table.label
                                    ),
                                )
                                .with_label(row.cells[k].span, "must be > 0"),
                            );
                            continue;
                        }
                        None => continue,
                    }
                }
            };
            self.points.push(Point {
                table: index,
                line: row.line,
                conditions: values,
                observed,
                weight,
                series: series_col
                    .and_then(|k| row.cells[k].value)
                    .map(|v| format!("{v}")),
            });
        }
        if errors.is_empty() {
            Ok(())
        } else {
            Err(errors)
        }
    }
}

impl Residuals for RateProblem<'_> {
    fn residual_count(&self) -> usize {
        self.points.len()
    }
    fn evaluate(&self, x: &[f64], r: &mut [f64], jacobian: &mut [f64]) -> Result<(), String> {
        let params = self.values(x);
        let p = self.free.len();
        for (i, point) in self.points.iter().enumerate() {
            let value = |s: Sym| self.value_of(point, &params, s);
            r[i] = point.weight * (self.rate.eval(&value, 0.0) - point.observed);
            for (j, d) in self.derivatives.iter().enumerate() {
                let chain = if self.free[j].log_scale {
                    params[j]
                } else {
                    1.0
                };
                jacobian[i * p + j] = if self.free[j].applies_to(point) {
                    point.weight * chain * d.eval(&value, 0.0)
                } else {
                    0.0
                };
            }
        }
        match r.iter().position(|v| !v.is_finite()) {
            Some(i) => Err(format!(
                "the rate is not finite at row {} of the data",
                self.points[i].line
            )),
            None => Ok(()),
        }
    }
}
