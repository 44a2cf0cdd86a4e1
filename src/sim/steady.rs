//! Steady states: Newton's method with a backtracking line search on the
//! (reduced) system, started from an integrated state, integrating further
//! when Newton fails; then the eigenvalues of the Jacobian for stability.
//!
//! Why reduced: every conservation law adds a zero eigenvalue and makes the
//! full Jacobian singular; on the independent species (totals held at their
//! initial values) the steady state lies in the stoichiometric class of the
//! initial state and Newton's linear systems are regular. Timed events are
//! not part of a steady state and are ignored here.

use super::{Prepared, Settings, SimError, default_until, simulate};
use crate::model::Model;
use crate::numeric::CompiledSystem;
use nalgebra::{DMatrix, DVector};

/// Stability from the eigenvalues of the Jacobian at the steady state.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stability {
    /// Every eigenvalue has a negative real part.
    Stable,
    /// Some eigenvalue has a positive real part.
    Unstable,
    /// The largest real part is zero within rounding: linearisation cannot tell.
    Marginal,
}

#[derive(Debug, Clone, PartialEq)]
pub struct SteadyState {
    /// Every species (model order), then every observable.
    pub values: Vec<f64>,
    /// Eigenvalues of the reduced Jacobian as (real, imaginary), sorted by
    /// real part, largest first.
    pub eigenvalues: Vec<(f64, f64)>,
    pub stability: Stability,
    /// max |dy/dt| at the reported state.
    pub residual: f64,
    /// The model time integrated to before Newton converged.
    pub integrated_to: f64,
    pub newton_iterations: usize,
}

/// How little an integrated state may move, relative to its largest
/// species, when the integrated time grows tenfold, to count as a steady
/// state when Newton's method cannot confirm it.
const STATIONARY_FRACTION: f64 = 1e-6;

/// Finds the steady state of `prepared` from its initial state.
pub fn steady_state(prepared: &Prepared, settings: &Settings) -> Result<SteadyState, SimError> {
    steady_state_of(&prepared.model, &prepared.system, settings)
}

/// Finds the steady state of `model` compiled as `system` (constants and
/// the initial state from `model`).
pub fn steady_state_of(
    model: &Model,
    system: &CompiledSystem,
    settings: &Settings,
) -> Result<SteadyState, SimError> {
    let mut model = model.clone();
    model.events.clear();
    let constants = crate::numeric::constants_of(&model);
    let mut w = system.workspace(&constants);
    let tight = Settings {
        rtol: settings.rtol.min(1e-8),
        atol: settings.atol.min(1e-12),
        ..*settings
    };
    let mut until = default_until(&model, system);
    let mut last_reason = String::new();
    let mut previous: Option<Vec<f64>> = None;
    for attempt in 0..10 {
        let tr = match simulate(&model, system, &tight, &[until]) {
            Ok(tr) => tr,
            // Integrating ever further failed (an oscillation runs into the
            // step limit): the question asked was the steady state.
            Err(e) if attempt > 0 && e.kind == super::SimErrorKind::Integration => {
                return Err(SimError::no_steady_state(format!(
                    "no steady state found: Newton's method did not converge from the state at t = {:e} ({last_reason}), and integrating on to t = {until:e} failed ({}); the system may oscillate or grow without bound",
                    until / 10.0,
                    e.named(&model)
                )));
            }
            Err(e) => return Err(e.named(&model)),
        };
        let Some(row) = tr.rows.last() else {
            return Err(SimError::no_steady_state(
                "the integration produced no state",
            ));
        };
        let x0 = system.state_from_species(&row[..system.species_count()]);
        match newton(system, &mut w, x0) {
            Ok((x, iterations)) => {
                let mut values = Vec::new();
                system.outputs(&mut w, &x, until, &mut values);
                let scale = values[..system.species_count()]
                    .iter()
                    .fold(0.0f64, |a, v| a.max(v.abs()))
                    .max(1e-300);
                if let Some(i) = (0..system.species_count()).find(|&i| values[i] < -1e-8 * scale) {
                    last_reason = format!(
                        "Newton's method reached a state with negative `{}` = {:e}",
                        model.species[i].name, values[i]
                    );
                } else {
                    return Ok(found(system, &mut w, &x, until, values, iterations));
                }
            }
            Err(reason) => {
                // A degenerate steady state (a singular Jacobian there, as in
                // Robertson's problem, whose state (0, 0, 1) is approached
                // like 1/t) defeats Newton's method. The integration has
                // still arrived when ten times more integrated time moved no
                // species by more than a small fraction of the largest one
                // (the residual itself is no test: it is bounded below by
                // the solver's absolute tolerance times the fast rates).
                let species = &row[..system.species_count()];
                let scale = species.iter().fold(0.0f64, |a, v| a.max(v.abs()));
                let moved = previous.as_ref().map(|p: &Vec<f64>| {
                    p.iter()
                        .zip(species)
                        .fold(0.0f64, |a, (x, y)| a.max((x - y).abs()))
                });
                if let Some(moved) = moved
                    && scale > 0.0
                    && moved <= STATIONARY_FRACTION * scale
                {
                    // Species still falling but already negligible are
                    // probably headed for zero (Robertson's A and B go like
                    // 1/t): try the state with them at zero, which counts
                    // only if its rates are exactly zero or Newton's method
                    // converges from it.
                    let before = previous.as_deref().unwrap_or(species);
                    let snapped = vanishing_species_at_zero(&model, before, species, scale);
                    if let Ok((x, iterations)) =
                        newton(system, &mut w, system.state_from_species(&snapped))
                    {
                        let mut values = Vec::new();
                        system.outputs(&mut w, &x, until, &mut values);
                        if values[..system.species_count()]
                            .iter()
                            .all(|v| *v >= -1e-8 * scale)
                        {
                            return Ok(found(system, &mut w, &x, until, values, iterations));
                        }
                    }
                    let x = system.state_from_species(species);
                    let mut values = Vec::new();
                    system.outputs(&mut w, &x, until, &mut values);
                    return Ok(found(system, &mut w, &x, until, values, 0));
                }
                previous = Some(species.to_vec());
                last_reason = reason;
            }
        }
        until *= 10.0;
    }
    Err(SimError::no_steady_state(format!(
        "no steady state found: integrated to t = {:e} without Newton's method converging ({last_reason}); the system may oscillate, grow without bound, or approach its steady state too slowly",
        until / 10.0
    )))
}

/// The species values `now` with every species that fell since `before`
/// and is below [`STATIONARY_FRACTION`] of `scale` set to zero; each total's
/// value is then restored on its largest species, so the state stays in the
/// stoichiometric class.
fn vanishing_species_at_zero(model: &Model, before: &[f64], now: &[f64], scale: f64) -> Vec<f64> {
    let mut snapped: Vec<f64> = now
        .iter()
        .zip(before)
        .map(|(&v, &b)| {
            if v.abs() <= STATIONARY_FRACTION * scale && v < b {
                0.0
            } else {
                v
            }
        })
        .collect();
    for total in &model.totals {
        let weighted = |i: usize, c| crate::model::coef_f64(c) * snapped[i];
        let Some(&(largest, c)) = total.terms.iter().max_by(|a, b| {
            weighted(a.0, a.1)
                .abs()
                .total_cmp(&weighted(b.0, b.1).abs())
        }) else {
            continue;
        };
        let sum: f64 = total.terms.iter().map(|&(i, c)| weighted(i, c)).sum();
        snapped[largest] += (total.value - sum) / crate::model::coef_f64(c);
    }
    snapped
}

/// Newton with backtracking on ||F||²; returns the state and iteration count.
fn newton(
    system: &CompiledSystem,
    w: &mut crate::numeric::Workspace,
    mut x: Vec<f64>,
) -> Result<(Vec<f64>, usize), String> {
    let n = system.nstates;
    if n == 0 {
        return Ok((x, 0));
    }
    let mut f = vec![0.0; n];
    let norm2 = |v: &[f64]| v.iter().map(|a| a * a).sum::<f64>();
    system.rhs(w, &x, 0.0, &mut f);
    let mut fnorm = norm2(&f);
    let xscale = x.iter().fold(0.0f64, |a, v| a.max(v.abs())).max(1e-300);
    for it in 0..100 {
        if !fnorm.is_finite() {
            return Err("the rates became non-finite".into());
        }
        if fnorm == 0.0 {
            // Every rate is exactly zero: a steady state, even where J is singular.
            return Ok((x, it));
        }
        let j = system.dense_jacobian(w, &x, 0.0);
        let jm = DMatrix::from_fn(n, n, |r, c| j[r][c]);
        let rhs = DVector::from_iterator(n, f.iter().map(|v| -v));
        let Some(dx) = jm.lu().solve(&rhs) else {
            return Err("the Jacobian is singular at the iterate".into());
        };
        // Converged: the full Newton step is far below the state's size.
        let step_small = dx
            .iter()
            .zip(&x)
            .all(|(d, xi)| d.abs() <= 1e-10 * xi.abs() + 1e-14 * xscale);
        if step_small {
            return Ok((x, it));
        }
        let mut lambda = 1.0;
        let mut trial = vec![0.0; n];
        let mut ftrial = vec![0.0; n];
        loop {
            for k in 0..n {
                trial[k] = x[k] + lambda * dx[k];
            }
            system.rhs(w, &trial, 0.0, &mut ftrial);
            let tn = norm2(&ftrial);
            if tn.is_finite() && tn <= (1.0 - 1e-4 * lambda) * fnorm {
                break;
            }
            lambda *= 0.5;
            if lambda < 1e-6 {
                return Err("the line search could not reduce the residual".into());
            }
        }
        std::mem::swap(&mut x, &mut trial);
        std::mem::swap(&mut f, &mut ftrial);
        fnorm = norm2(&f);
        if fnorm == 0.0 {
            return Ok((x, it + 1));
        }
    }
    Err("no convergence in 100 iterations".into())
}

/// The steady state at reduced state `x` (outputs `values`): its residual
/// and the eigenvalues and stability of the reduced Jacobian there.
fn found(
    system: &CompiledSystem,
    w: &mut crate::numeric::Workspace,
    x: &[f64],
    until: f64,
    values: Vec<f64>,
    newton_iterations: usize,
) -> SteadyState {
    let mut f = vec![0.0; system.nstates];
    system.rhs(w, x, until, &mut f);
    let residual = f.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let (eigenvalues, stability) = eigen(system, w, x, until);
    SteadyState {
        values,
        eigenvalues,
        stability,
        residual,
        integrated_to: until,
        newton_iterations,
    }
}

fn eigen(
    system: &CompiledSystem,
    w: &mut crate::numeric::Workspace,
    x: &[f64],
    t: f64,
) -> (Vec<(f64, f64)>, Stability) {
    let n = system.nstates;
    if n == 0 {
        return (Vec::new(), Stability::Stable);
    }
    let j = system.dense_jacobian(w, x, t);
    let m = DMatrix::from_fn(n, n, |r, c| j[r][c]);
    let accurate = super::accurate_eigenvalues(&m);
    // Each eigenvalue is accurate relative to its own size, so its sign is
    // judged against its own magnitude: a real part within 1e-9 of |λ| (a
    // zero or a purely imaginary pair) cannot decide stability.
    let mut any_positive = false;
    let mut any_undecided = false;
    for z in &accurate {
        let tol = 1e-9 * z.norm();
        if z.norm() == 0.0 || z.re.abs() <= tol {
            any_undecided = true;
        } else if z.re > 0.0 {
            any_positive = true;
        }
    }
    let stability = if any_positive {
        Stability::Unstable
    } else if any_undecided {
        Stability::Marginal
    } else {
        Stability::Stable
    };
    // `+ 0.0` turns a negative zero into zero for printing.
    let mut eig: Vec<(f64, f64)> = accurate.iter().map(|z| (z.re + 0.0, z.im + 0.0)).collect();
    eig.sort_by(|a, b| b.0.total_cmp(&a.0).then(b.1.total_cmp(&a.1)));
    (eig, stability)
}
