//! What a fit's figure shows: the data, the fitted curves and the
//! residuals, grouped as an experimenter plots them.
//!
//! Why here, not in the CLI: choosing the varied concentration of a rate
//! table and evaluating the fitted rate along it (or simulating each series
//! on a fine grid) is model work; the CLI only draws.
//!
//! Rate tables: the x axis is the condition with the most distinct values
//! (the varied substrate), one curve per level of the other conditions (the
//! figure of an inhibition study). Progress curves: time on the x axis, one
//! curve per series and measured output.

use super::curves::CurveProblem;
use super::rates::{Point, RateProblem};
use crate::model::Sym;

/// One group of a figure: data points, the fitted curve, residuals.
#[derive(Clone, Debug)]
pub struct Group {
    pub label: String,
    pub data: Vec<(f64, f64)>,
    pub curve: Vec<(f64, f64)>,
    pub residuals: Vec<(f64, f64)>,
}

#[derive(Clone, Debug)]
pub struct Figure {
    pub x_label: String,
    pub y_label: String,
    pub log_x: bool,
    pub groups: Vec<Group>,
    /// Whether it shows a rate table (rate against a concentration).
    pub of_rates: bool,
}

impl Figure {
    /// The double-reciprocal view of a rate table's figure (1/v against
    /// 1/[S], Lineweaver & Burk 1934), for reading inhibition patterns:
    /// lines meeting on the 1/v axis (competitive), parallel
    /// (uncompetitive), or meeting left of it (mixed). Points with a zero
    /// or negative rate or concentration have no reciprocal and are left
    /// out; residuals are 1/observed − 1/fitted.
    pub fn double_reciprocal(&self) -> Figure {
        let positive = |&(x, y): &(f64, f64)| x > 0.0 && y > 0.0;
        let groups = self
            .groups
            .iter()
            .map(|g| Group {
                label: g.label.clone(),
                data: g
                    .data
                    .iter()
                    .filter(|p| positive(p))
                    .map(|&(x, y)| (1.0 / x, 1.0 / y))
                    .collect(),
                curve: g
                    .curve
                    .iter()
                    .filter(|p| positive(p))
                    .map(|&(x, y)| (1.0 / x, 1.0 / y))
                    .rev()
                    .collect(),
                residuals: g
                    .data
                    .iter()
                    .zip(&g.residuals)
                    .filter(|((x, observed), (_, r))| {
                        *x > 0.0 && *observed > 0.0 && observed - r > 0.0
                    })
                    .map(|(&(x, observed), &(_, r))| {
                        (1.0 / x, 1.0 / observed - 1.0 / (observed - r))
                    })
                    .collect(),
            })
            .collect();
        Figure {
            x_label: reciprocal_label(&self.x_label),
            y_label: reciprocal_label(&self.y_label),
            log_x: false,
            groups,
            of_rates: self.of_rates,
        }
    }
}

/// `S (uM)` → `1/S (1/uM)`.
fn reciprocal_label(label: &str) -> String {
    match label.strip_suffix(')').and_then(|l| l.rsplit_once(" (")) {
        Some((name, unit)) => format!("1/{name} (1/({unit}))"),
        None => format!("1/{label}"),
    }
}

fn grid(lo: f64, hi: f64, log: bool, n: usize) -> Vec<f64> {
    (0..n)
        .map(|k| {
            let f = k as f64 / (n - 1) as f64;
            if log {
                (lo.ln() + f * (hi.ln() - lo.ln())).exp()
            } else {
                lo + f * (hi - lo)
            }
        })
        .collect()
}

/// The figure of a rate-table fit, or `None` when no condition varies.
pub fn of_rates(problem: &RateProblem, values: &[f64], response: &str) -> Option<Figure> {
    let model = problem.model;
    let mut syms: Vec<Sym> = Vec::new();
    for p in &problem.points {
        for (s, _) in &p.conditions {
            if !syms.contains(s) {
                syms.push(*s);
            }
        }
    }
    let distinct = |s: Sym| {
        let mut v: Vec<u64> = problem
            .points
            .iter()
            .filter_map(|p| {
                p.conditions
                    .iter()
                    .find(|c| c.0 == s)
                    .map(|c| c.1.to_bits())
            })
            .collect();
        v.sort_unstable();
        v.dedup();
        v.len()
    };
    let varied = syms
        .iter()
        .copied()
        .max_by_key(|s| distinct(*s))
        .filter(|s| distinct(*s) > 1)?;
    let x_of = |p: &Point| p.conditions.iter().find(|c| c.0 == varied).map(|c| c.1);
    let key_of = |p: &Point| -> String {
        let others: Vec<String> = p
            .conditions
            .iter()
            .filter(|c| c.0 != varied)
            .map(|(s, v)| {
                format!(
                    "{} = {}",
                    model.name_of(*s),
                    crate::algebra::print::plain_literal(*v)
                )
            })
            .collect();
        if others.is_empty() {
            "data".into()
        } else {
            others.join(", ")
        }
    };
    let mut groups: Vec<(String, Vec<&Point>)> = Vec::new();
    for p in &problem.points {
        let key = key_of(p);
        match groups.iter_mut().find(|g| g.0 == key) {
            Some(g) => g.1.push(p),
            None => groups.push((key, vec![p])),
        }
    }
    let all_x: Vec<f64> = problem.points.iter().filter_map(x_of).collect();
    let (lo, hi) = all_x
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(*x), b.max(*x))
        });
    let log_x = lo > 0.0 && hi / lo >= 10.0;
    let xs = grid(if log_x { lo } else { lo.min(0.0) }, hi, log_x, 80);
    let figure_groups = groups
        .into_iter()
        .map(|(label, points)| {
            let representative = points[0].clone();
            let curve = xs
                .iter()
                .map(|&x| {
                    let mut p = representative.clone();
                    for c in &mut p.conditions {
                        if c.0 == varied {
                            c.1 = x;
                        }
                    }
                    (x, problem.rate_at(&p, values))
                })
                .collect();
            let data = points
                .iter()
                .filter_map(|p| Some((x_of(p)?, p.observed)))
                .collect();
            let residuals = points
                .iter()
                .filter_map(|p| Some((x_of(p)?, p.observed - problem.rate_at(p, values))))
                .collect();
            Group {
                label,
                data,
                curve,
                residuals,
            }
        })
        .collect();
    let unit = |s: Sym| match s {
        Sym::Species(_) | Sym::Fixed(_) => format!(" ({})", model.units.concentration.symbol()),
        Sym::Param(i) => model.params[i]
            .dim
            .map(|d| format!(" ({})", d.display_in(model.units)))
            .unwrap_or_default(),
        _ => String::new(),
    };
    Some(Figure {
        x_label: format!("{}{}", model.name_of(varied), unit(varied)),
        y_label: if response == "v" {
            format!("v ({})", crate::model::Dim::RATE.display_in(model.units))
        } else {
            response.to_string()
        },
        log_x,
        groups: figure_groups,
        of_rates: true,
    })
}

/// The figure of a progress-curve fit: each series and output over time.
pub fn of_curves(problem: &CurveProblem, values: &[f64]) -> Option<Figure> {
    let model = problem.model;
    let names = crate::sim::column_names(model);
    let mut groups = Vec::new();
    for (k, s) in problem.series.iter().enumerate() {
        let end = s.times.last().copied().unwrap_or(0.0);
        let times = grid(0.0, end.max(f64::MIN_POSITIVE), false, 120);
        let fine = problem.trajectory(values, k, &times).ok()?;
        let at_data = problem.trajectory(values, k, &s.times).ok()?;
        let mut outputs: Vec<usize> = s.measurements.iter().map(|m| m.1).collect();
        outputs.sort_unstable();
        outputs.dedup();
        for output in outputs {
            let data: Vec<(f64, f64)> = s
                .measurements
                .iter()
                .filter(|m| m.1 == output)
                .map(|m| (s.times[m.0], m.2))
                .collect();
            let residuals = s
                .measurements
                .iter()
                .filter(|m| m.1 == output)
                .map(|m| (s.times[m.0], m.2 - at_data.rows[m.0][output]))
                .collect();
            let curve = fine
                .times
                .iter()
                .zip(&fine.rows)
                .map(|(t, r)| (*t, r[output]))
                .collect();
            let series = if problem.series.len() > 1 {
                format!("series {}: ", s.key)
            } else {
                String::new()
            };
            groups.push(Group {
                label: format!("{series}{}", names[output]),
                data,
                curve,
                residuals,
            });
        }
    }
    Some(Figure {
        x_label: format!("time ({})", model.units.time.symbol()),
        y_label: "measured".into(),
        log_x: false,
        groups,
        of_rates: false,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_double_reciprocal_view_of_michaelis_menten_is_a_straight_line() {
        // v = V·S/(K + S) gives 1/v = 1/V + (K/V)·(1/S) (Lineweaver & Burk
        // 1934): every transformed point on that line; residuals in the
        // reciprocal space; points at S = 0 left out.
        let (v_max, k_m) = (12.0, 3.0);
        let rate = |s: f64| v_max * s / (k_m + s);
        let xs = [0.0, 0.5, 1.0, 2.0, 5.0, 10.0, 40.0];
        let figure = Figure {
            x_label: "S (uM)".into(),
            y_label: "v (uM/s)".into(),
            log_x: false,
            groups: vec![Group {
                label: "I = 0".into(),
                data: xs.iter().map(|&s| (s, rate(s) * 1.01)).collect(),
                curve: xs.iter().map(|&s| (s, rate(s))).collect(),
                residuals: xs.iter().map(|&s| (s, 0.01 * rate(s))).collect(),
            }],
            of_rates: true,
        };
        let view = figure.double_reciprocal();
        assert_eq!(view.x_label, "1/S (1/(uM))");
        let g = &view.groups[0];
        assert_eq!(g.curve.len(), xs.len() - 1, "S = 0 has no reciprocal");
        for &(x, y) in &g.curve {
            let line = 1.0 / v_max + k_m / v_max * x;
            assert!((y - line).abs() <= 1e-12 * line, "({x}, {y}) vs {line}");
        }
        for (&(x, r), &(_, d)) in g.residuals.iter().zip(&g.data) {
            let fitted = 1.0 / v_max + k_m / v_max * x;
            assert!((r - (d - fitted)).abs() <= 1e-12 * fitted);
        }
    }
}
