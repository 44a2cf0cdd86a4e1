//! Compiled right-hand sides and Jacobians.
//!
//! Why a stage of its own: simulation, steady states and scans evaluate the
//! same model millions of times, so the model is lowered once into flat
//! register programs (`program`) and assembled into a right-hand side, an
//! analytic Jacobian with a fixed sparsity pattern, and output functions
//! (`system`), and a fixed-pattern sparse LU for the solver's iteration
//! matrix (`static_lu`). Invariants: nothing here walks an `Expr` or looks up a name at
//! evaluation time; evaluation never allocates; the Jacobian is the exact
//! derivative of the right-hand side (symbolic, from `algebra::calculus`).

pub mod derivatives;
pub mod program;
pub mod static_lu;
pub mod system;

pub use derivatives::{CompiledDerivatives, DerivativeWorkspace};
pub use system::{CompileError, CompiledSystem, StateLayout, Workspace, constants_of};

/// Above this many state variables the solver uses a sparse Jacobian and
/// sparse LU; at or below it, dense. Measured: see docs/simulation.md.
pub const SPARSE_THRESHOLD: usize = 60;
