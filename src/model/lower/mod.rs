//! Lowering: syntax trees of a main file and its `use`d files → one Model.
//!
//! Order of work: read and parse every file (following `use`, refusing
//! cycles), declare every name in one namespace, resolve and convert params
//! (in dependency order), steps, totals, observables, events and
//! assumptions, then lint. Errors are collected, not stopped at, so a user
//! sees every problem of a file at once.
//!
//! One file per concern; each adds methods to [`Lowerer`], which holds the
//! model being built and the diagnostics found so far. The invariants of
//! the result are those of [`super::ir`].

mod assay;
mod assumptions;
mod declarations;
mod diagnostics;
mod dimensions;
mod events;
mod files;
mod lints;
mod names;
mod observables;
mod params;
mod quantities;
mod steps;
mod totals;

use super::ir::*;
use super::load::Loaded;
use super::source::Sources;
use super::units::Units;
use crate::diagnostics::{Diagnostic, FileId, SourceMap, Span};
use crate::syntax::{ParamValue, StatementKind};
use declarations::Decl;
use declarations::RESERVED;
use diagnostics::*;
use files::{collect_files, place_statements};
pub use files::{load_path, load_str, load_with};
use quantities::file_units;
use std::collections::{HashMap, HashSet};
use std::path::Path;
use steps::StepParts;

struct FileUnits {
    units: Units,
}

/// A statement with the units of the file it came from.
struct Item<'a> {
    kind: &'a StatementKind,
    span: Span,
    units: Units,
}

fn lower_from(
    files: &dyn Sources,
    mut sources: SourceMap,
    main: FileId,
    main_path: &Path,
) -> Loaded {
    let mut diags = Vec::new();
    let collected = collect_files(files, &mut sources, main, main_path, &mut diags);
    if diags.iter().any(Diagnostic::is_error) {
        return Loaded {
            sources,
            model: None,
            diagnostics: diags,
        };
    }
    let main_units = file_units(
        collected
            .trees
            .iter()
            .find(|(f, _)| *f == main)
            .map(|(_, t)| t),
        &mut diags,
    )
    .units;
    // Statements in declaration order: a used file's statements stand where
    // its `use` is (so its species come there in the CSV columns), each
    // file once.
    let mut items = Vec::new();
    let mut placed = HashSet::new();
    place_statements(main, &collected, &mut placed, &mut items);
    for (file, _) in &collected.trees {
        // Files not reached from the main file's `use` lines (none today),
        // so that no statement is ever dropped.
        place_statements(*file, &collected, &mut placed, &mut items);
    }
    let mut lowerer = Lowerer::new(main_units, &sources);
    lowerer.lower(&items, main);
    diags.extend(lowerer.diags);
    let model = if diags.iter().any(Diagnostic::is_error) {
        None
    } else {
        Some(lowerer.model)
    };
    Loaded {
        sources,
        model,
        diagnostics: diags,
    }
}

struct Lowerer<'s> {
    model: Model,
    names: HashMap<String, (Decl, Span)>,
    diags: Vec<Diagnostic>,
    /// Per param: its AST value and file units, for resolution in order.
    param_sources: Vec<(ParamValue, Units)>,
    used: HashSet<Sym>,
    /// Species whose written initial value was refused: their value is a
    /// placeholder 0, so lints about starting at 0 would be follow-ons.
    initial_refused: HashSet<usize>,
    sources: &'s SourceMap,
    /// Name comparisons left for "did you mean" suggestions. Each unknown
    /// name is compared with every declared one, so without a bound a file
    /// with thousands of unknown names took quadratic time (8,000: 49 s).
    suggestion_budget: usize,
    /// The declared volume's unit, to convert volume changes into it.
    volume_factor: Option<crate::model::lab_units::Factor>,
}

const SUGGESTION_COMPARISONS: usize = 2_000_000;

impl<'s> Lowerer<'s> {
    fn new(units: Units, sources: &'s SourceMap) -> Self {
        Lowerer {
            model: Model {
                units,
                ..Model::default()
            },
            names: HashMap::new(),
            diags: Vec::new(),
            param_sources: Vec::new(),
            used: HashSet::new(),
            initial_refused: HashSet::new(),
            sources,
            suggestion_budget: SUGGESTION_COMPARISONS,
            volume_factor: None,
        }
    }

    fn error(&mut self, d: Diagnostic) {
        self.diags.push(d);
    }
}

impl Lowerer<'_> {
    fn lower(&mut self, items: &[Item], main: FileId) {
        self.lower_conditions(items);
        self.declare_all(items, main);
        self.resolve_params();
        // Steps and observables first: totals, events and assumptions
        // refer to them. Each statement kind is named in each pass, so a new
        // kind is a compile error until its place is chosen.
        for item in items {
            match item.kind {
                StatementKind::Step {
                    name,
                    lhs,
                    reversible,
                    arrow_text: _,
                    arrow_span,
                    rhs,
                    rate,
                    rate_span,
                    description,
                } => self.lower_step(
                    item,
                    StepParts {
                        name,
                        lhs,
                        reversible,
                        arrow_span,
                        rhs,
                        rate,
                        rate_span,
                        description,
                    },
                ),
                StatementKind::Observe { name, expr } => self.lower_observable(item, name, expr),
                StatementKind::Mechanism { .. }
                | StatementKind::Units(_)
                | StatementKind::Species(_)
                | StatementKind::Fixed(_)
                | StatementKind::Param { .. }
                | StatementKind::Total { .. }
                | StatementKind::AssumeSteady(_)
                | StatementKind::AssumeEquilibrium(_)
                | StatementKind::Event { .. }
                | StatementKind::Volume(_)
                | StatementKind::Temperature(_)
                | StatementKind::Use { .. } => {}
            }
        }
        self.check_observable_cycles();
        for item in items {
            match item.kind {
                StatementKind::Total { name, terms, value } => {
                    self.lower_total(item, name, terms, value)
                }
                StatementKind::Event { action, timing } => self.lower_event(item, action, timing),
                StatementKind::AssumeSteady(names) => self.lower_steady(names),
                StatementKind::AssumeEquilibrium(names) => self.lower_equilibrium(names),
                StatementKind::Mechanism { .. }
                | StatementKind::Units(_)
                | StatementKind::Species(_)
                | StatementKind::Fixed(_)
                | StatementKind::Param { .. }
                | StatementKind::Step { .. }
                | StatementKind::Observe { .. }
                | StatementKind::Volume(_)
                | StatementKind::Temperature(_)
                | StatementKind::Use { .. } => {}
            }
        }
        self.check_timed_volumes();
        // With errors, the lints would mostly describe their consequences
        // (an unknown name leaves a step empty, a param unused): they wait
        // until the errors are fixed.
        if !self.diags.iter().any(Diagnostic::is_error) {
            self.apply_total_values();
            self.lint();
        }
    }
}
