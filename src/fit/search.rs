//! Searches around the least-squares minimizer: several starting points,
//! and profile-likelihood intervals (each a sequence of fits with one
//! param held).
//!
//! Invariant: every search is deterministic (fixed seeds, fixed step
//! rules), so a fit's report is the same on every run and any thread count.

use super::lm::{self, Options, minimize};
use super::stats;

/// Minimizes from `start` and, with `starts` > 1, from a Latin hypercube
/// of further starting points over the bounds (where a bound is missing,
/// the start ± its size on the fitted scale, at least a decade on the log
/// scale), in parallel; the best optimum is kept and the spread of the
/// others summarized.
pub(super) fn multi_start(
    problem: &(dyn lm::Residuals + Sync),
    start: &[f64],
    options: &Options,
    starts: usize,
    progress: &super::Progress,
) -> (lm::Outcome, Option<String>) {
    use rayon::prelude::*;
    if starts <= 1 {
        return (minimize(problem, start, options), None);
    }
    let p = start.len();
    let ranges: Vec<(f64, f64)> = (0..p)
        .map(|j| {
            let width = if start[j].abs() > 0.0 {
                start[j].abs()
            } else {
                1.0
            };
            let width = width.max(std::f64::consts::LN_10);
            let lo = if options.lower[j].is_finite() {
                options.lower[j]
            } else {
                start[j] - width
            };
            let hi = if options.upper[j].is_finite() {
                options.upper[j]
            } else {
                start[j] + width
            };
            (lo, hi)
        })
        .collect();
    // Latin hypercube: each coordinate's strata in a shuffled order, the
    // shuffle and the point within a stratum from a fixed seed (SplitMix64),
    // so a run is reproducible.
    let mut state = 0x5EED_u64;
    let mut next = || {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    };
    let extra = starts - 1;
    let mut points = vec![start.to_vec()];
    let mut strata: Vec<Vec<usize>> = Vec::new();
    for _ in 0..p {
        let mut order: Vec<usize> = (0..extra).collect();
        for i in (1..extra).rev() {
            let k = (next() * (i + 1) as f64) as usize;
            order.swap(i, k.min(i));
        }
        strata.push(order);
    }
    #[allow(clippy::needless_range_loop)] // k picks a stratum of every coordinate
    for k in 0..extra {
        points.push(
            (0..p)
                .map(|j| {
                    let u = (strata[j][k] as f64 + next()) / extra as f64;
                    ranges[j].0 + u * (ranges[j].1 - ranges[j].0)
                })
                .collect(),
        );
    }
    let outcomes: Vec<lm::Outcome> = points
        .par_iter()
        .map(|x0| {
            let out = minimize(problem, x0, options);
            progress.tick();
            out
        })
        .collect();
    let finite: Vec<&lm::Outcome> = outcomes.iter().filter(|o| o.ssr.is_finite()).collect();
    let Some(best) = finite
        .iter()
        .min_by(|a, b| a.ssr.total_cmp(&b.ssr))
        .copied()
    else {
        return (
            outcomes.into_iter().next().expect("one start at least"),
            None,
        );
    };
    let reached = finite
        .iter()
        .filter(|o| (o.ssr - best.ssr).abs() <= 1e-6 * best.ssr.max(f64::MIN_POSITIVE))
        .count();
    let worst = finite.iter().map(|o| o.ssr).fold(best.ssr, f64::max);
    let note = format!(
        "multi-start: {reached} of {starts} starts reached the best SSR (within 1e-6); {} failed; the worst optimum found had SSR {worst:.6e}",
        starts - finite.len()
    );
    (best.clone(), Some(note))
}

/// Profile-likelihood 95% intervals: for each param, the values where the
/// sum of squares, minimized over the other params, reaches
/// SSR · (1 + F(0.95; 1, n − p)/(n − p)) (Bates & Watts 1988, ch. 6).
pub(super) fn profile_intervals(
    problem: &(dyn lm::Residuals + Sync),
    log: &[bool],
    best: &[f64],
    ssr: f64,
    options: &Options,
    s: &stats::Summary,
) -> Vec<(f64, f64)> {
    let threshold = ssr * (1.0 + stats::f_quantile_95(1, s.dof) / s.dof as f64);
    let p = best.len();
    (0..p)
        .map(|j| {
            let profile_ssr = |fixed: f64, from: &[f64]| -> f64 {
                if p == 1 {
                    let mut r = vec![0.0; problem.residual_count()];
                    let mut jac = vec![0.0; problem.residual_count()];
                    return match problem.evaluate(&[fixed], &mut r, &mut jac) {
                        Ok(()) => r.iter().map(|v| v * v).sum(),
                        Err(_) => f64::INFINITY,
                    };
                }
                let reduced = Fixed {
                    problem,
                    index: j,
                    value: fixed,
                };
                let start: Vec<f64> = from
                    .iter()
                    .enumerate()
                    .filter(|(k, _)| *k != j)
                    .map(|(_, v)| *v)
                    .collect();
                let mut o = Options::unbounded(p - 1);
                let keep: Vec<usize> = (0..p).filter(|k| *k != j).collect();
                o.lower = keep.iter().map(|&k| options.lower[k]).collect();
                o.upper = keep.iter().map(|&k| options.upper[k]).collect();
                o.max_iterations = 500;
                // The threshold is found to a few digits; the inner fits
                // need not be tighter than that.
                o.ssr_tolerance = 1e-10;
                o.step_tolerance = 1e-9;
                let out = minimize(&reduced, &start, &o);
                if out.ssr.is_finite() {
                    out.ssr
                } else {
                    f64::INFINITY
                }
            };
            let value = if log[j] { best[j].exp() } else { best[j] };
            let spread = if log[j] {
                s.stderr[j] / value
            } else {
                s.stderr[j]
            };
            let spread = if spread.is_finite() && spread > 0.0 {
                spread
            } else {
                0.1 * best[j].abs().max(1.0)
            };
            let mut ends = [f64::NAN; 2];
            for (side, sign) in [(0usize, -1.0f64), (1, 1.0)] {
                // Walk out until the threshold is crossed, then bisect.
                let mut inner = best[j];
                let mut outer = best[j];
                let mut step = spread;
                let mut crossed = false;
                for _ in 0..60 {
                    outer = (best[j] + sign * step).clamp(options.lower[j], options.upper[j]);
                    if profile_ssr(outer, best) >= threshold {
                        crossed = true;
                        break;
                    }
                    if outer == options.lower[j] || outer == options.upper[j] {
                        break;
                    }
                    inner = outer;
                    step *= 2.0;
                }
                if !crossed {
                    ends[side] = if sign < 0.0 {
                        f64::NEG_INFINITY
                    } else {
                        f64::INFINITY
                    };
                    continue;
                }
                while (outer - inner).abs() > 1e-7 * spread {
                    let mid = 0.5 * (inner + outer);
                    if profile_ssr(mid, best) >= threshold {
                        outer = mid;
                    } else {
                        inner = mid;
                    }
                }
                ends[side] = 0.5 * (inner + outer);
            }
            let to_value = |v: f64| {
                if log[j] { v.exp() } else { v }
            };
            (to_value(ends[0]), to_value(ends[1]))
        })
        .collect()
}

/// The problem with one unknown held at a value.
struct Fixed<'a> {
    problem: &'a dyn lm::Residuals,
    index: usize,
    value: f64,
}

impl lm::Residuals for Fixed<'_> {
    fn residual_count(&self) -> usize {
        self.problem.residual_count()
    }
    fn evaluate(&self, x: &[f64], r: &mut [f64], jacobian: &mut [f64]) -> Result<(), String> {
        let p = x.len() + 1;
        let mut full = x.to_vec();
        full.insert(self.index, self.value);
        let mut jac = vec![0.0; r.len() * p];
        self.problem.evaluate(&full, r, &mut jac)?;
        for i in 0..r.len() {
            let mut c = 0;
            for k in 0..p {
                if k != self.index {
                    jacobian[i * (p - 1) + c] = jac[i * p + k];
                    c += 1;
                }
            }
        }
        Ok(())
    }
    fn residuals(&self, x: &[f64], r: &mut [f64]) -> Result<(), String> {
        let mut full = x.to_vec();
        full.insert(self.index, self.value);
        self.problem.residuals(&full, r)
    }
}
