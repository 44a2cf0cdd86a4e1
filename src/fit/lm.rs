//! Levenberg–Marquardt for small dense least-squares problems.
//!
//! Why our own: the fitter needs bounds, a clear reason for every stop, and
//! a step that shrinks (rather than the fit aborting) when the model cannot
//! be evaluated at a trial point. The method: each step solves the damped
//! problem `min ‖r + J h‖² + μ ‖D^½ h‖²` as a least-squares problem of the
//! stacked matrix `[J; (μ D)^½]` by SVD (no normal equations, so
//! ill-conditioned problems keep their digits); `D` is Moré's (1978)
//! scaling, the running maximum of the squared column norms of J; `μ` is
//! updated from the ratio of actual to predicted reduction (Nielsen 1999;
//! Madsen, Nielsen & Tingleff 2004, "Methods for non-linear least squares
//! problems"). Bounds are kept by projecting each trial point onto the box.
//!
//! With [`Step::Geodesic`] each step adds the second-order correction of
//! Transtrum & Sethna (2012, "Improvements to the Levenberg–Marquardt
//! algorithm for nonlinear least-squares minimization", arXiv:1201.5885):
//! the acceleration `a` solves the same damped problem with the directional
//! second derivative `r_vv` (a finite difference along the velocity `v`,
//! h = 0.1) in place of `r`, the step is `v + a/2`, and it is taken only if
//! `2‖a‖/‖v‖ ≤ 0.75` (otherwise it counts as a failed step and the
//! damping rises). The damping keeps Nielsen's update: on the NIST
//! problems it took fewer iterations than their delayed gratification
//! (docs/fitting.md). The linear model's predicted reduction is the
//! velocity's. It costs one more residual evaluation per step and pays
//! where the plain step is drawn along a flat direction (Eckerle4 from
//! NIST's first start on the log scale).
//!
//! Invariant: the returned point is the best evaluated point, inside the
//! bounds, and its residuals are finite.

use nalgebra::{DMatrix, DVector};

/// A least-squares problem: `m` residuals of `p` unknowns.
pub trait Residuals {
    fn residual_count(&self) -> usize;
    /// Residuals at `x` and their Jacobian (`m × p`, row-major); an error
    /// when the model cannot be evaluated there.
    fn evaluate(&self, x: &[f64], r: &mut [f64], jacobian: &mut [f64]) -> Result<(), String>;
    /// Residuals alone (the geodesic step's probe); by default through
    /// [`Residuals::evaluate`].
    fn residuals(&self, x: &[f64], r: &mut [f64]) -> Result<(), String> {
        let mut jacobian = vec![0.0; r.len() * x.len()];
        self.evaluate(x, r, &mut jacobian)
    }
}

/// How each iteration steps.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Step {
    /// The Levenberg–Marquardt step with Nielsen's damping update.
    #[default]
    Plain,
    /// The step with geodesic acceleration (Transtrum & Sethna 2012).
    Geodesic,
}

#[derive(Clone, Debug)]
pub struct Options {
    pub max_iterations: usize,
    /// Stop when an accepted step reduces the sum of squares by less than
    /// this fraction and the model predicts no more.
    pub ssr_tolerance: f64,
    /// Stop when the step is smaller than this, relative to `|x| + it`.
    pub step_tolerance: f64,
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
    pub step: Step,
}

/// Transtrum & Sethna's (2012) recommended probe length along the velocity
/// and bound on the acceleration's share of the step.
const GEODESIC_PROBE: f64 = 0.1;
const GEODESIC_RATIO: f64 = 0.75;

impl Options {
    pub fn unbounded(p: usize) -> Options {
        Options {
            max_iterations: 2000,
            ssr_tolerance: 1e-15,
            step_tolerance: 1e-13,
            lower: vec![f64::NEG_INFINITY; p],
            upper: vec![f64::INFINITY; p],
            step: Step::Plain,
        }
    }
}

/// Why the iteration stopped.
#[derive(Clone, Debug, PartialEq)]
pub enum Stop {
    /// The sum of squares stopped decreasing.
    SsrConverged,
    /// The step became negligible.
    StepConverged,
    /// The gradient is zero.
    GradientZero,
    IterationLimit,
    /// The damped problem could not be solved (a Jacobian of NaNs).
    Singular,
    /// The model could not be evaluated at the start.
    StartFailed(String),
}

impl Stop {
    pub fn converged(&self) -> bool {
        matches!(
            self,
            Stop::SsrConverged | Stop::StepConverged | Stop::GradientZero
        )
    }
    pub fn describe(&self) -> String {
        match self {
            Stop::SsrConverged => {
                "converged: the sum of squares stopped decreasing (relative change below 1e-15)"
                    .into()
            }
            Stop::StepConverged => {
                "converged: the step became negligible (relative size below 1e-13)".into()
            }
            Stop::GradientZero => "converged: the gradient is zero".into(),
            Stop::IterationLimit => "stopped at the iteration limit without converging".into(),
            Stop::Singular => {
                "stopped: the damped step could not be computed (the Jacobian is not finite)".into()
            }
            Stop::StartFailed(e) => {
                format!("the model cannot be evaluated at the starting point: {e}")
            }
        }
    }
}

#[derive(Clone, Debug)]
pub struct Outcome {
    pub x: Vec<f64>,
    pub residuals: Vec<f64>,
    /// Row-major `m × p`.
    pub jacobian: Vec<f64>,
    pub ssr: f64,
    pub iterations: usize,
    pub evaluations: usize,
    /// Trial points where the model could not be evaluated (the step was
    /// shrunk).
    pub failed_evaluations: usize,
    pub stop: Stop,
}

fn sum_of_squares(r: &[f64]) -> f64 {
    r.iter().map(|x| x * x).sum()
}

/// Minimizes the sum of squared residuals from `start`.
pub fn minimize(problem: &dyn Residuals, start: &[f64], options: &Options) -> Outcome {
    let p = start.len();
    let m = problem.residual_count();
    let clamp = |x: &mut [f64]| {
        for (j, v) in x.iter_mut().enumerate() {
            *v = v.clamp(options.lower[j], options.upper[j]);
        }
    };
    let mut x = start.to_vec();
    clamp(&mut x);
    let mut r = vec![0.0; m];
    let mut jac = vec![0.0; m * p];
    let mut evaluations = 1;
    let failed = |x: Vec<f64>, stop| Outcome {
        x,
        residuals: Vec::new(),
        jacobian: Vec::new(),
        ssr: f64::NAN,
        iterations: 0,
        evaluations: 1,
        failed_evaluations: 1,
        stop,
    };
    if let Err(e) = problem.evaluate(&x, &mut r, &mut jac) {
        return failed(x, Stop::StartFailed(e));
    }
    if r.iter().chain(&jac).any(|v| !v.is_finite()) {
        return failed(
            x,
            Stop::StartFailed("a residual or derivative is not finite".into()),
        );
    }
    let mut ssr = sum_of_squares(&r);
    let mut scale = vec![0.0f64; p];
    let update_scale = |scale: &mut Vec<f64>, jac: &[f64]| {
        for (j, s) in scale.iter_mut().enumerate() {
            let norm: f64 = (0..m).map(|i| jac[i * p + j].powi(2)).sum();
            *s = s.max(norm);
        }
    };
    update_scale(&mut scale, &jac);
    let mut mu = 1e-3;
    let mut nu = 2.0;
    let mut failed_evaluations = 0;
    let mut stop = Stop::IterationLimit;
    let mut iterations = 0;
    let (mut r_new, mut jac_new) = (vec![0.0; m], vec![0.0; m * p]);
    while iterations < options.max_iterations {
        iterations += 1;
        let j_mat = DMatrix::from_row_slice(m, p, &jac);
        let gradient = j_mat.transpose() * DVector::from_column_slice(&r);
        if gradient.iter().all(|g| *g == 0.0) {
            stop = Stop::GradientZero;
            break;
        }
        let mut stacked = DMatrix::zeros(m + p, p);
        stacked.view_mut((0, 0), (m, p)).copy_from(&j_mat);
        let floor = scale.iter().cloned().fold(0.0, f64::max) * 1e-30 + f64::MIN_POSITIVE;
        for j in 0..p {
            stacked[(m + j, j)] = (mu * scale[j].max(floor)).sqrt();
        }
        let mut rhs = DVector::zeros(m + p);
        for i in 0..m {
            rhs[i] = -r[i];
        }
        let svd = stacked.svd(true, true);
        let Ok(velocity) = svd.solve(&rhs, 0.0) else {
            stop = Stop::Singular;
            break;
        };
        if velocity.iter().any(|v| !v.is_finite()) {
            stop = Stop::Singular;
            break;
        }
        let h = match options.step {
            Step::Plain => velocity.clone(),
            Step::Geodesic => match acceleration(problem, &x, &r, &j_mat, &velocity, &svd, options)
            {
                Acceleration::Within(a) => &velocity + a * 0.5,
                Acceleration::TooLarge => {
                    mu *= nu;
                    nu *= 2.0;
                    continue;
                }
                Acceleration::Unavailable => velocity.clone(),
            },
        };
        let mut trial: Vec<f64> = x.iter().zip(h.iter()).map(|(a, b)| a + b).collect();
        clamp(&mut trial);
        let step: Vec<f64> = trial.iter().zip(&x).map(|(a, b)| a - b).collect();
        let step_norm = step.iter().map(|v| v * v).sum::<f64>().sqrt();
        let x_norm = x.iter().map(|v| v * v).sum::<f64>().sqrt();
        if step_norm <= options.step_tolerance * (x_norm + options.step_tolerance) {
            stop = Stop::StepConverged;
            break;
        }
        // The linear model predicts the velocity's reduction; the
        // acceleration is a correction it cannot see.
        let modelled = match options.step {
            Step::Plain => DVector::from_column_slice(&step),
            Step::Geodesic => velocity,
        };
        let predicted_r = &j_mat * modelled + DVector::from_column_slice(&r);
        let predicted = ssr - predicted_r.norm_squared();
        evaluations += 1;
        let ok = problem.evaluate(&trial, &mut r_new, &mut jac_new).is_ok()
            && r_new.iter().chain(&jac_new).all(|v| v.is_finite());
        if !ok {
            failed_evaluations += 1;
            mu *= nu;
            nu *= 2.0;
            continue;
        }
        let ssr_new = sum_of_squares(&r_new);
        let rho = if predicted > 0.0 {
            (ssr - ssr_new) / predicted
        } else {
            -1.0
        };
        if rho > 0.0 {
            let relative = (ssr - ssr_new) / ssr.max(f64::MIN_POSITIVE);
            x = trial;
            std::mem::swap(&mut r, &mut r_new);
            std::mem::swap(&mut jac, &mut jac_new);
            ssr = ssr_new;
            update_scale(&mut scale, &jac);
            mu *= (1.0f64 / 3.0).max(1.0 - (2.0 * rho - 1.0).powi(3));
            nu = 2.0;
            if relative <= options.ssr_tolerance
                && predicted / ssr.max(f64::MIN_POSITIVE) <= options.ssr_tolerance
            {
                stop = Stop::SsrConverged;
                break;
            }
            if ssr == 0.0 {
                stop = Stop::SsrConverged;
                break;
            }
        } else {
            mu *= nu;
            nu *= 2.0;
            if !mu.is_finite() || mu > 1e300 {
                stop = Stop::StepConverged;
                break;
            }
        }
    }
    Outcome {
        x,
        residuals: r,
        jacobian: jac,
        ssr,
        iterations,
        evaluations,
        failed_evaluations,
        stop,
    }
}

enum Acceleration {
    /// Within the bound on its share of the step.
    Within(DVector<f64>),
    /// Too large a share: the step is refused and the damping raised.
    TooLarge,
    /// The probe point is outside the bounds or cannot be evaluated: the
    /// plain step is taken.
    Unavailable,
}

/// The geodesic acceleration along `velocity`: the damped least-squares
/// solution (same factorization) for the directional second derivative
/// `r_vv ≈ (2/h) ((r(x + h v) − r(x))/h − J v)`.
fn acceleration(
    problem: &dyn Residuals,
    x: &[f64],
    r: &[f64],
    j_mat: &DMatrix<f64>,
    velocity: &DVector<f64>,
    svd: &nalgebra::SVD<f64, nalgebra::Dyn, nalgebra::Dyn>,
    options: &Options,
) -> Acceleration {
    let h = GEODESIC_PROBE;
    let probe: Vec<f64> = x
        .iter()
        .zip(velocity.iter())
        .map(|(a, v)| a + h * v)
        .collect();
    let inside = probe
        .iter()
        .enumerate()
        .all(|(j, v)| *v >= options.lower[j] && *v <= options.upper[j]);
    let mut r_probe = vec![0.0; r.len()];
    if !inside
        || problem.residuals(&probe, &mut r_probe).is_err()
        || r_probe.iter().any(|v| !v.is_finite())
    {
        return Acceleration::Unavailable;
    }
    let jv = j_mat * velocity;
    let m = r.len();
    let mut rhs = DVector::zeros(m + x.len());
    for i in 0..m {
        let r_vv = (2.0 / h) * ((r_probe[i] - r[i]) / h - jv[i]);
        rhs[i] = -r_vv;
    }
    let Ok(a) = svd.solve(&rhs, 0.0) else {
        return Acceleration::Unavailable;
    };
    if a.iter().any(|v| !v.is_finite()) {
        return Acceleration::Unavailable;
    }
    if 2.0 * a.norm() <= GEODESIC_RATIO * velocity.norm() {
        Acceleration::Within(a)
    } else {
        Acceleration::TooLarge
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rosenbrock's function as residuals (10 (y − x²), 1 − x): the minimum
    /// is (1, 1) with zero residuals (Rosenbrock 1960).
    struct Rosenbrock;
    impl Residuals for Rosenbrock {
        fn residual_count(&self) -> usize {
            2
        }
        fn evaluate(&self, x: &[f64], r: &mut [f64], j: &mut [f64]) -> Result<(), String> {
            r[0] = 10.0 * (x[1] - x[0] * x[0]);
            r[1] = 1.0 - x[0];
            j.copy_from_slice(&[-20.0 * x[0], 10.0, -1.0, 0.0]);
            Ok(())
        }
    }

    #[test]
    fn rosenbrock_reaches_its_minimum() {
        let out = minimize(&Rosenbrock, &[-1.2, 1.0], &Options::unbounded(2));
        assert!(out.stop.converged(), "{:?}", out.stop);
        assert!(
            (out.x[0] - 1.0).abs() < 1e-8 && (out.x[1] - 1.0).abs() < 1e-8,
            "{:?}",
            out.x
        );
    }

    #[test]
    fn geodesic_steps_reach_rosenbrocks_minimum() {
        let mut o = Options::unbounded(2);
        o.step = Step::Geodesic;
        let out = minimize(&Rosenbrock, &[-1.2, 1.0], &o);
        assert!(out.stop.converged(), "{:?}", out.stop);
        assert!(
            (out.x[0] - 1.0).abs() < 1e-8 && (out.x[1] - 1.0).abs() < 1e-8,
            "{:?}",
            out.x
        );
    }

    #[test]
    fn bounds_hold() {
        let mut o = Options::unbounded(2);
        o.upper = vec![0.5, 10.0];
        let out = minimize(&Rosenbrock, &[-1.2, 1.0], &o);
        assert!(out.x[0] <= 0.5);
        assert!((out.x[0] - 0.5).abs() < 1e-6, "{:?}", out.x);
    }
}
