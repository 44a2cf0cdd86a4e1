//! Simulation: time courses with events (`integrate`), steady states with
//! stability (`steady`), and parameter scans (`scan`), all on a model
//! compiled by `numeric`.
//!
//! Why a separate stage: the numerical methods (diffsol's BDF and ESDIRK,
//! Newton with line search) and their failure modes live here, behind plain
//! data in and out; the command line only formats. Invariants: results are
//! in the model's default units; a failed run returns an error naming the
//! time and the species that went bad, never a partial result; nothing here
//! prints.

pub mod continuation;
pub mod forward;
pub mod integrate;
pub mod scan;
pub mod steady;

pub use integrate::{Trajectory, simulate};

use crate::model::{Expr, Model};
use crate::numeric::{CompileError, CompiledSystem, StateLayout};
use std::fmt;

/// The integration method.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Method {
    /// Variable-order backward differentiation formulas (stiff, the default).
    #[default]
    Bdf,
    /// Explicit-first-stage singly diagonally implicit Runge–Kutta, order 3(4).
    Esdirk,
}

/// Tolerances and limits of a run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settings {
    pub method: Method,
    pub rtol: f64,
    pub atol: f64,
    /// Steps allowed per segment between events.
    pub max_steps: usize,
    /// Whether each event's time gets a row just before and just after it
    /// (a default output grid does; a grid the user fixed does not).
    pub event_rows: bool,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            method: Method::Bdf,
            rtol: 1e-6,
            atol: 1e-10,
            max_steps: 500_000,
            event_rows: false,
        }
    }
}

/// A failed simulation, steady-state search or scan point.
#[derive(Debug, Clone, PartialEq)]
pub struct SimError {
    pub kind: SimErrorKind,
    pub message: String,
    /// When the failure happened (model time), if during integration.
    pub time: Option<f64>,
    /// The species that went bad (model index) and its last value.
    pub species: Option<(usize, f64)>,
    /// The species' name, filled in where the model is known.
    pub species_name: Option<String>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SimErrorKind {
    /// Bad input to a run (times, values).
    Input,
    /// The problem could not be set up.
    Setup,
    /// Integration failed (step size underflow, NaN, blow-up, step limit).
    Integration,
    /// No steady state found.
    NoSteadyState,
}

impl SimError {
    pub fn input(message: impl Into<String>) -> Self {
        SimError {
            kind: SimErrorKind::Input,
            message: message.into(),
            time: None,
            species: None,
            species_name: None,
        }
    }
    pub fn setup(message: impl Into<String>) -> Self {
        SimError {
            kind: SimErrorKind::Setup,
            message: message.into(),
            time: None,
            species: None,
            species_name: None,
        }
    }
    pub fn failed(time: f64, species: Option<usize>, value: f64, message: &str) -> Self {
        SimError {
            kind: SimErrorKind::Integration,
            message: message.to_string(),
            time: Some(time),
            species: species.map(|i| (i, value)),
            species_name: None,
        }
    }
    pub fn no_steady_state(message: impl Into<String>) -> Self {
        SimError {
            kind: SimErrorKind::NoSteadyState,
            message: message.into(),
            time: None,
            species: None,
            species_name: None,
        }
    }
    /// Fills in the species name from the model.
    pub fn named(mut self, model: &Model) -> Self {
        if let Some((i, _)) = self.species {
            self.species_name = model.species.get(i).map(|s| s.name.clone());
        }
        self
    }
    /// The stable diagnostic code for this failure.
    pub fn code(&self) -> crate::diagnostics::Code {
        use crate::diagnostics::Code;
        match self.kind {
            SimErrorKind::Input => Code::BadNumericInput,
            SimErrorKind::Setup | SimErrorKind::Integration => Code::SolverFailed,
            SimErrorKind::NoSteadyState => Code::NoSteadyState,
        }
    }
}

impl fmt::Display for SimError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.time {
            Some(t) => write!(
                f,
                "integration failed at t = {}: {}",
                readable(t),
                self.message
            )?,
            None => write!(f, "{}", self.message)?,
        }
        if let Some((i, v)) = self.species {
            let name = self
                .species_name
                .clone()
                .unwrap_or_else(|| format!("species #{i}"));
            write!(f, "; species `{name}` = {}", readable(v))?;
        }
        Ok(())
    }
}

impl std::error::Error for SimError {}

/// A number for a message: 6 significant digits, plain for magnitudes a
/// person reads as such (`0`, `9.99989`, `250`), with an exponent beyond
/// (`2.16879e15`), never Rust's `0e0`.
fn readable(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let (mantissa, exponent) = {
        let text = format!("{v:.5e}");
        let (m, e) = text.split_once('e').unwrap_or((&text, "0"));
        let m = m.trim_end_matches('0').trim_end_matches('.').to_string();
        (m, e.parse::<i32>().unwrap_or(0))
    };
    if (-3..6).contains(&exponent) {
        let decimals = (5 - exponent).max(0) as usize;
        let text = format!("{v:.decimals$}");
        if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        }
    } else {
        format!("{mantissa}e{exponent}")
    }
}

impl From<CompileError> for SimError {
    fn from(e: CompileError) -> Self {
        SimError::setup(format!("the model could not be compiled: {}", e.0))
    }
}

/// A model ready to simulate: the model whose constants, totals and events
/// apply, and its compiled system.
#[derive(Debug, Clone)]
pub struct Prepared {
    pub model: Model,
    pub system: CompiledSystem,
    /// Which species are integrated and how the others follow.
    pub layout: StateLayout,
    /// Whether the state is the reduced one (independent species only).
    pub reduced: bool,
}

impl Prepared {
    /// Every species is integrated.
    pub fn full(model: &Model) -> Result<Prepared, SimError> {
        Ok(Prepared {
            model: model.clone(),
            system: CompiledSystem::full(model)?,
            layout: StateLayout::full(model),
            reduced: false,
        })
    }

    /// Only the independent species are integrated; the dependent ones follow
    /// from the conservation laws (their totals are constants that events
    /// update).
    pub fn reduced(model: &Model) -> Result<Prepared, crate::diagnostics::Diagnostic> {
        let reduced = crate::network::reduce(model)?;
        let layout = StateLayout {
            state_species: reduced.independent.clone(),
            dependent: reduced
                .dependent
                .iter()
                .map(|d| (d.species, d.formula.clone()))
                .collect(),
        };
        let system = CompiledSystem::compile(&reduced.model, &layout).map_err(|e| {
            crate::diagnostics::Diagnostic::error(
                crate::diagnostics::Code::SolverFailed,
                format!("the reduced model could not be compiled: {}", e.0),
            )
        })?;
        Ok(Prepared {
            model: reduced.model,
            system,
            layout,
            reduced: true,
        })
    }

    pub fn simulate(&self, settings: &Settings, times: &[f64]) -> Result<Trajectory, SimError> {
        simulate(&self.model, &self.system, settings, times).map_err(|e| e.named(&self.model))
    }
}

/// Column names of a trajectory row: species in declaration order, then
/// observables.
pub fn column_names(model: &Model) -> Vec<String> {
    model
        .species
        .iter()
        .map(|s| s.name.clone())
        .chain(model.observables.iter().map(|o| o.name.clone()))
        .collect()
}

/// Appends the mixture's volume (column `volume`, in the unit the file
/// declared it in) and, with `amounts`, each species' amount (column
/// `amount(NAME)`, in the concentration unit times that volume unit, e.g.
/// uM × uL = pmol) to a trajectory of a model that declares a volume.
pub fn add_volume_columns(
    model: &Model,
    columns: &mut Vec<String>,
    trajectory: &mut Trajectory,
    amounts: bool,
) {
    if model.volume_unit.is_none() {
        return;
    }
    if trajectory.volumes.len() != trajectory.rows.len() {
        return;
    }
    columns.push("volume".to_string());
    if amounts {
        columns.extend(model.species.iter().map(|s| format!("amount({})", s.name)));
    }
    for (row, volume) in trajectory.rows.iter_mut().zip(&trajectory.volumes) {
        let volume = *volume;
        row.push(volume);
        if amounts {
            for i in 0..model.species.len() {
                row.push(row[i] * volume);
            }
        }
    }
}

/// The default end time: the last event plus five times the slowest time
/// scale of the linearised system at the start (1/|Re λ| of the eigenvalue
/// with the smallest non-zero real part, on the reduced system so that
/// conservation laws add no zero eigenvalues), rounded up to 1, 2 or
/// 5 × 10^k. Without any dynamics, or above 400 species, the slowest time
/// scale is taken as 20 time units.
pub fn default_until(model: &Model, system: &CompiledSystem) -> f64 {
    let last_event = model
        .events
        .iter()
        .filter_map(|e| e.time())
        .fold(0.0, f64::max);
    let tau = slowest_time_scale(model, system).unwrap_or(20.0);
    nice_ceiling(last_event + 5.0 * tau)
}

fn slowest_time_scale(model: &Model, system: &CompiledSystem) -> Option<f64> {
    if system.nstates == 0 || system.nstates > 400 {
        return None;
    }
    let reduced = if system.nstates == model.species.len() {
        Prepared::reduced(model).ok()
    } else {
        None
    };
    let (model, system) = match &reduced {
        Some(p) => (&p.model, &p.system),
        None => (model, system),
    };
    let n = system.nstates;
    if n == 0 {
        return None;
    }
    let y = system.state_from_species(&model.initial_state());
    let mut w = system.workspace(&crate::numeric::constants_of(model));
    let j = system.dense_jacobian(&mut w, &y, 0.0);
    let eig = accurate_eigenvalues(&nalgebra::DMatrix::from_fn(n, n, |r, c| j[r][c]));
    let slowest = eig
        .iter()
        .filter(|z| z.re != 0.0 && z.re.abs() > 1e-9 * z.norm())
        .map(|z| z.re.abs())
        .fold(f64::INFINITY, f64::min);
    (slowest.is_finite() && slowest > 0.0).then(|| 1.0 / slowest)
}

/// Eigenvalues, each with small relative error even when their magnitudes
/// span many decades: the QR algorithm's error is about ε·‖J‖ in absolute
/// terms, so small eigenvalues are taken from J⁻¹ (whose eigenvalues are
/// their reciprocals) and large ones from J. Sorted by magnitude.
pub fn accurate_eigenvalues(j: &nalgebra::DMatrix<f64>) -> Vec<nalgebra::Complex<f64>> {
    let by_size = |mut v: Vec<nalgebra::Complex<f64>>| {
        v.sort_by(|a, b| a.norm().total_cmp(&b.norm()));
        v
    };
    let direct = by_size(j.complex_eigenvalues().iter().copied().collect());
    let inverse = j
        .clone()
        .try_inverse()
        .filter(|inv| inv.iter().all(|v| v.is_finite()));
    let Some(inverse) = inverse else {
        return direct;
    };
    let reciprocal: Vec<nalgebra::Complex<f64>> = inverse
        .complex_eigenvalues()
        .iter()
        .map(|mu| mu.inv())
        .collect();
    let reciprocal = by_size(reciprocal);
    if reciprocal.len() != direct.len()
        || reciprocal
            .iter()
            .any(|z| !(z.re.is_finite() && z.im.is_finite()))
    {
        return direct;
    }
    let largest = direct.last().map(|z| z.norm()).unwrap_or(0.0);
    let smallest = reciprocal.first().map(|z| z.norm()).unwrap_or(0.0);
    direct
        .iter()
        .zip(&reciprocal)
        .map(|(d, r)| {
            if d.norm() * d.norm() >= largest * smallest {
                *d
            } else {
                *r
            }
        })
        .collect()
}

/// Rounds up to 1, 2 or 5 × 10^k.
pub fn nice_ceiling(x: f64) -> f64 {
    if !(x.is_finite() && x > 0.0) {
        return 100.0;
    }
    let p = 10f64.powf(x.log10().floor());
    for m in [1.0, 2.0, 5.0, 10.0] {
        if m * p >= x * (1.0 - 1e-12) {
            return m * p;
        }
    }
    10.0 * p
}

/// `n` evenly spaced times from 0 to `until` inclusive.
pub fn linear_times(until: f64, n: usize) -> Vec<f64> {
    if n <= 1 {
        return vec![until];
    }
    (0..n).map(|i| until * i as f64 / (n - 1) as f64).collect()
}

/// Evaluates an expression over species, observables and constants at each
/// row of a trajectory.
pub fn measure(model: &Model, expr: &Expr, time: f64, row: &[f64]) -> f64 {
    let nsp = model.species.len();
    model.eval_at(expr, &row[..nsp], time)
}
