//! Fitting mechanisms to assay data.
//!
//! Why: practitioners measure rates (or progress curves) and need the
//! constants with honest uncertainties and a verdict between rival
//! mechanisms; fitting the same version-controlled file that is checked,
//! derived and simulated keeps one source of truth.
//!
//! This stage takes a loaded model, parsed data tables ([`data`]) and a
//! [`Request`], and returns a [`Fit`]: the estimates, their statistics
//! ([`stats`]) and the stop reason of the minimizer ([`lm`]). A rate table
//! is fitted by the model's rate ([`rates`]): the overall rate that
//! `derive` gives when the file has `assume steady` (in the named
//! constants when a free name is one of them), otherwise the net rate of
//! its only step, or the step or observable `--response` names.
//!
//! Invariants: the fit never changes the caller's model; every free name
//! is a param with a value (not an expression); estimates are inside their
//! bounds; statistics are computed at the returned point with the exact
//! Jacobian.

pub mod compare;
pub mod curves;
pub mod data;
pub mod figure;
pub mod lm;
pub mod rates;
mod search;
pub mod stats;
pub mod write;

use crate::diagnostics::{Code, Diagnostic, did_you_mean};
use crate::model::{Dim, Expr, Model, ParamDef, Sym, load_str};
use crate::ratelaw;
pub use compare::{Ranked, f_test, rank};
use data::Table;
use lm::Options;
use rates::{FreeParam, RateProblem, Weight};
use search::{multi_start, profile_intervals};
use std::path::Path;

/// A free name with an optional start and bounds (`NAME=START:LO..HI`).
#[derive(Clone, Debug, Default)]
pub struct FreeSpec {
    pub name: String,
    pub start: Option<f64>,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
}

#[derive(Clone, Debug)]
pub struct Request {
    pub free: Vec<FreeSpec>,
    /// `(column, name)`: the measured column and the step or observable it
    /// measures.
    pub response: Option<(String, String)>,
    pub weight: Weight,
    pub profile: bool,
    /// Fit positive params by their logarithms (the default) rather than
    /// on their own scale.
    pub log_scale: bool,
    /// Skip free names the model does not have (rival models share one
    /// list of free names), with a warning.
    pub skip_missing: bool,
    /// Starting points of a multi-start (1: the given start only).
    pub starts: usize,
    /// Called once as each start's minimization ends (a progress bar).
    pub on_start_done: Progress,
    /// Plain Levenberg–Marquardt steps or geodesic-accelerated ones.
    pub step: lm::Step,
}

/// A callback for progress reports (a no-op by default).
#[derive(Clone, Default)]
pub struct Progress(pub Option<std::sync::Arc<dyn Fn() + Send + Sync>>);

impl Progress {
    pub fn tick(&self) {
        if let Some(f) = &self.0 {
            f();
        }
    }
}

impl std::fmt::Debug for Progress {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(if self.0.is_some() {
            "Progress(..)"
        } else {
            "Progress(none)"
        })
    }
}

#[derive(Clone, Debug)]
pub struct FittedParam {
    pub name: String,
    pub value: f64,
    pub stderr: f64,
    pub ci95: (f64, f64),
    /// Profile-likelihood interval, with `--profile`.
    pub profile: Option<(f64, f64)>,
    pub unit: Option<String>,
    pub log_scale: bool,
}

#[derive(Clone, Debug)]
pub struct Fit {
    pub params: Vec<FittedParam>,
    pub ssr: f64,
    pub n: usize,
    pub dof: usize,
    pub sigma: f64,
    pub aic: f64,
    pub aicc: f64,
    pub bic: f64,
    pub correlation: Vec<Vec<f64>>,
    pub converged: bool,
    pub iterations: usize,
    pub stop: String,
    pub warnings: Vec<String>,
    /// Per point: table index, line, observed and fitted response.
    pub points: Vec<(usize, usize, f64, f64)>,
    /// What the fitted rate is.
    pub rate_of: String,
    /// The data, fitted curves and residuals, as they are plotted.
    pub figure: Option<figure::Figure>,
}

/// A free name without its `[series]` suffix, and whether it had one.
fn base_name(name: &str) -> (&str, bool) {
    match name.strip_suffix("[series]") {
        Some(b) => (b, true),
        None => (name, false),
    }
}

fn request_error(message: String) -> Vec<Diagnostic> {
    vec![Diagnostic::error(Code::BadFitRequest, message)]
}

/// The model whose rate is fitted and that rate: the file's own, or the
/// mechanism `derive` writes (in the named constants if a free name is one).
fn rate_model(
    model: &Model,
    label: &str,
    request: &Request,
) -> Result<(Model, Expr, String), Vec<Diagnostic>> {
    if let Some((_, target)) = &request.response {
        if let Some(Sym::Observable(k)) = model.lookup(target) {
            return Ok((
                model.clone(),
                Expr::name(Sym::Observable(k)),
                format!("observable {target}"),
            ));
        }
        if let Some(j) = model.step_index(target) {
            return Ok((
                model.clone(),
                model.step_rate(j),
                format!("net rate of step {target}"),
            ));
        }
        let mut names: Vec<String> = model.steps.iter().map(|s| s.name.clone()).collect();
        names.extend(model.observables.iter().map(|o| o.name.clone()));
        let mut d = Diagnostic::error(
            Code::BadFitRequest,
            format!("--response: `{target}` is no step or observable of {label}"),
        );
        if let Some(h) = did_you_mean(target, names.iter().map(String::as_str)) {
            d = d.with_help(format!("did you mean `{h}`?"));
        }
        return Err(vec![d]);
    }
    if !model.assumptions.steady.is_empty() {
        let derivation =
            ratelaw::derive(model, &ratelaw::Request::default()).map_err(|d| vec![d])?;
        let constant_names: Vec<&str> = derivation
            .constants
            .iter()
            .chain(
                derivation
                    .constants_form
                    .iter()
                    .flat_map(|f| f.added.iter()),
            )
            .map(|c| c.name.as_str())
            .collect();
        let in_constants = request
            .free
            .iter()
            .any(|f| constant_names.contains(&base_name(&f.name).0));
        // A name that is neither a constant nor a param: suggest from both.
        for f in &request.free {
            let base = base_name(&f.name).0;
            let known =
                constant_names.contains(&base) || matches!(model.lookup(base), Some(Sym::Param(_)));
            if !known && !request.skip_missing {
                let params = model.params.iter().map(|p| p.name.as_str());
                let mut d = Diagnostic::error(
                    Code::BadFitRequest,
                    format!(
                        "--free: `{}` is neither a param of {label} nor a named constant of its rate law",
                        f.name
                    ),
                );
                if let Some(h) = did_you_mean(&f.name, constant_names.iter().copied().chain(params))
                {
                    d = d.with_help(format!("did you mean `{h}`?"));
                }
                return Err(vec![d]);
            }
        }
        let text = ratelaw::output::mechanism(&derivation, model, label, in_constants).map_err(
            |e| match e {
                ratelaw::output::MechanismError::Usage(m) => request_error(m),
                ratelaw::output::MechanismError::Model(d) => vec![*d],
            },
        )?;
        let loaded = load_str(&text, Path::new("derived.mech"));
        let Some(derived) = loaded.model else {
            return Err(request_error(format!(
                "the derived mechanism of {label} does not load (a bug): {:?}",
                loaded.diagnostics.first().map(|d| &d.message)
            )));
        };
        let how = if in_constants {
            "the derived rate law in its named constants"
        } else {
            "the derived rate law"
        };
        let rate = derived.step_rate(0);
        return Ok((derived, rate, how.to_string()));
    }
    match model.steps.len() {
        1 => Ok((
            model.clone(),
            model.step_rate(0),
            format!("net rate of step {}", model.steps[0].name),
        )),
        _ => Err(request_error(format!(
            "{label} has {} steps and no `assume steady`: name the rate the data measure with --response v=STEP (or an observable)",
            model.steps.len()
        ))),
    }
}

/// A free name's start, bounds and scale on the fitted scale: positive
/// constants are fitted by their logarithms (common practice: the steps are
/// relative, and the estimate stays positive).
struct Scaled {
    start: f64,
    lower: f64,
    upper: f64,
    log_scale: bool,
}

fn scaled(spec: &FreeSpec, default: f64, request: &Request) -> Result<Scaled, Diagnostic> {
    let value = spec.start.unwrap_or(default);
    let (lo, hi) = (
        spec.lower.unwrap_or(f64::NEG_INFINITY),
        spec.upper.unwrap_or(f64::INFINITY),
    );
    if lo >= hi || value < lo || value > hi || !value.is_finite() {
        return Err(Diagnostic::error(
            Code::BadFitRequest,
            format!(
                "--free: the start {value} of `{}` is not inside its bounds {lo}..{hi}",
                spec.name
            ),
        ));
    }
    let log_scale = request.log_scale && value > 0.0 && spec.lower.is_none_or(|l| l >= 0.0);
    Ok(if log_scale {
        Scaled {
            start: value.ln(),
            lower: if lo > 0.0 { lo.ln() } else { f64::NEG_INFINITY },
            upper: hi.ln(),
            log_scale,
        }
    } else {
        Scaled {
            start: value,
            lower: lo,
            upper: hi,
            log_scale,
        }
    })
}

/// The free params, their starting points and bounds in the fitted
/// scale, and the names skipped (with `skip_missing`).
type FreeSetup = (Vec<FreeParam>, Vec<f64>, Options, Vec<String>);

fn free_params(model: &Model, request: &Request) -> Result<FreeSetup, Vec<Diagnostic>> {
    let (specs, skipped): (Vec<&FreeSpec>, Vec<&FreeSpec>) = request.free.iter().partition(|f| {
        !request.skip_missing || matches!(model.lookup(base_name(&f.name).0), Some(Sym::Param(_)))
    });
    if specs.is_empty() {
        return Err(request_error(
            "nothing to fit: name the free params with --free NAME[=START][:LO..HI]".into(),
        ));
    }
    let mut free = Vec::new();
    let mut start = Vec::new();
    let mut options = Options::unbounded(specs.len());
    options.step = request.step;
    let mut errors = Vec::new();
    for (k, spec) in specs.into_iter().enumerate() {
        let (base, per_series) = base_name(&spec.name);
        let i = match model.lookup(base) {
            Some(Sym::Param(i)) => i,
            other => {
                let what = match other {
                    Some(Sym::Species(_)) => {
                        " (a species: initial values are fitted to progress curves, not rate tables)"
                    }
                    Some(_) => " (not a param)",
                    None => "",
                };
                let names: Vec<&str> = model.params.iter().map(|p| p.name.as_str()).collect();
                let mut d = Diagnostic::error(
                    Code::BadFitRequest,
                    format!(
                        "--free: `{}` is no param of the fitted rate{what}",
                        spec.name
                    ),
                );
                if let Some(h) = did_you_mean(&spec.name, names.iter().copied()) {
                    d = d.with_help(format!("did you mean `{h}`?"));
                }
                errors.push(d);
                continue;
            }
        };
        if matches!(model.params[i].definition, ParamDef::Expr(_)) {
            errors.push(Diagnostic::error(
                Code::BadFitRequest,
                format!(
                    "--free: `{}` is defined by an expression; free the params it is made of",
                    spec.name
                ),
            ));
            continue;
        }
        if free.iter().any(|f: &FreeParam| f.sym == Sym::Param(i)) {
            errors.push(Diagnostic::error(
                Code::BadFitRequest,
                format!("--free: `{}` is named twice", spec.name),
            ));
            continue;
        }
        let sc = match scaled(spec, model.params[i].value, request) {
            Ok(sc) => sc,
            Err(d) => {
                errors.push(d);
                continue;
            }
        };
        start.push(sc.start);
        options.lower[k] = sc.lower;
        options.upper[k] = sc.upper;
        let log_scale = sc.log_scale;
        free.push(FreeParam {
            sym: Sym::Param(i),
            log_scale,
            series: per_series.then(String::new),
        });
    }
    let skipped = skipped.into_iter().map(|f| f.name.clone()).collect();
    if errors.is_empty() {
        Ok((free, start, options, skipped))
    } else {
        Err(errors)
    }
}

/// Fits a rate table (or several, globally) with the model's rate.
pub fn fit_rates(
    model: &Model,
    label: &str,
    tables: &[Table],
    request: &Request,
) -> Result<Fit, Vec<Diagnostic>> {
    let (fitted_model, rate, rate_of) = rate_model(model, label, request)?;
    let (free, start, options, skipped) = free_params(&fitted_model, request)?;
    let mut problem = RateProblem::new(&fitted_model, &rate, free);
    let response = request
        .response
        .as_ref()
        .map(|(c, _)| c.as_str())
        .unwrap_or("v");
    let rate_dim = if request.response.is_some() {
        None
    } else {
        Some(Dim::RATE)
    };
    let mut errors = Vec::new();
    for (k, table) in tables.iter().enumerate() {
        if let Err(e) = problem.add_table(k, table, response, &request.weight, rate_dim) {
            errors.extend(e);
        }
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    // Per-series names become one unknown per series, named NAME[KEY].
    let mut keys: Vec<String> = Vec::new();
    for pt in &problem.points {
        if let Some(k) = &pt.series
            && !keys.contains(k)
        {
            keys.push(k.clone());
        }
    }
    let mut free = Vec::new();
    let (mut start2, mut lower, mut upper) = (Vec::new(), Vec::new(), Vec::new());
    for (k, f) in problem.free.iter().enumerate() {
        let copies: Vec<Option<String>> = match &f.series {
            Some(_) if keys.is_empty() => {
                return Err(request_error(format!(
                    "--free {}[series]: the data have no `series` column",
                    fitted_model.name_of(f.sym)
                )));
            }
            Some(_) => keys.iter().cloned().map(Some).collect(),
            None => vec![None],
        };
        for series in copies {
            free.push(FreeParam {
                series,
                ..f.clone()
            });
            start2.push(start[k]);
            lower.push(options.lower[k]);
            upper.push(options.upper[k]);
        }
    }
    problem.set_free(free);
    let start = start2;
    let mut options = options;
    options.lower = lower;
    options.upper = upper;
    let (n, p) = (problem.points.len(), problem.free.len());
    if n <= p {
        return Err(request_error(format!(
            "{n} usable data points cannot determine {p} free params"
        )));
    }
    let names: Vec<String> = problem
        .free
        .iter()
        .map(|f| {
            let name = fitted_model.name_of(f.sym);
            match &f.series {
                Some(key) => format!("{name}[{key}]"),
                None => name.to_string(),
            }
        })
        .collect();
    let units: Vec<Option<String>> = problem
        .free
        .iter()
        .map(|f| match f.sym {
            Sym::Param(i) => fitted_model.params[i]
                .dim
                .map(|d| d.display_in(fitted_model.units)),
            _ => None,
        })
        .collect();
    let log: Vec<bool> = problem.free.iter().map(|f| f.log_scale).collect();
    let unknowns = Unknowns {
        names,
        units,
        log,
        skipped,
    };
    let mut fit = estimate(&problem, &unknowns, &start, &options, request, label)?;
    let values: Vec<f64> = fit.params.iter().map(|p| p.value).collect();
    fit.points = problem
        .points
        .iter()
        .map(|pt| (pt.table, pt.line, pt.observed, problem.rate_at(pt, &values)))
        .collect();
    fit.rate_of = rate_of;
    let response = request
        .response
        .as_ref()
        .map(|(c, _)| c.as_str())
        .unwrap_or("v");
    fit.figure = figure::of_rates(&problem, &values, response);
    Ok(fit)
}

/// Fits assay data: progress curves when the tables have a `t` column,
/// rate tables otherwise.
pub fn fit(
    model: &Model,
    label: &str,
    tables: &[Table],
    request: &Request,
) -> Result<Fit, Vec<Diagnostic>> {
    let timed: Vec<bool> = tables.iter().map(|t| t.column("t").is_some()).collect();
    match (timed.iter().all(|t| *t), timed.iter().any(|t| *t)) {
        (true, _) => fit_curves(model, label, tables, request),
        (false, false) => fit_rates(model, label, tables, request),
        (false, true) => {
            let k = timed.iter().position(|t| !*t).unwrap_or(0);
            Err(vec![
                Diagnostic::error(
                    Code::BadData,
                    format!("{} has no `t` column, but other data files are progress curves: fit rate tables and progress curves separately", tables[k].label),
                )
                .with_label(tables[k].columns[0].span, "the header"),
            ])
        }
    }
}

/// Fits progress curves: every series simulated from its own start.
pub fn fit_curves(
    model: &Model,
    label: &str,
    tables: &[Table],
    request: &Request,
) -> Result<Fit, Vec<Diagnostic>> {
    if request.free.is_empty() {
        return Err(request_error(
            "nothing to fit: name the free params with --free NAME[=START][:LO..HI]".into(),
        ));
    }
    let mut free = Vec::new();
    let mut start = Vec::new();
    let mut names = Vec::new();
    let mut units = Vec::new();
    let mut log = Vec::new();
    let mut skipped = Vec::new();
    let mut errors = Vec::new();
    let mut lower = Vec::new();
    let mut upper = Vec::new();
    for spec in &request.free {
        // `NAME[series]`: one value of NAME per series.
        let (base, per_series) = match spec.name.strip_suffix("[series]") {
            Some(b) => (b, true),
            None => (spec.name.as_str(), false),
        };
        let conc = Some(Dim::CONC.display_in(model.units));
        let found = match base.strip_suffix("(0)") {
            Some(species) => match model.lookup(species) {
                Some(Sym::Species(i)) => {
                    Some((species.to_string(), model.species[i].initial, conc))
                }
                _ => None,
            },
            None => match model.lookup(base) {
                Some(Sym::Param(i)) if matches!(model.params[i].definition, ParamDef::Value(_)) => {
                    Some((
                        base.to_string(),
                        model.params[i].value,
                        model.params[i].dim.map(|d| d.display_in(model.units)),
                    ))
                }
                Some(Sym::Total(k)) if model.totals[k].value_given => {
                    Some((base.to_string(), model.totals[k].value, conc))
                }
                Some(Sym::Fixed(k)) => Some((base.to_string(), model.fixed[k].value, conc)),
                _ => None,
            },
        };
        let Some((target, default, unit)) = found else {
            if request.skip_missing {
                skipped.push(spec.name.clone());
                continue;
            }
            let mut d = Diagnostic::error(
                Code::BadFitRequest,
                format!(
                    "--free: `{}` is no param (with a value), initial value NAME(0), total with a value or fixed species of {label}",
                    spec.name
                ),
            );
            let names = model.all_names();
            if let Some(h) = did_you_mean(
                spec.name.trim_end_matches("(0)"),
                names.iter().map(String::as_str),
            ) {
                d = d.with_help(format!("did you mean `{h}`?"));
            }
            errors.push(d);
            continue;
        };
        let sc = match scaled(spec, default, request) {
            Ok(sc) => sc,
            Err(d) => {
                errors.push(d);
                continue;
            }
        };
        start.push(sc.start);
        lower.push(sc.lower);
        upper.push(sc.upper);
        let log_scale = sc.log_scale;
        free.push(curves::FreeValue {
            target,
            log_scale,
            series: per_series.then(String::new),
        });
        names.push(base.to_string());
        units.push(unit);
        log.push(log_scale);
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    if free.is_empty() {
        return Err(request_error(
            "nothing to fit: none of the free names is in this model".into(),
        ));
    }
    let mut options = Options::unbounded(free.len());
    options.lower = lower;
    options.upper = upper;
    let mut problem = curves::CurveProblem::new(model, Vec::new()).map_err(|d| vec![d])?;
    for table in tables {
        if let Err(e) = problem.add_table(table, &request.weight) {
            errors.extend(e);
        }
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    // Per-series names become one unknown per series, named NAME[series].
    // Named by the series' key, and by file too when there are several.
    let keys: Vec<(String, String)> = problem
        .series
        .iter()
        .map(|s| {
            (
                s.name.clone(),
                if tables.len() > 1 {
                    s.name.clone()
                } else {
                    s.key.clone()
                },
            )
        })
        .collect();
    let mut expanded = (
        Vec::new(),
        Vec::new(),
        Vec::new(),
        Vec::new(),
        Vec::new(),
        Vec::new(),
    );
    for (k, f) in free.into_iter().enumerate() {
        let copies: Vec<(Option<String>, String)> = match &f.series {
            Some(_) => keys
                .iter()
                .map(|(series, key)| (Some(series.clone()), format!("{}[{key}]", names[k])))
                .collect(),
            None => vec![(None, names[k].clone())],
        };
        for (series, name) in copies {
            expanded.0.push(curves::FreeValue {
                series,
                ..f.clone()
            });
            expanded.1.push(name);
            expanded.2.push(units[k].clone());
            expanded.3.push(log[k]);
            expanded.4.push(start[k]);
            expanded.5.push((options.lower[k], options.upper[k]));
        }
    }
    let (free, names, units, log, start, bounds) = expanded;
    problem.free = free;
    let mut options = Options::unbounded(problem.free.len());
    options.lower = bounds.iter().map(|b| b.0).collect();
    options.upper = bounds.iter().map(|b| b.1).collect();
    if problem.count <= names.len() {
        return Err(request_error(format!(
            "{} measurements cannot determine {} free values",
            problem.count,
            names.len()
        )));
    }
    let unknowns = Unknowns {
        names,
        units,
        log,
        skipped,
    };
    let mut fit = estimate(&problem, &unknowns, &start, &options, request, label)?;
    let values: Vec<f64> = fit.params.iter().map(|p| p.value).collect();
    if let Ok(predicted) = problem.predictions(&values) {
        let mut k = 0;
        for s in &problem.series {
            for &(_, _, observed, _, line) in &s.measurements {
                fit.points.push((0, line, observed, predicted[k]));
                k += 1;
            }
        }
    }
    fit.rate_of = format!("progress curves of {} series", problem.series.len());
    fit.figure = figure::of_curves(&problem, &values);
    Ok(fit)
}

/// The unknowns of a fit, for its report.
struct Unknowns {
    names: Vec<String>,
    units: Vec<Option<String>>,
    log: Vec<bool>,
    skipped: Vec<String>,
}

/// Minimizes and computes the statistics at the optimum.
fn estimate(
    problem: &(dyn lm::Residuals + Sync),
    unknowns: &Unknowns,
    start: &[f64],
    options: &Options,
    request: &Request,
    label: &str,
) -> Result<Fit, Vec<Diagnostic>> {
    let n = problem.residual_count();
    let p = start.len();
    let (outcome, spread) = multi_start(
        problem,
        start,
        options,
        request.starts,
        &request.on_start_done,
    );
    if let lm::Stop::StartFailed(e) = &outcome.stop {
        return Err(vec![
            Diagnostic::error(Code::FitFailed, format!("fitting {label}: {e}"))
                .with_help("choose other starting values with --free NAME=START"),
        ]);
    }
    let values: Vec<f64> = outcome
        .x
        .iter()
        .zip(&unknowns.log)
        .map(|(x, log)| if *log { x.exp() } else { *x })
        .collect();
    let linear_jacobian: Vec<f64> = outcome
        .jacobian
        .iter()
        .enumerate()
        .map(|(k, d)| {
            let j = k % p;
            if unknowns.log[j] { d / values[j] } else { *d }
        })
        .collect();
    let summary = stats::summarize(&values, &linear_jacobian, outcome.ssr, n);
    let profiles = if request.profile {
        Some(profile_intervals(
            problem,
            &unknowns.log,
            &outcome.x,
            outcome.ssr,
            options,
            &summary,
        ))
    } else {
        None
    };
    let mut warnings =
        identifiability_warnings(&unknowns.names, &values, &summary, options, &outcome.x);
    if !unknowns.skipped.is_empty() {
        warnings.push(format!(
            "not in this model, so not fitted here: {}",
            unknowns.skipped.join(", ")
        ));
    }
    if outcome.failed_evaluations > 0 {
        warnings.push(format!(
            "the model could not be evaluated at {} trial points; the steps were shrunk",
            outcome.failed_evaluations
        ));
    }
    if let Some(spread) = &spread {
        warnings.push(spread.clone());
    }
    let params = (0..p)
        .map(|j| FittedParam {
            name: unknowns.names[j].clone(),
            value: values[j],
            stderr: summary.stderr[j],
            ci95: summary.ci95[j],
            profile: profiles.as_ref().map(|pr| pr[j]),
            unit: unknowns.units[j].clone(),
            log_scale: unknowns.log[j],
        })
        .collect();
    Ok(Fit {
        params,
        ssr: outcome.ssr,
        n,
        dof: summary.dof,
        sigma: summary.sigma,
        aic: summary.aic,
        aicc: summary.aicc,
        bic: summary.bic,
        correlation: summary.correlation,
        converged: outcome.stop.converged(),
        iterations: outcome.iterations,
        stop: outcome.stop.describe(),
        warnings,
        points: Vec::new(),
        rate_of: String::new(),
        figure: None,
    })
}

fn identifiability_warnings(
    names: &[String],
    values: &[f64],
    s: &stats::Summary,
    options: &Options,
    x: &[f64],
) -> Vec<String> {
    let mut out = Vec::new();
    for v in &s.undetermined {
        let combination: Vec<String> = v
            .iter()
            .zip(names)
            .filter(|(c, _)| c.abs() > 1e-3)
            .map(|(c, n)| format!("{c:+.3}·{n}"))
            .collect();
        out.push(format!(
            "the data do not determine the combination {} (a near-zero singular value of the Jacobian); standard errors are undefined",
            combination.join(" ")
        ));
    }
    let p = names.len();
    for a in 0..p {
        for b in a + 1..p {
            let r = s.correlation[a][b];
            if r.abs() > 0.99 {
                out.push(format!("{} and {} are correlated (r = {r:.4}): the data determine a combination of them better than either", names[a], names[b]));
            }
        }
    }
    for j in 0..p {
        let (lo, hi) = s.ci95[j];
        if values[j] > 0.0 && (lo <= 0.0 || hi / lo > 100.0) {
            out.push(format!("the 95% interval of {} spans more than two orders of magnitude: it is poorly determined", names[j]));
        }
        if x[j] <= options.lower[j] || x[j] >= options.upper[j] {
            out.push(format!(
                "{} is at a bound; its interval assumes it is not",
                names[j]
            ));
        }
    }
    out
}
