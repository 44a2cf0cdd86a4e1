//! Parameter scans: one or two names varied over linear or logarithmic
//! grids, a measured column read at a time point or at the steady state,
//! every grid point computed independently (in parallel by the caller's
//! thread pool).
//!
//! The model is compiled once; each point only changes values (params,
//! initial values, fixed species, totals), so it reuses the compiled system
//! with its own constants.

use super::{Settings, SimError, simulate, steady::steady_state_of};
use crate::model::{Model, Sym, Units};
use crate::numeric::{CompiledSystem, StateLayout};
use rayon::prelude::*;

/// One varied name and its grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    pub name: String,
    pub values: Vec<f64>,
    pub log: bool,
    /// The ends as written and the dimension of their units (`None` for a
    /// bare number), checked against the varied name in [`check_axes`].
    pub written_ends: [(String, Option<crate::model::Dim>); 2],
}

/// Parses `NAME=LO..HI[:N][:log]` (units allowed on LO and HI; N defaults to 21).
pub fn parse_axis(text: &str, units: Units) -> Result<Axis, String> {
    let (name, rest) = text
        .split_once('=')
        .ok_or_else(|| format!("`{text}` is not NAME=LO..HI[:N][:log]"))?;
    let name = name.trim().to_string();
    let mut parts = rest.split(':');
    let range = parts.next().unwrap_or("");
    let (lo, hi) = range
        .split_once("..")
        .ok_or_else(|| format!("`{range}` is not a range LO..HI"))?;
    let (lo_text, hi_text) = (lo.trim().to_string(), hi.trim().to_string());
    // The assay temperature is read in C or K and varied in kelvin.
    let ((lo, lo_dim), (hi, hi_dim)) = if name == crate::model::TEMPERATURE {
        let kelvin = |t: &str| crate::model::lab_units::parse_temperature(t).map(|k| (k, None));
        (kelvin(lo)?, kelvin(hi)?)
    } else {
        (
            crate::model::units::parse_quantity(lo, units)?,
            crate::model::units::parse_quantity(hi, units)?,
        )
    };
    let mut n = 21usize;
    let mut log = false;
    for p in parts {
        let p = p.trim();
        if p.eq_ignore_ascii_case("log") {
            log = true;
        } else if p.eq_ignore_ascii_case("lin") {
            log = false;
        } else {
            n = p
                .parse()
                .map_err(|_| format!("`{p}` is neither a point count nor `log`"))?;
        }
    }
    if n == 0 || n > 100_000 {
        return Err(format!("{n} points: give between 1 and 100,000"));
    }
    if log && !(lo > 0.0 && hi > 0.0) {
        return Err(format!("a log grid needs positive ends, got {lo}..{hi}"));
    }
    let values = (0..n)
        .map(|i| {
            // The ends exactly as given, not as rounded by the grid formula.
            if i == 0 {
                return lo;
            }
            if i == n - 1 {
                return hi;
            }
            let f = i as f64 / (n - 1) as f64;
            if log {
                (lo.ln() + f * (hi.ln() - lo.ln())).exp()
            } else {
                lo + f * (hi - lo)
            }
        })
        .collect();
    Ok(Axis {
        name,
        values,
        log,
        written_ends: [(lo_text, lo_dim), (hi_text, hi_dim)],
    })
}

/// Where the measured column is read.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum MeasureAt {
    Time(f64),
    Steady,
}

/// A scan request: the model (with the measured quantity as its observable
/// number `column - species count`), axes, and where to read.
pub struct Scan<'a> {
    pub model: &'a Model,
    pub axes: &'a [Axis],
    /// Index into a trajectory row (species then observables).
    pub column: usize,
    pub at: MeasureAt,
    pub settings: Settings,
}

/// The result at every grid point, axes varying slowest first.
#[derive(Debug, Clone)]
pub struct ScanResult {
    pub points: Vec<Vec<f64>>,
    pub values: Vec<Result<f64, SimError>>,
}

/// Checks that every axis names something a scan can vary.
pub fn check_axes(model: &Model, axes: &[Axis]) -> Result<(), String> {
    for a in axes {
        match model.lookup(&a.name) {
            Some(Sym::Param(_) | Sym::Species(_) | Sym::Fixed(_) | Sym::Total(_)) => {
                for (text, dim) in &a.written_ends {
                    model.check_value_dimension(&a.name, text, *dim)?;
                }
            }
            None if a.name == crate::model::TEMPERATURE => {}
            Some(Sym::Observable(_)) => {
                return Err(format!(
                    "`{}` is an observable; vary a param, species, fixed species or total",
                    a.name
                ));
            }
            None => {
                let names = model.all_names();
                let hint =
                    crate::diagnostics::did_you_mean(&a.name, names.iter().map(String::as_str))
                        .map(|s| format!(" (did you mean `{s}`?)"))
                        .unwrap_or_default();
                return Err(format!(
                    "no param, species, fixed species or total named `{}`{hint}",
                    a.name
                ));
            }
        }
    }
    // Each axis is capped on its own; the grid is their product.
    let points = axes
        .iter()
        .fold(1u128, |n, a| n.saturating_mul(a.values.len() as u128));
    if points > MAX_SCAN_POINTS {
        return Err(format!(
            "the grid has {points} points; at most {MAX_SCAN_POINTS} are run (use fewer points per axis)"
        ));
    }
    Ok(())
}

/// Largest grid (product of the axes' points) a scan runs.
pub const MAX_SCAN_POINTS: u128 = 1_000_000;

/// Runs the scan on the current rayon pool; `tick` is called once per point.
pub fn run_scan(scan: &Scan<'_>, tick: &(dyn Fn() + Sync)) -> Result<ScanResult, SimError> {
    let mut points: Vec<Vec<f64>> = vec![Vec::new()];
    for axis in scan.axes {
        points = points
            .into_iter()
            .flat_map(|p| {
                axis.values
                    .iter()
                    .map(move |v| [p.clone(), vec![*v]].concat())
            })
            .collect();
    }
    let steady = matches!(scan.at, MeasureAt::Steady);
    // Compile once: the reduced layout for steady states, the full one for time points.
    let (base, layout) = if steady {
        let reduced = crate::network::reduce(scan.model).map_err(|d| SimError::setup(d.message))?;
        let layout = StateLayout {
            state_species: reduced.independent.clone(),
            dependent: reduced
                .dependent
                .iter()
                .map(|d| (d.species, d.formula.clone()))
                .collect(),
        };
        (reduced.model, layout)
    } else {
        (scan.model.clone(), StateLayout::full(scan.model))
    };
    let system = CompiledSystem::compile(&base, &layout)?;
    let values: Vec<Result<f64, SimError>> = points
        .par_iter()
        .map(|p| {
            let r = point(scan, &system, steady, p);
            tick();
            r
        })
        .collect();
    Ok(ScanResult { points, values })
}

/// The measured value at one grid point; a value that is not a finite
/// number (`1/0`, `log(0)`) fails the point like a failed run, so no `inf`
/// or `NaN` reaches the CSV as if it were a measurement.
fn point(
    scan: &Scan<'_>,
    system: &CompiledSystem,
    steady: bool,
    p: &[f64],
) -> Result<f64, SimError> {
    let v = measure_at(scan, system, steady, p)?;
    if v.is_finite() {
        Ok(v)
    } else {
        Err(SimError::input(format!(
            "the measured expression evaluates to {v} (not a finite number)"
        )))
    }
}

fn measure_at(
    scan: &Scan<'_>,
    system: &CompiledSystem,
    steady: bool,
    p: &[f64],
) -> Result<f64, SimError> {
    let overrides: Vec<(String, f64)> = scan
        .axes
        .iter()
        .zip(p)
        .map(|(a, v)| (a.name.clone(), *v))
        .collect();
    let model = scan
        .model
        .with_overrides(&overrides)
        .map_err(SimError::input)?;
    if steady {
        // The reduced model of this point: its totals follow this point's initial values.
        let reduced = crate::network::reduce(&model).map_err(|d| SimError::setup(d.message))?;
        let s = steady_state_of(&reduced.model, system, &scan.settings)
            .map_err(|e| e.named(&reduced.model))?;
        Ok(s.values[scan.column])
    } else {
        let MeasureAt::Time(t) = scan.at else {
            unreachable!("steady handled above")
        };
        let tr = simulate(&model, system, &scan.settings, &[t]).map_err(|e| e.named(&model))?;
        tr.rows
            .first()
            .map(|r| r[scan.column])
            .ok_or_else(|| SimError::setup("no output at the measurement time"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_grids_are_geometric() {
        let a = parse_axis("k=1..100:3:log", Units::default()).unwrap();
        assert_eq!(a.values.len(), 3);
        assert!((a.values[1] - 10.0).abs() < 1e-12);
        let b = parse_axis("S=1uM..1mM:2", Units::default()).unwrap();
        // 1 mM = 1000 uM (SI prefixes); the conversion may round in the last bit.
        assert_eq!(b.values.len(), 2);
        assert!((b.values[0] - 1.0).abs() < 1e-12 && (b.values[1] - 1000.0).abs() < 1e-9);
        assert!(parse_axis("k=0..1:5:log", Units::default()).is_err());
    }
}
