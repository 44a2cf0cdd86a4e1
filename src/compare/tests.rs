//! Unit tests of the comparison on models built from text.

use super::*;
use crate::model::load_str;
use std::path::Path;

fn model(text: &str) -> Model {
    let loaded = load_str(text, Path::new("t.mech"));
    loaded
        .model
        .unwrap_or_else(|| panic!("{:?}", loaded.diagnostics))
}

fn summary(c: &Comparison) -> Vec<(ItemKind, ChangeKind, String)> {
    c.changes
        .iter()
        .map(|ch| (ch.item, ch.kind, ch.name().to_string()))
        .collect()
}

#[test]
fn a_model_equals_itself_and_its_unit_converted_copy() {
    // 1 mM = 1000 uM and 1 min = 60 s (SI prefixes and units, BIPM 2019).
    let a = model("species A = 1 mM\nspecies B\nparam k = 0.5 /s\nstep r A -> B with k\n");
    let b = model(
        "units concentration uM, time min\nspecies A = 1000\nspecies B\nparam k = 30\nstep r A -> B with k\n",
    );
    assert!(!compare(&a, &a).changed());
    assert!(
        !compare(&a, &b).changed(),
        "{:?}",
        summary(&compare(&a, &b))
    );
}

#[test]
fn commuted_and_expanded_expressions_are_the_same_rate() {
    let a = model(
        "species A = 1, B\nparam k1 = 1 /s\nparam k2 = 2 /s\nstep r A -> B law (k1 + k2) * A\n",
    );
    let b = model(
        "species A = 1, B\nparam k1 = 1 /s\nparam k2 = 2 /s\nstep r A -> B law A*k2 + k1*A\n",
    );
    assert!(!compare(&a, &b).changed());
    let c = model(
        "species A = 1, B\nparam k1 = 1 /s\nparam k2 = 2 /s\nstep r A -> B law (k1 - k2) * A\n",
    );
    assert_eq!(
        summary(&compare(&a, &c)),
        vec![(ItemKind::Step, ChangeKind::Changed, "r".into())]
    );
}

#[test]
fn a_chain_of_renames_is_found_through_the_steps() {
    // X and Y both start at 0, so only the steps tell which is which; the
    // step is renamed too.
    let a = model(
        "species A = 1, X, Y\nparam k = 1 /s\nstep one A -> X with k\nstep two X -> Y with k\n",
    );
    let b = model(
        "species A = 1, Mid, End\nparam k = 1 /s\nstep first A -> Mid with k\nstep two Mid -> End with k\n",
    );
    let s = summary(&compare(&a, &b));
    assert_eq!(
        s,
        vec![
            (ItemKind::Species, ChangeKind::Renamed, "End".into()),
            (ItemKind::Species, ChangeKind::Renamed, "Mid".into()),
            (ItemKind::Step, ChangeKind::Renamed, "first".into()),
        ]
    );
}

#[test]
fn ambiguous_leftovers_are_not_guessed() {
    // Two unused params with the same value, both renamed: nothing tells
    // which became which, so they are reported as removed and added.
    let a = model("param p = 1\nparam q = 1\n");
    let b = model("param u = 1\nparam v = 1\n");
    let kinds: Vec<ChangeKind> = compare(&a, &b).changes.iter().map(|c| c.kind).collect();
    assert_eq!(
        kinds,
        vec![
            ChangeKind::Added,
            ChangeKind::Added,
            ChangeKind::Removed,
            ChangeKind::Removed
        ]
    );
}

#[test]
fn conservation_laws_are_compared_as_spaces() {
    // The same network with a law basis written differently still has the
    // same laws: {A+B, C} and {A+B+C, C} span the same space.
    let a = model(
        "species A = 1, B, C = 1\nparam k = 1 /s\nstep r A <=> B with k, k\ntotal T = A + B\n",
    );
    let b = model(
        "species A = 1, B, C = 1\nparam k = 1 /s\nstep r A <=> B with k, k\ntotal T2 = A + B + C\n",
    );
    let c = compare(&a, &b);
    let facts = c.consequences.network.as_ref().unwrap();
    assert!(
        facts.gained.is_empty() && facts.lost.is_empty(),
        "{facts:?}"
    );
}

#[test]
fn an_unrelated_species_with_the_same_start_value_is_no_rename() {
    // X (a product, 0 at start) is removed with its step; Y (also 0) is
    // added as the reactant of a new step: different roles, so no rename.
    let a = model("species A = 1, X\nparam k = 1 /s\nstep make A -> X with k\n");
    let b = model("species A = 1, Y\nparam k = 1 /s\nstep use_up Y -> A with k\n");
    let s = summary(&compare(&a, &b));
    assert_eq!(
        s,
        vec![
            (ItemKind::Species, ChangeKind::Added, "Y".into()),
            (ItemKind::Species, ChangeKind::Removed, "X".into()),
            (ItemKind::Step, ChangeKind::Added, "use_up".into()),
            (ItemKind::Step, ChangeKind::Removed, "make".into()),
        ]
    );
}
