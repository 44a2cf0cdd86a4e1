//! Figures for `run`, `scan` and `sample`: line plots (time courses, 1-D
//! scans), heat maps (2-D scans), bands (ensemble means with a quantile
//! band and sample paths) and bars (histograms of counts), as SVG or PNG, with unit-labelled axes, a legend
//! and optional log axes.
//!
//! Figures are staged with the command's other outputs (`cli::output`), so
//! a failed command never leaves half a figure, or a new figure beside an
//! old table, behind. Text needs a TrueType
//! font: the first of a few common system fonts is used (or the file named
//! by the `RATEWRIGHT_FONT` environment variable).

use super::output::{Sink, Staged};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// Lines against a shared x axis.
pub struct LinePlot {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub x: Vec<f64>,
    pub series: Vec<(String, Vec<f64>)>,
    pub log_x: bool,
    pub log_y: bool,
}

/// A value over a grid of two inputs.
pub struct HeatMap {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub value_label: String,
    pub x: Vec<f64>,
    pub y: Vec<f64>,
    /// `values[i][j]` at `x[i]`, `y[j]`.
    pub values: Vec<Vec<f64>>,
    pub log_x: bool,
    pub log_y: bool,
    /// Names of the rows when they are categories (then `y` is 0, 1, …).
    pub y_names: Vec<String>,
}

/// Lines, each in a shaded band, with thin sample paths in the band's
/// colour (ensembles of stochastic runs: mean, a quantile band, a few runs).
pub struct BandPlot {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub x: Vec<f64>,
    pub bands: Vec<Band>,
    /// (band index, values): sample paths drawn thin in the band's colour.
    pub paths: Vec<(usize, Vec<f64>)>,
}

/// One series of a [`BandPlot`]: a line inside a band from `low` to `high`.
pub struct Band {
    pub name: String,
    pub line: Vec<f64>,
    pub low: Vec<f64>,
    pub high: Vec<f64>,
}

/// Bars over whole numbers (histograms of counts), one colour per series,
/// side by side within each bar's width.
pub struct BarPlot {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    /// Left edges of the bins and their common width.
    pub edges: Vec<f64>,
    pub width: f64,
    /// (name, height of each bin).
    pub series: Vec<(String, Vec<f64>)>,
}

/// A followed steady-state branch: stable stretches solid, unstable
/// dashed, special points (folds, Hopf points) marked and named.
pub struct BranchPlot {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    /// (x, y, stable) in branch order.
    pub points: Vec<(f64, f64, bool)>,
    /// (x, y, name).
    pub marks: Vec<(f64, f64, String)>,
}

/// Colour-blind-safe line colours (Okabe & Ito, "Color Universal Design", 2002).
const PALETTE: [RGBColor; 8] = [
    RGBColor(0, 114, 178),
    RGBColor(213, 94, 0),
    RGBColor(0, 158, 115),
    RGBColor(204, 121, 167),
    RGBColor(230, 159, 0),
    RGBColor(86, 180, 233),
    RGBColor(0, 0, 0),
    RGBColor(240, 228, 66),
];

const FONT_CANDIDATES: [&str; 8] = [
    "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf",
    "/usr/share/fonts/TTF/DejaVuSans.ttf",
    "/usr/share/fonts/dejavu/DejaVuSans.ttf",
    "/usr/share/fonts/truetype/liberation/LiberationSans-Regular.ttf",
    "/usr/share/fonts/liberation/LiberationSans-Regular.ttf",
    "/Library/Fonts/Arial.ttf",
    "/System/Library/Fonts/Supplemental/Arial.ttf",
    "C:\\Windows\\Fonts\\arial.ttf",
];

fn ensure_font() -> Result<(), String> {
    static FONT: OnceLock<Result<(), String>> = OnceLock::new();
    FONT.get_or_init(|| {
        let mut candidates: Vec<PathBuf> = std::env::var_os("RATEWRIGHT_FONT")
            .map(PathBuf::from)
            .into_iter()
            .collect();
        candidates.extend(FONT_CANDIDATES.iter().map(PathBuf::from));
        for path in candidates {
            if let Ok(bytes) = std::fs::read(&path) {
                // plotters keeps fonts for the life of the process.
                let bytes: &'static [u8] = Box::leak(bytes.into_boxed_slice());
                if plotters::style::register_font("sans-serif", FontStyle::Normal, bytes).is_ok() {
                    return Ok(());
                }
            }
        }
        Err("no TrueType font found for the plot's text; set RATEWRIGHT_FONT to a .ttf file".into())
    })
    .clone()
}

enum Kind {
    Svg,
    Png,
}

fn kind_of(path: &Path) -> Result<Kind, String> {
    match path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase)
        .as_deref()
    {
        Some("svg") => Ok(Kind::Svg),
        Some("png") => Ok(Kind::Png),
        _ => Err(format!(
            "--plot {}: the figure must end in .svg or .png",
            path.display()
        )),
    }
}

/// Checks that `path` names a figure format that can be drawn, so a wrong
/// name is refused before a run rather than after it.
pub fn check_figure_path(path: &Path) -> Result<(), String> {
    kind_of(path).map(|_| ())
}

/// Stages the figure `draw` makes for `sink` (see [`super::output`]): it
/// is put in place with the command's other outputs, or not at all.
fn stage_figure(
    staged: &mut Staged,
    sink: &Sink,
    draw: impl Fn(&Path, &Kind) -> Result<(), String>,
) -> Result<(), String> {
    let kind = kind_of(Path::new(&sink.shown()))?;
    ensure_font()?;
    let suffix = match kind {
        Kind::Svg => ".svg",
        Kind::Png => ".png",
    };
    staged.with_file(sink, suffix, |tmp| draw(tmp, &kind))
}

/// Stages a line plot (.svg or .png by the sink's name).
pub fn draw_lines(staged: &mut Staged, sink: &Sink, spec: &LinePlot) -> Result<(), String> {
    stage_figure(staged, sink, |tmp, kind| match kind {
        Kind::Svg => lines_on(SVGBackend::new(tmp, (960, 640)).into_drawing_area(), spec),
        Kind::Png => lines_on(
            BitMapBackend::new(tmp, (1440, 960)).into_drawing_area(),
            spec,
        ),
    })
}

/// Stages a heat map (.svg or .png by the sink's name).
pub fn draw_heat_map(staged: &mut Staged, sink: &Sink, spec: &HeatMap) -> Result<(), String> {
    stage_figure(staged, sink, |tmp, kind| match kind {
        Kind::Svg => heat_on(SVGBackend::new(tmp, (960, 720)).into_drawing_area(), spec),
        Kind::Png => heat_on(
            BitMapBackend::new(tmp, (1440, 1080)).into_drawing_area(),
            spec,
        ),
    })
}

/// Stages a band plot (.svg or .png by the sink's name).
pub fn draw_bands(staged: &mut Staged, sink: &Sink, spec: &BandPlot) -> Result<(), String> {
    stage_figure(staged, sink, |tmp, kind| match kind {
        Kind::Svg => bands_on(SVGBackend::new(tmp, (960, 640)).into_drawing_area(), spec),
        Kind::Png => bands_on(
            BitMapBackend::new(tmp, (1440, 960)).into_drawing_area(),
            spec,
        ),
    })
}

/// Stages a bar plot (.svg or .png by the sink's name).
pub fn draw_bars(staged: &mut Staged, sink: &Sink, spec: &BarPlot) -> Result<(), String> {
    stage_figure(staged, sink, |tmp, kind| match kind {
        Kind::Svg => bars_on(SVGBackend::new(tmp, (960, 640)).into_drawing_area(), spec),
        Kind::Png => bars_on(
            BitMapBackend::new(tmp, (1440, 960)).into_drawing_area(),
            spec,
        ),
    })
}

/// Stages a branch plot (.svg or .png by the sink's name).
pub fn draw_branch(staged: &mut Staged, sink: &Sink, spec: &BranchPlot) -> Result<(), String> {
    stage_figure(staged, sink, |tmp, kind| match kind {
        Kind::Svg => branch_on(SVGBackend::new(tmp, (960, 640)).into_drawing_area(), spec),
        Kind::Png => branch_on(
            BitMapBackend::new(tmp, (1440, 960)).into_drawing_area(),
            spec,
        ),
    })
}

fn branch_on<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    spec: &BranchPlot,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(err)?;
    let finite: Vec<(f64, f64, bool)> = spec
        .points
        .iter()
        .copied()
        .filter(|(x, y, _)| x.is_finite() && y.is_finite())
        .collect();
    let (x0, x1) =
        range_of(finite.iter().map(|p| p.0), false).ok_or("nothing to plot on the x axis")?;
    let (y0, y1) = range_of(finite.iter().map(|p| p.1), false).ok_or("nothing to plot")?;
    let mut chart = linear_chart(
        &root,
        &spec.title,
        &spec.x_label,
        &spec.y_label,
        x0..x1,
        y0..y1,
    )?;
    let color = PALETTE[0];
    // Consecutive points of one stability form a stretch; stretches share
    // their end points so the curve has no gaps.
    let mut start = 0;
    let (mut stable_labelled, mut unstable_labelled) = (false, false);
    while start + 1 < finite.len() {
        let stable = finite[start + 1].2 && finite[start].2;
        let mut end = start + 1;
        while end + 1 < finite.len() && (finite[end].2 && finite[end + 1].2) == stable {
            end += 1;
        }
        let stretch: Vec<(f64, f64)> = finite[start..=end].iter().map(|p| (p.0, p.1)).collect();
        if stable {
            let series = chart
                .draw_series(LineSeries::new(stretch, color.stroke_width(3)))
                .map_err(err)?;
            if !stable_labelled {
                series.label("stable").legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], color.stroke_width(3))
                });
                stable_labelled = true;
            }
        } else {
            let series = chart
                .draw_series(DashedLineSeries::new(stretch, 10, 6, color.stroke_width(2)))
                .map_err(err)?;
            if !unstable_labelled {
                series.label("unstable").legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 10, y)], color.stroke_width(2))
                });
                unstable_labelled = true;
            }
        }
        start = end;
    }
    let mark = PALETTE[1];
    chart
        .draw_series(spec.marks.iter().map(|(x, y, name)| {
            EmptyElement::at((*x, *y))
                + Cross::new((0, 0), 7, mark.stroke_width(3))
                + Text::new(name.clone(), (8, -18), ("sans-serif", 16))
        }))
        .map_err(err)?;
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .label_font(("sans-serif", 16))
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(120, 120, 120))
        .draw()
        .map_err(err)?;
    root.present().map_err(err)?;
    Ok(())
}

fn bands_on<DB: DrawingBackend>(root: DrawingArea<DB, Shift>, spec: &BandPlot) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(err)?;
    let (x0, x1) =
        range_of(spec.x.iter().copied(), false).ok_or("nothing to plot on the x axis")?;
    let (y0, y1) = range_of(
        spec.bands
            .iter()
            .flat_map(|b| b.line.iter().chain(&b.low).chain(&b.high).copied())
            .chain(spec.paths.iter().flat_map(|(_, p)| p.iter().copied())),
        false,
    )
    .ok_or("nothing to plot: every value is missing")?;
    let mut chart = linear_chart(
        &root,
        &spec.title,
        &spec.x_label,
        &spec.y_label,
        x0..x1,
        y0..y1,
    )?;
    let finite = |x: &f64, y: &f64| x.is_finite() && y.is_finite();
    for (
        k,
        Band {
            low: lo, high: hi, ..
        },
    ) in spec.bands.iter().enumerate()
    {
        let color = PALETTE[k % PALETTE.len()];
        let mut outline: Vec<(f64, f64)> = spec
            .x
            .iter()
            .zip(hi)
            .filter(|(x, y)| finite(x, y))
            .map(|(x, y)| (*x, *y))
            .collect();
        outline.extend(
            spec.x
                .iter()
                .zip(lo)
                .rev()
                .filter(|(x, y)| finite(x, y))
                .map(|(x, y)| (*x, *y)),
        );
        chart
            .draw_series(std::iter::once(Polygon::new(
                outline,
                color.mix(0.18).filled(),
            )))
            .map_err(err)?;
    }
    for (k, path) in &spec.paths {
        let color = PALETTE[k % PALETTE.len()];
        let points: Vec<(f64, f64)> = spec
            .x
            .iter()
            .zip(path)
            .filter(|(x, y)| finite(x, y))
            .map(|(x, y)| (*x, *y))
            .collect();
        chart
            .draw_series(LineSeries::new(points, color.mix(0.55).stroke_width(1)))
            .map_err(err)?;
    }
    for (k, Band { name, line, .. }) in spec.bands.iter().enumerate() {
        let color = PALETTE[k % PALETTE.len()];
        let points: Vec<(f64, f64)> = spec
            .x
            .iter()
            .zip(line)
            .filter(|(x, y)| finite(x, y))
            .map(|(x, y)| (*x, *y))
            .collect();
        chart
            .draw_series(LineSeries::new(points, color.stroke_width(3)))
            .map_err(err)?
            .label(name.as_str())
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 24, y)], color.stroke_width(3))
            });
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .label_font(("sans-serif", 16))
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(120, 120, 120))
        .draw()
        .map_err(err)?;
    root.present().map_err(err)?;
    Ok(())
}

fn bars_on<DB: DrawingBackend>(root: DrawingArea<DB, Shift>, spec: &BarPlot) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(err)?;
    let (Some(first), Some(last)) = (spec.edges.first(), spec.edges.last()) else {
        return Err("nothing to plot: no counts".into());
    };
    let (x0, x1) = (*first, *last + spec.width);
    let top = spec
        .series
        .iter()
        .flat_map(|(_, v)| v.iter().copied())
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    let top = if top > 0.0 { top * 1.06 } else { 1.0 };
    let mut chart = linear_chart(
        &root,
        &spec.title,
        &spec.x_label,
        &spec.y_label,
        x0..x1,
        0.0..top,
    )?;
    let n = spec.series.len().max(1) as f64;
    for (k, (name, heights)) in spec.series.iter().enumerate() {
        let color = PALETTE[k % PALETTE.len()];
        let w = spec.width / n;
        chart
            .draw_series(spec.edges.iter().zip(heights).map(|(&e, &h)| {
                let left = e + k as f64 * w;
                Rectangle::new([(left, 0.0), (left + w * 0.9, h)], color.filled())
            }))
            .map_err(err)?
            .label(name.as_str())
            .legend(move |(x, y)| Rectangle::new([(x, y - 6), (x + 18, y + 6)], color.filled()));
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .label_font(("sans-serif", 16))
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(120, 120, 120))
        .draw()
        .map_err(err)?;
    root.present().map_err(err)?;
    Ok(())
}

fn range_of(values: impl Iterator<Item = f64>, log: bool) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite() && (!log || *v > 0.0)) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return None;
    }
    if hi <= lo {
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        return Some(if log {
            (lo / 2.0, hi * 2.0)
        } else {
            (lo - pad, hi + pad)
        });
    }
    if log {
        Some((lo, hi))
    } else {
        let pad = (hi - lo) * 0.04;
        Some((
            if lo >= 0.0 {
                (lo - pad).max(0.0)
            } else {
                lo - pad
            },
            hi + pad,
        ))
    }
}

fn err<E: std::fmt::Debug>(e: E) -> String {
    format!("cannot draw the figure: {e:?}")
}

/// Tick labels without float noise.
/// A chart on linear axes with the figures' caption, margins and labelled
/// mesh (time courses on log axes go through `line_chart!`).
fn linear_chart<'a, DB: DrawingBackend>(
    root: &'a DrawingArea<DB, Shift>,
    title: &str,
    x_label: &str,
    y_label: &str,
    x: std::ops::Range<f64>,
    y: std::ops::Range<f64>,
) -> Result<
    ChartContext<
        'a,
        DB,
        plotters::coord::cartesian::Cartesian2d<
            plotters::coord::types::RangedCoordf64,
            plotters::coord::types::RangedCoordf64,
        >,
    >,
    String,
>
where
    DB::ErrorType: 'static,
{
    let mut chart = ChartBuilder::on(root)
        .caption(title, ("sans-serif", 26))
        .margin(18)
        .x_label_area_size(56)
        .y_label_area_size(90)
        .build_cartesian_2d(x, y)
        .map_err(err)?;
    chart
        .configure_mesh()
        .x_desc(x_label)
        .y_desc(y_label)
        .x_label_formatter(&tick)
        .y_label_formatter(&tick)
        .label_style(("sans-serif", 16))
        .axis_desc_style(("sans-serif", 19))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(err)?;
    Ok(chart)
}

fn tick(v: &f64) -> String {
    if *v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        let s = format!("{v:.4}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        format!("{v:.1e}")
    }
}

macro_rules! line_chart {
    ($root:expr, $spec:expr, $xr:expr, $yr:expr) => {{
        let spec = $spec;
        let mut chart = ChartBuilder::on($root)
            .caption(&spec.title, ("sans-serif", 26))
            .margin(18)
            .x_label_area_size(56)
            .y_label_area_size(90)
            .build_cartesian_2d($xr, $yr)
            .map_err(err)?;
        chart
            .configure_mesh()
            .x_desc(spec.x_label.as_str())
            .y_desc(spec.y_label.as_str())
            .x_label_formatter(&tick)
            .y_label_formatter(&tick)
            .label_style(("sans-serif", 16))
            .axis_desc_style(("sans-serif", 19))
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(err)?;
        for (k, (name, ys)) in spec.series.iter().enumerate() {
            let color = PALETTE[k % PALETTE.len()];
            let points: Vec<(f64, f64)> = spec
                .x
                .iter()
                .zip(ys)
                .filter(|(x, y)| {
                    x.is_finite()
                        && y.is_finite()
                        && (!spec.log_x || **x > 0.0)
                        && (!spec.log_y || **y > 0.0)
                })
                .map(|(x, y)| (*x, *y))
                .collect();
            chart
                .draw_series(LineSeries::new(points, color.stroke_width(3)))
                .map_err(err)?
                .label(name.as_str())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], color.stroke_width(3))
                });
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .label_font(("sans-serif", 16))
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(120, 120, 120))
            .draw()
            .map_err(err)?;
    }};
}

fn lines_on<DB: DrawingBackend>(root: DrawingArea<DB, Shift>, spec: &LinePlot) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(err)?;
    let (x0, x1) =
        range_of(spec.x.iter().copied(), spec.log_x).ok_or("nothing to plot on the x axis")?;
    let (y0, y1) = range_of(
        spec.series.iter().flat_map(|(_, v)| v.iter().copied()),
        spec.log_y,
    )
    .ok_or("nothing to plot: every value is missing (or not positive on a log axis)")?;
    match (spec.log_x, spec.log_y) {
        (false, false) => line_chart!(&root, spec, x0..x1, y0..y1),
        (true, false) => line_chart!(&root, spec, (x0..x1).log_scale(), y0..y1),
        (false, true) => line_chart!(&root, spec, x0..x1, (y0..y1).log_scale()),
        (true, true) => line_chart!(&root, spec, (x0..x1).log_scale(), (y0..y1).log_scale()),
    }
    root.present().map_err(err)?;
    Ok(())
}

/// Viridis (van der Walt & Smith, 2015), 8 stops, linearly interpolated.
fn viridis(f: f64) -> RGBColor {
    const STOPS: [(u8, u8, u8); 8] = [
        (68, 1, 84),
        (70, 50, 127),
        (54, 92, 141),
        (39, 127, 143),
        (31, 162, 136),
        (74, 194, 110),
        (160, 219, 57),
        (254, 232, 37),
    ];
    let f = if f.is_finite() {
        f.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let x = f * (STOPS.len() - 1) as f64;
    let i = (x.floor() as usize).min(STOPS.len() - 2);
    let w = x - i as f64;
    let mix = |a: u8, b: u8| (a as f64 + (b as f64 - a as f64) * w).round() as u8;
    let (a, b) = (STOPS[i], STOPS[i + 1]);
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// Cell edges around grid points (geometric midpoints on a log axis).
fn edges(points: &[f64], log: bool) -> Vec<f64> {
    let n = points.len();
    if n == 1 {
        let p = points[0];
        return if log {
            vec![p / 1.5, p * 1.5]
        } else {
            vec![p - 0.5 * p.abs().max(1e-12), p + 0.5 * p.abs().max(1e-12)]
        };
    }
    let mid = |a: f64, b: f64| if log { (a * b).sqrt() } else { 0.5 * (a + b) };
    let mut e = Vec::with_capacity(n + 1);
    let first = if log {
        points[0] * points[0] / mid(points[0], points[1])
    } else {
        2.0 * points[0] - mid(points[0], points[1])
    };
    e.push(first);
    for k in 0..n - 1 {
        e.push(mid(points[k], points[k + 1]));
    }
    let last = if log {
        points[n - 1] * points[n - 1] / mid(points[n - 2], points[n - 1])
    } else {
        2.0 * points[n - 1] - mid(points[n - 2], points[n - 1])
    };
    e.push(last);
    e
}

macro_rules! heat_chart {
    ($area:expr, $spec:expr, $xr:expr, $yr:expr, $xe:expr, $ye:expr, $lo:expr, $hi:expr) => {{
        let spec = $spec;
        let names = &spec.y_names;
        // Category rows are named at their whole-number positions.
        let row_label = |v: &f64| -> String {
            if names.is_empty() {
                return tick(v);
            }
            let i = v.round();
            if (v - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < names.len() {
                names[i as usize].clone()
            } else {
                String::new()
            }
        };
        let name_width = names.iter().map(|n| n.chars().count()).max().unwrap_or(0) as u32;
        let mut chart = ChartBuilder::on($area)
            .caption(&spec.title, ("sans-serif", 26))
            .margin(18)
            .x_label_area_size(56)
            .y_label_area_size(90.max(name_width * 9 + 20))
            .build_cartesian_2d($xr, $yr)
            .map_err(err)?;
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc(spec.x_label.as_str())
            .y_desc(spec.y_label.as_str())
            .x_label_formatter(&tick)
            .y_labels(if names.is_empty() { 10 } else { names.len() })
            .y_label_formatter(&row_label)
            .label_style(("sans-serif", 16))
            .axis_desc_style(("sans-serif", 19))
            .draw()
            .map_err(err)?;
        let (xe, ye): (&Vec<f64>, &Vec<f64>) = ($xe, $ye);
        let mut cells = Vec::new();
        for i in 0..spec.x.len() {
            for j in 0..spec.y.len() {
                let v = spec.values[i][j];
                let color = if v.is_finite() {
                    viridis((v - $lo) / ($hi - $lo))
                } else {
                    RGBColor(200, 200, 200)
                };
                cells.push(Rectangle::new(
                    [(xe[i], ye[j]), (xe[i + 1], ye[j + 1])],
                    color.filled(),
                ));
            }
        }
        chart.draw_series(cells).map_err(err)?;
    }};
}

fn heat_on<DB: DrawingBackend>(root: DrawingArea<DB, Shift>, spec: &HeatMap) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(err)?;
    if spec.x.is_empty() || spec.y.is_empty() {
        return Err("nothing to plot: the grid is empty".into());
    }
    let (plot_area, bar_area) = root.split_horizontally(root.dim_in_pixel().0 as i32 - 150);
    let (lo, hi) = range_of(spec.values.iter().flat_map(|r| r.iter().copied()), false)
        .ok_or("nothing to plot: every value is missing")?;
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (lo - 1.0, hi + 1.0)
    };
    let xe = edges(&spec.x, spec.log_x);
    let ye = edges(&spec.y, spec.log_y);
    let (x0, x1) = (xe[0].min(xe[xe.len() - 1]), xe[0].max(xe[xe.len() - 1]));
    let (y0, y1) = (ye[0].min(ye[ye.len() - 1]), ye[0].max(ye[ye.len() - 1]));
    match (spec.log_x, spec.log_y) {
        (false, false) => heat_chart!(&plot_area, spec, x0..x1, y0..y1, &xe, &ye, lo, hi),
        (true, false) => heat_chart!(
            &plot_area,
            spec,
            (x0..x1).log_scale(),
            y0..y1,
            &xe,
            &ye,
            lo,
            hi
        ),
        (false, true) => heat_chart!(
            &plot_area,
            spec,
            x0..x1,
            (y0..y1).log_scale(),
            &xe,
            &ye,
            lo,
            hi
        ),
        (true, true) => heat_chart!(
            &plot_area,
            spec,
            (x0..x1).log_scale(),
            (y0..y1).log_scale(),
            &xe,
            &ye,
            lo,
            hi
        ),
    }
    // Colour bar with the measured quantity's name.
    let mut bar = ChartBuilder::on(&bar_area)
        .margin_top(60)
        .margin_bottom(74)
        .margin_right(10)
        .y_label_area_size(70)
        .caption(&spec.value_label, ("sans-serif", 16))
        .build_cartesian_2d(0.0..1.0, lo..hi)
        .map_err(err)?;
    bar.configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_label_formatter(&tick)
        .label_style(("sans-serif", 14))
        .draw()
        .map_err(err)?;
    let steps = 100;
    bar.draw_series((0..steps).map(|k| {
        let a = lo + (hi - lo) * k as f64 / steps as f64;
        let b = lo + (hi - lo) * (k + 1) as f64 / steps as f64;
        Rectangle::new(
            [(0.0, a), (1.0, b)],
            viridis(k as f64 / (steps - 1) as f64).filled(),
        )
    }))
    .map_err(err)?;
    root.present().map_err(err)?;
    Ok(())
}

/// Stages the figure of a fit: data as points and fitted curves above, the
/// residuals against the same x below (.svg or .png by the sink's name).
pub fn draw_fit(
    staged: &mut Staged,
    sink: &Sink,
    title: &str,
    figure: &crate::fit::figure::Figure,
) -> Result<(), String> {
    stage_figure(staged, sink, |tmp, kind| match kind {
        Kind::Svg => fit_on(
            SVGBackend::new(tmp, (960, 800)).into_drawing_area(),
            title,
            figure,
        ),
        Kind::Png => fit_on(
            BitMapBackend::new(tmp, (1440, 1200)).into_drawing_area(),
            title,
            figure,
        ),
    })
}

macro_rules! fit_panels {
    ($top:expr, $bottom:expr, $title:expr, $fig:expr, $xr:expr, $xr2:expr, $yr:expr, $rr:expr) => {{
        let fig = $fig;
        let mut chart = ChartBuilder::on($top)
            .caption($title, ("sans-serif", 26))
            .margin(18)
            .x_label_area_size(40)
            .y_label_area_size(90)
            .build_cartesian_2d($xr, $yr)
            .map_err(err)?;
        chart
            .configure_mesh()
            .y_desc(fig.y_label.as_str())
            .x_label_formatter(&tick)
            .y_label_formatter(&tick)
            .label_style(("sans-serif", 16))
            .axis_desc_style(("sans-serif", 19))
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(err)?;
        for (k, g) in fig.groups.iter().enumerate() {
            let color = PALETTE[k % PALETTE.len()];
            let curve: Vec<(f64, f64)> = g
                .curve
                .iter()
                .copied()
                .filter(|(x, y)| x.is_finite() && y.is_finite() && (!fig.log_x || *x > 0.0))
                .collect();
            chart
                .draw_series(LineSeries::new(curve, color.stroke_width(3)))
                .map_err(err)?
                .label(g.label.as_str())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], color.stroke_width(3))
                });
            chart
                .draw_series(
                    g.data
                        .iter()
                        .filter(|(x, _)| !fig.log_x || *x > 0.0)
                        .map(|&(x, y)| Circle::new((x, y), 4, color.filled())),
                )
                .map_err(err)?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::LowerRight)
            .label_font(("sans-serif", 15))
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(120, 120, 120))
            .draw()
            .map_err(err)?;
        let mut residuals = ChartBuilder::on($bottom)
            .margin(18)
            .x_label_area_size(56)
            .y_label_area_size(90)
            .build_cartesian_2d($xr2, $rr)
            .map_err(err)?;
        residuals
            .configure_mesh()
            .x_desc(fig.x_label.as_str())
            .y_desc("residual")
            .x_label_formatter(&tick)
            .y_label_formatter(&tick)
            .label_style(("sans-serif", 16))
            .axis_desc_style(("sans-serif", 19))
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(err)?;
        for (k, g) in fig.groups.iter().enumerate() {
            let color = PALETTE[k % PALETTE.len()];
            residuals
                .draw_series(
                    g.residuals
                        .iter()
                        .filter(|(x, _)| !fig.log_x || *x > 0.0)
                        .map(|&(x, y)| Circle::new((x, y), 3, color.filled())),
                )
                .map_err(err)?;
        }
    }};
}

fn fit_on<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    title: &str,
    fig: &crate::fit::figure::Figure,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(err)?;
    let xs = fig
        .groups
        .iter()
        .flat_map(|g| g.data.iter().chain(&g.curve).map(|p| p.0));
    let (x0, x1) = range_of(xs, fig.log_x).ok_or("nothing to plot on the x axis")?;
    let ys = fig
        .groups
        .iter()
        .flat_map(|g| g.data.iter().chain(&g.curve).map(|p| p.1));
    let (y0, y1) = range_of(ys, false).ok_or("nothing to plot")?;
    let r = fig
        .groups
        .iter()
        .flat_map(|g| g.residuals.iter().map(|p| p.1.abs()))
        .fold(0.0f64, f64::max);
    let r = if r > 0.0 { r * 1.1 } else { 1.0 };
    let (top, bottom) = root.split_vertically((root.dim_in_pixel().1 as f64 * 0.7) as u32);
    if fig.log_x {
        fit_panels!(
            &top,
            &bottom,
            title,
            fig,
            (x0..x1).log_scale(),
            (x0..x1).log_scale(),
            y0..y1,
            -r..r
        );
    } else {
        fit_panels!(&top, &bottom, title, fig, x0..x1, x0..x1, y0..y1, -r..r);
    }
    root.present().map_err(err)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_cell_edges_are_geometric_midpoints() {
        let e = edges(&[1.0, 100.0], true);
        assert!((e[1] - 10.0).abs() < 1e-12);
        assert!((e[0] - 0.1).abs() < 1e-12 && (e[2] - 1000.0).abs() < 1e-9);
    }
}
