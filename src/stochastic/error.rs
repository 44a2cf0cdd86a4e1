//! Why a model, or a run, cannot be simulated as molecule counts: typed,
//! with the span of the statement concerned, and a stable code.

use crate::diagnostics::{Code, Diagnostic, Span};
use std::fmt;

#[derive(Debug, Clone, PartialEq)]
pub enum StochasticError {
    /// A step has a dynamic species with a coefficient that is not a whole
    /// number: a count cannot change by half a molecule.
    FractionalCoefficient {
        step: String,
        species: String,
        coefficient: String,
        span: Span,
    },
    /// A law or rate constant mentions the time `t`: the methods here need
    /// propensities that change only when counts do.
    TimeDependent { step: String, span: Span },
    /// A value whose count is not a whole number from 0 to 2^53.
    CountOutOfRange {
        what: String,
        count: f64,
        span: Option<Span>,
    },
    /// A mass-action constant that is not a finite number ≥ 0.
    BadConstant {
        step: String,
        value: f64,
        span: Span,
    },
    /// A law that is negative (or not a number) at a state a run reached.
    NegativeLaw {
        step: String,
        value: f64,
        time: f64,
        run: u64,
        state: Vec<(String, i64)>,
        span: Span,
    },
    /// An addition of a stock, a withdrawal of volume or a triggered
    /// event: molecule-count runs apply timed species changes only.
    AssayEvent { span: Span },
}

impl StochasticError {
    pub fn code(&self) -> Code {
        match self {
            StochasticError::FractionalCoefficient { .. }
            | StochasticError::TimeDependent { .. }
            | StochasticError::BadConstant { .. }
            | StochasticError::AssayEvent { .. } => Code::NotCountable,
            StochasticError::CountOutOfRange { .. } => Code::CountOutOfRange,
            StochasticError::NegativeLaw { .. } => Code::NegativePropensity,
        }
    }

    /// The diagnostic, labelled at the statement concerned.
    pub fn to_diagnostic(&self) -> Diagnostic {
        let d = Diagnostic::error(self.code(), self.to_string());
        match self {
            StochasticError::FractionalCoefficient { span, .. } => d
                .with_label(*span, "not a whole number of molecules")
                .with_help("a stochastic run changes counts by whole molecules: write the step with whole coefficients"),
            StochasticError::TimeDependent { span, .. } => d
                .with_label(*span, "depends on t")
                .with_help("propensities must change only when counts change; model the time dependence with events instead"),
            StochasticError::CountOutOfRange { span, .. } => {
                let d = d.with_help("give a smaller --volume, or a smaller amount");
                match span {
                    Some(s) => d.with_label(*s, "this amount"),
                    None => d,
                }
            }
            StochasticError::BadConstant { span, .. } => {
                d.with_label(*span, "this constant")
            }
            StochasticError::AssayEvent { span } => d
                .with_label(*span, "not a timed species change")
                .with_help("run it with `ratewright run`, or write the protocol as `add`/`remove`/`set ... at TIME` of species"),
            StochasticError::NegativeLaw { span, .. } => d
                .with_label(*span, "negative here")
                .with_help("a propensity is a probability per time and cannot be negative: split the law into a forward and a reverse step"),
        }
    }
}

impl fmt::Display for StochasticError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StochasticError::FractionalCoefficient {
                step,
                species,
                coefficient,
                ..
            } => write!(
                f,
                "step `{step}` has coefficient {coefficient} for `{species}`, which is not a whole number of molecules"
            ),
            StochasticError::TimeDependent { step, .. } => write!(
                f,
                "the rate of step `{step}` depends on the time t, which a stochastic run cannot use as a propensity"
            ),
            StochasticError::CountOutOfRange { what, count, .. } => write!(
                f,
                "{what} is {count:e} molecules, outside the counts a run can hold (0 to 2^53)"
            ),
            StochasticError::AssayEvent { .. } => write!(
                f,
                "stochastic runs apply timed changes of species only; this event changes the volume or waits for a condition"
            ),
            StochasticError::BadConstant { step, value, .. } => write!(
                f,
                "the rate constant of step `{step}` is {value}, not a finite number ≥ 0"
            ),
            StochasticError::NegativeLaw {
                step,
                value,
                time,
                run,
                state,
                ..
            } => {
                write!(
                    f,
                    "the law of step `{step}` is {value} at t = {time} in run {run}, where counts are "
                )?;
                let shown: Vec<String> = state
                    .iter()
                    .take(12)
                    .map(|(n, c)| format!("{n} = {c}"))
                    .collect();
                write!(f, "{}", shown.join(", "))?;
                if state.len() > 12 {
                    write!(f, ", ...")?;
                }
                Ok(())
            }
        }
    }
}

impl std::error::Error for StochasticError {}
