//! `ratewright run FILE`: simulate the time course and write it as a table
//! (stdout), CSV, TSV or JSON, and optionally a plot.
//!
//! Output shape (CLI.md, relied on by other tools): header
//! `t,<species in declaration order>,<observables>`, one row per output
//! time, values in the model's default units.

use super::common::{self, load_model, run_error, usage_error};
use crate::diagnostics::SourceMap;
use crate::model::Model;
use crate::sim::{self, Method, Prepared, Settings, Trajectory};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(clap::ValueEnum, Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum MethodArg {
    /// Variable-order BDF (stiff; the default).
    #[default]
    Bdf,
    /// ESDIRK 3(4), a one-step stiff method.
    Esdirk,
}

impl From<MethodArg> for Method {
    fn from(m: MethodArg) -> Method {
        match m {
            MethodArg::Bdf => Method::Bdf,
            MethodArg::Esdirk => Method::Esdirk,
        }
    }
}

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// End time, with an optional unit (`20 min`); default: see docs/simulation.md.
    #[arg(long, value_name = "TIME")]
    pub until: Option<String>,
    /// Number of evenly spaced output times from 0 to the end time.
    #[arg(long, value_name = "N", conflicts_with_all = ["every", "times"])]
    pub points: Option<usize>,
    /// Output every TIME from 0 to the end time.
    #[arg(long, value_name = "TIME", conflicts_with = "times")]
    pub every: Option<String>,
    /// Output at exactly these times (comma-separated, units allowed).
    #[arg(long, value_name = "T1,T2,..", conflicts_with = "until")]
    pub times: Option<String>,
    /// Override a param, initial value, fixed species or total (`S=5mM`); repeatable.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Integrate every species (the default).
    #[arg(long, conflicts_with = "reduced")]
    pub full: bool,
    /// Integrate only the independent species; the dependent ones follow from the conservation laws.
    #[arg(long)]
    pub reduced: bool,
    /// Integration method.
    #[arg(long, value_enum, default_value_t = MethodArg::Bdf)]
    pub method: MethodArg,
    /// Relative tolerance.
    #[arg(long, default_value_t = 1e-6)]
    pub rtol: f64,
    /// Absolute tolerance (model concentration units).
    #[arg(long, default_value_t = 1e-10)]
    pub atol: f64,
    /// Write the time course to a .csv, .tsv or .json file.
    #[arg(short = 'o', long = "output", value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Draw the time course to an .svg or .png file.
    #[arg(long, value_name = "PATH")]
    pub plot: Option<PathBuf>,
    /// Columns to show in the table and plot (species or observables, comma-separated).
    #[arg(long, value_name = "A,B,..")]
    pub show: Option<String>,
    /// Logarithmic time axis in the plot.
    #[arg(long)]
    pub log_time: bool,
    /// Logarithmic value axis in the plot.
    #[arg(long)]
    pub log_values: bool,
    /// Add each species' amount (concentration × volume) as a column `amount(NAME)`; needs a `volume`.
    #[arg(long)]
    pub amounts: bool,
}

/// Loads the model (diagnostics as JSON when `json`) and applies `--set`
/// overrides; the sources are the files read.
pub(crate) fn model_with_overrides(
    file: &Path,
    set: &[String],
    json: bool,
) -> Result<(Model, SourceMap), ExitCode> {
    let (model, sources) = load_model(file, json)?;
    let mut overrides = Vec::new();
    for s in set {
        match common::parse_assignment(s, &model) {
            Ok(pair) => overrides.push(pair),
            Err(e) => return Err(common::usage_error_as(json, format!("--set {s}: {e}"))),
        }
    }
    if overrides.is_empty() {
        return Ok((model, sources));
    }
    model
        .with_overrides(&overrides)
        .map(|m| (m, sources))
        .map_err(|e| common::usage_error_as(json, format!("--set: {e}")))
}

/// Prints a simulation failure with its stable code; exit code 1.
pub(crate) fn sim_failure(e: &sim::SimError) -> ExitCode {
    run_error(format!("[{}] {e}", e.code().as_str()))
}

fn output_times(args: &Args, model: &Model, prepared: &Prepared) -> Result<Vec<f64>, String> {
    let units = model.units;
    if let Some(list) = &args.times {
        let mut v = Vec::new();
        for part in list.split(',').map(str::trim).filter(|p| !p.is_empty()) {
            v.push(common::parse_time(part, units).map_err(|e| format!("--times: {e}"))?);
        }
        if v.is_empty() {
            return Err("--times: no times given".into());
        }
        if v.iter().any(|t| *t < 0.0) {
            return Err("--times: times must not be negative (the run starts at t = 0)".into());
        }
        // The rows are exactly the times asked for, in that order, so a
        // list out of order is refused rather than silently reordered.
        if let Some(w) = v.windows(2).find(|w| w[1] < w[0]) {
            return Err(format!(
                "--times: give the times in increasing order ({} comes after {})",
                w[1], w[0]
            ));
        }
        return Ok(v);
    }
    let until = match &args.until {
        Some(u) => common::parse_time(u, units).map_err(|e| format!("--until: {e}"))?,
        None => sim::default_until(&prepared.model, &prepared.system),
    };
    if until.is_nan() || until <= 0.0 {
        return Err("--until: the end time must be positive".into());
    }
    if let Some(every) = &args.every {
        let dt = common::parse_time(every, units).map_err(|e| format!("--every: {e}"))?;
        if dt.is_nan() || dt <= 0.0 {
            return Err("--every: the interval must be positive".into());
        }
        // Counted in f64: the count may not fit an integer (1e-300 s over
        // 100 s), and a cast would saturate to a meaningless figure.
        let rows = (until / dt * (1.0 + 1e-12)).floor();
        if rows > 10_000_000.0 {
            let count = if rows.is_finite() {
                format!("about {rows:.1e} output rows")
            } else {
                "more output rows than can be counted".to_string()
            };
            return Err(format!(
                "--every: the interval gives {count}, and at most 10,000,000 can be written; give a longer interval"
            ));
        }
        let n = rows as usize;
        let mut v: Vec<f64> = (0..=n).map(|i| i as f64 * dt).collect();
        if v.last().is_some_and(|&t| (until - t) > 1e-9 * until) {
            v.push(until);
        }
        return Ok(v);
    }
    let points = args.points.unwrap_or(101);
    if points == 0 || points > 10_000_000 {
        return Err("--points: give between 1 and 10,000,000 output times".into());
    }
    Ok(sim::linear_times(until, points))
}

pub fn run(args: &Args) -> ExitCode {
    if args.rtol.is_nan()
        || args.rtol <= 0.0
        || args.rtol >= 1.0
        || !args.atol.is_finite()
        || args.atol <= 0.0
    {
        return usage_error(
            "--rtol must lie in (0, 1) and --atol must be a positive finite number",
        );
    }
    // Output paths are checked before the run: a wrong extension or an
    // input file as output is a usage error, found before any work is done.
    if let Some(path) = &args.output
        && let Err(e) = table_format(path)
    {
        return usage_error(e);
    }
    if let Some(path) = &args.plot
        && let Err(e) = super::plot::check_figure_path(path)
    {
        return usage_error(e);
    }
    let out_paths: Vec<&Path> = args
        .output
        .iter()
        .chain(&args.plot)
        .map(PathBuf::as_path)
        .collect();
    let sinks = match super::output::sinks_for(&out_paths, &[]) {
        Ok(s) => s,
        Err(e) => return usage_error(e),
    };
    let (table_sink, plot_sink) = match (&args.output, &args.plot) {
        (Some(_), Some(_)) => (Some(&sinks[0]), Some(&sinks[1])),
        (Some(_), None) => (Some(&sinks[0]), None),
        (None, Some(_)) => (None, Some(&sinks[0])),
        (None, None) => (None, None),
    };
    let (model, sources) = match model_with_overrides(&args.file, &args.set, false) {
        Ok(m) => m,
        Err(code) => return code,
    };
    let inputs: Vec<PathBuf> = sources.files().iter().map(|f| f.path.clone()).collect();
    for path in args.output.iter().chain(&args.plot) {
        if let Err(e) = common::refuse_input_overwrite(path, &inputs) {
            return usage_error(e);
        }
    }
    let prepared = if args.reduced {
        match Prepared::reduced(&model) {
            Ok(p) => p,
            Err(d) => return run_error(format!("[{}] {}", d.code.as_str(), d.message)),
        }
    } else {
        match Prepared::full(&model) {
            Ok(p) => p,
            Err(e) => return sim_failure(&e),
        }
    };
    let times = match output_times(args, &model, &prepared) {
        Ok(t) => t,
        Err(e) => return usage_error(e),
    };
    let columns = sim::column_names(&prepared.model);
    let shown: Vec<usize> = match &args.show {
        None => (0..columns.len()).collect(),
        Some(list) => {
            let mut v = Vec::new();
            for name in list.split(',').map(str::trim).filter(|n| !n.is_empty()) {
                match columns.iter().position(|c| c == name) {
                    Some(i) => v.push(i),
                    None => {
                        let hint = crate::diagnostics::did_you_mean(
                            name,
                            columns.iter().map(String::as_str),
                        )
                        .map(|s| format!(" (did you mean `{s}`?)"))
                        .unwrap_or_default();
                        return usage_error(format!(
                            "--show: no species or observable named `{name}`{hint}"
                        ));
                    }
                }
            }
            v
        }
    };
    let settings = Settings {
        method: args.method.into(),
        rtol: args.rtol,
        atol: args.atol,
        // A grid the user fixed is kept exactly; otherwise each event's
        // time appears just before and just after it.
        event_rows: args.times.is_none(),
        ..Settings::default()
    };
    if args.amounts && prepared.model.volume.is_none() {
        return usage_error(
            "--amounts: the model declares no `volume`, so amounts are not defined",
        );
    }
    let mut trajectory = match prepared.simulate(&settings, &times) {
        Ok(t) => t,
        Err(e) => return sim_failure(&e),
    };
    let mut columns = columns;
    sim::add_volume_columns(&prepared.model, &mut columns, &mut trajectory, args.amounts);
    // Species stay finite (the solver fails otherwise), but an observable
    // such as A / B with B = 0 does not; CSV writes it as `inf` or `NaN`
    // and JSON as null, so say where it first happened.
    let nspecies = prepared.model.species.len();
    if let Some((t, k, v)) = trajectory
        .times
        .iter()
        .zip(&trajectory.rows)
        .find_map(|(t, row)| {
            row.iter()
                .enumerate()
                .skip(nspecies)
                .find(|(_, v)| !v.is_finite())
                .map(|(k, v)| (*t, k, *v))
        })
    {
        stderr_line!(
            "warning: observable `{}` is {v} at t = {t} (first of its non-finite values; written as {} in CSV/TSV and null in JSON)",
            prepared.model.observables[k - nspecies].name,
            v
        );
    }

    // Render everything first: nothing is written unless all outputs are ready.
    let file_output = match &args.output {
        None => None,
        Some(path) => match render_file(path, &prepared.model, &columns, &trajectory) {
            Ok(bytes) => Some((path, bytes)),
            Err(e) => return usage_error(e),
        },
    };
    let mut staged = super::output::Staged::new();
    if let Some((_, bytes)) = &file_output
        && let Some(sink) = table_sink
        && let Err(e) = staged.bytes(sink, bytes)
    {
        return run_error(format!("[E0803] {e}"));
    }
    if let Some(plot_sink) = plot_sink {
        let spec = super::plot::LinePlot {
            title: prepared
                .model
                .name
                .clone()
                .unwrap_or_else(|| file_stem(&args.file)),
            x_label: format!("time ({})", prepared.model.units.time.symbol()),
            y_label: y_label(&prepared.model, &shown),
            x: trajectory.times.clone(),
            series: shown
                .iter()
                .map(|&c| {
                    (
                        columns[c].clone(),
                        trajectory.rows.iter().map(|r| r[c]).collect(),
                    )
                })
                .collect(),
            log_x: args.log_time,
            log_y: args.log_values,
        };
        if let Err(e) = super::plot::draw_lines(&mut staged, plot_sink, &spec) {
            return run_error(format!("[E0803] {e}"));
        }
    }
    if let Err(e) = staged.commit() {
        return run_error(format!("[E0803] {e}"));
    }
    if let Some((path, _)) = file_output {
        stderr_line!(
            "wrote {} to {}",
            common::count_of(trajectory.times.len(), "row", "rows"),
            path.display()
        );
    }
    if args.output.is_none()
        && let Err(failed) = common::write_stdout(&compact_table(
            &prepared.model,
            &columns,
            &shown,
            &trajectory,
        ))
    {
        return failed;
    }
    ExitCode::SUCCESS
}

fn file_stem(p: &Path) -> String {
    p.file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// The value axis label: the concentration unit when only species are shown.
fn y_label(model: &Model, shown: &[usize]) -> String {
    let nsp = model.species.len();
    if shown.iter().all(|&c| c < nsp) {
        format!("concentration ({})", model.units.concentration.symbol())
    } else if shown.iter().all(|&c| c >= nsp) {
        "value".to_string()
    } else {
        format!(
            "concentration ({}) / value",
            model.units.concentration.symbol()
        )
    }
}

/// CSV, TSV or JSON by the file's extension.
fn render_file(
    path: &Path,
    model: &Model,
    columns: &[String],
    tr: &Trajectory,
) -> Result<Vec<u8>, String> {
    match table_format(path)? {
        TableFormat::Csv => Ok(delimited(columns, tr, ',').into_bytes()),
        TableFormat::Tsv => Ok(delimited(columns, tr, '\t').into_bytes()),
        TableFormat::Json => {
            let nsp = model.species.len();
            let col = |c: usize| tr.rows.iter().map(|r| r[c]).collect::<Vec<f64>>();
            let species: serde_json::Map<String, serde_json::Value> = (0..nsp)
                .map(|c| (columns[c].clone(), serde_json::json!(col(c))))
                .collect();
            let observables: serde_json::Map<String, serde_json::Value> = (nsp..columns.len())
                .map(|c| (columns[c].clone(), serde_json::json!(col(c))))
                .collect();
            let v = serde_json::json!({
                "units": { "concentration": model.units.concentration.symbol(), "time": model.units.time.symbol() },
                "t": tr.times,
                "species": species,
                "observables": observables,
            });
            serde_json::to_vec_pretty(&v).map_err(|e| format!("cannot encode JSON: {e}"))
        }
    }
}

enum TableFormat {
    Csv,
    Tsv,
    Json,
}

/// The format `-o` asks for, by the file's extension.
fn table_format(path: &Path) -> Result<TableFormat, String> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .unwrap_or("")
        .to_ascii_lowercase();
    match ext.as_str() {
        "csv" => Ok(TableFormat::Csv),
        "tsv" => Ok(TableFormat::Tsv),
        "json" => Ok(TableFormat::Json),
        _ => Err(format!(
            "-o {}: the output must end in .csv, .tsv or .json",
            path.display()
        )),
    }
}

/// Shortest text that reads back as the same f64.
fn number(v: f64) -> String {
    format!("{v:?}")
}

fn delimited(columns: &[String], tr: &Trajectory, sep: char) -> String {
    let mut s = String::with_capacity(tr.rows.len() * (columns.len() + 1) * 12);
    s.push('t');
    for c in columns {
        s.push(sep);
        s.push_str(c);
    }
    s.push('\n');
    for (t, row) in tr.times.iter().zip(&tr.rows) {
        s.push_str(&number(*t));
        for v in row {
            s.push(sep);
            s.push_str(&number(*v));
        }
        s.push('\n');
    }
    s
}

/// A table for the terminal: at most about 21 rows (evenly chosen, first
/// and last always), values to 6 significant digits.
fn compact_table(model: &Model, columns: &[String], shown: &[usize], tr: &Trajectory) -> String {
    let n = tr.times.len();
    let picks: Vec<usize> = if n <= 25 {
        (0..n).collect()
    } else {
        (0..21).map(|k| (k * (n - 1) + 10) / 20).collect::<Vec<_>>()
    };
    let mut picks = picks;
    picks.dedup();
    let t_head = format!("t ({})", model.units.time.symbol());
    let mut header = vec![t_head];
    header.extend(shown.iter().map(|&c| columns[c].clone()));
    let mut cells: Vec<Vec<String>> = vec![header];
    for &i in &picks {
        let t = tr.times[i];
        let t_text = if t != 0.0 && !(1e-3..1e6).contains(&t.abs()) {
            format!("{t:.4e}")
        } else {
            format!("{t:.6}")
                .trim_end_matches('0')
                .trim_end_matches('.')
                .to_string()
        };
        let mut row = vec![t_text];
        row.extend(shown.iter().map(|&c| format!("{:.6e}", tr.rows[i][c])));
        cells.push(row);
    }
    let widths: Vec<usize> = (0..cells[0].len())
        .map(|k| {
            cells
                .iter()
                .map(|r| r[k].chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut out = String::new();
    for row in &cells {
        let line: Vec<String> = row
            .iter()
            .zip(&widths)
            .map(|(c, w)| common::pad_start(c, *w))
            .collect();
        out.push_str(line.join("  ").trim_end());
        out.push('\n');
    }
    if picks.len() < n {
        out.push_str(&format!(
            "({} of {n} rows; concentrations in {}; write all with -o out.csv)\n",
            picks.len(),
            model.units.concentration.symbol()
        ));
    } else {
        out.push_str(&format!(
            "(concentrations in {})\n",
            model.units.concentration.symbol()
        ));
    }
    out
}
