//! `ratewright fit MODEL... --data FILE...`: estimate params from assay
//! data (CLI.md, second round). Parses the options, reads the data files,
//! calls `fit::fit_rates` for each model and writes the report; with
//! several models, ranks them by AICc with Akaike weights and F tests.

use super::common::{
    EXIT_MODEL, EXIT_USAGE, load_model, pad_end, report_failure, usage_error_as, write_stdout,
};
use crate::diagnostics::{Diagnostic, SourceMap};
use crate::fit::{self, Fit, FreeSpec, Request, rates::Weight};
use crate::model::Model;
use crate::model::units::parse_quantity;
use serde_json::{Value, json};
use std::io::IsTerminal;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism files (several: the same data fitted by rival mechanisms, ranked).
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// Data files (CSV, or TSV by extension); several are fitted together.
    #[arg(long, required = true, num_args = 1..)]
    pub data: Vec<PathBuf>,
    /// Free params: NAME[=START][:LO..HI], repeatable or a comma list.
    #[arg(long, value_delimiter = ',', value_name = "NAME[=START][:LO..HI]")]
    pub free: Vec<String>,
    /// The measured column and what it measures: COLUMN=STEP or COLUMN=OBSERVABLE.
    #[arg(long, value_name = "COLUMN=NAME")]
    pub response: Option<String>,
    /// Residual weights: none, relative, or a column of standard deviations.
    #[arg(long, default_value = "none", value_name = "none|relative|COLUMN")]
    pub weight: String,
    /// Profile-likelihood intervals as well as the asymptotic ones.
    #[arg(long)]
    pub profile: bool,
    /// Fit positive params by their logarithms (log, the default) or on
    /// their own scale (linear).
    #[arg(long, value_enum, default_value_t = Scale::Log)]
    pub scale: Scale,
    /// Output format.
    #[arg(long, value_enum, default_value_t = super::Format::Human)]
    pub format: super::Format,
    /// Minimize from this many starting points (the given one and a Latin
    /// hypercube over the bounds), in parallel; the best is kept.
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub starts: usize,
    /// The minimizer's step: plain Levenberg–Marquardt, or with geodesic
    /// acceleration (follows a curved, flat valley the plain step can stall
    /// in; one more model evaluation per step).
    #[arg(long, value_enum, default_value_t = StepKind::Plain)]
    pub step: StepKind,
    /// A figure of the data, the fitted curves and the residuals (.svg or .png; one model).
    #[arg(long, value_name = "FIGURE")]
    pub plot: Option<PathBuf>,
    /// With --plot and a rate table, draw the double-reciprocal view (1/v against 1/[S]) instead, for reading inhibition patterns.
    #[arg(long, requires = "plot")]
    pub reciprocal: bool,
    /// Write the model file with the fitted values in place (one model).
    #[arg(short = 'o', long, value_name = "FITTED.mech")]
    pub output: Option<PathBuf>,
}

#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum StepKind {
    Plain,
    Geodesic,
}

#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum Scale {
    Log,
    Linear,
}

/// `NAME[=START][:LO..HI]`, quantities in the model's units.
fn parse_free(text: &str, model: &Model) -> Result<FreeSpec, String> {
    let (head, bounds) = match text.split_once(':') {
        Some((h, b)) => (h, Some(b)),
        None => (text, None),
    };
    let quantity = |t: &str| -> Result<f64, String> {
        parse_quantity(t.trim(), model.units)
            .map(|(v, _)| v)
            .map_err(|e| format!("--free {text}: `{t}`: {e}"))
    };
    let (name, start) = match head.split_once('=') {
        Some((n, s)) => (n.trim(), Some(quantity(s)?)),
        None => (head.trim(), None),
    };
    if name.is_empty() {
        return Err(format!("--free {text}: no name"));
    }
    let (lower, upper) = match bounds {
        None => (None, None),
        Some(b) => {
            let Some((lo, hi)) = b.split_once("..") else {
                return Err(format!("--free {text}: bounds are written LO..HI"));
            };
            let side = |t: &str| -> Result<Option<f64>, String> {
                if t.trim().is_empty() {
                    Ok(None)
                } else {
                    quantity(t).map(Some)
                }
            };
            (side(lo)?, side(hi)?)
        }
    };
    Ok(FreeSpec {
        name: name.to_string(),
        start,
        lower,
        upper,
    })
}

/// The tables with the source map holding their text; or the diagnostics,
/// that map, and whether a file could not be read at all (exit 2).
type TablesRead = Result<(Vec<fit::data::Table>, SourceMap), (Vec<Diagnostic>, SourceMap, bool)>;

fn read_tables(paths: &[PathBuf]) -> TablesRead {
    let mut sources = SourceMap::new();
    let mut tables = Vec::new();
    let mut errors = Vec::new();
    for path in paths {
        let text = match std::fs::read(path) {
            Ok(bytes) => match String::from_utf8(bytes) {
                Ok(t) => t,
                Err(e) => {
                    errors.push(
                        Diagnostic::error(
                            crate::diagnostics::Code::BadData,
                            format!(
                                "{} is not UTF-8 text (bad byte at offset {})",
                                path.display(),
                                e.utf8_error().valid_up_to()
                            ),
                        )
                        .with_path(path),
                    );
                    continue;
                }
            },
            Err(e) => {
                let d = Diagnostic::error(
                    crate::diagnostics::Code::FileRead,
                    format!("cannot read {}: {e}", path.display()),
                )
                .with_path(path);
                return Err((vec![d], sources, true));
            }
        };
        let label = path.display().to_string();
        let id = sources.add(path.clone(), text.clone());
        let tab = path.extension().is_some_and(|e| e == "tsv" || e == "tab");
        match fit::data::parse_table(&text, id, &label, tab) {
            Ok(t) => tables.push(t),
            Err(e) => errors.extend(e),
        }
    }
    if errors.is_empty() {
        Ok((tables, sources))
    } else {
        Err((errors, sources, false))
    }
}

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == super::Format::Json;
    let weight = match args.weight.as_str() {
        "none" => Weight::None,
        "relative" => Weight::Relative,
        column => Weight::Column(column.to_string()),
    };
    let response = match &args.response {
        None => None,
        Some(r) => match r.split_once('=') {
            Some((c, n)) if !c.trim().is_empty() && !n.trim().is_empty() => {
                Some((c.trim().to_string(), n.trim().to_string()))
            }
            _ => {
                return usage_error_as(
                    json,
                    format!("--response {r}: write COLUMN=NAME (a step or observable)"),
                );
            }
        },
    };
    // The output is checked before any work (exit 2), and is never an input.
    if let Some(path) = &args.output {
        if args.files.len() > 1 {
            return usage_error_as(json, "-o writes one fitted model: give one model file");
        }
        if path.extension().is_none_or(|e| e != "mech") {
            return usage_error_as(
                json,
                format!("-o {}: the fitted model is a .mech file", path.display()),
            );
        }
    }
    if let Some(path) = &args.plot {
        if args.files.len() > 1 {
            return usage_error_as(json, "--plot draws one fitted model: give one model file");
        }
        if let Err(e) = super::plot::check_figure_path(path) {
            return usage_error_as(json, e);
        }
    }
    // Outputs are checked before the work and committed together after it.
    let outputs: Vec<&std::path::Path> = args
        .output
        .iter()
        .chain(&args.plot)
        .map(PathBuf::as_path)
        .collect();
    let inputs: Vec<PathBuf> = args.files.iter().chain(&args.data).cloned().collect();
    let sinks = match super::output::sinks_for(&outputs, &inputs) {
        Ok(s) => s,
        Err(e) => return usage_error_as(json, e),
    };
    let mut staged = super::output::Staged::new();
    let (tables, data_sources) = match read_tables(&args.data) {
        Ok(t) => t,
        Err((diags, sources, unreadable)) => {
            return report_failure(
                &diags,
                &sources,
                json,
                if unreadable { EXIT_USAGE } else { EXIT_MODEL },
            );
        }
    };
    let mut fits: Vec<(String, Fit)> = Vec::new();
    // On a terminal, a bar over every start of every model of a multi-start.
    let bar = (args.starts > 1 && std::io::stderr().is_terminal()).then(|| {
        // Cleared when dropped, also on an early error return.
        let b = indicatif::ProgressBar::new((args.starts * args.files.len()) as u64)
            .with_finish(indicatif::ProgressFinish::AndClear);
        b.set_style(
            indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} starts, {eta} left")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    });
    for file in &args.files {
        let (model, model_sources) = match load_model(file, json) {
            Ok(m) => m,
            Err(code) => return code,
        };
        let mut free = Vec::new();
        let bar = bar.clone();
        let progress = fit::Progress(bar.map(|b| {
            std::sync::Arc::new(move || b.inc(1)) as std::sync::Arc<dyn Fn() + Send + Sync>
        }));
        for text in &args.free {
            match parse_free(text, &model) {
                Ok(f) => free.push(f),
                Err(e) => return usage_error_as(json, e),
            }
        }
        let request = Request {
            free,
            response: response.clone(),
            weight: weight.clone(),
            profile: args.profile,
            log_scale: args.scale == Scale::Log,
            skip_missing: args.files.len() > 1,
            starts: args.starts,
            on_start_done: progress.clone(),
            step: match args.step {
                StepKind::Plain => fit::lm::Step::Plain,
                StepKind::Geodesic => fit::lm::Step::Geodesic,
            },
        };
        let label = file.display().to_string();
        match fit::fit(&model, &label, &tables, &request) {
            Ok(f) => {
                if let Some(path) = &args.output {
                    let file = model_sources.find(file).unwrap_or_default();
                    let text = model_sources
                        .get(file)
                        .map(|s| s.text.clone())
                        .unwrap_or_default();
                    let data: Vec<String> =
                        args.data.iter().map(|d| d.display().to_string()).collect();
                    let written =
                        match fit::write::with_fitted_values(&text, file, &model, &f, &data) {
                            Ok(t) => t,
                            Err(e) => return usage_error_as(json, format!("-o: {e}")),
                        };
                    let _ = path;
                    if let Err(e) = staged.bytes(&sinks[0], written.as_bytes()) {
                        return super::common::run_error(e);
                    }
                }
                if args.plot.is_some() {
                    let sink = &sinks[outputs.len() - 1];
                    let Some(figure) = &f.figure else {
                        return usage_error_as(
                            json,
                            "--plot: no condition varies in the data, so there is nothing to draw against",
                        );
                    };
                    let title = model.name.clone().unwrap_or_else(|| label.clone());
                    let reciprocal;
                    let figure = if args.reciprocal {
                        if !figure.of_rates {
                            return usage_error_as(
                                json,
                                "--reciprocal: the double-reciprocal view is of a rate table; these data are progress curves",
                            );
                        }
                        reciprocal = figure.double_reciprocal();
                        &reciprocal
                    } else {
                        figure
                    };
                    if let Err(e) = super::plot::draw_fit(&mut staged, sink, &title, figure) {
                        return super::common::run_error(e);
                    }
                }
                fits.push((label, f))
            }
            Err(diags) => {
                let sources = if diags.iter().any(|d| d.primary_span().is_some()) {
                    &data_sources
                } else {
                    &model_sources
                };
                return report_failure(&diags, sources, json, EXIT_MODEL);
            }
        }
    }
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    if let Err(e) = staged.commit() {
        return super::common::run_error(e);
    }
    let text = if json {
        let document = if fits.len() == 1 {
            fit_json(&fits[0].0, &fits[0].1)
        } else {
            comparison_json(&fits)
        };
        format!(
            "{}\n",
            serde_json::to_string_pretty(&document).unwrap_or_default()
        )
    } else {
        let mut out = String::new();
        for (label, f) in &fits {
            out.push_str(&fit_human(label, f));
        }
        if fits.len() > 1 {
            out.push_str(&comparison_human(&fits));
        }
        out
    };
    match write_stdout(&text) {
        Ok(()) => ExitCode::SUCCESS,
        Err(code) => code,
    }
}

fn number(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

fn fit_json(label: &str, f: &Fit) -> Value {
    let parameters: serde_json::Map<String, Value> = f
        .params
        .iter()
        .map(|p| {
            let mut entry = json!({
                "value": p.value,
                "stderr": number(p.stderr),
                "ci95": [number(p.ci95.0), number(p.ci95.1)],
                "unit": p.unit,
                "log_scale": p.log_scale,
            });
            if let Some((lo, hi)) = p.profile {
                entry["profile95"] = json!([number(lo), number(hi)]);
            }
            (p.name.clone(), entry)
        })
        .collect();
    json!({
        "file": label,
        "rate_of": f.rate_of,
        "parameters": parameters,
        "ssr": f.ssr,
        "n": f.n,
        "dof": f.dof,
        "sigma": number(f.sigma),
        "aic": number(f.aic),
        "aicc": number(f.aicc),
        "bic": number(f.bic),
        "correlation": {
            "names": f.params.iter().map(|p| p.name.clone()).collect::<Vec<_>>(),
            "matrix": f.correlation.iter().map(|row| row.iter().map(|v| number(*v)).collect::<Vec<_>>()).collect::<Vec<_>>(),
        },
        "converged": f.converged,
        "iterations": f.iterations,
        "stop_reason": f.stop,
        "warnings": f.warnings,
    })
}

fn comparison_json(fits: &[(String, Fit)]) -> Value {
    let plain: Vec<Fit> = fits.iter().map(|(_, f)| f.clone()).collect();
    let ranking = fit::rank(&plain);
    json!({
        "models": fits.iter().map(|(l, f)| fit_json(l, f)).collect::<Vec<_>>(),
        "ranking": ranking.iter().map(|r| json!({
            "file": fits[r.index].0,
            "delta_aicc": r.delta_aicc,
            "akaike_weight": r.weight,
        })).collect::<Vec<_>>(),
        "f_tests": f_tests(fits).into_iter().map(|(a, b, f, p)| json!({
            "fewer_params": fits[a].0, "more_params": fits[b].0, "f": f, "p_value": p,
        })).collect::<Vec<_>>(),
    })
}

/// F tests for every pair with different numbers of params on the same
/// points (meaningful where the smaller model is nested in the larger).
fn f_tests(fits: &[(String, Fit)]) -> Vec<(usize, usize, f64, f64)> {
    let mut out = Vec::new();
    for a in 0..fits.len() {
        for b in 0..fits.len() {
            if let Some((f, p)) = fit::f_test(&fits[a].1, &fits[b].1) {
                out.push((a, b, f, p));
            }
        }
    }
    out
}

fn fit_human(label: &str, f: &Fit) -> String {
    let mut out = format!("{label}: fitted {} to {} points\n", f.rate_of, f.n);
    out.push_str(&format!("  {}\n\n", f.stop));
    let width = f
        .params
        .iter()
        .map(|p| p.name.chars().count())
        .max()
        .unwrap_or(4)
        .max(4);
    out.push_str(&format!(
        "  {}  {:>14}  {:>12}  {:>29}  unit\n",
        pad_end("name", width),
        "value",
        "std. error",
        "95% interval"
    ));
    for p in &f.params {
        out.push_str(&format!(
            "  {}  {:>14.7e}  {:>12.4e}  [{:>12.5e}, {:>12.5e}]  {}\n",
            pad_end(&p.name, width),
            p.value,
            p.stderr,
            p.ci95.0,
            p.ci95.1,
            p.unit.clone().unwrap_or_default()
        ));
        if let Some((lo, hi)) = p.profile {
            out.push_str(&format!(
                "  {}  profile 95% interval [{lo:.5e}, {hi:.5e}]\n",
                pad_end("", width)
            ));
        }
    }
    out.push_str(&format!(
        "\n  SSR {:.6e}, n {}, dof {}, sigma {:.4e}; AIC {:.3}, AICc {:.3}, BIC {:.3}; {} iterations\n",
        f.ssr, f.n, f.dof, f.sigma, f.aic, f.aicc, f.bic, f.iterations
    ));
    for w in &f.warnings {
        out.push_str(&format!("  warning: {w}\n"));
    }
    out.push('\n');
    out
}

fn comparison_human(fits: &[(String, Fit)]) -> String {
    let plain: Vec<Fit> = fits.iter().map(|(_, f)| f.clone()).collect();
    let mut out = String::from("ranking by AICc (best first):\n");
    let width = fits
        .iter()
        .map(|(l, _)| l.chars().count())
        .max()
        .unwrap_or(4);
    for r in fit::rank(&plain) {
        let (label, f) = &fits[r.index];
        out.push_str(&format!(
            "  {}  AICc {:>10.3}  delta {:>8.3}  Akaike weight {:.4}  ({} params, SSR {:.4e})\n",
            pad_end(label, width),
            f.aicc,
            r.delta_aicc,
            r.weight,
            f.params.len(),
            f.ssr
        ));
    }
    for (a, b, f, p) in f_tests(fits) {
        out.push_str(&format!(
            "F test, {} against {} (if nested): F = {f:.4}, p = {p:.4}\n",
            fits[a].0, fits[b].0
        ));
    }
    out
}
