//! Network analysis: the stoichiometric matrix, its rank, conservation laws,
//! the reduced system, and the structure of the reaction network.
//!
//! Why a stage of its own: conservation laws shrink the ODE system (an
//! enzyme total turns four equations into three) and later stages —
//! simulation, code emission and rate-law derivation — all work on the
//! reduced system built here, so it is computed once, exactly.
//!
//! Invariants:
//! - all linear algebra is exact (integers, rationals); no floats decide a
//!   rank or a law;
//! - the stoichiometric matrix N has one row per dynamic species and one
//!   column per step (fixed species are excluded);
//! - every law y satisfies yᵀN = 0, has integer coefficients with gcd 1, and
//!   the laws form a basis of the left null space (their number is
//!   species − rank);
//! - each law has exactly one dependent species, and `N = L · N_R` holds
//!   exactly for the link matrix `L` and the rows `N_R` of the independent
//!   species (Reder 1988);
//! - nothing here prints.

mod laws;
mod moieties;
pub mod sparse;
mod structure;

pub use structure::{Complex, Structure};

use crate::diagnostics::Diagnostic;
use crate::model::{Coef, Expr, Model, Sym};
use num_rational::BigRational;

/// A conservation law `Σ coefficient · species = value`.
#[derive(Debug, Clone, PartialEq)]
pub struct ConservationLaw {
    /// The user's total's name, or a deterministic readable name such as
    /// `E_total` (semi-positive laws, after their first species with
    /// coefficient 1) or `conserved_1` (laws with mixed signs).
    pub name: String,
    /// Species index → integer coefficient (gcd 1), zeros omitted, by species.
    pub coefficients: Vec<(usize, num_bigint::BigInt)>,
    /// Given by the user's total (scaled like `coefficients`), or computed
    /// from the initial state.
    pub value: f64,
    /// Index into `model.totals` if the user named this law.
    pub user_total: Option<usize>,
}

/// A species eliminated by a conservation law.
#[derive(Debug, Clone, PartialEq)]
pub struct DependentSpecies {
    pub species: usize,
    /// Index into [`Reduced::model`]`.totals` of the law that eliminates it.
    pub total: usize,
    /// The species as an expression over `Sym::Total` and independent `Sym::Species`.
    pub formula: Expr,
}

/// The reduced system: the independent species and how the dependent ones
/// follow from them and the totals.
#[derive(Debug, Clone, PartialEq)]
pub struct Reduced {
    /// The input model with every conservation law present as a `Total`
    /// (user totals kept; automatically found laws appended with their
    /// deterministic names and values from the initial state), so later
    /// stages can refer to every total as `Sym::Total(i)`.
    pub model: Model,
    pub laws: Vec<ConservationLaw>,
    /// Species indices, in declaration order.
    pub independent: Vec<usize>,
    /// By species index.
    pub dependent: Vec<DependentSpecies>,
    /// The link matrix L (species × independent species), one sparse row per
    /// species: (position in `independent`, value), zeros omitted.
    pub link_matrix: Vec<Vec<(usize, BigRational)>>,
    /// N_R: the rows of N for the independent species (in `independent`
    /// order), each sparse over steps.
    pub reduced_stoichiometry: Vec<Vec<(usize, Coef)>>,
}

impl Reduced {
    /// d/dt of each independent species (in `independent` order), with every
    /// dependent species replaced by its formula.
    pub fn rhs_exprs(&self) -> Vec<Expr> {
        let full = self.model.rhs_exprs();
        let observables = &self.model.observables;
        let mut formula_of: Vec<Option<&Expr>> = vec![None; self.model.species.len()];
        for d in &self.dependent {
            formula_of[d.species] = Some(&d.formula);
        }
        let substitute_dependent = |e: &Expr| -> Expr {
            // Observables may name species, so they are expanded first
            // (their definitions cannot be cyclic).
            fn expand(e: &Expr, obs: &[crate::model::Observable]) -> Expr {
                e.substitute(&|s| match s {
                    Sym::Observable(i) => obs.get(i).map(|o| expand(&o.expr, obs)),
                    _ => None,
                })
            }
            let expanded = expand(e, observables);
            expanded.substitute(&|s| match s {
                Sym::Species(i) => formula_of.get(i).copied().flatten().cloned(),
                _ => None,
            })
        };
        self.independent
            .iter()
            .map(|&i| substitute_dependent(&full[i]))
            .collect()
    }

    /// The full state from an independent state (rebuilds dependents from
    /// the totals' values in [`Reduced::model`]).
    pub fn full_state(&self, independent_values: &[f64]) -> Vec<f64> {
        let mut y = vec![0.0; self.model.species.len()];
        for (&i, &v) in self.independent.iter().zip(independent_values) {
            y[i] = v;
        }
        let snapshot = y.clone();
        for d in &self.dependent {
            y[d.species] = d.formula.eval(
                &|s| match s {
                    Sym::Species(i) => snapshot[i],
                    other => self.model.initial_value(other),
                },
                0.0,
            );
        }
        y
    }

    /// The independent part of a full state (in `independent` order).
    pub fn independent_state(&self, full: &[f64]) -> Vec<f64> {
        self.independent.iter().map(|&i| full[i]).collect()
    }

    /// Whether a species is dependent.
    pub fn is_dependent(&self, species: usize) -> bool {
        self.dependent.iter().any(|d| d.species == species)
    }
}

/// Where a reported law comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LawSource {
    /// A user's `total` (index into `model.totals`).
    User(usize),
    /// An extreme ray of the non-negative cone (a conserved moiety).
    NonNegative,
    /// An integer basis vector completing the basis.
    Integer,
}

/// Whether the reported laws are a non-negative basis.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NonNegativeBasis {
    /// There are no conservation laws.
    NoLaws,
    /// Every reported law has non-negative coefficients.
    Spans,
    /// Some non-negative laws exist, but they do not span the laws.
    Partial,
    /// No non-zero y ≥ 0 with yᵀN = 0 exists (apart from the user's totals).
    NoneExist,
    /// The moiety search exceeded its work budget in this many blocks of
    /// species; the laws there are an integer basis.
    GaveUp { blocks: usize },
}

/// Everything `ratewright analyze` reports.
#[derive(Debug, Clone)]
pub struct Analysis {
    /// Net change of each species per step: one sparse column per step.
    pub columns: Vec<Vec<(usize, Coef)>>,
    pub rank: usize,
    pub reduced: Reduced,
    /// User totals that are combinations of earlier ones (kept as totals,
    /// not counted as laws).
    pub redundant_totals: Vec<usize>,
    pub nonnegative: NonNegativeBasis,
    pub structure: Structure,
}

impl Analysis {
    /// The stoichiometric coefficient of species `i` in step `j`.
    pub fn coefficient(&self, i: usize, j: usize) -> Coef {
        self.columns[j]
            .iter()
            .find(|(s, _)| *s == i)
            .map(|(_, c)| *c)
            .unwrap_or_default()
    }
}

/// The reduced system of a model.
pub fn reduce(model: &Model) -> Result<Reduced, Diagnostic> {
    Ok(laws::find(model)?.reduced)
}

/// Everything `analyze` reports.
pub fn analyze(model: &Model) -> Result<Analysis, Diagnostic> {
    let found = laws::find(model)?;
    let columns: Vec<Vec<(usize, Coef)>> = (0..model.steps.len())
        .map(|j| model.net_change(j))
        .collect();
    let structure = structure::analyze(model, found.rank);
    Ok(Analysis {
        columns,
        rank: found.rank,
        reduced: found.reduced,
        redundant_totals: found.redundant_totals,
        nonnegative: found.nonnegative,
        structure,
    })
}

#[cfg(test)]
mod tests;
