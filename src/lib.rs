//! ratewright: a compiler for a plain-text language of reaction mechanisms.
//!
//! Stages, each a module with one job (see docs/architecture.md):
//! `syntax` → `model` → {`network`, `algebra` → `ratelaw`, `numeric` → `sim`, `stochastic`,
//! `emit`, `compare`} → `cli`; `lsp` answers an editor from `syntax` and `model`. `diagnostics` is shared by all.

pub mod algebra;
pub mod cli;
pub mod compare;
pub mod control;
pub mod diagnostics;
pub mod emit;
pub mod fit;
pub mod lsp;
pub mod model;
pub mod network;
pub mod numeric;
pub mod ratelaw;
pub mod sensitivity;
pub mod sim;
pub mod stochastic;
pub mod syntax;
