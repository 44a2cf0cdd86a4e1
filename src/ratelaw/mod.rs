//! Rate-law derivation: turns a mechanism with quasi-steady-state enzyme
//! forms (and optionally rapid-equilibrium steps) into the rate equation of
//! the overall reaction, its coefficient form and named kinetic constants.
//!
//! Method: forms joined by rapid-equilibrium steps are lumped and shared by
//! their equilibrium constants (Cha 1968); the lumped forms' steady-state
//! shares come from sums over directed spanning trees (King & Altman 1956,
//! the matrix-tree theorem, [`trees`]); the rate is the net flux written
//! with the forms' conserved total. Everything is exact ([`crate::algebra`]).
//!
//! Invariants: a [`Derivation`]'s numerator and denominator are polynomials
//! over params, totals and non-intermediate species only; the denominator is
//! never zero; nothing here prints (progress goes through a callback).

mod build;
pub mod constants;
pub mod constants_form;
mod lumping;
pub mod output;
mod overall;
pub mod patterns;
pub mod saturation;
pub mod trees;

use crate::algebra::poly::{Poly, Var, Vars};
use crate::algebra::rational::RationalFunction;
use crate::diagnostics::{Code, Diagnostic, did_you_mean};
use crate::model::Model;
use num_bigint::BigInt;

pub use build::derive_with_progress;

/// What to derive and under which assumptions. `None` takes the file's
/// `assume` lines.
#[derive(Clone, Debug)]
pub struct Request {
    pub steady: Option<Vec<String>>,
    pub equilibrium: Option<Vec<String>>,
    pub target: Target,
    /// Refuse to expand more than this many spanning-tree terms.
    pub max_terms: u64,
}

impl Default for Request {
    fn default() -> Self {
        Request {
            steady: None,
            equilibrium: None,
            target: Target::Overall,
            max_terms: DEFAULT_MAX_TERMS,
        }
    }
}

pub const DEFAULT_MAX_TERMS: u64 = 1_000_000;

/// The rate to derive.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Target {
    /// The rate of the mechanism's single overall reaction.
    Overall,
    /// The rate of change of one non-intermediate species.
    Species(String),
    /// The net rate of one step.
    Flux(String),
}

/// What a variable of the derived polynomials stands for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum VarKind {
    Param(usize),
    Fixed(usize),
    /// A dynamic species that is not an intermediate.
    Species(usize),
    /// An index into [`Derivation::totals`].
    Total(usize),
}

/// A conserved total of one connected set of forms.
#[derive(Clone, Debug)]
pub struct FormTotal {
    pub name: String,
    pub forms: Vec<usize>,
    /// Index of the `total` statement that names it, if any.
    pub declared: Option<usize>,
    pub value: f64,
}

/// A named kinetic constant.
#[derive(Clone, Debug)]
pub struct Constant {
    pub name: String,
    pub value: RationalFunction,
    pub meaning: String,
}

/// A relation between the constants that holds identically.
#[derive(Clone, Debug)]
pub struct Relation {
    pub name: String,
    /// Left and right sides, as expressions over constant names.
    pub lhs: String,
    pub rhs: String,
    /// Checked by exact substitution of the constants' definitions.
    pub holds: bool,
}

/// The overall reaction: species indices with integer coefficients.
#[derive(Clone, Debug, Default)]
pub struct Overall {
    pub reactants: Vec<(usize, BigInt)>,
    pub products: Vec<(usize, BigInt)>,
}

/// What the derived rate is the rate of.
#[derive(Clone, Debug)]
pub enum Derived {
    Overall(Overall),
    Species(usize),
    Flux(usize),
}

/// The result of a derivation.
#[derive(Clone, Debug)]
pub struct Derivation {
    pub vars: Vars,
    pub kinds: Vec<VarKind>,
    pub steady: Vec<usize>,
    pub equilibrium: Vec<usize>,
    pub totals: Vec<FormTotal>,
    pub derived: Derived,
    /// The rate, `numerator / denominator`, in lowest terms.
    pub rate: RationalFunction,
    /// Each intermediate's concentration (species index, expression).
    pub forms: Vec<(usize, RationalFunction)>,
    pub constants: Vec<Constant>,
    /// The rate over the named constants (overall rates with one enzyme
    /// total and named constants).
    pub constants_form: Option<constants_form::ConstantsForm>,
    /// Each product's and dead-end inhibitor's pattern against each
    /// substrate (overall rates only).
    pub inhibition_patterns: Vec<patterns::InhibitionPattern>,
    /// K0.5 and the Hill number of each substrate the law is of degree two
    /// or more in (at the file's values).
    pub half_saturation: Vec<saturation::HalfSaturation>,
    pub relations: Vec<Relation>,
    pub notes: Vec<String>,
    /// Single-term spanning trees enumerated.
    pub trees: u64,
}

impl Derivation {
    pub fn kind(&self, v: Var) -> Option<VarKind> {
        self.kinds.get(v as usize).copied()
    }
    /// Whether a variable is a concentration (species or fixed species).
    pub fn is_concentration(&self, v: Var) -> bool {
        matches!(self.kind(v), Some(VarKind::Species(_) | VarKind::Fixed(_)))
    }
    pub fn numerator(&self) -> &Poly {
        &self.rate.num
    }
    pub fn denominator(&self) -> &Poly {
        &self.rate.den
    }
    /// The variables of the overall reaction's substrates and products
    /// (`None` for a species or flux rate).
    pub fn reaction_vars(&self, model: &Model) -> Option<(Vec<Var>, Vec<Var>)> {
        let Derived::Overall(overall) = &self.derived else {
            return None;
        };
        let vars = |side: &[(usize, BigInt)]| -> Vec<Var> {
            side.iter()
                .filter_map(|(i, _)| self.vars.get(&model.species[*i].name))
                .collect()
        };
        Some((vars(&overall.reactants), vars(&overall.products)))
    }
    /// Evaluates the rate with `value` giving each variable's value.
    pub fn eval(&self, value: &dyn Fn(Var) -> f64) -> f64 {
        self.rate.eval(value)
    }
}

/// Progress of a long derivation.
#[derive(Clone, Copy, Debug)]
pub enum Progress {
    /// About to enumerate this many single-term spanning trees.
    Start { estimated_trees: f64 },
    /// So many enumerated so far.
    Trees(u64),
}

/// Derives without progress reports.
pub fn derive(model: &Model, request: &Request) -> Result<Derivation, Diagnostic> {
    derive_with_progress(model, request, &mut |_| {})
}

/// An error about a name given on the command line.
pub(crate) fn unknown_name(what: &str, name: &str, candidates: &[String]) -> Diagnostic {
    let hint = did_you_mean(name, candidates.iter().map(String::as_str));
    let d = Diagnostic::error(
        Code::BadDerivationRequest,
        format!("no {what} named `{name}`"),
    );
    match hint {
        Some(h) => d.with_help(format!("did you mean `{h}`?")),
        None => d,
    }
}
