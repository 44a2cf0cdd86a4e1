//! Why a value given to a lowered model (`--set`, a scan's axis, a total's
//! value) cannot be used: one typed error for the model's own value
//! changes, converting into a [`Diagnostic`] with a [`Code`].
//!
//! Invariants: the text of each error is what users have always seen (the
//! command line prints it after `--set:`); every kind has one code.

use super::units::Dim;
use crate::diagnostics::{Code, Diagnostic};
use std::fmt;

#[derive(Debug, Clone, PartialEq)]
pub enum ValueError {
    /// A value that is NaN or infinite.
    NotFinite { name: String },
    /// A species' initial value below zero.
    NegativeInitial { name: String },
    /// An observable, which follows from other values.
    NotSettable { name: String },
    /// No settable item of that name; the closest name, if any.
    UnknownName {
        name: String,
        suggestion: Option<String>,
    },
    /// A param whose definition evaluates to NaN or infinity.
    ParamNotFinite { name: String, value: f64 },
    /// A total none of whose species can take up its value.
    TotalWithoutSpecies { total: String },
    /// A total smaller than what its other species already hold.
    TotalTooSmall {
        total: String,
        value: f64,
        species: String,
        would_start_at: f64,
    },
    /// A mass-action constant that evaluates below zero.
    NegativeRateConstant {
        step: String,
        direction: &'static str,
        value: f64,
    },
    /// A value written with a unit of another dimension than the item's.
    WrongDimension {
        text: String,
        name: String,
        needed: String,
        given: Dim,
    },
}

impl ValueError {
    pub fn code(&self) -> Code {
        match self {
            ValueError::NotFinite { .. } => Code::BadNumber,
            ValueError::NegativeInitial { .. } => Code::NegativeInitial,
            ValueError::NotSettable { .. } => Code::WrongKind,
            ValueError::UnknownName { .. } => Code::UnknownName,
            ValueError::ParamNotFinite { .. } => Code::BadParamValue,
            ValueError::TotalWithoutSpecies { .. } | ValueError::TotalTooSmall { .. } => {
                Code::TotalInconsistent
            }
            ValueError::NegativeRateConstant { .. } => Code::NegativeRateConstant,
            ValueError::WrongDimension { .. } => Code::DimensionMismatch,
        }
    }
}

impl fmt::Display for ValueError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ValueError::NotFinite { name } => write!(f, "value for `{name}` is not finite"),
            ValueError::NegativeInitial { name } => {
                write!(f, "initial value of `{name}` must not be negative")
            }
            ValueError::NotSettable { name } => {
                write!(f, "`{name}` is an observable and cannot be set")
            }
            ValueError::UnknownName { name, suggestion } => {
                write!(
                    f,
                    "no param, species, fixed species or total named `{name}`"
                )?;
                match suggestion {
                    Some(s) => write!(f, " (did you mean `{s}`?)"),
                    None => Ok(()),
                }
            }
            ValueError::ParamNotFinite { name, value } => {
                write!(f, "param `{name}` evaluates to {value}")
            }
            ValueError::TotalWithoutSpecies { total } => write!(
                f,
                "total `{total}` has no species whose start value could follow from it"
            ),
            ValueError::TotalTooSmall {
                total,
                value,
                species,
                would_start_at,
            } => write!(
                f,
                "total `{total}` = {value} is less than the other species in it already hold; `{species}` would start at {would_start_at}"
            ),
            ValueError::NegativeRateConstant {
                step,
                direction,
                value,
            } => write!(
                f,
                "the {direction} constant of step `{step}` would be {value}; a rate constant cannot be negative"
            ),
            ValueError::WrongDimension {
                text,
                name,
                needed,
                given,
            } => write!(
                f,
                "`{text}` cannot be a value of `{name}`, which is in {needed} (the unit given has dimension {given})"
            ),
        }
    }
}

impl std::error::Error for ValueError {}

impl From<ValueError> for Diagnostic {
    fn from(e: ValueError) -> Self {
        Diagnostic::error(e.code(), e.to_string())
    }
}

/// Callers that report a value error as text (a usage error) keep doing so.
impl From<ValueError> for String {
    fn from(e: ValueError) -> Self {
        e.to_string()
    }
}
