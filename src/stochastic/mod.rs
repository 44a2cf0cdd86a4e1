//! Stochastic simulation: molecule counts, propensities, exact and
//! approximate stochastic runs, and ensembles of runs with statistics.
//!
//! Why a stage of its own: at low copy numbers (a cell's few enzyme
//! molecules, a droplet) the rate equations of `sim` give only the mean,
//! and the fluctuations are the result. A stochastic run needs a different
//! state (whole molecule counts in a volume), a different rate (the
//! propensity, with combinatorial factors) and different methods, so it
//! reads the `Model` IR itself, beside `numeric`/`sim`, and hands the
//! command line plain data: count arrays and their statistics.
//!
//! Layout: `convert` (volume, Avogadro constant, counts from
//! concentrations), `network` (the count-level reactions, their constants,
//! the dependency graph, events as count changes), `exact` (Gillespie's
//! direct method; the next-reaction method with an indexed priority queue
//! above [`exact::NEXT_REACTION_ABOVE`] reactions), `leap` (tau-leaping with
//! the Cao–Gillespie–Petzold step size), `ensemble` (random streams, runs in
//! parallel, statistics and histograms), `error` (the typed errors).
//!
//! Invariants:
//! - counts are whole and never negative at any reached state: a reaction
//!   fires only when its reactants are there, and a leap that would take a
//!   count below zero is rejected and retried with half the step;
//! - a run's random stream depends only on the seed and the run's number,
//!   so an ensemble is the same whatever the number of worker threads;
//! - the Avogadro constant is the exact SI value 6.02214076e23 /mol;
//! - a `law` is used as a propensity only while it is a finite number ≥ 0:
//!   anything else stops the run with an error at the law's span;
//! - nothing here prints, reads files or exits.

pub mod convert;
pub mod ensemble;
pub mod error;
pub mod exact;
pub mod leap;
pub mod network;

pub use convert::{AVOGADRO, molecules_per_unit, parse_volume};
pub use ensemble::{Ensemble, Method, Settings, Statistics, histogram, run_rng, sample};
pub use error::StochasticError;
pub use network::{Network, prepare};
