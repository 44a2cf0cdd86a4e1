//! Steady states followed along one constant: pseudo-arclength
//! continuation on the reduced system, with folds (saddle-node points) and
//! Hopf points detected from the tangent and the eigenvalues and located
//! precisely.
//!
//! Why: a scan that restarts every point from the initial state lands on
//! whichever branch that state is drawn to, so bistability, hysteresis and
//! the unstable branch between are invisible. Following the branch from
//! the previous point, and parametrising it by arclength rather than by
//! the constant, walks around folds, so both stable branches and the
//! unstable one appear.
//!
//! Method (Keller's pseudo-arclength continuation, common practice):
//! unknowns u = (x, λ); predictor u + h·τ along the unit tangent τ of
//! F(x, λ) = 0; corrector Newton on F = 0 with τ·(u − u_pred) = 0 (the
//! bordered Jacobian [F_x F_λ; τᵀ]); norms weighted by the state's and the
//! range's scale. A fold is where τ's λ component changes sign, a Hopf
//! point where the largest real part of a complex pair does; each is
//! located by secant steps along the branch from the point before it.
//!
//! Invariants: every reported point solves F = 0 to Newton's tolerance;
//! F_λ is the exact derivative (compiled by `numeric::derivatives`, derived
//! params expanded); points are in branch order; the constant stays within
//! the requested range.

use super::steady::{Stability, steady_state_of};
use super::{SimError, accurate_eigenvalues};
use crate::model::{Model, Sym};
use crate::numeric::{CompiledDerivatives, CompiledSystem, StateLayout, constants_of};
use nalgebra::{DMatrix, DVector};

/// One point of a followed branch.
#[derive(Debug, Clone, PartialEq)]
pub struct BranchPoint {
    /// The followed constant's value.
    pub parameter: f64,
    /// Every species (model order), then every observable.
    pub values: Vec<f64>,
    pub stability: Stability,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpecialKind {
    /// A saddle-node: the branch turns back, a real eigenvalue crosses zero.
    Fold,
    /// A complex pair of eigenvalues crosses the imaginary axis.
    Hopf,
}

impl SpecialKind {
    pub fn name(self) -> &'static str {
        match self {
            SpecialKind::Fold => "fold",
            SpecialKind::Hopf => "hopf",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct SpecialPoint {
    pub kind: SpecialKind,
    pub point: BranchPoint,
    /// For a Hopf point, the angular frequency of the pair crossing.
    pub frequency: Option<f64>,
    /// Index of the branch point just before it.
    pub after: usize,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Branch {
    pub points: Vec<BranchPoint>,
    pub special: Vec<SpecialPoint>,
    /// Why the continuation stopped before leaving the range, if it did.
    pub stopped: Option<String>,
}

/// What to follow: a param, fixed species or total of `model`, from the
/// steady state at `from` towards `to` and on around any folds until the
/// constant leaves the range between them.
pub struct Follow<'a> {
    pub model: &'a Model,
    pub name: &'a str,
    pub from: f64,
    pub to: f64,
    /// Points a branch crossing the range once would have at the largest
    /// step (the step shrinks where the branch bends).
    pub points: usize,
    pub settings: super::Settings,
}

/// The most continuation steps taken (a closed branch would loop forever).
const MAX_STEPS: usize = 20_000;
/// Newton's tolerance on the weighted correction.
const NEWTON_TOLERANCE: f64 = 1e-11;

struct Continuation<'a> {
    reduced: Model,
    system: CompiledSystem,
    derivative: CompiledDerivatives,
    name: &'a str,
    /// Weights of the arclength norm: 1/scale of the state, 1/range of λ.
    weight_x: f64,
    weight_lambda: f64,
    n: usize,
}

/// F, F_x and F_λ at a point.
type Linearised = (Vec<f64>, DMatrix<f64>, Vec<f64>);

/// A point on the branch with its tangent.
#[derive(Clone)]
struct Onbranch {
    x: Vec<f64>,
    lambda: f64,
    tangent: Vec<f64>,
}

impl Continuation<'_> {
    fn constants_at(&self, lambda: f64) -> Result<Vec<f64>, SimError> {
        let m = self
            .reduced
            .with_overrides(&[(self.name.to_string(), lambda)])
            .map_err(SimError::input)?;
        Ok(constants_of(&m))
    }

    /// F, F_x (dense) and F_λ at (x, λ).
    fn evaluate(&self, x: &[f64], lambda: f64) -> Result<Linearised, SimError> {
        let n = self.n;
        let constants = self.constants_at(lambda)?;
        let mut w = self.system.workspace(&constants);
        let mut f = vec![0.0; n];
        self.system.rhs(&mut w, x, 0.0, &mut f);
        let j = self.system.dense_jacobian(&mut w, x, 0.0);
        let jm = DMatrix::from_fn(n, n, |r, c| j[r][c]);
        let mut dw = self.derivative.workspace(&constants);
        let mut f_lambda = vec![0.0; n];
        self.derivative
            .rhs_mul(&mut dw, x, 0.0, &[1.0], &mut f_lambda);
        Ok((f, jm, f_lambda))
    }

    /// The bordered matrix [F_x F_λ; cᵀ] for a row `c` in unweighted
    /// coordinates.
    fn bordered(&self, jx: &DMatrix<f64>, f_lambda: &[f64], row: &[f64]) -> DMatrix<f64> {
        let n = self.n;
        DMatrix::from_fn(n + 1, n + 1, |r, c| {
            if r < n {
                if c < n { jx[(r, c)] } else { f_lambda[r] }
            } else {
                row[c]
            }
        })
    }

    fn norm(&self, v: &[f64]) -> f64 {
        let n = self.n;
        let sx: f64 = v[..n].iter().map(|a| (a * self.weight_x).powi(2)).sum();
        (sx + (v[n] * self.weight_lambda).powi(2)).sqrt()
    }

    /// The weighted inner-product row: ⟨a, ·⟩ = Σ w² a_i (·)_i.
    fn weighted(&self, a: &[f64]) -> Vec<f64> {
        let n = self.n;
        (0..=n)
            .map(|i| {
                let w = if i < n {
                    self.weight_x
                } else {
                    self.weight_lambda
                };
                a[i] * w * w
            })
            .collect()
    }

    /// The unit tangent at (x, λ), oriented along `previous`.
    fn tangent(&self, x: &[f64], lambda: f64, previous: &[f64]) -> Result<Vec<f64>, SimError> {
        let n = self.n;
        let (_, jx, fl) = self.evaluate(x, lambda)?;
        let a = self.bordered(&jx, &fl, &self.weighted(previous));
        let mut rhs = DVector::zeros(n + 1);
        rhs[n] = 1.0;
        let t = a.lu().solve(&rhs).ok_or_else(|| {
            SimError::no_steady_state(format!(
                "the branch's tangent is undefined at {} = {lambda:e} (a branch point)",
                self.name
            ))
        })?;
        let t: Vec<f64> = t.iter().copied().collect();
        let size = self.norm(&t);
        Ok(t.iter().map(|v| v / size).collect())
    }

    /// Newton from the predicted point on the hyperplane through it normal
    /// to `direction`.
    fn correct(&self, predicted: &[f64], direction: &[f64]) -> Option<(Vec<f64>, f64, usize)> {
        let n = self.n;
        let row = self.weighted(direction);
        let mut u = predicted.to_vec();
        for iteration in 1..=12 {
            let (f, jx, fl) = self.evaluate(&u[..n], u[n]).ok()?;
            let a = self.bordered(&jx, &fl, &row);
            let mut rhs = DVector::from_fn(n + 1, |i, _| if i < n { -f[i] } else { 0.0 });
            rhs[n] = -(0..=n).map(|i| row[i] * (u[i] - predicted[i])).sum::<f64>();
            let delta = a.lu().solve(&rhs)?;
            for i in 0..=n {
                u[i] += delta[i];
            }
            if !u.iter().all(|v| v.is_finite()) {
                return None;
            }
            let step: Vec<f64> = delta.iter().copied().collect();
            if self.norm(&step) <= NEWTON_TOLERANCE {
                return Some((u[..n].to_vec(), u[n], iteration));
            }
        }
        None
    }

    fn point(
        &self,
        x: &[f64],
        lambda: f64,
    ) -> Result<(BranchPoint, Vec<nalgebra::Complex<f64>>), SimError> {
        let constants = self.constants_at(lambda)?;
        let mut w = self.system.workspace(&constants);
        let mut values = Vec::new();
        self.system.outputs(&mut w, x, 0.0, &mut values);
        let (_, jx, _) = self.evaluate(x, lambda)?;
        let eigen = if self.n == 0 {
            Vec::new()
        } else {
            accurate_eigenvalues(&jx)
        };
        let stability = stability_of(&eigen);
        Ok((
            BranchPoint {
                parameter: lambda,
                values,
                stability,
            },
            eigen,
        ))
    }

    /// From `start`, the corrected point a step `h` along its tangent, with
    /// its own tangent.
    fn advance(&self, start: &Onbranch, h: f64) -> Option<(Onbranch, usize)> {
        let mut predicted: Vec<f64> = start.x.clone();
        predicted.push(start.lambda);
        for (p, t) in predicted.iter_mut().zip(&start.tangent) {
            *p += h * t;
        }
        let (x, lambda, iterations) = self.correct(&predicted, &start.tangent)?;
        let tangent = self.tangent(&x, lambda, &start.tangent).ok()?;
        Some((Onbranch { x, lambda, tangent }, iterations))
    }
}

/// The largest real part among complex pairs (None without a pair).
fn hopf_function(eigen: &[nalgebra::Complex<f64>]) -> Option<f64> {
    eigen
        .iter()
        .filter(|z| z.im.abs() > 1e-9 * z.norm())
        .map(|z| z.re)
        .max_by(|a, b| a.total_cmp(b))
}

fn stability_of(eigen: &[nalgebra::Complex<f64>]) -> Stability {
    let mut any_positive = false;
    let mut any_undecided = false;
    for z in eigen {
        if z.re.abs() <= 1e-9 * z.norm() {
            any_undecided = true;
        } else if z.re > 0.0 {
            any_positive = true;
        }
    }
    if any_positive {
        Stability::Unstable
    } else if any_undecided {
        Stability::Marginal
    } else {
        Stability::Stable
    }
}

/// Follows the steady-state branch of `follow.model` through the constant
/// `follow.name`.
pub fn follow_branch(follow: &Follow<'_>) -> Result<Branch, SimError> {
    let model = follow.model;
    let sym = match model.lookup(follow.name) {
        Some(s @ (Sym::Param(_) | Sym::Fixed(_) | Sym::Total(_))) => s,
        _ => {
            return Err(SimError::input(format!(
                "following a branch needs a param, fixed species or total; `{}` is not one",
                follow.name
            )));
        }
    };
    if !(follow.from.is_finite() && follow.to.is_finite()) || follow.from == follow.to {
        return Err(SimError::input(
            "the range to follow must have two different ends",
        ));
    }
    let start_model = model
        .with_overrides(&[(follow.name.to_string(), follow.from)])
        .map_err(SimError::input)?;
    let reduced = crate::network::reduce(&start_model).map_err(|d| SimError::setup(d.message))?;
    let layout = StateLayout {
        state_species: reduced.independent.clone(),
        dependent: reduced
            .dependent
            .iter()
            .map(|d| (d.species, d.formula.clone()))
            .collect(),
    };
    let system = CompiledSystem::compile(&reduced.model, &layout)?;
    // The reduced model may have renumbered nothing but appended totals; the
    // followed name means the same constant there.
    let sym = reduced.model.lookup(follow.name).unwrap_or(sym);
    let derivative = CompiledDerivatives::compile(&reduced.model, &layout, &[sym])?;
    let first = steady_state_of(&reduced.model, &system, &follow.settings)
        .map_err(|e| e.named(&reduced.model))?;
    let x0 = system.state_from_species(&first.values[..system.species_count()]);
    let n = system.nstates;
    // The state's scale: its size at the start, or the initial values' (a
    // branch may start at zero), grown as the branch does.
    let largest = |v: &[f64]| v.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let initial_scale = largest(&reduced.model.initial_state());
    let mut scale = largest(&first.values[..system.species_count()])
        .max(initial_scale)
        .max(1e-12);
    let range = (follow.to - follow.from).abs();
    let mut c = Continuation {
        reduced: reduced.model.clone(),
        system,
        derivative,
        name: follow.name,
        weight_x: 1.0 / scale,
        weight_lambda: 1.0 / range,
        n,
    };
    let (lo, hi) = (follow.from.min(follow.to), follow.from.max(follow.to));
    let towards = (follow.to - follow.from).signum();
    let mut initial_direction = vec![0.0; n + 1];
    initial_direction[n] = towards;
    let tangent = c.tangent(&x0, follow.from, &initial_direction)?;
    let mut current = Onbranch {
        x: x0,
        lambda: follow.from,
        tangent,
    };
    let (p, mut eigen) = c.point(&current.x, current.lambda)?;
    let mut branch = Branch {
        points: vec![p],
        special: Vec::new(),
        stopped: None,
    };
    // Steps in the weighted arclength; one crossing of the range is about
    // 1 in it.
    let max_step = 1.0 / (follow.points.max(2) - 1) as f64;
    let min_step = max_step * 1e-6;
    let mut h = max_step;
    for _ in 0..MAX_STEPS {
        let Some((next, iterations)) = c.advance(&current, h) else {
            h *= 0.5;
            if h < min_step {
                branch.stopped = Some(format!(
                    "the corrector failed near {} = {:e}; the branch may end or meet another there",
                    follow.name, current.lambda
                ));
                break;
            }
            continue;
        };
        if next.lambda < lo || next.lambda > hi {
            break;
        }
        let (p, next_eigen) = c.point(&next.x, next.lambda)?;
        if p.values[..c.system.species_count()]
            .iter()
            .any(|v| *v < -1e-9 * scale)
        {
            branch.stopped = Some(format!(
                "the branch leaves the non-negative concentrations at {} = {:e}",
                follow.name, next.lambda
            ));
            break;
        }
        // A fold: the tangent's λ component changes sign.
        if current.tangent[n] * next.tangent[n] < 0.0
            && let Some(found) = locate(&c, &current, h, |b| Some(b.tangent[n]))
        {
            let (point, _) = c.point(&found.x, found.lambda)?;
            branch.special.push(SpecialPoint {
                kind: SpecialKind::Fold,
                point,
                frequency: None,
                after: branch.points.len() - 1,
            });
        }
        // A Hopf point: a complex pair's real part changes sign.
        if let (Some(a), Some(b)) = (hopf_function(&eigen), hopf_function(&next_eigen))
            && a * b < 0.0
            && let Some(found) = locate(&c, &current, h, |b| {
                c.point(&b.x, b.lambda)
                    .ok()
                    .and_then(|(_, e)| hopf_function(&e))
            })
        {
            let (point, e) = c.point(&found.x, found.lambda)?;
            let frequency = e
                .iter()
                .filter(|z| z.im.abs() > 1e-9 * z.norm())
                .min_by(|a, b| a.re.abs().total_cmp(&b.re.abs()))
                .map(|z| z.im.abs());
            branch.special.push(SpecialPoint {
                kind: SpecialKind::Hopf,
                point,
                frequency,
                after: branch.points.len() - 1,
            });
        }
        branch.points.push(p);
        eigen = next_eigen;
        current = next;
        let size = largest(&current.x);
        if size > scale {
            scale = size;
            c.weight_x = 1.0 / scale;
        }
        if iterations <= 3 {
            h = (h * 1.5).min(max_step);
        }
    }
    if branch.points.len() >= MAX_STEPS {
        branch.stopped = Some(format!(
            "stopped after {MAX_STEPS} steps (a closed branch returns to where it started)"
        ));
    }
    Ok(branch)
}

/// The point between `start` and a step `h` along the branch where `test`
/// is zero (it has opposite signs at the two ends): secant steps on the
/// step length, kept inside the bracket (Illinois), to |test| ≤ 1e-13 of
/// its size at the ends.
fn locate(
    c: &Continuation<'_>,
    start: &Onbranch,
    h: f64,
    test: impl Fn(&Onbranch) -> Option<f64>,
) -> Option<Onbranch> {
    let (mut a, mut fa) = (0.0, test(start)?);
    let (mut b, mut fb) = (h, test(&c.advance(start, h)?.0)?);
    if fa * fb > 0.0 {
        return None;
    }
    let size = fa.abs().max(fb.abs());
    let mut side = 0;
    let mut best = None;
    for _ in 0..100 {
        let s = (a * fb - b * fa) / (fb - fa);
        let (point, _) = c.advance(start, s)?;
        let fs = test(&point)?;
        best = Some(point);
        if fs.abs() <= 1e-13 * size || (b - a).abs() <= 1e-15 * h {
            break;
        }
        if fs * fb < 0.0 {
            (a, fa) = (b, fb);
            side = 0;
        } else {
            if side == 1 {
                fa *= 0.5;
            }
            side = 1;
        }
        (b, fb) = (s, fs);
    }
    best
}
