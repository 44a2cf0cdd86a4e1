//! Time courses on diffsol: a compiled system, timed events applied by
//! stopping, changing the state and restarting, and output at requested
//! times from the solver's interpolant.
//!
//! Event semantics: events at the same time apply in file order; an output
//! time equal to an event time reports the state *after* the event; an
//! event at t = 0 changes the initial state. After an event every total's
//! value is recomputed from the species (an addition changes the amount
//! conserved), and the constants that depend on totals follow. An addition
//! of a stock dilutes every species and fixed species by V/(V+ΔV) and adds
//! the stock's content; a withdrawal lowers the volume only. A `when`
//! event fires where its condition becomes true (bisection on the
//! solver's interpolant), once per crossing. With `event_rows`, each event
//! time appears twice: the state just before, then just after.

use super::{Method, Settings, SimError};
use crate::model::{Action, EventKind, Model, Sym, Timing, coef_f64};
use crate::numeric::{CompiledSystem, constants_of};
use diffsol::{
    FaerSparseMat, NalgebraLU, NalgebraMat, OdeBuilder, OdeSolverMethod, OdeSolverStopReason,
    Vector,
};
use std::cell::RefCell;

/// Rows of a time course: each row holds every species (model order) then
/// every observable, in the model's default units.
#[derive(Debug, Clone, PartialEq)]
pub struct Trajectory {
    pub times: Vec<f64>,
    pub rows: Vec<Vec<f64>>,
    /// The mixture's volume (in the model's volume unit) at each row, when
    /// the model declares one.
    pub volumes: Vec<f64>,
    pub steps: usize,
}

impl Trajectory {
    pub(super) fn push(&mut self, t: f64, row: &[f64], volume: Option<f64>) {
        self.times.push(t);
        self.rows.push(row.to_vec());
        if let Some(v) = volume {
            self.volumes.push(v);
        }
    }
}

/// Last Jacobian values, reused while the solver asks for J·v at the same
/// point (building a Jacobian takes one J·v per column or colour).
pub(super) struct JacobianCache {
    pub(super) y_bits: Vec<u64>,
    pub(super) t_bits: u64,
    pub(super) valid: bool,
    pub(super) values: Vec<f64>,
}

impl JacobianCache {
    pub(super) fn matches(&self, y: &[f64], t: f64) -> bool {
        self.valid
            && self.t_bits == t.to_bits()
            && self.y_bits.iter().zip(y).all(|(a, b)| *a == b.to_bits())
    }
    pub(super) fn store(&mut self, y: &[f64], t: f64) {
        self.y_bits.clear();
        self.y_bits.extend(y.iter().map(|v| v.to_bits()));
        self.t_bits = t.to_bits();
        self.valid = true;
    }
}

/// A value above this (in default units) counts as a blow-up.
pub(super) const BLOW_UP: f64 = 1e100;

/// Integrates `model` compiled as `system` from t = 0 and reports the state
/// at `times` (sorted, non-negative). `model` supplies constants, totals and
/// events; its species' initial values are the start state.
pub fn simulate(
    model: &Model,
    system: &CompiledSystem,
    settings: &Settings,
    times: &[f64],
) -> Result<Trajectory, SimError> {
    if times.iter().any(|t| !t.is_finite() || *t < 0.0) {
        return Err(SimError::input(
            "output times must be finite and not negative",
        ));
    }
    if times.windows(2).any(|w| w[1] < w[0]) {
        return Err(SimError::input("output times must be in increasing order"));
    }
    let algebra = if system.nstates > crate::numeric::SPARSE_THRESHOLD {
        LinearAlgebra::Sparse
    } else {
        LinearAlgebra::Dense
    };
    simulate_with(model, system, settings, times, algebra)
}

/// Dense (nalgebra LU) or sparse (faer sparse LU) Newton systems.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LinearAlgebra {
    Dense,
    Sparse,
}

/// [`simulate`] with the linear algebra chosen by the caller (benchmarks
/// use it to measure where sparse starts to pay).
pub fn simulate_with(
    model: &Model,
    system: &CompiledSystem,
    settings: &Settings,
    times: &[f64],
    algebra: LinearAlgebra,
) -> Result<Trajectory, SimError> {
    match algebra {
        LinearAlgebra::Sparse => simulate_sparse(model, system, settings, times),
        LinearAlgebra::Dense => simulate_dense(model, system, settings, times),
    }
}

/// The segment plan: timed events in time order (file order at one time),
/// and the state-triggered events.
pub(super) struct Plan {
    pub(super) events: Vec<usize>,
    pub(super) triggers: Vec<usize>,
}

pub(super) fn plan(model: &Model, end: f64) -> Plan {
    let mut events: Vec<usize> = (0..model.events.len())
        .filter(|&i| model.events[i].time().is_some_and(|t| t <= end))
        .collect();
    // Stable: events at the same time keep file order.
    events.sort_by(|&a, &b| {
        let time = |i: usize| model.events[i].time().unwrap_or(0.0);
        time(a).total_cmp(&time(b))
    });
    let triggers = (0..model.events.len())
        .filter(|&i| matches!(model.events[i].timing, Timing::When(_)))
        .collect();
    Plan { events, triggers }
}

/// A condition that does not hold: a rising function that is not above
/// zero, NaN included (a condition that cannot be evaluated is not true).
fn not_positive(value: f64) -> bool {
    value.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)
}

/// Triggered firings allowed in one run (a condition that flips at every
/// step would otherwise never let the run end).
pub(super) const MAX_FIRINGS: usize = 100_000;

/// What the protocol has done to the mixture so far: the species, the
/// fixed species and totals as events left them (in `current`), and the
/// volume.
pub(super) struct Mixture {
    pub(super) current: Model,
    pub(super) species: Vec<f64>,
    pub(super) volume: Option<f64>,
}

impl Mixture {
    pub(super) fn new(model: &Model) -> Mixture {
        Mixture {
            current: model.clone(),
            species: model.initial_state(),
            volume: model.volume,
        }
    }

    /// Applies one event to the full species values (and the volume).
    pub(super) fn apply(&mut self, model: &Model, event: usize, t: f64) -> Result<(), SimError> {
        match &model.events[event].action {
            Action::Species {
                kind,
                species,
                amount,
            } => {
                let v = &mut self.species[*species];
                match kind {
                    EventKind::Add => *v += amount,
                    // A withdrawal cannot take more than there is.
                    EventKind::Remove => *v = (*v - amount).max(0.0),
                    EventKind::Set => *v = *amount,
                }
            }
            Action::Stock { volume, contents } => {
                let before = self.volume.unwrap_or(0.0);
                let after = before + volume;
                let kept = before / after;
                self.species.iter_mut().for_each(|x| *x *= kept);
                self.current.fixed.iter_mut().for_each(|f| f.value *= kept);
                for (sym, c) in contents {
                    let added = c * volume / after;
                    match sym {
                        Sym::Species(i) => self.species[*i] += added,
                        Sym::Fixed(i) => self.current.fixed[*i].value += added,
                        _ => {}
                    }
                }
                self.volume = Some(after);
            }
            Action::Withdraw { volume } => {
                let before = self.volume.unwrap_or(0.0);
                if *volume >= before * (1.0 - 1e-12) {
                    return Err(SimError::input(format!(
                        "at t = {t}, a withdrawal of {volume} {unit} is more than the {before} {unit} the mixture holds",
                        unit = model.volume_symbol()
                    )));
                }
                self.volume = Some(before - volume);
            }
        }
        Ok(())
    }

    /// The constants for the system: params, fixed species as diluted,
    /// and totals recomputed from the species (an addition changes the
    /// amount conserved, and the constants that depend on totals follow).
    pub(super) fn constants(&mut self) -> Vec<f64> {
        for t in &mut self.current.totals {
            t.value = t
                .terms
                .iter()
                .map(|(i, c)| coef_f64(*c) * self.species[*i])
                .sum();
        }
        constants_of(&self.current)
    }

    /// The value of a trigger's rising function at full species values.
    pub(super) fn rising(&self, model: &Model, event: usize, species: &[f64], t: f64) -> f64 {
        match &model.events[event].timing {
            Timing::When(trigger) => self.current.eval_at(&trigger.rising, species, t),
            Timing::At(_) => f64::NAN,
        }
    }
}

/// How a stretch of integration ended.
pub(super) enum Stretch {
    /// At the segment's end; the state there.
    Reached(Vec<f64>),
    /// A trigger fired first: its time, the state there, and which
    /// triggers (indices into the plan's list) fired.
    Triggered {
        time: f64,
        state: Vec<f64>,
        fired: Vec<usize>,
    },
}

/// The triggers a stretch watches.
pub(super) struct Watch<'a> {
    pub(super) model: &'a Model,
    pub(super) mixture: &'a Mixture,
    pub(super) triggers: &'a [usize],
    /// Whether each trigger may fire (its condition was false since it last fired).
    pub(super) armed: &'a mut Vec<bool>,
}

impl Watch<'_> {
    fn values(
        &self,
        system: &CompiledSystem,
        workspace: &RefCell<crate::numeric::Workspace>,
        y: &[f64],
        t: f64,
        row: &mut Vec<f64>,
    ) -> Vec<f64> {
        system.outputs(&mut workspace.borrow_mut(), y, t, row);
        let species = &row[..system.species_count()];
        self.triggers
            .iter()
            .map(|&e| self.mixture.rising(self.model, e, species, t))
            .collect()
    }
}

macro_rules! simulate_with {
    ($name:ident, $matrix:ty, $solver:ty) => {
        fn $name(
            model: &Model,
            system: &CompiledSystem,
            settings: &Settings,
            times: &[f64],
        ) -> Result<Trajectory, SimError> {
            let n = system.nstates;
            let end = times.last().copied().unwrap_or(0.0);
            let plan = plan(model, end);
            let mut mixture = Mixture::new(model);
            let mut next_event = 0;
            while next_event < plan.events.len()
                && model.events[plan.events[next_event]].time().unwrap_or(0.0) <= 0.0
            {
                mixture.apply(model, plan.events[next_event], 0.0)?;
                next_event += 1;
            }
            let constants = mixture.constants();
            let workspace = RefCell::new(system.workspace(&constants));
            let start = RefCell::new(system.state_from_species(&mixture.species));
            let cache = RefCell::new(JacobianCache {
                y_bits: Vec::new(),
                t_bits: 0,
                valid: false,
                values: vec![0.0; system.jacobian_nnz()],
            });

            let rhs = |x: &[f64], _p: &[f64], t: f64, y: &mut [f64]| {
                system.rhs(&mut workspace.borrow_mut(), x, t, y)
            };
            let jac = |x: &[f64], _p: &[f64], t: f64, v: &[f64], y: &mut [f64]| {
                let mut c = cache.borrow_mut();
                if !c.matches(x, t) {
                    let JacobianCache { values, .. } = &mut *c;
                    system.jacobian_values(&mut workspace.borrow_mut(), x, t, values);
                    c.store(x, t);
                }
                system.jacobian_mul(&c.values, v, y);
            };
            let init = |_p: &[f64], _t: f64, y: &mut [f64]| y.copy_from_slice(&start.borrow());
            let mut problem = OdeBuilder::<$matrix>::new()
                .rtol(settings.rtol)
                .atol(vec![settings.atol; n])
                .rhs_implicit(rhs, jac)
                .init(init, n)
                .build()
                .map_err(|e| SimError::setup(format!("the solver could not be set up: {e}")))?;
            problem.ode_options.max_number_timesteps = settings.max_steps;

            let mut out = Trajectory {
                times: Vec::with_capacity(times.len()),
                rows: Vec::with_capacity(times.len()),
                volumes: Vec::new(),
                steps: 0,
            };
            let mut next_out = 0;
            let mut row = Vec::new();
            let mut t_start = 0.0;
            let mut armed: Vec<bool> = {
                let mut row = Vec::new();
                system.outputs(&mut workspace.borrow_mut(), &start.borrow(), 0.0, &mut row);
                let species = &row[..system.species_count()];
                plan.triggers
                    .iter()
                    .map(|&e| not_positive(mixture.rising(model, e, species, 0.0)))
                    .collect()
            };
            let mut firings = 0usize;
            loop {
                let seg_end = if next_event < plan.events.len() {
                    model.events[plan.events[next_event]].time().unwrap_or(end)
                } else {
                    end
                };
                let last_segment = next_event >= plan.events.len();
                // Outputs at the segment start report the start state (after its events).
                while next_out < times.len() && times[next_out] <= t_start {
                    let s = start.borrow();
                    system.outputs(&mut workspace.borrow_mut(), &s, times[next_out], &mut row);
                    out.push(times[next_out], &row, mixture.volume);
                    next_out += 1;
                }
                let mut stretch = Stretch::Reached(start.borrow().clone());
                if seg_end > t_start && n == 0 {
                    // Nothing is integrated (every species fixed, in no step,
                    // or dependent): the state is constant and the solver,
                    // which cannot take a step of size zero, is not needed.
                    let mut watch = Watch {
                        model,
                        mixture: &mixture,
                        triggers: &plan.triggers,
                        armed: &mut armed,
                    };
                    let mut sink = Sink {
                        times,
                        next_out: &mut next_out,
                        out: &mut out,
                        row: &mut row,
                        volume: mixture.volume,
                        sensitivities: None,
                    };
                    stretch = still_stretch(system, &workspace, t_start, seg_end, last_segment, &mut sink, &mut watch);
                } else if seg_end > t_start {
                    problem.t0 = t_start;
                    cache.borrow_mut().valid = false;
                    let mut watch = Watch {
                        model,
                        mixture: &mixture,
                        triggers: &plan.triggers,
                        armed: &mut armed,
                    };
                    let mut sink = Sink {
                        times,
                        next_out: &mut next_out,
                        out: &mut out,
                        row: &mut row,
                        volume: mixture.volume,
                        sensitivities: None,
                    };
                    stretch = match settings.method {
                        Method::Bdf => {
                            let solver = problem.bdf::<$solver>().map_err(|e| {
                                SimError::setup(format!(
                                    "the solver could not start at t = {t_start}: {e}"
                                ))
                            })?;
                            drive(solver, system, &workspace, settings, seg_end, last_segment, &mut sink, &mut watch)?
                        }
                        Method::Esdirk => {
                            let solver = problem.esdirk34::<$solver>().map_err(|e| {
                                SimError::setup(format!(
                                    "the solver could not start at t = {t_start}: {e}"
                                ))
                            })?;
                            drive(solver, system, &workspace, settings, seg_end, last_segment, &mut sink, &mut watch)?
                        }
                    };
                }
                let (t_event, state, fired) = match stretch {
                    Stretch::Reached(state) => (seg_end, state, Vec::new()),
                    Stretch::Triggered { time, state, fired } => (time, state, fired),
                };
                system.outputs(&mut workspace.borrow_mut(), &state, t_event, &mut row);
                mixture.species.copy_from_slice(&row[..system.species_count()]);
                if fired.is_empty() && last_segment {
                    break;
                }
                if settings.event_rows {
                    // The state just before the events.
                    out.push(t_event, &row, mixture.volume);
                }
                // Apply the fired triggers (file order), or every timed event
                // at this time, then restart.
                if fired.is_empty() {
                    while next_event < plan.events.len()
                        && model.events[plan.events[next_event]].time().unwrap_or(0.0) <= t_event
                    {
                        mixture.apply(model, plan.events[next_event], t_event)?;
                        next_event += 1;
                    }
                } else {
                    firings += fired.len();
                    if firings > MAX_FIRINGS {
                        return Err(SimError::failed(t_event, None, f64::NAN, &format!(
                            "triggered events fired more than {MAX_FIRINGS} times; a condition may be flipping at every step"
                        )));
                    }
                    for k in fired {
                        mixture.apply(model, plan.triggers[k], t_event)?;
                    }
                }
                let constants = mixture.constants();
                system.set_constants(&mut workspace.borrow_mut(), &constants);
                *start.borrow_mut() = system.state_from_species(&mixture.species);
                // A condition made false by the events may fire again later.
                {
                    let mut row = Vec::new();
                    system.outputs(&mut workspace.borrow_mut(), &start.borrow(), t_event, &mut row);
                    let species = &row[..system.species_count()];
                    for (k, &e) in plan.triggers.iter().enumerate() {
                        if not_positive(mixture.rising(model, e, species, t_event)) {
                            armed[k] = true;
                        }
                    }
                }
                let grid_has_it = next_out < times.len() && times[next_out] == t_event;
                if settings.event_rows && !grid_has_it {
                    let s = start.borrow();
                    system.outputs(&mut workspace.borrow_mut(), &s, t_event, &mut row);
                    out.push(t_event, &row, mixture.volume);
                }
                t_start = t_event;
            }
            Ok(out)
        }
    };
}

simulate_with!(simulate_dense, NalgebraMat<f64>, NalgebraLU<f64>);
simulate_with!(
    simulate_sparse,
    FaerSparseMat<f64>,
    crate::numeric::static_lu::StaticPivotLu
);

/// Where a stretch writes the requested outputs.
pub(super) struct Sink<'a> {
    pub(super) times: &'a [f64],
    pub(super) next_out: &'a mut usize,
    pub(super) out: &'a mut Trajectory,
    pub(super) row: &'a mut Vec<f64>,
    pub(super) volume: Option<f64>,
    /// With forward sensitivities: the state and the state's sensitivities
    /// (column per parameter) at each output, and at the stretch's end.
    pub(super) sensitivities: Option<&'a mut SensitivitySink>,
}

#[derive(Default)]
pub(super) struct SensitivitySink {
    pub(super) at_outputs: Vec<(Vec<f64>, Vec<f64>)>,
    pub(super) at_end: Vec<f64>,
}

/// A stretch with nothing to integrate: the state stands still, so each
/// trigger's rising function depends on `t` alone. It is sampled at the
/// output times inside the stretch and at its end; a crossing between two
/// samples is located by bisection to a relative 1e-13 of the time (a
/// condition that becomes true and false again between two samples is
/// not seen).
fn still_stretch(
    system: &CompiledSystem,
    workspace: &RefCell<crate::numeric::Workspace>,
    t_start: f64,
    seg_end: f64,
    last_segment: bool,
    sink: &mut Sink<'_>,
    watch: &mut Watch<'_>,
) -> Stretch {
    let mut scratch = Vec::new();
    let mut crossing: Option<(f64, Vec<usize>)> = None;
    if !watch.triggers.is_empty() {
        let samples = sink.times[*sink.next_out..]
            .iter()
            .copied()
            .filter(|&t| t > t_start && t < seg_end)
            .chain(std::iter::once(seg_end));
        let mut previous = t_start;
        for t in samples {
            let g = watch.values(system, workspace, &[], t, &mut scratch);
            let rising: Vec<usize> = (0..g.len())
                .filter(|&k| watch.armed[k] && g[k] > 0.0)
                .collect();
            if !rising.is_empty() {
                let mut best = (t, Vec::new());
                for &k in &rising {
                    let (mut lo, mut hi) = (previous, t);
                    for _ in 0..200 {
                        if hi - lo <= 1e-13 * hi.abs().max(f64::MIN_POSITIVE) {
                            break;
                        }
                        let mid = 0.5 * (lo + hi);
                        if watch.values(system, workspace, &[], mid, &mut scratch)[k] > 0.0 {
                            hi = mid;
                        } else {
                            lo = mid;
                        }
                    }
                    if hi < best.0 {
                        best = (hi, vec![k]);
                    } else if hi == best.0 {
                        best.1.push(k);
                    }
                }
                for &k in &best.1 {
                    watch.armed[k] = false;
                }
                crossing = Some(best);
                break;
            }
            for (k, &value) in g.iter().enumerate() {
                if not_positive(value) {
                    watch.armed[k] = true;
                }
            }
            previous = t;
        }
    }
    while *sink.next_out < sink.times.len() {
        let t = sink.times[*sink.next_out];
        let before = match &crossing {
            Some((time, _)) => t < *time,
            None => t < seg_end || (last_segment && t <= seg_end),
        };
        if !before {
            break;
        }
        system.outputs(&mut workspace.borrow_mut(), &[], t, sink.row);
        sink.out.push(t, sink.row, sink.volume);
        *sink.next_out += 1;
    }
    match crossing {
        Some((time, fired)) => Stretch::Triggered {
            time,
            state: Vec::new(),
            fired,
        },
        None => Stretch::Reached(Vec::new()),
    }
}

/// Steps one solver to `seg_end`, recording outputs on the way, and stops
/// early where a trigger's condition becomes true (located by bisection on
/// the solver's interpolant to a relative 1e-13 of the time).
#[allow(clippy::too_many_arguments)]
pub(super) fn drive<'a, Eqn, S>(
    mut solver: S,
    system: &CompiledSystem,
    workspace: &RefCell<crate::numeric::Workspace>,
    settings: &Settings,
    seg_end: f64,
    last_segment: bool,
    sink: &mut Sink<'_>,
    watch: &mut Watch<'_>,
) -> Result<Stretch, SimError>
where
    Eqn: diffsol::OdeEquationsImplicit<T = f64> + 'a,
    S: OdeSolverMethod<'a, Eqn>,
{
    solver
        .set_stop_time(seg_end)
        .map_err(|e| SimError::setup(format!("cannot stop at t = {seg_end}: {e}")))?;
    let mut scratch = Vec::new();
    let mut t_prev = solver.state().t;
    loop {
        let reason = match solver.step() {
            Ok(r) => r,
            Err(e) => {
                let state = solver.state();
                let y = state.y.clone_as_vec();
                return Err(diagnose_failure(
                    system,
                    workspace,
                    settings,
                    &y,
                    state.t,
                    &e.to_string(),
                ));
            }
        };
        sink.out.steps += 1;
        let state = solver.state();
        let t_now = state.t;
        let size = state.y.norm(1);
        if !size.is_finite() || size > BLOW_UP {
            let y = state.y.clone_as_vec();
            return Err(diagnose_failure(
                system,
                workspace,
                settings,
                &y,
                t_now,
                "the solution blew up",
            ));
        }
        let mut crossing: Option<(f64, Vec<usize>)> = None;
        if !watch.triggers.is_empty() {
            let y_now = state.y.clone_as_vec();
            let g = watch.values(system, workspace, &y_now, t_now, &mut scratch);
            let rising: Vec<usize> = (0..g.len())
                .filter(|&k| watch.armed[k] && g[k] > 0.0)
                .collect();
            if !rising.is_empty() {
                // The earliest crossing among the rising conditions.
                let mut best = (t_now, Vec::new());
                for &k in &rising {
                    let (mut lo, mut hi) = (t_prev, t_now);
                    for _ in 0..200 {
                        if hi - lo <= 1e-13 * hi.abs().max(f64::MIN_POSITIVE) {
                            break;
                        }
                        let mid = 0.5 * (lo + hi);
                        let y = solver
                            .interpolate(mid)
                            .map_err(|e| {
                                SimError::setup(format!("interpolation at t = {mid} failed: {e}"))
                            })?
                            .clone_as_vec();
                        if watch.values(system, workspace, &y, mid, &mut scratch)[k] > 0.0 {
                            hi = mid;
                        } else {
                            lo = mid;
                        }
                    }
                    if hi < best.0 {
                        best = (hi, vec![k]);
                    } else if hi == best.0 {
                        best.1.push(k);
                    }
                }
                for &k in &best.1 {
                    watch.armed[k] = false;
                }
                crossing = Some(best);
            }
            for (k, &value) in g.iter().enumerate() {
                if not_positive(value) {
                    watch.armed[k] = true;
                }
            }
        }
        let t_out_end = crossing.as_ref().map(|c| c.0).unwrap_or(t_now);
        while *sink.next_out < sink.times.len()
            && sink.times[*sink.next_out] <= t_out_end
            && (last_segment || sink.times[*sink.next_out] < seg_end)
            && (crossing.is_none() || sink.times[*sink.next_out] < t_out_end)
        {
            let t = sink.times[*sink.next_out];
            let y = solver
                .interpolate(t)
                .map_err(|e| SimError::setup(format!("interpolation at t = {t} failed: {e}")))?
                .clone_as_vec();
            system.outputs(&mut workspace.borrow_mut(), &y, t, sink.row);
            sink.out.push(t, sink.row, sink.volume);
            if let Some(sens) = sink.sensitivities.as_deref_mut() {
                sens.at_outputs
                    .push((y, interpolated_sensitivities(&solver, t)?));
            }
            *sink.next_out += 1;
        }
        if let Some((time, fired)) = crossing {
            let state = solver
                .interpolate(time)
                .map_err(|e| SimError::setup(format!("interpolation at t = {time} failed: {e}")))?
                .clone_as_vec();
            if let Some(sens) = sink.sensitivities.as_deref_mut() {
                sens.at_end = interpolated_sensitivities(&solver, time)?;
            }
            return Ok(Stretch::Triggered { time, state, fired });
        }
        if matches!(reason, OdeSolverStopReason::TstopReached) {
            if let Some(sens) = sink.sensitivities.as_deref_mut() {
                sens.at_end = solver.state().s.clone_as_vec();
            }
            return Ok(Stretch::Reached(solver.state().y.clone_as_vec()));
        }
        t_prev = t_now;
    }
}

/// The state's sensitivities at `t` from the solver's interpolant, one
/// column of the state's length per parameter.
fn interpolated_sensitivities<'a, Eqn, S>(solver: &S, t: f64) -> Result<Vec<f64>, SimError>
where
    Eqn: diffsol::OdeEquationsImplicit<T = f64> + 'a,
    S: OdeSolverMethod<'a, Eqn>,
{
    solver
        .interpolate_sens(t)
        .map(|s| s.clone_as_vec())
        .map_err(|e| {
            SimError::setup(format!(
                "interpolation of the sensitivities at t = {t} failed: {e}"
            ))
        })
}

/// Names the time and the species that went bad: a non-finite or huge
/// value first, else the species whose rate is largest against its
/// tolerance (the one forcing the step size down).
pub(super) fn diagnose_failure(
    system: &CompiledSystem,
    workspace: &RefCell<crate::numeric::Workspace>,
    settings: &Settings,
    y: &[f64],
    t: f64,
    what: &str,
) -> SimError {
    let mut ws = workspace.borrow_mut();
    let mut full = Vec::new();
    system.outputs(&mut ws, y, t, &mut full);
    let nsp = system.species_count();
    if let Some(i) = (0..nsp).find(|&i| !full[i].is_finite() || full[i].abs() > BLOW_UP) {
        return SimError::failed(t, Some(i), full[i], what);
    }
    let mut f = vec![0.0; system.nstates];
    system.rhs(&mut ws, y, t, &mut f);
    if let Some(slot) = (0..f.len()).find(|&k| !f[k].is_finite()) {
        let sp = system.state_species[slot];
        return SimError::failed(
            t,
            Some(sp),
            full[sp],
            &format!("{what}; its rate of change is {}", f[slot]),
        );
    }
    let worst = (0..f.len()).max_by(|&a, &b| {
        let sa = f[a].abs() / (settings.atol + settings.rtol * y[a].abs());
        let sb = f[b].abs() / (settings.atol + settings.rtol * y[b].abs());
        sa.total_cmp(&sb)
    });
    match worst {
        Some(slot) => {
            let sp = system.state_species[slot];
            SimError::failed(
                t,
                Some(sp),
                full[sp],
                &format!("{what} (fastest-changing species shown)"),
            )
        }
        None => SimError::failed(t, None, f64::NAN, what),
    }
}

#[cfg(test)]
#[allow(clippy::excessive_precision)]
pub(crate) mod tests {
    use super::*;
    use crate::model::{Coef, Expr, Param, ParamDef, Rate, Species, Step, Sym, Term};
    use crate::sim::Prepared;

    /// Reactants and products as (species, coefficient), forward and reverse param.
    pub(crate) type StepSpec<'a> = (&'a [(usize, i64)], &'a [(usize, i64)], usize, Option<usize>);

    /// A hand-built mass-action model: species with initial values, params,
    /// and steps given as (reactants, products, forward param, reverse param).
    pub(crate) fn mass_action(
        species: &[(&str, f64)],
        params: &[(&str, f64)],
        steps: &[StepSpec<'_>],
    ) -> Model {
        let mut m = Model::default();
        for (name, v) in species {
            m.species.push(Species {
                name: name.to_string(),
                initial: *v,
                initial_given: true,
                description: None,
                span: Default::default(),
            });
        }
        for (name, v) in params {
            m.params.push(Param {
                name: name.to_string(),
                definition: ParamDef::Value(*v),
                value: *v,
                dim: None,
                description: None,
                span: Default::default(),
            });
        }
        m.param_order = (0..params.len()).collect();
        let terms = |side: &[(usize, i64)]| -> Vec<Term> {
            side.iter()
                .map(|&(i, c)| Term {
                    sym: Sym::Species(i),
                    coefficient: Coef::from_integer(c),
                    span: Default::default(),
                })
                .collect()
        };
        for (k, (lhs, rhs, kf, kr)) in steps.iter().enumerate() {
            m.steps.push(Step {
                name: format!("s{k}"),
                reactants: terms(lhs),
                products: terms(rhs),
                reversible: kr.is_some(),
                rate: Rate::MassAction {
                    forward: Expr::Name(Sym::Param(*kf)),
                    reverse: kr.map(|r| Expr::Name(Sym::Param(r))),
                },
                description: None,
                span: Default::default(),
                rate_span: Default::default(),
            });
        }
        m
    }

    fn robertson() -> Model {
        // Robertson (1966): A -> B (0.04), B + C -> A + C (1e4), 2 B -> B + C (3e7).
        mass_action(
            &[("A", 1.0), ("B", 0.0), ("C", 0.0)],
            &[("k1", 0.04), ("k2", 1e4), ("k3", 3e7)],
            &[
                (&[(0, 1)], &[(1, 1)], 0, None),
                (&[(1, 1), (2, 1)], &[(0, 1), (2, 1)], 1, None),
                (&[(1, 2)], &[(1, 1), (2, 1)], 2, None),
            ],
        )
    }

    #[test]
    fn first_order_decay_matches_the_closed_form() {
        // A -> B: A(t) = A0 exp(-k t) (first-order rate law; common practice).
        let m = mass_action(
            &[("A", 2.0), ("B", 0.0)],
            &[("k", 0.3)],
            &[(&[(0, 1)], &[(1, 1)], 0, None)],
        );
        let p = Prepared::full(&m).unwrap();
        let settings = Settings {
            rtol: 1e-10,
            atol: 1e-14,
            ..Settings::default()
        };
        let times = [0.0, 0.5, 1.0, 5.0, 10.0];
        let tr = p.simulate(&settings, &times).unwrap();
        for (t, row) in tr.times.iter().zip(&tr.rows) {
            let a = 2.0 * (-0.3 * t).exp();
            assert!((row[0] - a).abs() <= 1e-8 * 2.0, "t={t}: {} vs {a}", row[0]);
            assert!((row[0] + row[1] - 2.0).abs() <= 1e-9 * 2.0);
        }
    }

    #[test]
    fn robertson_reaches_the_reference_solution() {
        // Reference at t = 1e11 from the Bari IVP test set (Mazzia & Magherini,
        // "Test Set for IVP Solvers", problem ROBER), from memory:
        // y1 = 0.2083340149701255e-7, y2 = 0.8333360770334713e-13,
        // y3 = 0.9999999791665050; cross-checked with SciPy Radau at
        // rtol 1e-12 in tests/python/sim_robertson.py.
        let p = Prepared::full(&robertson()).unwrap();
        for method in [Method::Bdf, Method::Esdirk] {
            let settings = Settings {
                method,
                rtol: 1e-8,
                atol: 1e-14,
                ..Settings::default()
            };
            let tr = p.simulate(&settings, &[0.0, 1e11]).unwrap();
            let y = &tr.rows[1];
            let reference = [
                0.2083340149701255e-7,
                0.8333360770334713e-13,
                0.9999999791665050,
            ];
            for k in 0..3 {
                let rel = (y[k] - reference[k]).abs() / reference[k];
                assert!(
                    rel < 1e-3,
                    "{method:?} y{} = {} vs {}",
                    k + 1,
                    y[k],
                    reference[k]
                );
            }
        }
    }

    #[test]
    fn sparse_and_dense_linear_algebra_give_the_same_robertson_solution() {
        // Same reference as above (Bari IVP test set, ROBER at t = 1e11, from memory).
        let m = robertson();
        let system = CompiledSystem::full(&m).unwrap();
        let settings = Settings {
            rtol: 1e-8,
            atol: 1e-14,
            ..Settings::default()
        };
        let dense = simulate_with(&m, &system, &settings, &[1e11], LinearAlgebra::Dense).unwrap();
        let sparse = simulate_with(&m, &system, &settings, &[1e11], LinearAlgebra::Sparse).unwrap();
        let reference = [
            0.2083340149701255e-7,
            0.8333360770334713e-13,
            0.9999999791665050,
        ];
        for (k, want) in reference.iter().enumerate() {
            assert!((sparse.rows[0][k] - want).abs() < 1e-3 * want);
            assert!((sparse.rows[0][k] - dense.rows[0][k]).abs() < 1e-4 * want);
        }
    }

    #[test]
    fn an_output_at_an_event_time_holds_the_state_after_the_event() {
        // A -> B with 1 added to A at t = 1: A(1) = A0 e^{-k} + 1 after the event.
        let mut m = mass_action(
            &[("A", 1.0), ("B", 0.0)],
            &[("k", 1.0)],
            &[(&[(0, 1)], &[(1, 1)], 0, None)],
        );
        m.events.push(crate::model::Event {
            timing: Timing::At(1.0),
            action: Action::Species {
                kind: EventKind::Add,
                species: 0,
                amount: 1.0,
            },
            span: Default::default(),
        });
        let p = Prepared::full(&m).unwrap();
        let settings = Settings {
            rtol: 1e-10,
            atol: 1e-14,
            ..Settings::default()
        };
        let tr = p.simulate(&settings, &[0.0, 0.999, 1.0, 2.0]).unwrap();
        let e = (-1.0f64).exp();
        assert!((tr.rows[2][0] - (e + 1.0)).abs() < 1e-8);
        assert!((tr.rows[1][0] - (-0.999f64).exp()).abs() < 1e-8);
        assert!((tr.rows[3][0] - (e + 1.0) * e).abs() < 1e-8);
    }
}
