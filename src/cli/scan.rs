//! `ratewright scan FILE`: vary one or two names over grids and measure an
//! expression at a time point or at the steady state. CSV out: one column
//! per varied name, then the measured value; a failed point leaves its value
//! empty and is reported on stderr.

use super::common::{self, run_error, usage_error};
use crate::sim::scan::{Axis, MeasureAt, Scan, check_axes, parse_axis, run_scan};

/// The most worker threads a scan starts, whatever `--jobs` asks for.
const MAX_JOBS: usize = 256;
use crate::sim::{Method, Settings};
use std::io::IsTerminal;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// A name to vary: `NAME=LO..HI[:N][:log]` (units allowed; N defaults to 21); give once or twice.
    #[arg(long, value_name = "NAME=LO..HI[:N][:log]", required = true)]
    pub vary: Vec<String>,
    /// What to measure: an expression over species, observables, params and totals.
    #[arg(long, value_name = "EXPR")]
    pub measure: String,
    /// Measure at this time (units allowed).
    #[arg(
        long,
        value_name = "TIME",
        conflicts_with = "steady",
        required_unless_present = "steady"
    )]
    pub at: Option<String>,
    /// Measure at the steady state.
    #[arg(long)]
    pub steady: bool,
    /// Follow the steady-state branch from the first value of --vary, each point from the last (pseudo-arclength continuation around folds), reporting folds and Hopf points; with --steady and one --vary.
    #[arg(long)]
    pub follow: bool,
    /// Override a param, initial value, fixed species or total for every point; repeatable.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Write the results as CSV (default: print them).
    #[arg(short = 'o', long = "output", value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Draw a line (one name varied) or heat map (two) to .svg or .png.
    #[arg(long, value_name = "PATH")]
    pub plot: Option<PathBuf>,
    /// Worker threads (default and 0: one per core; at most one per point
    /// and at most 256).
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Relative tolerance.
    #[arg(long, default_value_t = 1e-6)]
    pub rtol: f64,
    /// Absolute tolerance.
    #[arg(long, default_value_t = 1e-10)]
    pub atol: f64,
}

/// A name for the measured observable that the model does not use.
fn fresh_name(text: &str) -> String {
    let mut k = 0;
    loop {
        let name = if k == 0 {
            "scan_measure".to_string()
        } else {
            format!("scan_measure_{k}")
        };
        if !text.contains(&name) {
            return name;
        }
        k += 1;
    }
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

pub fn run(args: &Args) -> ExitCode {
    if args.vary.len() > 2 {
        return usage_error("--vary: give one or two names (a line or a heat map)");
    }
    if args.measure.contains(['\n', '#']) {
        return usage_error("--measure: give one expression on one line");
    }
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
    // Output paths are checked before any work (exit 2): a table must end
    // in .csv, a figure in .svg or .png, and no path may serve two outputs.
    if let Some(path) = &args.output
        && !path
            .extension()
            .and_then(|e| e.to_str())
            .is_some_and(|e| e.eq_ignore_ascii_case("csv"))
        && path.as_os_str() != "-"
        && !path.starts_with("/dev")
    {
        return usage_error(format!(
            "-o {}: the scan's table is CSV; name it with .csv",
            path.display()
        ));
    }
    if let Some(path) = &args.plot
        && let Err(e) = super::plot::check_figure_path(path)
    {
        return usage_error(e);
    }
    let out_paths: Vec<&std::path::Path> = args
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
    // The measured expression is parsed and resolved by the front end as an
    // observable appended to the model, so it follows the language exactly.
    // The model's own errors first, located in the file as written.
    let alone = crate::model::load_path(&args.file);
    if alone.model.is_none() || alone.diagnostics.iter().any(|d| d.is_error()) {
        common::print_diagnostics(&alone.diagnostics, &alone.sources);
        return ExitCode::from(
            if common::names_an_unreadable_argument(&alone.diagnostics) {
                common::EXIT_USAGE
            } else {
                common::EXIT_MODEL
            },
        );
    }
    let Some(main) = alone.sources.files().first() else {
        return ExitCode::from(common::EXIT_MODEL);
    };
    let text = main.text.clone();
    // Output paths are checked before any point is run: a path over an
    // input file or a figure of an unknown kind is a usage error.
    let inputs: Vec<PathBuf> = alone
        .sources
        .files()
        .iter()
        .map(|f| f.path.clone())
        .collect();
    for path in args.output.iter().chain(&args.plot) {
        if let Err(e) = common::refuse_input_overwrite(path, &inputs) {
            return usage_error(e);
        }
    }
    let measure_name = fresh_name(&text);
    let extended = format!("{text}\nobserve {measure_name} = {}\n", args.measure);
    // The file's text with the line added, over the disk (its `use` lines
    // read the same files).
    let extended_file = crate::model::source::Overlay {
        base: &crate::model::source::Disk,
        path: args.file.clone(),
        text: extended,
    };
    let loaded = crate::model::load_with(&extended_file, &args.file);
    let Some(base) = loaded
        .model
        .filter(|_| !loaded.diagnostics.iter().any(|d| d.is_error()))
    else {
        // Any error now is in the measured expression, which is a
        // command-line argument: a usage error, not a line of the file.
        let internal = format!("observable `{measure_name}`");
        let reasons: Vec<String> = loaded
            .diagnostics
            .iter()
            .filter(|d| d.is_error())
            .map(|d| {
                format!(
                    "[{}] {}",
                    d.code.as_str(),
                    d.message.replace(&internal, "the measured expression")
                )
            })
            .collect();
        return usage_error(format!(
            "--measure `{}`: {}",
            args.measure,
            reasons.join("; ")
        ));
    };
    let mut model = base;
    if !args.set.is_empty() {
        let mut overrides = Vec::new();
        for s in &args.set {
            match common::parse_assignment(s, &model) {
                Ok(p) => overrides.push(p),
                Err(e) => return usage_error(format!("--set {s}: {e}")),
            }
        }
        model = match model.with_overrides(&overrides) {
            Ok(m) => m,
            Err(e) => return usage_error(format!("--set: {e}")),
        };
    }
    let Some(obs) = model
        .observables
        .iter()
        .position(|o| o.name == measure_name)
    else {
        return run_error("the measured expression was lost while loading");
    };
    let column = model.species.len() + obs;
    let mut axes: Vec<Axis> = Vec::new();
    for v in &args.vary {
        match parse_axis(v, model.units) {
            Ok(a) => axes.push(a),
            Err(e) => return usage_error(format!("--vary {v}: {e}")),
        }
    }
    if let Err(e) = check_axes(&model, &axes) {
        return usage_error(format!("--vary: {e}"));
    }
    if axes.len() == 2 && axes[0].name == axes[1].name {
        return usage_error("--vary: the two names must differ");
    }
    let at = if args.steady {
        if observable_mentions_time(&model, obs) {
            return usage_error(format!(
                "--measure `{}`: the expression uses the time t, which has no value at a steady state; measure it --at a time instead",
                args.measure
            ));
        }
        MeasureAt::Steady
    } else {
        match args
            .at
            .as_deref()
            .map(|a| common::parse_time(a, model.units))
        {
            Some(Ok(t)) if t >= 0.0 => MeasureAt::Time(t),
            Some(Ok(_)) => return usage_error("--at: the time must not be negative"),
            Some(Err(e)) => return usage_error(format!("--at: {e}")),
            None => return usage_error("give --at TIME or --steady"),
        }
    };
    let settings = Settings {
        method: Method::Bdf,
        rtol: args.rtol,
        atol: args.atol,
        ..Settings::default()
    };
    if args.follow {
        if !args.steady {
            return usage_error("--follow follows steady states: give --steady, not --at");
        }
        if axes.len() != 1 {
            return usage_error(
                "--follow: vary exactly one name (the branch is followed along it)",
            );
        }
        return follow(
            args, &model, &axes[0], column, settings, table_sink, plot_sink,
        );
    }
    let total: usize = axes.iter().map(|a| a.values.len()).product();
    let bar = if std::io::stderr().is_terminal() {
        let b = indicatif::ProgressBar::new(total as u64);
        b.set_style(
            indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} points, {eta} left")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    let scan = Scan {
        model: &model,
        axes: &axes,
        column,
        at,
        settings,
    };
    // More workers than points do nothing but cost a thread each (and
    // thousands of threads take longer to start than the scan itself);
    // rayon reads 0 as one per core.
    let workers = args.jobs.unwrap_or(0).min(total).min(MAX_JOBS);
    let pool = match rayon::ThreadPoolBuilder::new().num_threads(workers).build() {
        Ok(p) => p,
        Err(e) => return usage_error(format!("--jobs: {e}")),
    };
    let result = pool.install(|| run_scan(&scan, &|| bar.inc(1)));
    bar.finish_and_clear();
    let result = match result {
        Ok(r) => r,
        Err(e) => return super::run::sim_failure(&e),
    };

    let failures: Vec<&crate::sim::SimError> = result
        .values
        .iter()
        .filter_map(|v| v.as_ref().err())
        .collect();
    if failures.len() == result.values.len() {
        return super::run::sim_failure(failures[0]);
    }
    let mut csv = String::new();
    let header: Vec<String> = axes
        .iter()
        .map(|a| csv_field(&a.name))
        .chain([csv_field(args.measure.trim())])
        .collect();
    csv.push_str(&header.join(","));
    csv.push('\n');
    for (p, v) in result.points.iter().zip(&result.values) {
        let mut fields: Vec<String> = p.iter().map(|x| format!("{x:?}")).collect();
        fields.push(match v {
            Ok(x) => format!("{x:?}"),
            Err(_) => String::new(),
        });
        csv.push_str(&fields.join(","));
        csv.push('\n');
    }
    let mut staged = super::output::Staged::new();
    if let Some(sink) = table_sink
        && let Err(e) = staged.bytes(sink, csv.as_bytes())
    {
        return run_error(format!("[E0803] {e}"));
    }
    if let Some(plot) = plot_sink {
        let value = |v: &Result<f64, crate::sim::SimError>| v.as_ref().copied().unwrap_or(f64::NAN);
        let where_ = match at {
            MeasureAt::Steady => "at steady state".to_string(),
            MeasureAt::Time(t) => format!("at t = {t} {}", model.units.time.symbol()),
        };
        let label = |a: &Axis| axis_label(&model, &a.name);
        let drawn = if axes.len() == 1 {
            super::plot::draw_lines(
                &mut staged,
                plot,
                &super::plot::LinePlot {
                    title: format!("{} {where_}", args.measure.trim()),
                    x_label: label(&axes[0]),
                    y_label: args.measure.trim().to_string(),
                    x: axes[0].values.clone(),
                    series: vec![(
                        args.measure.trim().to_string(),
                        result.values.iter().map(value).collect(),
                    )],
                    log_x: axes[0].log,
                    log_y: false,
                },
            )
        } else {
            let ny = axes[1].values.len();
            let values: Vec<Vec<f64>> = result
                .values
                .chunks(ny)
                .map(|row| row.iter().map(value).collect())
                .collect();
            super::plot::draw_heat_map(
                &mut staged,
                plot,
                &super::plot::HeatMap {
                    title: format!("{} {where_}", args.measure.trim()),
                    x_label: label(&axes[0]),
                    y_label: label(&axes[1]),
                    value_label: args.measure.trim().to_string(),
                    x: axes[0].values.clone(),
                    y: axes[1].values.clone(),
                    values,
                    log_x: axes[0].log,
                    log_y: axes[1].log,
                    y_names: Vec::new(),
                },
            )
        };
        if let Err(e) = drawn {
            return run_error(format!("[E0803] {e}"));
        }
    }
    if let Err(e) = staged.commit() {
        return run_error(format!("[E0803] {e}"));
    }
    match &args.output {
        Some(path) => {
            stderr_line!(
                "wrote {} to {}",
                super::common::count_of(result.points.len(), "point", "points"),
                path.display()
            );
        }
        None => {
            if let Err(failed) = super::common::write_stdout(&csv) {
                return failed;
            }
        }
    }
    if let Some(first) = failures.first() {
        stderr_line!(
            "warning: {} of {} points failed (left empty); the first: {first}",
            failures.len(),
            result.values.len()
        );
    }
    ExitCode::SUCCESS
}

/// `scan --steady --follow`: the branch as CSV (`NAME,MEASURE,stability,point`,
/// one row per branch point in order, a located fold or Hopf point as a row
/// of its own with `point` naming it), special points on stderr, and a
/// bifurcation diagram.
fn follow(
    args: &Args,
    model: &crate::model::Model,
    axis: &Axis,
    column: usize,
    settings: Settings,
    table_sink: Option<&super::output::Sink>,
    plot_sink: Option<&super::output::Sink>,
) -> ExitCode {
    use crate::sim::continuation::{Follow, follow_branch};
    use crate::sim::steady::Stability;
    let request = Follow {
        model,
        name: &axis.name,
        from: axis.values[0],
        to: *axis.values.last().unwrap_or(&axis.values[0]),
        points: axis.values.len(),
        settings,
    };
    if model
        .lookup(&axis.name)
        .is_some_and(|s| matches!(s, crate::model::Sym::Species(_)))
    {
        return usage_error(format!(
            "--follow: `{}` is a species' initial value, which a steady state does not depend on except through a total; follow a param, fixed species or total",
            axis.name
        ));
    }
    let branch = match follow_branch(&request) {
        Ok(b) => b,
        Err(e) => return super::run::sim_failure(&e),
    };
    let stability = |s: Stability| match s {
        Stability::Stable => "stable",
        Stability::Unstable => "unstable",
        Stability::Marginal => "marginal",
    };
    let mut csv = format!(
        "{},{},stability,point\n",
        csv_field(&axis.name),
        csv_field(args.measure.trim())
    );
    // Special points sit between the branch points they were found between.
    let mut rows: Vec<(f64, f64, &str, &str)> = Vec::new();
    let mut specials = branch.special.iter().peekable();
    for (i, p) in branch.points.iter().enumerate() {
        rows.push((p.parameter, p.values[column], stability(p.stability), ""));
        while let Some(sp) = specials.next_if(|sp| sp.after == i) {
            rows.push((
                sp.point.parameter,
                sp.point.values[column],
                stability(sp.point.stability),
                sp.kind.name(),
            ));
        }
    }
    for (x, y, st, point) in &rows {
        csv.push_str(&format!("{x:?},{y:?},{st},{point}\n"));
    }
    let mut staged = super::output::Staged::new();
    if let Some(sink) = table_sink
        && let Err(e) = staged.bytes(sink, csv.as_bytes())
    {
        return run_error(format!("[E0803] {e}"));
    }
    if let Some(plot) = plot_sink {
        let spec = super::plot::BranchPlot {
            title: format!("{} along {}", args.measure.trim(), axis.name),
            x_label: axis_label(model, &axis.name),
            y_label: args.measure.trim().to_string(),
            points: branch
                .points
                .iter()
                .map(|p| {
                    (
                        p.parameter,
                        p.values[column],
                        p.stability == Stability::Stable,
                    )
                })
                .collect(),
            marks: branch
                .special
                .iter()
                .map(|sp| {
                    (
                        sp.point.parameter,
                        sp.point.values[column],
                        sp.kind.name().to_string(),
                    )
                })
                .collect(),
        };
        if let Err(e) = super::plot::draw_branch(&mut staged, plot, &spec) {
            return run_error(format!("[E0803] {e}"));
        }
    }
    if let Err(e) = staged.commit() {
        return run_error(format!("[E0803] {e}"));
    }
    if args.output.is_none()
        && let Err(failed) = super::common::write_stdout(&csv)
    {
        return failed;
    }
    for sp in &branch.special {
        let what = match sp.kind {
            crate::sim::continuation::SpecialKind::Fold => "fold (saddle-node)".to_string(),
            crate::sim::continuation::SpecialKind::Hopf => match sp.frequency {
                Some(w) => format!("Hopf point (angular frequency {w:.6e})"),
                None => "Hopf point".to_string(),
            },
        };
        stderr_line!(
            "{what} at {} = {:.10e}: {} = {:.10e}",
            axis.name,
            sp.point.parameter,
            args.measure.trim(),
            sp.point.values[column]
        );
    }
    if let Some(path) = &args.output {
        stderr_line!(
            "wrote {} branch points to {}",
            branch.points.len(),
            path.display()
        );
    }
    if let Some(reason) = &branch.stopped {
        stderr_line!("warning: {reason}");
    }
    ExitCode::SUCCESS
}

/// An axis label with the unit of what is varied, where known.
fn axis_label(model: &crate::model::Model, name: &str) -> String {
    use crate::model::Sym;
    let conc = model.units.concentration.symbol();
    match model.lookup(name) {
        Some(Sym::Species(_)) => format!("initial {name} ({conc})"),
        Some(Sym::Fixed(_) | Sym::Total(_)) => format!("{name} ({conc})"),
        Some(Sym::Param(i)) => match model.params[i].dim {
            Some(d) if d != crate::model::Dim::NONE => {
                format!("{name} ({})", d.display_in(model.units))
            }
            _ => name.to_string(),
        },
        _ => name.to_string(),
    }
}

/// Whether observable `start` uses the time, directly or through the
/// observables it refers to.
fn observable_mentions_time(model: &crate::model::Model, start: usize) -> bool {
    let mut seen = vec![false; model.observables.len()];
    let mut todo = vec![start];
    while let Some(k) = todo.pop() {
        if std::mem::replace(&mut seen[k], true) {
            continue;
        }
        let expr = &model.observables[k].expr;
        if expr.mentions_time() {
            return true;
        }
        todo.extend(expr.names().into_iter().filter_map(|s| match s {
            crate::model::Sym::Observable(j) => Some(j),
            _ => None,
        }));
    }
    false
}
