//! `ratewright sample FILE --volume V`: stochastic runs of molecule counts,
//! exact or tau-leaping, as an ensemble with statistics and histograms.
//!
//! Output shapes (CLI.md, second round): `-o x.csv` writes one row per run
//! and output time, `run,t,<species counts>`; with `--stats`, one row per
//! output time, `t,<NAME_mean,NAME_sd,NAME_q05,NAME_q95 for each species>`.
//! Runs are numbered from 1; run r with seed s is the same sample path
//! whatever `--jobs` is. Everything is computed before anything is
//! written, so an interrupted or failed command leaves no output.

use super::Format;
use super::common::{self, report_failure, usage_error_as};
use crate::model::Model;
use crate::stochastic::{self, Ensemble, Method, Network, Settings, Statistics};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// The most worker threads started, whatever `--jobs` asks for.
const MAX_JOBS: usize = 256;
/// The most count cells (runs × output times × species) held in memory:
/// 50 million counts are 400 MB.
const MAX_CELLS: u128 = 50_000_000;

#[derive(clap::ValueEnum, Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum MethodArg {
    /// Every reaction event (direct or next-reaction method by size).
    #[default]
    Exact,
    /// Tau-leaping (Cao–Gillespie–Petzold step size), exact steps where counts are low.
    Leap,
}

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// The reaction volume, with a unit: L, mL, uL, nL, pL or fL (`--volume 1 pL`).
    #[arg(long, value_name = "V")]
    pub volume: Option<String>,
    /// Number of runs.
    #[arg(long, value_name = "N", default_value_t = 100)]
    pub runs: u64,
    /// Seed of the random streams (run r of seed s is always the same path).
    #[arg(long, value_name = "S", default_value_t = 1)]
    pub seed: u64,
    /// Exact runs or tau-leaping.
    #[arg(long, value_enum, default_value_t = MethodArg::Exact)]
    pub method: MethodArg,
    /// End time, with an optional unit (`20 min`); default as for `run`.
    #[arg(long, value_name = "TIME")]
    pub until: Option<String>,
    /// Number of evenly spaced output times from 0 to the end time (default 101).
    #[arg(long, value_name = "N", conflicts_with = "times")]
    pub points: Option<usize>,
    /// Output at exactly these times (comma-separated, units allowed).
    #[arg(long, value_name = "T1,T2,..", conflicts_with = "until")]
    pub times: Option<String>,
    /// Write statistics per output time (mean, sd, 5 % and 95 % quantiles) instead of every run.
    #[arg(long)]
    pub stats: bool,
    /// Write the runs (or, with --stats, the statistics) to a .csv file.
    #[arg(short = 'o', long = "output", value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Worker threads (default and 0: one per core).
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Histogram of the counts at this time (units allowed).
    #[arg(long, value_name = "TIME")]
    pub hist: Option<String>,
    /// Report for people (default) or as JSON on standard output.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    pub format: Format,
    /// Draw the mean with a 5–95 % band and a few runs (or, with --hist, the histogram) to .svg or .png.
    #[arg(long, value_name = "PATH")]
    pub plot: Option<PathBuf>,
    /// Override a param, initial value, fixed species or total (`S=5mM`); repeatable.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
}

/// The output times asked for: `--times`, or `--points` from 0 to `--until`.
fn output_times(args: &Args, model: &Model) -> Result<Vec<f64>, String> {
    let units = model.units;
    if let Some(list) = &args.times {
        let mut v = Vec::new();
        for part in list.split(',').map(str::trim).filter(|p| !p.is_empty()) {
            v.push(common::parse_time(part, units).map_err(|e| format!("--times: {e}"))?);
        }
        if v.is_empty() {
            return Err("--times: no times given".into());
        }
        if v.iter().any(|t| !(t.is_finite() && *t >= 0.0)) {
            return Err(
                "--times: times must be finite and not negative (runs start at t = 0)".into(),
            );
        }
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
        None => match crate::sim::Prepared::full(model) {
            Ok(p) => crate::sim::default_until(&p.model, &p.system),
            Err(_) => crate::sim::nice_ceiling(20.0),
        },
    };
    if !(until.is_finite() && until > 0.0) {
        return Err("--until: the end time must be a positive finite number".into());
    }
    let points = args.points.unwrap_or(101);
    if points == 0 || points > 10_000_000 {
        return Err("--points: give between 1 and 10,000,000 output times".into());
    }
    Ok(crate::sim::linear_times(until, points))
}

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == Format::Json;
    let usage = |m: String| usage_error_as(json, m);
    // --volume, or else the file's `volume` (read once the model is loaded).
    let given_litres = match &args.volume {
        Some(text) => match stochastic::parse_volume(text) {
            Ok(v) => Some(v),
            Err(e) => return usage(format!("--volume: {e}")),
        },
        None => None,
    };
    if args.runs == 0 || args.runs > 10_000_000 {
        return usage("--runs: give between 1 and 10,000,000 runs".into());
    }
    if let Some(path) = &args.output {
        let is_csv = path
            .extension()
            .and_then(|e| e.to_str())
            .is_some_and(|e| e.eq_ignore_ascii_case("csv"));
        if !is_csv && path.as_os_str() != "-" {
            return usage(format!(
                "-o {}: the output must end in .csv",
                path.display()
            ));
        }
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
    // `-o -` puts the table on standard output, so the report for people
    // goes to standard error there, and a JSON report cannot share it.
    let table_on_stdout =
        args.output.is_some() && matches!(sinks.first(), Some(super::output::Sink::Stdout));
    if table_on_stdout && json {
        return usage(
            "-o - and --format json both write to standard output; give -o a file".into(),
        );
    }
    let (model, sources) = match super::run::model_with_overrides(&args.file, &args.set, json) {
        Ok(m) => m,
        Err(code) => return code,
    };
    let Some(litres) = given_litres.or(model.volume_litres()) else {
        return usage(
            "sample needs the reaction volume to turn concentrations into molecule counts: declare `volume` in the file or give --volume V with a unit (L, mL, uL, nL, pL or fL)".into(),
        );
    };
    let inputs: Vec<PathBuf> = sources.files().iter().map(|f| f.path.clone()).collect();
    for path in &out_paths {
        if let Err(e) = common::refuse_input_overwrite(path, &inputs) {
            return usage(e);
        }
    }
    let times = match output_times(args, &model) {
        Ok(t) => t,
        Err(e) => return usage(e),
    };
    let hist_time = match &args.hist {
        None => None,
        Some(text) => match common::parse_time(text, model.units) {
            Ok(t) if t.is_finite() && t >= 0.0 => Some(t),
            Ok(_) => return usage("--hist: the time must be finite and not negative".into()),
            Err(e) => return usage(format!("--hist: {e}")),
        },
    };
    // The histogram's time is simulated with the output times but written
    // only in the histogram, so the CSV's rows are exactly those asked for.
    let mut run_times = times.clone();
    if let Some(h) = hist_time
        && !run_times.contains(&h)
    {
        run_times.push(h);
        run_times.sort_by(f64::total_cmp);
    }
    let cells = u128::from(args.runs) * run_times.len() as u128 * model.species.len() as u128;
    if cells > MAX_CELLS {
        return usage(format!(
            "{} runs × {} output times × {} species are {cells} counts, more than the {MAX_CELLS} held in memory; ask for fewer runs or output times",
            args.runs,
            run_times.len(),
            model.species.len()
        ));
    }
    let (net, warnings) = match stochastic::prepare(&model, litres) {
        Ok(n) => n,
        Err(errors) => {
            let diags: Vec<_> = errors.iter().map(|e| e.to_diagnostic()).collect();
            return report_failure(&diags, &sources, json, common::EXIT_MODEL);
        }
    };
    if !json {
        common::print_diagnostics(&warnings, &sources);
    }
    let settings = Settings {
        method: match args.method {
            MethodArg::Exact => Method::Exact,
            MethodArg::Leap => Method::Leap,
        },
        runs: args.runs,
        seed: args.seed,
        times: run_times.clone(),
    };
    let bar = if std::io::stderr().is_terminal() {
        let b = indicatif::ProgressBar::new(args.runs);
        b.set_style(
            indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} runs, {eta} left")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    let workers = args
        .jobs
        .unwrap_or(0)
        .min(usize::try_from(args.runs).unwrap_or(usize::MAX))
        .min(MAX_JOBS);
    let pool = match rayon::ThreadPoolBuilder::new().num_threads(workers).build() {
        Ok(p) => p,
        Err(e) => return usage(format!("--jobs: {e}")),
    };
    let result = pool.install(|| stochastic::sample(&net, &settings, &|| bar.inc(1)));
    bar.finish_and_clear();
    let ensemble = match result {
        Ok(e) => e,
        Err(e) => {
            return report_failure(&[e.to_diagnostic()], &sources, json, common::EXIT_MODEL);
        }
    };
    let shown: Vec<usize> = (0..run_times.len())
        .filter(|k| times.contains(&run_times[*k]))
        .collect();
    let hist_index = hist_time.and_then(|h| run_times.iter().position(|t| *t == h));
    let stats = ensemble.statistics();

    let mut staged = super::output::Staged::new();
    let mut sink_index = 0;
    if args.output.is_some() {
        let text = if args.stats {
            stats_csv(&ensemble, &stats, &shown)
        } else {
            runs_csv(&ensemble, &shown)
        };
        if let Err(e) = staged.bytes(&sinks[sink_index], text.as_bytes()) {
            return common::run_error(format!("[E0803] {e}"));
        }
        sink_index += 1;
    }
    if args.plot.is_some() {
        let title = model.name.clone().unwrap_or_else(|| {
            args.file
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default()
        });
        let drawn = match hist_index {
            Some(h) => super::plot::draw_bars(
                &mut staged,
                &sinks[sink_index],
                &histogram_plot(&ensemble, h, title),
            ),
            None => super::plot::draw_bands(
                &mut staged,
                &sinks[sink_index],
                &band_plot(&model, &ensemble, &stats, &shown, title),
            ),
        };
        if let Err(e) = drawn {
            return common::run_error(format!("[E0803] {e}"));
        }
    }
    if let Err(e) = staged.commit() {
        return common::run_error(format!("[E0803] {e}"));
    }
    if let Some(path) = args.output.as_ref().filter(|_| !table_on_stdout) {
        let rows = if args.stats {
            shown.len()
        } else {
            shown.len() * ensemble.runs
        };
        common::write_stderr(format_args!(
            "wrote {} to {}\n",
            common::count_of(rows, "row", "rows"),
            path.display()
        ));
    }
    let report = if json {
        let warnings_json: Vec<serde_json::Value> = warnings
            .iter()
            .map(|d| crate::diagnostics::to_json_value(d, &sources))
            .collect();
        match serde_json::to_string_pretty(&json_report(
            &net,
            &ensemble,
            &stats,
            &shown,
            hist_index,
            args,
            warnings_json,
        )) {
            Ok(s) => s + "\n",
            Err(e) => return common::run_error(format!("cannot encode JSON: {e}")),
        }
    } else {
        human_report(&net, &ensemble, &stats, &shown, hist_index, args)
    };
    if table_on_stdout {
        common::write_stderr(format_args!("{report}"));
    } else if let Err(failed) = common::write_stdout(&report) {
        return failed;
    }
    ExitCode::SUCCESS
}

/// Shortest text that reads back as the same f64.
fn number(v: f64) -> String {
    format!("{v:?}")
}

fn runs_csv(ens: &Ensemble, shown: &[usize]) -> String {
    let mut s = String::with_capacity(ens.runs * shown.len() * (ens.species.len() + 2) * 6);
    s.push_str("run,t");
    for name in &ens.species {
        s.push(',');
        s.push_str(name);
    }
    s.push('\n');
    for r in 0..ens.runs {
        for &k in shown {
            s.push_str(&(r + 1).to_string());
            s.push(',');
            s.push_str(&number(ens.times[k]));
            for c in ens.row(r, k) {
                s.push(',');
                s.push_str(&c.to_string());
            }
            s.push('\n');
        }
    }
    s
}

fn stats_csv(ens: &Ensemble, st: &Statistics, shown: &[usize]) -> String {
    let mut s = String::from("t");
    for name in &ens.species {
        for part in ["mean", "sd", "q05", "q95"] {
            s.push_str(&format!(",{name}_{part}"));
        }
    }
    s.push('\n');
    for &k in shown {
        s.push_str(&number(ens.times[k]));
        for i in 0..ens.species.len() {
            for v in [st.mean[k][i], st.sd[k][i], st.q05[k][i], st.q95[k][i]] {
                s.push(',');
                s.push_str(&number(v));
            }
        }
        s.push('\n');
    }
    s
}

/// Bins of a histogram for people and figures: every count while the range
/// is at most 40 wide, else 40 bins of equal whole-number width.
fn bins(hist: &[(i64, u64)]) -> (i64, i64, Vec<u64>) {
    let (lo, hi) = match (hist.first(), hist.last()) {
        (Some(a), Some(b)) => (a.0, b.0),
        _ => return (0, 1, Vec::new()),
    };
    let width = ((hi - lo + 1) as f64 / 40.0).ceil().max(1.0) as i64;
    let n = ((hi - lo) / width + 1) as usize;
    let mut v = vec![0; n];
    for &(c, runs) in hist {
        v[((c - lo) / width) as usize] += runs;
    }
    (lo, width, v)
}

fn histogram_plot(ens: &Ensemble, time: usize, title: String) -> super::plot::BarPlot {
    let all: Vec<Vec<(i64, u64)>> = (0..ens.species.len())
        .map(|i| stochastic::histogram(ens, time, i))
        .collect();
    let lo = all
        .iter()
        .filter_map(|h| h.first())
        .map(|h| h.0)
        .min()
        .unwrap_or(0);
    let hi = all
        .iter()
        .filter_map(|h| h.last())
        .map(|h| h.0)
        .max()
        .unwrap_or(0);
    let (_, width, _) = bins(&[(lo, 0), (hi, 0)]);
    let nbins = ((hi - lo) / width + 1) as usize;
    let series = ens
        .species
        .iter()
        .zip(&all)
        .map(|(name, h)| {
            let mut v = vec![0.0; nbins];
            for &(c, runs) in h {
                v[((c - lo) / width) as usize] += runs as f64 / ens.runs as f64;
            }
            (name.clone(), v)
        })
        .collect();
    super::plot::BarPlot {
        title: format!("{title}: counts at t = {}", number(ens.times[time])),
        x_label: if width == 1 {
            "molecules".into()
        } else {
            format!("molecules (bins of {width})")
        },
        y_label: "fraction of runs".into(),
        edges: (0..nbins)
            .map(|b| (lo + b as i64 * width) as f64 - 0.5)
            .collect(),
        width: width as f64,
        series,
    }
}

fn band_plot(
    model: &Model,
    ens: &Ensemble,
    st: &Statistics,
    shown: &[usize],
    title: String,
) -> super::plot::BandPlot {
    let species: Vec<usize> = (0..ens.species.len()).take(8).collect();
    let col = |table: &Vec<Vec<f64>>, i: usize| shown.iter().map(|&k| table[k][i]).collect();
    super::plot::BandPlot {
        title: format!("{title}: mean, 5–95 % of {} runs", ens.runs),
        x_label: format!("time ({})", model.units.time.symbol()),
        y_label: "molecules".into(),
        x: shown.iter().map(|&k| ens.times[k]).collect(),
        bands: species
            .iter()
            .map(|&i| super::plot::Band {
                name: ens.species[i].clone(),
                line: col(&st.mean, i),
                low: col(&st.q05, i),
                high: col(&st.q95, i),
            })
            .collect(),
        paths: species
            .iter()
            .flat_map(|&i| {
                (0..ens.runs.min(3)).map(move |r| {
                    (
                        i,
                        shown
                            .iter()
                            .map(|&k| ens.row(r, k)[i] as f64)
                            .collect::<Vec<f64>>(),
                    )
                })
            })
            .collect(),
    }
}

fn method_text(ens: &Ensemble) -> String {
    match ens.method {
        Method::Exact => format!("exact ({})", ens.algorithm.name()),
        Method::Leap => "tau-leaping".to_string(),
    }
}

fn human_report(
    net: &Network,
    ens: &Ensemble,
    st: &Statistics,
    shown: &[usize],
    hist: Option<usize>,
    args: &Args,
) -> String {
    let units = net.model.units;
    let mut out = format!(
        "{} of {} ({} runs, seed {}), volume {} L: {} molecules per {}\n",
        method_text(ens),
        args.file.display(),
        ens.runs,
        args.seed,
        format_g(net.litres),
        format_g(net.omega),
        units.concentration.symbol()
    );
    let start: Vec<String> = net
        .model
        .species
        .iter()
        .zip(&net.initial)
        .map(|(s, n)| format!("{} = {n}", s.name))
        .collect();
    out.push_str(&format!("start counts: {}\n", start.join(", ")));
    if args.output.is_none() {
        let n = shown.len();
        let picks: Vec<usize> = if n <= 25 {
            shown.to_vec()
        } else {
            let mut v: Vec<usize> = (0..21).map(|k| shown[(k * (n - 1) + 10) / 20]).collect();
            v.dedup();
            v
        };
        let mut cells: Vec<Vec<String>> = Vec::new();
        let mut header = vec![format!("t ({})", units.time.symbol())];
        for name in &ens.species {
            header.push(format!("{name} mean"));
            header.push(format!("{name} sd"));
        }
        cells.push(header);
        for &k in &picks {
            let mut row = vec![format_g(ens.times[k])];
            for i in 0..ens.species.len() {
                row.push(format_g(st.mean[k][i]));
                row.push(format_g(st.sd[k][i]));
            }
            cells.push(row);
        }
        out.push_str(&table(&cells));
        if picks.len() < n {
            out.push_str(&format!(
                "({} of {n} output times; counts of molecules; write all with -o out.csv)\n",
                picks.len()
            ));
        }
    }
    if let Some(h) = hist {
        out.push_str(&format!(
            "counts at t = {} {} over {} runs:\n",
            format_g(ens.times[h]),
            units.time.symbol(),
            ens.runs
        ));
        for (i, name) in ens.species.iter().enumerate() {
            let (lo, width, v) = bins(&stochastic::histogram(ens, h, i));
            let mut cells = vec![vec![name.clone(), "runs".to_string()]];
            for (b, runs) in v.iter().enumerate() {
                let start = lo + b as i64 * width;
                let label = if width == 1 {
                    start.to_string()
                } else {
                    format!("{start}–{}", start + width - 1)
                };
                cells.push(vec![label, runs.to_string()]);
            }
            out.push_str(&table(&cells));
        }
    }
    out.push_str(&format!(
        "{} reaction events in all ({} per run)\n",
        ens.firings,
        format_g(ens.firings as f64 / ens.runs as f64)
    ));
    out
}

fn table(cells: &[Vec<String>]) -> String {
    let widths: Vec<usize> = (0..cells.first().map_or(0, Vec::len))
        .map(|k| {
            cells
                .iter()
                .map(|r| r[k].chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut out = String::new();
    for row in cells {
        let line: Vec<String> = row
            .iter()
            .zip(&widths)
            .map(|(c, w)| common::pad_start(c, *w))
            .collect();
        out.push_str(line.join("  ").trim_end());
        out.push('\n');
    }
    out
}

/// Six significant digits, without trailing zeros.
fn format_g(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let e = v.abs().log10().floor() as i32;
    if (-4..6).contains(&e) {
        let decimals = (5 - e).max(0) as usize;
        let s = format!("{v:.decimals$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        let text = format!("{v:.5e}");
        match text.split_once('e') {
            Some((m, e)) if m.contains('.') => {
                format!("{}e{e}", m.trim_end_matches('0').trim_end_matches('.'))
            }
            _ => text,
        }
    }
}

fn json_report(
    net: &Network,
    ens: &Ensemble,
    st: &Statistics,
    shown: &[usize],
    hist: Option<usize>,
    args: &Args,
    warnings: Vec<serde_json::Value>,
) -> serde_json::Value {
    use serde_json::{Map, Value, json};
    let col = |table: &Vec<Vec<f64>>, i: usize| -> Vec<f64> {
        shown.iter().map(|&k| table[k][i]).collect()
    };
    let statistics: Map<String, Value> = ens
        .species
        .iter()
        .enumerate()
        .map(|(i, name)| {
            (
                name.clone(),
                json!({
                    "mean": col(&st.mean, i),
                    "sd": col(&st.sd, i),
                    "q05": col(&st.q05, i),
                    "q95": col(&st.q95, i),
                }),
            )
        })
        .collect();
    let obs = ens.observable_statistics(net);
    let observables: Map<String, Value> = net
        .model
        .observables
        .iter()
        .enumerate()
        .map(|(i, o)| {
            (
                o.name.clone(),
                json!({
                    "mean": col(&obs.mean, i),
                    "sd": col(&obs.sd, i),
                    "q05": col(&obs.q05, i),
                    "q95": col(&obs.q95, i),
                }),
            )
        })
        .collect();
    let start: Map<String, Value> = net
        .model
        .species
        .iter()
        .zip(&net.initial)
        .map(|(s, n)| (s.name.clone(), json!(n)))
        .collect();
    let constants = net
        .stochastic_constants(&net.start_totals())
        .unwrap_or_default();
    let reactions: Vec<Value> = net
        .reactions
        .iter()
        .zip(constants)
        .map(|(r, c)| {
            json!({
                "step": net.model.steps[r.step].name,
                "direction": if r.reverse { "reverse" } else { "forward" },
                "order": r.order,
                "stochastic_constant": c,
                "propensity": if c.is_some() { "mass action" } else { "law" },
            })
        })
        .collect();
    let mut doc = json!({
        "method": ens.method,
        "algorithm": ens.algorithm,
        "runs": ens.runs,
        "seed": args.seed,
        "volume_litres": net.litres,
        "molecules_per_unit": net.omega,
        "units": {
            "concentration": net.model.units.concentration.symbol(),
            "time": net.model.units.time.symbol(),
        },
        "start_counts": start,
        "reactions": reactions,
        "t": shown.iter().map(|&k| ens.times[k]).collect::<Vec<f64>>(),
        "statistics": statistics,
        "observables": observables,
        "reaction_events": ens.firings,
        "warnings": warnings,
    });
    if let Some(h) = hist {
        let counts: Map<String, Value> = ens
            .species
            .iter()
            .enumerate()
            .map(|(i, name)| {
                let pairs: Vec<Value> = stochastic::histogram(ens, h, i)
                    .into_iter()
                    .map(|(c, n)| json!([c, n]))
                    .collect();
                (name.clone(), Value::Array(pairs))
            })
            .collect();
        doc["histogram"] = json!({ "t": ens.times[h], "counts": counts });
    }
    doc
}
