//! The model stage: resolves names, converts units once, checks dimensions
//! and model rules, and lowers the syntax tree into the [`Model`] IR.
//!
//! Invariants: see [`ir`]. Nothing here prints; problems come back as
//! [`crate::diagnostics::Diagnostic`]s with spans into the right file.

pub mod expr;
pub mod ir;
pub mod lab_units;
pub mod units;
pub mod value_error;

pub use expr::{BinOp, Expr, Func};
pub use ir::*;
pub use units::{ConcUnit, Dim, TimeUnit, Units};
pub use validate::{Violation, validate};
pub use value_error::ValueError;
pub mod load;
mod lower;
pub mod source;
mod validate;

pub use load::{Loaded, load_path, load_str, load_with};
