//! ratewright: a compiler for a plain-text language of reaction mechanisms.
//!
//! Stages, each a module with one job (see docs/architecture.md):
//! `syntax` → `model` → {`network`, `algebra` → `ratelaw`, `numeric` → `sim`,
//! `emit`, `compare`} → `cli`. `diagnostics` is shared by all.

pub mod diagnostics;
pub mod model;
pub mod cli;
