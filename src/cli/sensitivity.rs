//! `ratewright sensitivity FILE`: local sensitivities of the time course
//! to params, fixed species and initial values (CLI.md, second round).
//!
//! Output shapes: CSV header `t,d(OUT)/d(PARAM),...` (outputs slowest,
//! parameters fastest); JSON `times`, `sensitivities` (output → parameter →
//! values, one per time), `normalized` (bool), and `ranking`. Normalised
//! values ∂ln y/∂ln p are undefined (CSV empty, JSON null) where y is 0 or
//! below 1e-9 of its largest size along the course.

use super::Format;
use super::common::{self, EXIT_MODEL, report_failure, usage_error_as, write_stdout};
use super::run::{model_with_overrides, sim_failure};
use crate::sensitivity::{Parameter, Sensitivities, SensitivityError, sensitivities};
use crate::sim::{self, Settings};
use serde_json::{Map, Value, json};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// End time, with an optional unit; default: as `run`.
    #[arg(long, value_name = "TIME", conflicts_with = "times")]
    pub until: Option<String>,
    /// Number of evenly spaced output times from 0 to the end time.
    #[arg(
        long,
        value_name = "N",
        default_value_t = 101,
        conflicts_with = "times"
    )]
    pub points: usize,
    /// Output at exactly these times (comma-separated, units allowed).
    #[arg(long, value_name = "T1,T2,..")]
    pub times: Option<String>,
    /// Outputs: species or observables (comma-separated; default: all).
    #[arg(long, value_name = "NAME,..")]
    pub of: Option<String>,
    /// Parameters: params, fixed species, initial values `NAME(0)`, totals (with --reduced) (comma-separated; default: every param with a value).
    #[arg(long, value_name = "NAME,..")]
    pub to: Option<String>,
    /// Normalised sensitivities ∂ln y/∂ln p instead of ∂y/∂p.
    #[arg(long)]
    pub normalized: bool,
    /// Override a param, initial value, fixed species or total (`S=5mM`); repeatable.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Integrate only the independent species (dependent ones follow their totals; totals can then be parameters).
    #[arg(long)]
    pub reduced: bool,
    /// Integration method.
    #[arg(long, value_enum, default_value_t = super::run::MethodArg::Bdf)]
    pub method: super::run::MethodArg,
    /// Relative tolerance (of the states and the sensitivities).
    #[arg(long, default_value_t = 1e-8)]
    pub rtol: f64,
    /// Absolute tolerance (model units).
    #[arg(long, default_value_t = 1e-12)]
    pub atol: f64,
    /// Write the sensitivities to a .csv file.
    #[arg(short = 'o', long = "output", value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Report format.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    pub format: Format,
    /// Draw the sensitivities over time to an .svg or .png file.
    #[arg(long, value_name = "PATH")]
    pub plot: Option<PathBuf>,
}

/// Above this many output × parameter pairs, `--plot` draws a heat map
/// instead of lines.
const MOST_LINES: usize = 8;

fn names(list: &Option<String>) -> Option<Vec<String>> {
    list.as_ref().map(|l| {
        l.split(',')
            .map(|s| s.trim().to_string())
            .filter(|s| !s.is_empty())
            .collect()
    })
}

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == Format::Json;
    let usage = |m: String| usage_error_as(json, m);
    if args.rtol.is_nan()
        || args.rtol <= 0.0
        || args.rtol >= 1.0
        || !args.atol.is_finite()
        || args.atol <= 0.0
    {
        return usage(
            "--rtol must lie in (0, 1) and --atol must be a positive finite number".into(),
        );
    }
    if let Some(path) = &args.output
        && !path
            .extension()
            .and_then(|e| e.to_str())
            .is_some_and(|e| e.eq_ignore_ascii_case("csv"))
    {
        return usage(format!(
            "-o {}: the output must end in .csv",
            path.display()
        ));
    }
    if let Some(path) = &args.plot
        && let Err(e) = super::plot::check_figure_path(path)
    {
        return usage(e);
    }
    let out_paths: Vec<&Path> = args
        .output
        .iter()
        .chain(&args.plot)
        .map(PathBuf::as_path)
        .collect();
    let sinks = match super::output::sinks_for(&out_paths, &[]) {
        Ok(s) => s,
        Err(e) => return usage(e),
    };
    let (model, sources) = match model_with_overrides(&args.file, &args.set, json) {
        Ok(m) => m,
        Err(code) => return code,
    };
    let inputs: Vec<PathBuf> = sources.files().iter().map(|f| f.path.clone()).collect();
    for path in &out_paths {
        if let Err(e) = common::refuse_input_overwrite(path, &inputs) {
            return usage(e);
        }
    }
    let parameters = match names(&args.to) {
        None => Parameter::all_params(&model),
        Some(list) => {
            let mut v = Vec::new();
            for name in list {
                match Parameter::parse(&model, &name) {
                    Ok(p) => v.push(p),
                    Err(e) => return usage(format!("--to: {e}")),
                }
            }
            v
        }
    };
    if parameters.is_empty() {
        return usage("--to: the model has no param with a value; name fixed species or initial values `NAME(0)`".into());
    }
    let all_outputs = sim::column_names(&model);
    let chosen: Vec<usize> = match names(&args.of) {
        None => (0..all_outputs.len()).collect(),
        Some(list) => {
            let mut v = Vec::new();
            for name in list {
                match all_outputs.iter().position(|c| *c == name) {
                    Some(i) => v.push(i),
                    None => return usage(format!("--of: no species or observable named `{name}`")),
                }
            }
            v
        }
    };
    let times = match &args.times {
        Some(list) => {
            let mut v = Vec::new();
            for part in list.split(',').map(str::trim).filter(|p| !p.is_empty()) {
                match common::parse_time(part, model.units) {
                    Ok(t) if t >= 0.0 => v.push(t),
                    Ok(_) => return usage("--times: times must not be negative".into()),
                    Err(e) => return usage(format!("--times: {e}")),
                }
            }
            if v.windows(2).any(|w| w[1] < w[0]) || v.is_empty() {
                return usage("--times: give one or more times in increasing order".into());
            }
            v
        }
        None => {
            let until = match &args.until {
                Some(u) => match common::parse_time(u, model.units) {
                    Ok(t) if t > 0.0 => t,
                    Ok(_) => return usage("--until: the end time must be positive".into()),
                    Err(e) => return usage(format!("--until: {e}")),
                },
                None => match sim::Prepared::full(&model) {
                    Ok(p) => sim::default_until(&p.model, &p.system),
                    Err(e) => return sim_failure(&e),
                },
            };
            if args.points == 0 || args.points > 1_000_000 {
                return usage("--points: give between 1 and 1,000,000 output times".into());
            }
            sim::linear_times(until, args.points)
        }
    };
    let settings = Settings {
        rtol: args.rtol,
        atol: args.atol,
        method: args.method.into(),
        event_rows: args.times.is_none(),
        ..Settings::default()
    };
    let result = match sensitivities(&model, &parameters, &settings, &times, args.reduced) {
        Ok(r) => r,
        Err(SensitivityError::Model(d)) => return report_failure(&[d], &sources, json, EXIT_MODEL),
        Err(SensitivityError::Run(e)) => return sim_failure(&e),
    };
    let value = |o: usize, k: usize, t: usize| -> Option<f64> {
        if args.normalized {
            result.normalized(o, k, t)
        } else {
            Some(result.values[o][k][t])
        }
    };
    let mut staged = super::output::Staged::new();
    let mut sink_index = 0;
    if args.output.is_some() {
        let csv = csv_text(&result, &chosen, &value);
        if let Err(e) = staged.bytes(&sinks[sink_index], csv.as_bytes()) {
            return common::run_error(format!("[E0803] {e}"));
        }
        sink_index += 1;
    }
    if args.plot.is_some() {
        let prefix = if args.normalized { "∂ln " } else { "∂" };
        let title = model
            .description
            .clone()
            .or(model.name.clone())
            .unwrap_or_else(|| "sensitivities".into());
        let pairs: Vec<(usize, usize)> = chosen
            .iter()
            .flat_map(|&o| (0..result.parameters.len()).map(move |k| (o, k)))
            .collect();
        let name = |&(o, k): &(usize, usize)| {
            format!(
                "{prefix}{}/{prefix}{}",
                result.outputs[o], result.parameters[k]
            )
        };
        let series = |&(o, k): &(usize, usize), missing: f64| -> Vec<f64> {
            (0..result.times.len())
                .map(|t| value(o, k, t).unwrap_or(missing))
                .collect()
        };
        let x_label = format!("time ({})", model.units.time.symbol());
        let drawn = if pairs.len() > MOST_LINES {
            // Many pairs: a heat map of the normalised sensitivities (one row
            // per output and parameter), comparable across units.
            let normalised =
                |o: usize, k: usize, t: usize| result.normalized(o, k, t).unwrap_or(f64::NAN);
            super::plot::draw_heat_map(
                &mut staged,
                &sinks[sink_index],
                &super::plot::HeatMap {
                    title,
                    x_label,
                    y_label: "output / parameter".into(),
                    value_label: "∂ln y/∂ln p".into(),
                    x: result.times.clone(),
                    y: (0..pairs.len()).map(|r| r as f64).collect(),
                    values: (0..result.times.len())
                        .map(|t| pairs.iter().map(|&(o, k)| normalised(o, k, t)).collect())
                        .collect(),
                    log_x: false,
                    log_y: false,
                    y_names: pairs
                        .iter()
                        .map(|&(o, k)| {
                            format!("∂ln {}/∂ln {}", result.outputs[o], result.parameters[k])
                        })
                        .collect(),
                },
            )
        } else {
            super::plot::draw_lines(
                &mut staged,
                &sinks[sink_index],
                &super::plot::LinePlot {
                    title,
                    x_label,
                    y_label: if args.normalized {
                        "normalised sensitivity ∂ln y/∂ln p".into()
                    } else {
                        "sensitivity ∂y/∂p (model units)".into()
                    },
                    x: result.times.clone(),
                    series: pairs.iter().map(|p| (name(p), series(p, 0.0))).collect(),
                    log_x: false,
                    log_y: false,
                },
            )
        };
        if let Err(e) = drawn {
            return common::run_error(format!("[E0803] {e}"));
        }
    }
    if let Err(e) = staged.commit() {
        return common::run_error(format!("[E0803] {e}"));
    }
    let report = if json {
        format!(
            "{}\n",
            serde_json::to_string_pretty(&document(&result, &chosen, args.normalized, &value))
                .unwrap_or_default()
        )
    } else if args.output.is_some() {
        // The table went to the file; people get the ranking.
        human_ranking(&result, &chosen)
    } else {
        human(&result, &chosen, args.normalized, &value)
    };
    match write_stdout(&report) {
        Ok(()) => ExitCode::SUCCESS,
        Err(code) => code,
    }
}

fn cell(v: Option<f64>) -> String {
    match v {
        Some(v) => format!("{v:?}"),
        None => String::new(),
    }
}

fn csv_text(
    r: &Sensitivities,
    chosen: &[usize],
    value: &dyn Fn(usize, usize, usize) -> Option<f64>,
) -> String {
    let mut header = vec!["t".to_string()];
    for &o in chosen {
        for p in &r.parameters {
            header.push(format!("d({})/d({})", r.outputs[o], p));
        }
    }
    let mut out = header.join(",");
    out.push('\n');
    for (t, time) in r.times.iter().enumerate() {
        let mut row = vec![format!("{time:?}")];
        for &o in chosen {
            for k in 0..r.parameters.len() {
                row.push(cell(value(o, k, t)));
            }
        }
        out.push_str(&row.join(","));
        out.push('\n');
    }
    out
}

fn document(
    r: &Sensitivities,
    chosen: &[usize],
    normalized: bool,
    value: &dyn Fn(usize, usize, usize) -> Option<f64>,
) -> Value {
    let mut sens = Map::new();
    for &o in chosen {
        let mut per = Map::new();
        for (k, p) in r.parameters.iter().enumerate() {
            let list: Vec<Value> = (0..r.times.len())
                .map(|t| {
                    value(o, k, t)
                        .filter(|v| v.is_finite())
                        .map(|v| json!(v))
                        .unwrap_or(Value::Null)
                })
                .collect();
            per.insert(p.clone(), Value::Array(list));
        }
        sens.insert(r.outputs[o].clone(), Value::Object(per));
    }
    json!({
        "times": r.times,
        "sensitivities": sens,
        "normalized": normalized,
        "ranking": r.ranking(chosen).iter().map(|(p, v)| json!({ "parameter": p, "influence": v })).collect::<Vec<_>>(),
    })
}

fn human_ranking(r: &Sensitivities, chosen: &[usize]) -> String {
    let mut out = String::from(
        "parameters by overall influence (root mean square of ∂ln y/∂ln p over the outputs shown and times):\n",
    );
    for (p, v) in r.ranking(chosen) {
        out.push_str(&format!("  {p:<16} {v:.4}\n"));
    }
    out
}

fn human(
    r: &Sensitivities,
    chosen: &[usize],
    normalized: bool,
    value: &dyn Fn(usize, usize, usize) -> Option<f64>,
) -> String {
    let last = r.times.len().saturating_sub(1);
    let kind = if normalized {
        "normalised ∂ln y/∂ln p"
    } else {
        "∂y/∂p"
    };
    let mut out = format!(
        "sensitivities ({kind}) at t = {}:\n",
        r.times.get(last).copied().unwrap_or(0.0)
    );
    let width = r
        .parameters
        .iter()
        .map(|p| p.len())
        .max()
        .unwrap_or(4)
        .max(12);
    out.push_str(&format!("  {:<14}", "output"));
    for p in &r.parameters {
        out.push_str(&format!(" {p:>width$}"));
    }
    out.push('\n');
    for &o in chosen {
        out.push_str(&format!("  {:<14}", r.outputs[o]));
        for k in 0..r.parameters.len() {
            let text = value(o, k, last)
                .map(|v| format!("{v:.6e}"))
                .unwrap_or_else(|| "undefined".into());
            out.push_str(&format!(" {text:>width$}"));
        }
        out.push('\n');
    }
    out.push('\n');
    out.push_str(&human_ranking(r, chosen));
    out
}
