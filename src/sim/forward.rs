//! Forward sensitivities of a time course on diffsol's forward-sensitivity
//! solvers (BDF, ESDIRK): S' = J·S + (∂f/∂c)·(dc/dp), S the state's
//! sensitivities, one column per parameter, solved with the state in the
//! same steps, reusing its iteration matrix.
//!
//! The constants `c` a parameter reaches are tracked as dc/dp: a param or
//! fixed species is its own column (a fixed species diluted by additions
//! scales with it); a total is recomputed from the species after every
//! event, so its sensitivity is recomputed from theirs. Through events:
//! additions keep the sensitivities, a dilution scales them by V/(V+ΔV),
//! a `set` zeroes the set species' (the value set is a number), and a
//! state-triggered event adds the jump correction of the event time,
//! S⁺ = H·(S⁻ + f⁻·τ_p) − f⁺·τ_p with τ_p = −(g_y·S⁻ + g_c·c_p)/(g_y·f⁻ + g_t)
//! (H the event's linear map of the state, g the condition's rising
//! function).
//!
//! Invariants: the trajectory is the one `simulate` gives for the model
//! (same events, same order); `sensitivities[time][output·m + k]` is
//! ∂output/∂parameter k in the model's units.

use super::integrate::{
    JacobianCache, MAX_FIRINGS, Mixture, SensitivitySink, Sink, Stretch, Trajectory, Watch, drive,
    plan,
};
use super::{Method, Prepared, Settings, SimError};
use crate::algebra::calculus::{derivative, simplify};
use crate::model::{Action, EventKind, Expr, Model, Sym, Timing, coef_f64};
use crate::numeric::{CompiledDerivatives, DerivativeWorkspace, SPARSE_THRESHOLD};
use diffsol::{FaerSparseMat, NalgebraLU, NalgebraMat, OdeBuilder};
use std::cell::RefCell;

/// What a sensitivity is taken with respect to, in the prepared model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Wrt {
    /// A param with a value, a fixed species, or a total of a reduced model.
    Constant(Sym),
    /// The initial value of a species.
    Initial(usize),
}

/// A time course with its sensitivities.
#[derive(Debug, Clone)]
pub struct SensitivityTrajectory {
    pub trajectory: Trajectory,
    /// Per row of the trajectory: ∂output/∂parameter at `[output·m + k]`
    /// (outputs: every species, then every observable).
    pub sensitivities: Vec<Vec<f64>>,
}

/// dc/dp of the tracked constants and the bookkeeping around it.
struct Tracking<'a> {
    model: &'a Model,
    derivatives: &'a CompiledDerivatives,
    /// `[column·m + k]`: d(constant of the column)/d(parameter k).
    dc: Vec<f64>,
    m: usize,
    nstates: usize,
    nspecies: usize,
    state_species: Vec<usize>,
}

impl Tracking<'_> {
    fn column(&self, sym: Sym) -> Option<usize> {
        self.derivatives.columns.iter().position(|&s| s == sym)
    }

    /// ∂output/∂p (`[output·m + k]`) from the state's sensitivities
    /// (`[k·n + slot]`).
    fn outputs(&self, ws: &mut DerivativeWorkspace, y: &[f64], t: f64, s: &[f64]) -> Vec<f64> {
        let (m, n) = (self.m, self.nstates);
        let mut out = vec![0.0; self.derivatives.noutputs * m];
        let cell = RefCell::new(&mut out);
        self.derivatives.output_partials(
            ws,
            y,
            t,
            &mut |o, slot, v| {
                let mut out = cell.borrow_mut();
                for k in 0..m {
                    out[o * m + k] += v * s[k * n + slot];
                }
            },
            &mut |o, c, v| {
                let mut out = cell.borrow_mut();
                for k in 0..m {
                    out[o * m + k] += v * self.dc[c * m + k];
                }
            },
        );
        out
    }

    /// d(species)/dt of every species (dependent ones through their
    /// formulas) from the state's rate of change.
    fn species_rates(
        &self,
        ws: &mut DerivativeWorkspace,
        y: &[f64],
        t: f64,
        f: &[f64],
    ) -> Vec<f64> {
        let mut rates = vec![0.0; self.nspecies];
        self.derivatives.output_partials(
            ws,
            y,
            t,
            &mut |o, slot, v| {
                if o < rates.len() {
                    rates[o] += v * f[slot];
                }
            },
            &mut |_, _, _| {},
        );
        rates
    }

    /// The species' sensitivities (`[species·m + k]`) after an event's
    /// linear map: a dilution scales all (and the fixed species' dc/dp), a
    /// `set` or a withdrawal down to zero zeroes one.
    fn through_event(&mut self, event: usize, kept: f64, species_after: &[f64], sens: &mut [f64]) {
        let m = self.m;
        match &self.model.events[event].action {
            Action::Species {
                kind,
                species,
                amount: _,
            } => {
                let zeroed = match kind {
                    EventKind::Add => false,
                    EventKind::Remove => species_after[*species] == 0.0,
                    EventKind::Set => true,
                };
                if zeroed {
                    sens[species * m..(species + 1) * m]
                        .iter_mut()
                        .for_each(|v| *v = 0.0);
                }
            }
            Action::Stock { .. } => {
                sens.iter_mut().for_each(|v| *v *= kept);
                for f in 0..self.model.fixed.len() {
                    if let Some(c) = self.column(Sym::Fixed(f)) {
                        self.dc[c * m..(c + 1) * m]
                            .iter_mut()
                            .for_each(|v| *v *= kept);
                    }
                }
            }
            Action::Withdraw { .. } => {}
        }
    }

    /// Totals are recomputed from the species after events, and so are
    /// their sensitivities.
    fn recompute_totals(&mut self, species_sens: &[f64]) {
        let m = self.m;
        for (j, total) in self.model.totals.iter().enumerate() {
            let Some(c) = self.column(Sym::Total(j)) else {
                continue;
            };
            for k in 0..m {
                self.dc[c * m + k] = total
                    .terms
                    .iter()
                    .map(|(i, coef)| coef_f64(*coef) * species_sens[i * m + k])
                    .sum();
            }
        }
    }

    /// The state's sensitivities (`[k·n + slot]`) taken from the species'.
    fn state_part(&self, species_sens: &[f64]) -> Vec<f64> {
        let (m, n) = (self.m, self.nstates);
        let mut s = vec![0.0; n * m];
        for (slot, &sp) in self.state_species.iter().enumerate() {
            for k in 0..m {
                s[k * n + slot] = species_sens[sp * m + k];
            }
        }
        s
    }
}

/// The condition's gradient terms for the jump correction: g_y·v over the
/// species and g_c·(dc/dp) per parameter, and g_t.
struct Condition {
    by_species: Vec<(usize, Expr)>,
    by_column: Vec<(usize, Expr)>,
    rising: Expr,
}

impl Condition {
    fn new(model: &Model, event: usize, columns: &[Sym]) -> Option<Condition> {
        let Timing::When(trigger) = &model.events[event].timing else {
            return None;
        };
        let rising = crate::numeric::derivatives::without_derived_params(model, &trigger.rising, 0);
        let by_species = (0..model.species.len())
            .map(|i| (i, simplify(&derivative(&rising, Sym::Species(i)))))
            .filter(|(_, d)| !matches!(d, Expr::Number(v) if *v == 0.0))
            .collect();
        let by_column = columns
            .iter()
            .enumerate()
            .map(|(c, &s)| (c, simplify(&derivative(&rising, s))))
            .filter(|(_, d)| !matches!(d, Expr::Number(v) if *v == 0.0))
            .collect();
        Some(Condition {
            by_species,
            by_column,
            rising,
        })
    }

    /// dτ/dp for each parameter, at the crossing.
    fn time_sensitivity(
        &self,
        current: &Model,
        species: &[f64],
        t: f64,
        rates: &[f64],
        species_sens: &[f64],
        tracking: &Tracking<'_>,
    ) -> Result<Vec<f64>, SimError> {
        let m = tracking.m;
        let h = 1e-7 * t.abs().max(1.0);
        let g_t = (current.eval_at(&self.rising, species, t + h)
            - current.eval_at(&self.rising, species, t - h))
            / (2.0 * h);
        let mut speed = g_t;
        let mut numerator = vec![0.0; m];
        for (i, d) in &self.by_species {
            let g = current.eval_at(d, species, t);
            speed += g * rates[*i];
            for (k, v) in numerator.iter_mut().enumerate() {
                *v += g * species_sens[i * m + k];
            }
        }
        for (c, d) in &self.by_column {
            let g = current.eval_at(d, species, t);
            for (k, v) in numerator.iter_mut().enumerate() {
                *v += g * tracking.dc[c * m + k];
            }
        }
        if speed == 0.0 || !speed.is_finite() {
            return Err(SimError::failed(
                t,
                None,
                f64::NAN,
                "a triggered event's condition touches its threshold without crossing it, so the event time has no derivative",
            ));
        }
        Ok(numerator.iter().map(|v| -v / speed).collect())
    }
}

/// A model compiled for forward sensitivities to a fixed list of
/// parameters: the system and the partials are compiled once, and
/// [`Self::run`] takes the model with any values changed (the same
/// structure), so a fit or a scan reuses one compilation across calls.
#[derive(Debug, Clone)]
pub struct SensitivityRunner {
    system: crate::numeric::CompiledSystem,
    derivatives: CompiledDerivatives,
    wrt: Vec<Wrt>,
}

impl SensitivityRunner {
    pub fn new(prepared: &Prepared, wrt: &[Wrt]) -> Result<SensitivityRunner, SimError> {
        let columns = tracked_columns(&prepared.model, wrt);
        let derivatives =
            CompiledDerivatives::compile(&prepared.model, &prepared.layout, &columns)?;
        Ok(SensitivityRunner {
            system: prepared.system.clone(),
            derivatives,
            wrt: wrt.to_vec(),
        })
    }

    /// The time course of `model` (the prepared model, values possibly
    /// changed) at `times`, with the sensitivities to the runner's parameters.
    pub fn run(
        &self,
        model: &Model,
        settings: &Settings,
        times: &[f64],
    ) -> Result<SensitivityTrajectory, SimError> {
        if times.iter().any(|t| !t.is_finite() || *t < 0.0) {
            return Err(SimError::input(
                "output times must be finite and not negative",
            ));
        }
        if times.windows(2).any(|w| w[1] < w[0]) {
            return Err(SimError::input("output times must be in increasing order"));
        }
        let result = if self.system.nstates > SPARSE_THRESHOLD {
            forward_sparse(model, self, settings, times)
        } else {
            forward_dense(model, self, settings, times)
        };
        result.map_err(|e| e.named(model))
    }
}

/// The time course of `prepared` at `times` with the sensitivities of every
/// species and observable to `wrt`.
pub fn simulate_sensitivities(
    prepared: &Prepared,
    wrt: &[Wrt],
    settings: &Settings,
    times: &[f64],
) -> Result<SensitivityTrajectory, SimError> {
    SensitivityRunner::new(prepared, wrt)?.run(&prepared.model, settings, times)
}

/// The constants differentiated against: the chosen ones, then every total.
fn tracked_columns(model: &Model, wrt: &[Wrt]) -> Vec<Sym> {
    let mut columns: Vec<Sym> = Vec::new();
    for w in wrt {
        if let Wrt::Constant(s) = w
            && !columns.contains(s)
        {
            columns.push(*s);
        }
    }
    for j in 0..model.totals.len() {
        if !columns.contains(&Sym::Total(j)) {
            columns.push(Sym::Total(j));
        }
    }
    columns
}

macro_rules! forward_with {
    ($name:ident, $matrix:ty, $solver:ty) => {
        fn $name(
            model: &Model,
            runner: &SensitivityRunner,
            settings: &Settings,
            times: &[f64],
        ) -> Result<SensitivityTrajectory, SimError> {
            let system = &runner.system;
            let wrt = &runner.wrt[..];
            let (n, m) = (system.nstates, wrt.len());
            let nspecies = system.species_count();
            let derivatives = &runner.derivatives;
            let columns = derivatives.columns.clone();
            let mut tracking = Tracking {
                model,
                derivatives,
                dc: vec![0.0; columns.len() * m],
                m,
                nstates: n,
                nspecies,
                state_species: system.state_species.clone(),
            };
            // At t = 0: a constant is its own parameter; a total moves with
            // the initial values it sums (and with itself, in a reduced model).
            for (k, w) in wrt.iter().enumerate() {
                if let Wrt::Constant(s) = w
                    && let Some(c) = tracking.column(*s)
                {
                    tracking.dc[c * m + k] = 1.0;
                }
            }
            for (j, total) in model.totals.iter().enumerate() {
                let Some(c) = tracking.column(Sym::Total(j)) else {
                    continue;
                };
                for (k, w) in wrt.iter().enumerate() {
                    if let Wrt::Initial(i) = w {
                        tracking.dc[c * m + k] += total
                            .terms
                            .iter()
                            .filter(|(s, _)| s == i)
                            .map(|(_, coef)| coef_f64(*coef))
                            .sum::<f64>();
                    }
                }
            }
            let mut s_start = vec![0.0; n * m];
            for (k, w) in wrt.iter().enumerate() {
                if let Wrt::Initial(i) = w
                    && let Some(slot) = system.state_species.iter().position(|s| s == i)
                {
                    s_start[k * n + slot] = 1.0;
                }
            }

            let end = times.last().copied().unwrap_or(0.0);
            let plan = plan(model, end);
            let mut mixture = Mixture::new(model);
            let mut constants = mixture.constants();
            let workspace = RefCell::new(system.workspace(&constants));
            let dws = RefCell::new(tracking.derivatives.workspace(&constants));
            let start = RefCell::new(system.state_from_species(&mixture.species));
            // Events at t = 0 change the start, and its sensitivities.
            let mut next_event = 0;
            if next_event < plan.events.len()
                && model.events[plan.events[next_event]].time().unwrap_or(0.0) <= 0.0
            {
                let y0 = start.borrow().clone();
                let mut species_sens =
                    tracking.outputs(&mut dws.borrow_mut(), &y0, 0.0, &s_start)[..nspecies * m].to_vec();
                while next_event < plan.events.len()
                    && model.events[plan.events[next_event]].time().unwrap_or(0.0) <= 0.0
                {
                    let e = plan.events[next_event];
                    let before = mixture.volume;
                    mixture.apply(model, e, 0.0)?;
                    let kept = kept_fraction(before, mixture.volume);
                    tracking.through_event(e, kept, &mixture.species, &mut species_sens);
                    next_event += 1;
                }
                tracking.recompute_totals(&species_sens);
                s_start = tracking.state_part(&species_sens);
                constants = mixture.constants();
                system.set_constants(&mut workspace.borrow_mut(), &constants);
                tracking.derivatives.set_constants(&mut dws.borrow_mut(), &constants);
                *start.borrow_mut() = system.state_from_species(&mixture.species);
            }
            let start_sens = RefCell::new(s_start);
            let dc = RefCell::new(tracking.dc.clone());
            let cache = RefCell::new(JacobianCache {
                y_bits: Vec::new(),
                t_bits: 0,
                valid: false,
                values: vec![0.0; system.jacobian_nnz()],
            });
            let weights = RefCell::new(vec![0.0; columns.len()]);

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
            // (∂f/∂c)·(dc/dp)·v.
            let sens = |x: &[f64], _p: &[f64], t: f64, v: &[f64], y: &mut [f64]| {
                let dc = dc.borrow();
                let mut w = weights.borrow_mut();
                for (c, wc) in w.iter_mut().enumerate() {
                    *wc = (0..m).map(|k| dc[c * m + k] * v[k]).sum();
                }
                derivatives.rhs_mul(&mut dws.borrow_mut(), x, t, &w, y);
            };
            let init = |_p: &[f64], _t: f64, y: &mut [f64]| y.copy_from_slice(&start.borrow());
            let init_sens = |_p: &[f64], _t: f64, v: &[f64], y: &mut [f64]| {
                let s = start_sens.borrow();
                y.iter_mut().for_each(|y| *y = 0.0);
                for k in 0..m {
                    for i in 0..n {
                        y[i] += s[k * n + i] * v[k];
                    }
                }
            };
            let mut problem = OdeBuilder::<$matrix>::new()
                .rtol(settings.rtol)
                .atol(vec![settings.atol; n])
                .p(vec![0.0; m])
                // The sensitivities share the state's error control.
                .sens_rtol(settings.rtol)
                .sens_atol(vec![settings.atol; n])
                .rhs_sens_implicit(rhs, jac, sens)
                .init_sens(init, init_sens, n)
                .build()
                .map_err(|e| SimError::setup(format!("the solver could not be set up: {e}")))?;
            problem.ode_options.max_number_timesteps = settings.max_steps;
            // Sensitivities agree with finite differences of the solver only
            // when their (preconditioned, iterative) linear solves converge
            // well below the error test: a hundredth of it, with room to
            // iterate.
            if let Ok(v) = std::env::var("RW_DST") { problem.ode_options.derivative_solve_tolerance = v.parse().unwrap(); } else { problem.ode_options.derivative_solve_tolerance = 0.01; }
            problem.ode_options.derivative_solve_max_iter = 50;

            let mut out = Trajectory {
                times: Vec::with_capacity(times.len()),
                rows: Vec::with_capacity(times.len()),
                volumes: Vec::new(),
                steps: 0,
            };
            let mut sensitivities: Vec<Vec<f64>> = Vec::with_capacity(times.len());
            let mut next_out = 0;
            let mut row = Vec::new();
            let mut t_start = 0.0;
            let mut armed: Vec<bool> = {
                let mut row = Vec::new();
                system.outputs(&mut workspace.borrow_mut(), &start.borrow(), 0.0, &mut row);
                let species = &row[..nspecies];
                plan.triggers
                    .iter()
                    .map(|&e| not_true(mixture.rising(model, e, species, 0.0)))
                    .collect()
            };
            let conditions: Vec<Option<Condition>> = plan
                .triggers
                .iter()
                .map(|&e| Condition::new(model, e, &columns))
                .collect();
            let mut firings = 0usize;
            let record = |out: &mut Trajectory,
                              sensitivities: &mut Vec<Vec<f64>>,
                              row: &mut Vec<f64>,
                              t: f64,
                              y: &[f64],
                              s: &[f64],
                              volume: Option<f64>,
                              tracking: &Tracking<'_>| {
                system.outputs(&mut workspace.borrow_mut(), y, t, row);
                out.push(t, row, volume);
                sensitivities.push(tracking.outputs(&mut dws.borrow_mut(), y, t, s));
            };
            loop {
                let seg_end = if next_event < plan.events.len() {
                    model.events[plan.events[next_event]].time().unwrap_or(end)
                } else {
                    end
                };
                let last_segment = next_event >= plan.events.len();
                while next_out < times.len() && times[next_out] <= t_start {
                    let (y, s) = (start.borrow().clone(), start_sens.borrow().clone());
                    record(&mut out, &mut sensitivities, &mut row, times[next_out], &y, &s, mixture.volume, &tracking);
                    next_out += 1;
                }
                let mut y_end = start.borrow().clone();
                let mut s_end = start_sens.borrow().clone();
                let mut fired = Vec::new();
                let mut t_event = seg_end;
                if seg_end > t_start && n == 0 {
                    while next_out < times.len()
                        && (times[next_out] < seg_end || (last_segment && times[next_out] <= seg_end))
                    {
                        record(&mut out, &mut sensitivities, &mut row, times[next_out], &[], &[], mixture.volume, &tracking);
                        next_out += 1;
                    }
                } else if seg_end > t_start {
                    problem.t0 = t_start;
                    cache.borrow_mut().valid = false;
                    let mut sens_sink = SensitivitySink::default();
                    let first_row = out.rows.len();
                    let stretch = {
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
                            sensitivities: Some(&mut sens_sink),
                        };
                        match settings.method {
                            Method::Bdf => {
                                let solver = problem.bdf_sens::<$solver>().map_err(|e| {
                                    SimError::setup(format!("the solver could not start at t = {t_start}: {e}"))
                                })?;
                                drive(solver, system, &workspace, settings, seg_end, last_segment, &mut sink, &mut watch)?
                            }
                            Method::Esdirk => {
                                let solver = problem.esdirk34_sens::<$solver>().map_err(|e| {
                                    SimError::setup(format!("the solver could not start at t = {t_start}: {e}"))
                                })?;
                                drive(solver, system, &workspace, settings, seg_end, last_segment, &mut sink, &mut watch)?
                            }
                        }
                    };
                    for (offset, (y, s)) in sens_sink.at_outputs.iter().enumerate() {
                        let t = out.times[first_row + offset];
                        sensitivities.push(tracking.outputs(&mut dws.borrow_mut(), y, t, s));
                    }
                    s_end = sens_sink.at_end;
                    match stretch {
                        Stretch::Reached(state) => y_end = state,
                        Stretch::Triggered { time, state, fired: f } => {
                            t_event = time;
                            y_end = state;
                            fired = f;
                        }
                    }
                }
                system.outputs(&mut workspace.borrow_mut(), &y_end, t_event, &mut row);
                mixture.species.copy_from_slice(&row[..nspecies]);
                if fired.is_empty() && last_segment {
                    break;
                }
                let mut species_sens =
                    tracking.outputs(&mut dws.borrow_mut(), &y_end, t_event, &s_end)[..nspecies * m].to_vec();
                if settings.event_rows {
                    out.push(t_event, &row, mixture.volume);
                    sensitivities.push(tracking.outputs(&mut dws.borrow_mut(), &y_end, t_event, &s_end));
                }
                // A triggered event's time moves with the parameters.
                let mut time_sens = vec![0.0; m];
                if let Some(&first) = fired.first()
                    && let Some(condition) = &conditions[first]
                {
                    let mut f = vec![0.0; n];
                    system.rhs(&mut workspace.borrow_mut(), &y_end, t_event, &mut f);
                    let rates = tracking.species_rates(&mut dws.borrow_mut(), &y_end, t_event, &f);
                    time_sens = condition.time_sensitivity(
                        &mixture.current,
                        &mixture.species,
                        t_event,
                        &rates,
                        &species_sens,
                        &tracking,
                    )?;
                    for i in 0..nspecies {
                        for k in 0..m {
                            species_sens[i * m + k] += rates[i] * time_sens[k];
                        }
                    }
                }
                let events: Vec<usize> = if fired.is_empty() {
                    let mut v = Vec::new();
                    while next_event < plan.events.len()
                        && model.events[plan.events[next_event]].time().unwrap_or(0.0) <= t_event
                    {
                        v.push(plan.events[next_event]);
                        next_event += 1;
                    }
                    v
                } else {
                    firings += fired.len();
                    if firings > MAX_FIRINGS {
                        return Err(SimError::failed(t_event, None, f64::NAN, &format!(
                            "triggered events fired more than {MAX_FIRINGS} times; a condition may be flipping at every step"
                        )));
                    }
                    fired.iter().map(|&k| plan.triggers[k]).collect()
                };
                for e in events {
                    let before = mixture.volume;
                    mixture.apply(model, e, t_event)?;
                    let kept = kept_fraction(before, mixture.volume);
                    tracking.through_event(e, kept, &mixture.species, &mut species_sens);
                }
                tracking.recompute_totals(&species_sens);
                constants = mixture.constants();
                system.set_constants(&mut workspace.borrow_mut(), &constants);
                tracking.derivatives.set_constants(&mut dws.borrow_mut(), &constants);
                *dc.borrow_mut() = tracking.dc.clone();
                let y_start = system.state_from_species(&mixture.species);
                let mut s_new = tracking.state_part(&species_sens);
                if time_sens.iter().any(|v| *v != 0.0) {
                    let mut f = vec![0.0; n];
                    system.rhs(&mut workspace.borrow_mut(), &y_start, t_event, &mut f);
                    for k in 0..m {
                        for i in 0..n {
                            s_new[k * n + i] -= f[i] * time_sens[k];
                        }
                    }
                }
                *start.borrow_mut() = y_start;
                *start_sens.borrow_mut() = s_new;
                {
                    let mut row = Vec::new();
                    system.outputs(&mut workspace.borrow_mut(), &start.borrow(), t_event, &mut row);
                    let species = &row[..nspecies];
                    for (k, &e) in plan.triggers.iter().enumerate() {
                        if not_true(mixture.rising(model, e, species, t_event)) {
                            armed[k] = true;
                        }
                    }
                }
                let grid_has_it = next_out < times.len() && times[next_out] == t_event;
                if settings.event_rows && !grid_has_it {
                    let (y, s) = (start.borrow().clone(), start_sens.borrow().clone());
                    record(&mut out, &mut sensitivities, &mut row, t_event, &y, &s, mixture.volume, &tracking);
                }
                t_start = t_event;
            }
            Ok(SensitivityTrajectory {
                trajectory: out,
                sensitivities,
            })
        }
    };
}

forward_with!(forward_dense, NalgebraMat<f64>, NalgebraLU<f64>);
forward_with!(
    forward_sparse,
    FaerSparseMat<f64>,
    crate::numeric::static_lu::StaticPivotLu
);

/// V/(V+ΔV) of an addition of a stock (1 for anything else).
fn kept_fraction(before: Option<f64>, after: Option<f64>) -> f64 {
    match (before, after) {
        (Some(b), Some(a)) if a > b && a > 0.0 => b / a,
        _ => 1.0,
    }
}

/// A condition is false where its rising function is not above zero (NaN
/// included: an undefined condition never fires).
fn not_true(rising: f64) -> bool {
    rising.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)
}
