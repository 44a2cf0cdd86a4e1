//! Meaning-level comparison of two models: what changed in the chemistry
//! between an old and a new version of a mechanism, and what follows from it.
//!
//! Why a stage of its own: a text diff of a reordered or reformatted file
//! says nothing about the chemistry, and a rename shows up as one removal and
//! one addition. Comparing resolved [`Model`]s instead makes statement order,
//! layout and the choice of default units irrelevant by construction.
//!
//! How: items are first paired by name ([`pairing`]); the items left over are
//! paired as renames when their content is the same (same value, same
//! stoichiometry and rate with the already paired names substituted), found
//! by iterating to a fixed point so that a renamed species lets a renamed
//! step be recognised and vice versa. Values are compared in one canonical
//! unit system (mol/L and s); expressions are compared by value at a few
//! pseudo-random points in which every paired name takes the same value on
//! both sides ([`sameness`]), so `k*E*S` and `S*E*k` are the same rate, and
//! `with k` is the same as `law k*A`. Consequences ([`consequences`]) come
//! from the network stage (rank, conservation laws, reduced dimension,
//! deficiency) and, where both files carry `assume` lines, from the exact
//! derived rate laws.
//!
//! Invariants: a [`Comparison`] lists a change only when the meaning
//! differs; comparing a model with itself (or with any reformatted,
//! reordered or unit-converted copy) gives no changes; nothing here prints.
//! [`git`] reads a side from a git revision (the only I/O in this stage).

mod consequences;
pub mod git;
mod items;
mod pairing;
pub mod report;
mod sameness;

pub use consequences::{
    Both, Consequences, LawChange, NetworkFacts, RateLawComparison, RateLawStatus,
};

use crate::model::Model;

/// The kind of item a change is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum ItemKind {
    Species,
    Fixed,
    Param,
    Step,
    Total,
    Observable,
    Event,
    Assumption,
    /// The assay's conditions: volume and temperature.
    Condition,
}

impl ItemKind {
    /// The word used in both output formats.
    pub fn word(self) -> &'static str {
        match self {
            ItemKind::Species => "species",
            ItemKind::Fixed => "fixed",
            ItemKind::Param => "param",
            ItemKind::Step => "step",
            ItemKind::Total => "total",
            ItemKind::Observable => "observable",
            ItemKind::Event => "event",
            ItemKind::Assumption => "assumption",
            ItemKind::Condition => "condition",
        }
    }
}

/// What happened to an item.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum ChangeKind {
    Added,
    Removed,
    /// The same content under a new name.
    Renamed,
    /// The same name (or a paired item) with a different content.
    Changed,
}

impl ChangeKind {
    pub fn word(self) -> &'static str {
        match self {
            ChangeKind::Added => "added",
            ChangeKind::Removed => "removed",
            ChangeKind::Renamed => "renamed",
            ChangeKind::Changed => "changed",
        }
    }
}

/// A value shown in a change: a number with its unit (in the side's own
/// default units), a piece of mechanism text, a flag or a list of names.
#[derive(Debug, Clone, PartialEq)]
pub enum Shown {
    Quantity { value: f64, unit: Option<String> },
    Text(String),
    Flag(bool),
    Names(Vec<String>),
    Absent,
}

/// One aspect of a changed item, old and new.
#[derive(Debug, Clone, PartialEq)]
pub struct Detail {
    /// `initial`, `value`, `evaluated` (a derived param's value), `definition`, `dimension`, `kind`, `reactants`, `products`,
    /// `reversible`, `rate`, `direction`, `terms`, `expression`, `amount`,
    /// `time`, `steady`, `equilibrium`.
    pub aspect: &'static str,
    pub old: Shown,
    pub new: Shown,
}

/// One change of one item.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    pub item: ItemKind,
    pub kind: ChangeKind,
    /// The name in the old model (absent for an addition).
    pub old_name: Option<String>,
    /// The name in the new model (absent for a removal).
    pub new_name: Option<String>,
    /// The item as written, in the mechanism language (old and new side).
    pub old_text: Option<String>,
    pub new_text: Option<String>,
    /// For `Changed`: what differs.
    pub details: Vec<Detail>,
}

impl Change {
    /// The name to show: the new one, or the old one for a removal.
    pub fn name(&self) -> &str {
        self.new_name
            .as_deref()
            .or(self.old_name.as_deref())
            .unwrap_or("")
    }
}

/// The meaning-level difference of two models.
#[derive(Debug, Clone)]
pub struct Comparison {
    /// Sorted by item kind, then change kind, then name.
    pub changes: Vec<Change>,
    pub consequences: Consequences,
}

impl Comparison {
    /// Whether anything changed in meaning.
    pub fn changed(&self) -> bool {
        !self.changes.is_empty()
    }
}

/// Compares two models.
pub fn compare(old: &Model, new: &Model) -> Comparison {
    let ctx = pairing::pair(sameness::Context::new(old, new));
    let mut changes = items::changes(&ctx);
    changes.sort_by(|a, b| (a.item, a.kind, a.name()).cmp(&(b.item, b.kind, b.name())));
    let consequences = consequences::compare(&ctx, changes.is_empty());
    Comparison {
        changes,
        consequences,
    }
}

#[cfg(test)]
mod tests;
