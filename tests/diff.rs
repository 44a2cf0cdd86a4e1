//! End-to-end tests of `ratewright diff`: pairs of mechanisms in
//! tests/fixtures/diff/ that cover every kind of change, the no-change cases
//! (reordering, reformatting, other default units), errors, and the
//! `REV:PATH` form and the documented git diff driver in a temporary git
//! repository.
//!
//! Expected values are worked out by hand from outside definitions, named
//! beside each check: SI unit prefixes and time units (BIPM, The
//! International System of Units, 9th ed., 2019), the Michaelis constant
//! Km = (k-1 + k2)/k1 (Briggs & Haldane 1925, Biochem. J. 19:338),
//! conservation laws as left null vectors of the stoichiometric matrix
//! (Reder 1988, J. Theor. Biol. 135:175) and the deficiency
//! δ = complexes − linkage classes − rank (Feinberg 1987, Chem. Eng. Sci.
//! 42:2229).

mod common;

use common::{bin, ratewright};
use serde_json::Value;
use std::collections::BTreeSet;
use std::path::Path;
use std::process::Command;

fn fixture(name: &str) -> String {
    format!("tests/fixtures/diff/{name}")
}

/// Runs `diff --format json`; returns the exit code and the document.
fn diff_json(old: &str, new: &str) -> (i32, Value) {
    let out = ratewright(&["diff", "--format", "json", old, new]);
    let code = out.status.code().expect("exit code");
    let doc: Value = serde_json::from_slice(&out.stdout)
        .unwrap_or_else(|e| panic!("not JSON ({e}): {}", String::from_utf8_lossy(&out.stdout)));
    (code, doc)
}

/// (item, change, old name, new name) of every change.
fn change_set(doc: &Value) -> BTreeSet<(String, String, String, String)> {
    let s = |v: &Value| v.as_str().unwrap_or("").to_string();
    doc["changes"]
        .as_array()
        .expect("changes")
        .iter()
        .map(|c| {
            (
                s(&c["item"]),
                s(&c["change"]),
                s(&c["old_name"]),
                s(&c["new_name"]),
            )
        })
        .collect()
}

fn set(items: &[(&str, &str, &str, &str)]) -> BTreeSet<(String, String, String, String)> {
    items
        .iter()
        .map(|(a, b, c, d)| (a.to_string(), b.to_string(), c.to_string(), d.to_string()))
        .collect()
}

/// The details of the change of `item` named `name` (new name).
fn details<'a>(doc: &'a Value, item: &str, name: &str) -> &'a Vec<Value> {
    doc["changes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["item"] == item && c["change"] == "changed" && c["name"] == name)
        .unwrap_or_else(|| panic!("no change of {item} {name} in {doc:#}"))["details"]
        .as_array()
        .unwrap()
}

fn detail<'a>(doc: &'a Value, item: &str, name: &str, aspect: &str) -> &'a Value {
    details(doc, item, name)
        .iter()
        .find(|d| d["aspect"] == aspect)
        .unwrap_or_else(|| panic!("no {aspect} detail for {item} {name}"))
}

fn quantity(v: &Value) -> (f64, String) {
    (
        v["value"].as_f64().expect("a number"),
        v["unit"].as_str().unwrap_or("").to_string(),
    )
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1e-300)
}

#[test]
fn reordering_reformatting_and_other_units_are_no_change() {
    // reordered.mech writes every value of base.mech in mM and min:
    // 10 /uM/s = 0.6 /nM/min, 50 /s = 3000 /min, 50 uM = 0.05 mM (SI prefixes, 1 min = 60 s).
    for (a, b) in [
        ("base.mech", "reordered.mech"),
        ("reordered.mech", "base.mech"),
        ("base.mech", "base.mech"),
    ] {
        let (code, doc) = diff_json(&fixture(a), &fixture(b));
        assert_eq!(code, 0, "{a} vs {b}: {doc:#}");
        assert_eq!(doc["changed"], false);
        assert!(doc["changes"].as_array().unwrap().is_empty(), "{doc:#}");
        assert_eq!(doc["schema_version"], 1);
        assert_eq!(doc["consequences"]["rate_law"]["status"], "unchanged");
        for key in [
            "rank",
            "conservation_laws",
            "reduced_dimension",
            "deficiency",
        ] {
            assert_eq!(
                doc["consequences"]["network"][key]["changed"], false,
                "{key}"
            );
        }
    }
    let out = ratewright(&["diff", &fixture("base.mech"), &fixture("reordered.mech")]);
    assert_eq!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stdout).starts_with("no change in meaning"));
}

#[test]
fn renames_are_detected_even_among_species_with_equal_start_values() {
    let (code, doc) = diff_json(&fixture("base.mech"), &fixture("renamed.mech"));
    assert_eq!(code, 1);
    assert_eq!(
        change_set(&doc),
        set(&[
            ("species", "renamed", "ES", "C1"),
            ("species", "renamed", "EI", "C2"),
            ("param", "renamed", "k3", "kon_I"),
            ("step", "renamed", "inhibit", "inhibitor_binding"),
            ("total", "renamed", "E_t", "Etot"),
            ("observable", "renamed", "product_signal", "signal"),
            ("fixed", "renamed", "Mg", "Mg2"),
        ])
    );
    // Renaming changes nothing in the network or the rate law.
    for key in [
        "rank",
        "conservation_laws",
        "reduced_dimension",
        "deficiency",
    ] {
        assert_eq!(
            doc["consequences"]["network"][key]["changed"], false,
            "{key}"
        );
    }
    assert!(
        doc["consequences"]["network"]["laws_gained"]
            .as_array()
            .unwrap()
            .is_empty()
    );
    assert_eq!(doc["consequences"]["rate_law"]["status"], "unchanged");
    let human = String::from_utf8_lossy(
        &ratewright(&["diff", &fixture("base.mech"), &fixture("renamed.mech")]).stdout,
    )
    .to_string();
    assert!(human.contains("~ ES → C1"), "{human}");
}

#[test]
fn every_kind_of_change_is_reported_with_values_and_units() {
    let (code, doc) = diff_json(&fixture("base.mech"), &fixture("changed.mech"));
    assert_eq!(code, 1);
    assert_eq!(
        change_set(&doc),
        set(&[
            ("species", "added", "", "A"),
            ("species", "removed", "I", ""),
            ("species", "removed", "EI", ""),
            ("species", "changed", "S", "S"),
            ("fixed", "changed", "Mg", "Mg"),
            ("param", "removed", "k3", ""),
            ("param", "removed", "km3", ""),
            ("param", "changed", "k2", "k2"),
            ("param", "changed", "Km", "Km"),
            ("step", "removed", "inhibit", ""),
            ("step", "changed", "convert", "convert"),
            ("total", "changed", "E_t", "E_t"),
            ("observable", "added", "", "activator"),
            ("observable", "changed", "product_signal", "product_signal"),
            ("event", "added", "", "add 10 uM S at 300 s"),
            (
                "event",
                "changed",
                "add 20 uM S at 120 s",
                "add 20 uM S at 180 s"
            ),
            ("assumption", "changed", "assume", "assume"),
        ])
    );
    let q = |item, name, aspect| {
        let d = detail(&doc, item, name, aspect);
        (quantity(&d["old"]), quantity(&d["new"]))
    };
    assert_eq!(
        q("species", "S", "initial"),
        ((50.0, "uM".into()), (80.0, "uM".into()))
    );
    assert_eq!(
        q("fixed", "Mg", "value"),
        ((2.0, "uM".into()), (3.0, "uM".into()))
    );
    assert_eq!(
        q("param", "k2", "value"),
        ((25.0, "/s".into()), (30.0, "/s".into()))
    );
    // Km = (km1 + k2) / k1 (Briggs & Haldane 1925): (50 + 25)/10 = 7.5 uM → (50 + 30)/10 = 8 uM.
    let ((km_old, unit), (km_new, _)) = q("param", "Km", "evaluated");
    assert!(
        close(km_old, 7.5) && close(km_new, 8.0) && unit == "uM",
        "{km_old} {km_new} {unit}"
    );
    assert_eq!(
        detail(&doc, "step", "convert", "products")["new"],
        "E + 2 P"
    );
    assert_eq!(detail(&doc, "total", "E_t", "terms")["old"], "E + ES + EI");
    assert_eq!(detail(&doc, "total", "E_t", "value")["old"], Value::Null);
    assert_eq!(
        q("event", "add 20 uM S at 180 s", "time"),
        ((120.0, "s".into()), (180.0, "s".into()))
    );
    assert_eq!(
        detail(&doc, "observable", "product_signal", "expression")["new"],
        "4 * P"
    );
    assert_eq!(
        detail(&doc, "assumption", "assume", "steady")["new"],
        serde_json::json!(["E", "ES"])
    );

    let net = &doc["consequences"]["network"];
    // Old: 6 species, steps bind, convert, inhibit independent → rank 3, 3 laws, 3 independent species.
    // New: species S, P, E, ES, A; steps bind, convert → rank 2, 3 laws (A alone among them).
    assert_eq!(
        (net["rank"]["old"].as_u64(), net["rank"]["new"].as_u64()),
        (Some(3), Some(2))
    );
    assert_eq!(
        (
            net["reduced_dimension"]["old"].as_u64(),
            net["reduced_dimension"]["new"].as_u64()
        ),
        (Some(3), Some(2))
    );
    // Deficiency (Feinberg 1987): old complexes E+S, ES, E+P, E+I, EI: 5 − 2 linkage classes − 3 = 0;
    // new E+S, ES, E+2P: 3 − 1 − 2 = 0.
    assert_eq!(
        (
            net["deficiency"]["old"].as_i64(),
            net["deficiency"]["new"].as_i64()
        ),
        (Some(0), Some(0))
    );
    // Laws y with yᵀN = 0 (Reder 1988): old E+ES+EI, I+EI, S+ES+P; new E+ES, A, 2S+2ES+P.
    // None of either side lies in the span of the other side's laws.
    let combos = |key: &str| {
        net[key]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| l["combination"].as_str().unwrap().to_string())
            .collect::<BTreeSet<_>>()
    };
    let want = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<BTreeSet<_>>();
    assert_eq!(
        combos("laws_lost"),
        want(&["E + ES + EI", "I + EI", "S + P + ES"])
    );
    assert_eq!(
        combos("laws_gained"),
        want(&["E + ES", "A", "2 S + P + 2 ES"])
    );
    assert_eq!(doc["consequences"]["rate_law"]["status"], "changed");
}

#[test]
fn kinetics_changes_direction_law_equivalence_and_kind() {
    let (code, doc) = diff_json(&fixture("kinetics_old.mech"), &fixture("kinetics_new.mech"));
    assert_eq!(code, 1);
    // s3 changed from `with ka` to `law ka * C`: the same rate, so no change.
    assert_eq!(
        change_set(&doc),
        set(&[
            ("species", "changed", "G", "G"),
            ("param", "added", "", "ke"),
            ("param", "changed", "kd", "kd"),
            ("step", "added", "", "s5"),
            ("step", "changed", "s1", "s1"),
            ("step", "changed", "s2", "s2"),
            ("step", "changed", "s4", "s4"),
            ("fixed", "removed", "F", ""),
            ("total", "removed", "T", ""),
            ("observable", "removed", "f", ""),
            ("event", "removed", "add 1 uM A at 10 s", ""),
        ])
    );
    assert_eq!(detail(&doc, "species", "G", "kind")["new"], "fixed");
    assert_eq!(detail(&doc, "param", "kd", "definition")["new"], "3 /s");
    // kd's value is unchanged (ka + kb = 1 + 2 = 3 /s): only its definition differs.
    assert!(
        details(&doc, "param", "kd")
            .iter()
            .all(|d| d["aspect"] != "evaluated")
    );
    assert_eq!(detail(&doc, "step", "s1", "reversible")["new"], true);
    assert_eq!(detail(&doc, "step", "s2", "direction")["new"], "C <=> B");
    assert_eq!(details(&doc, "step", "s2").len(), 1);
    assert_eq!(detail(&doc, "step", "s4", "products")["new"], "2 A");
    let net = &doc["consequences"]["network"];
    // Old: A, B, C, G with s1..s4: rank 3, one law A+B+C+G. New: G clamped, species A, B, C, rank 3, no law.
    assert_eq!(net["laws_lost"][0]["combination"], "A + B + C + G");
    assert_eq!(
        (
            net["conservation_laws"]["old"].as_u64(),
            net["conservation_laws"]["new"].as_u64()
        ),
        (Some(1), Some(0))
    );
    // Deficiency (Feinberg 1987): old complexes A, B, C, G: 4 − 1 − 3 = 0;
    // new A, B, C, 0 (G is clamped), 2A, with 0 → 2A and 2A → B joining all: 5 − 1 − 3 = 1.
    assert_eq!(
        (
            net["deficiency"]["old"].as_i64(),
            net["deficiency"]["new"].as_i64()
        ),
        (Some(0), Some(1))
    );
    assert_eq!(doc["consequences"]["rate_law"], Value::Null);
}

#[test]
fn numbers_inside_expressions_follow_the_default_units() {
    // A bare number in an expression is in the file's default units, so
    // `P + 120` in uM equals `P + 0.12` in mM (SI prefixes) and not `P + 120` in mM.
    let dir = tempfile::tempdir().unwrap();
    let write = |name: &str, text: &str| {
        let p = dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        p.to_string_lossy().to_string()
    };
    let old = write(
        "old.mech",
        "units concentration uM\nspecies P = 1 uM\nobserve x = P + 120\n",
    );
    let same = write(
        "same.mech",
        "units concentration mM\nspecies P = 0.001\nobserve x = P + 0.12\n",
    );
    let other = write(
        "other.mech",
        "units concentration mM\nspecies P = 1 uM\nobserve x = P + 120\n",
    );
    assert_eq!(diff_json(&old, &same).0, 0);
    let (code, doc) = diff_json(&old, &other);
    assert_eq!(code, 1);
    assert_eq!(
        change_set(&doc),
        set(&[("observable", "changed", "x", "x")])
    );
}

#[test]
fn errors_exit_2_with_located_diagnostics() {
    let missing = ratewright(&[
        "diff",
        &fixture("base.mech"),
        "tests/fixtures/diff/no_such_file.mech",
    ]);
    assert_eq!(missing.status.code(), Some(2));
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.mech");
    std::fs::write(&bad, "species S = 1 uM\nstep r S -> Q with k\n").unwrap();
    let (code, doc) = diff_json(&fixture("base.mech"), bad.to_str().unwrap());
    assert_eq!(code, 2);
    let errors = doc["errors"].as_array().unwrap();
    assert!(
        errors
            .iter()
            .any(|e| e["code"] == "E0201" && e["line"] == 2),
        "{doc:#}"
    );
}

/// An empty repository with an author, for tests that commit.
fn init_repo(dir: &Path) {
    git(dir, &["init", "-q"]);
    git(dir, &["config", "user.name", "Diff Test"]);
    git(dir, &["config", "user.email", "diff-test@example.org"]);
    git(dir, &["config", "commit.gpgsign", "false"]);
}

fn git(dir: &Path, args: &[&str]) {
    let out = Command::new("git")
        .args(args)
        .current_dir(dir)
        .output()
        .expect("git runs (git is needed for this test)");
    assert!(
        out.status.success(),
        "git {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

fn run_in(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::new(bin())
        .args(args)
        .current_dir(dir)
        .output()
        .expect("ratewright runs")
}

#[test]
fn revisions_are_read_through_git_with_their_own_included_files() {
    let repo = tempfile::tempdir().unwrap();
    let dir = repo.path();
    init_repo(dir);
    std::fs::create_dir_all(dir.join("parts")).unwrap();
    std::fs::write(dir.join("parts/rates.mech"), "param k = 2 /s\n").unwrap();
    std::fs::write(
        dir.join("m.mech"),
        "use \"parts/rates.mech\"\nspecies A = 1 uM\nspecies B\nstep r A -> B with k\n",
    )
    .unwrap();
    git(dir, &["add", "."]);
    git(dir, &["commit", "-q", "-m", "first version"]);
    // Second version: the included rate constant changes and B is renamed.
    std::fs::write(dir.join("parts/rates.mech"), "param k = 5 /s\n").unwrap();
    std::fs::write(
        dir.join("m.mech"),
        "use \"parts/rates.mech\"\nspecies A = 1 uM\nspecies Product\nstep r A -> Product with k\n",
    )
    .unwrap();
    git(dir, &["commit", "-q", "-a", "-m", "second version"]);

    let out = run_in(
        dir,
        &["diff", "--format", "json", "HEAD~1:m.mech", "m.mech"],
    );
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(
        change_set(&doc),
        set(&[
            ("species", "renamed", "B", "Product"),
            ("param", "changed", "k", "k")
        ])
    );
    // k = 2 /s at HEAD~1 proves the `use` line was read from the same revision.
    assert_eq!(
        quantity(&detail(&doc, "param", "k", "value")["old"]),
        (2.0, "/s".into())
    );
    assert_eq!(
        quantity(&detail(&doc, "param", "k", "value")["new"]),
        (5.0, "/s".into())
    );

    // Both sides from git, and from a subdirectory (paths are relative to the current directory).
    assert_eq!(
        run_in(dir, &["diff", "HEAD:m.mech", "m.mech"])
            .status
            .code(),
        Some(0)
    );
    assert_eq!(
        run_in(
            &dir.join("parts"),
            &["diff", "HEAD~1:rates.mech", "HEAD:rates.mech"]
        )
        .status
        .code(),
        Some(1)
    );
    // Bad revision or path: exit 2 with the git-read code.
    let bad = run_in(dir, &["diff", "HEAD~7:m.mech", "m.mech"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("E0804"));
}

#[test]
fn the_documented_git_diff_driver_shows_the_meaning_level_change() {
    // The recipe of docs/version-control.md, with the binary's full path.
    let repo = tempfile::tempdir().unwrap();
    let dir = repo.path();
    init_repo(dir);
    std::fs::write(dir.join(".gitattributes"), "*.mech diff=mech\n").unwrap();
    git(
        dir,
        &[
            "config",
            "diff.mech.command",
            &format!(
                "f() {{ echo \"== $1\"; '{}' diff \"$2\" \"$5\"; }}; f",
                bin().display()
            ),
        ],
    );
    git(dir, &["config", "diff.mech.trustExitCode", "true"]);
    std::fs::write(
        dir.join("m.mech"),
        "species A = 1 uM\nspecies B\nparam k = 2 /s\nstep r A -> B with k\n",
    )
    .unwrap();
    git(dir, &["add", "."]);
    git(dir, &["commit", "-q", "-m", "first"]);
    // Reformatted and reordered only: git's line diff sees changes, the driver none.
    std::fs::write(
        dir.join("m.mech"),
        "step r A -> B with k\nparam k = 2 /s\nspecies B\nspecies A = 1 uM\n",
    )
    .unwrap();
    let out = Command::new("git")
        .args(["--no-pager", "diff"])
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        String::from_utf8_lossy(&out.stdout).contains("no change in meaning"),
        "{}",
        String::from_utf8_lossy(&out.stdout)
    );
    std::fs::write(
        dir.join("m.mech"),
        "step r A -> B with k\nparam k = 4 /s\nspecies B\nspecies A = 1 uM\n",
    )
    .unwrap();
    let out = Command::new("git")
        .args(["--no-pager", "diff"])
        .current_dir(dir)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("value: 2 /s → 4 /s") && text.contains("== m.mech"),
        "{text}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn every_demo_model_equals_itself_shuffled_and_differs_from_the_others() {
    // Statement order is irrelevant in the language (LANGUAGE.md: "order-independent
    // names"), so reversing the order of a file's statements must leave its
    // meaning alone; distinct demo models must differ, never fail.
    let models = common::models();
    let dir = tempfile::tempdir().unwrap();
    for (i, m) in models.iter().enumerate() {
        let text = std::fs::read_to_string(m).unwrap();
        // A statement continues over lines while parentheses are open.
        let mut statements: Vec<String> = Vec::new();
        let mut depth = 0i32;
        for line in text.lines() {
            let code = line.split('#').next().unwrap_or("");
            if depth > 0 {
                statements
                    .last_mut()
                    .unwrap()
                    .push_str(&format!("\n{code}"));
            } else if !code.trim().is_empty() {
                statements.push(code.to_string());
            }
            depth += code.matches('(').count() as i32 - code.matches(')').count() as i32;
        }
        let reversed: Vec<&str> = statements.iter().rev().map(String::as_str).collect();
        let copy = dir.path().join(format!("reversed_{i}.mech"));
        std::fs::write(&copy, reversed.join("\n") + "\n").unwrap();
        let path = m.to_str().unwrap();
        let out = ratewright(&["diff", path, copy.to_str().unwrap()]);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{path}: {}{}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        );
        for other in models.iter().filter(|o| *o != m) {
            let out = ratewright(&["diff", path, other.to_str().unwrap()]);
            assert_eq!(
                out.status.code(),
                Some(1),
                "{path} vs {}: {}",
                other.display(),
                String::from_utf8_lossy(&out.stderr)
            );
        }
    }
}

#[test]
fn params_without_units_in_other_units_are_no_change() {
    // unitless_mm_min.mech is unitless_base.mech in mM and min with its
    // rate constants converted and written without units (2 /uM/s =
    // 1.2e5 /mM/min, 40 /s = 2400 /min; SI prefixes, 1 min = 60 s): their
    // dimensions follow from their use, and so do those of the derived
    // Km and the observable over it.
    let (code, doc) = diff_json(
        &fixture("unitless_base.mech"),
        &fixture("unitless_mm_min.mech"),
    );
    assert_eq!(code, 0, "{doc:#}");
}

#[test]
fn swapping_two_events_at_one_time_is_a_change() {
    // Withdrawing everything then adding 10 uM leaves 10 uM; the other
    // order leaves 0: the order of events at one time is meaning.
    let dir = tempfile::tempdir().unwrap();
    let body = |events: &str| {
        format!(
            "units concentration uM, time s\nspecies S = 50 uM\nspecies P\nparam k = 0.01 /s\nstep convert S -> P with k\n{events}"
        )
    };
    let a = dir.path().join("a.mech");
    let b = dir.path().join("b.mech");
    std::fs::write(&a, body("remove 100 uM S at 30 s\nadd 10 uM S at 30 s\n")).unwrap();
    std::fs::write(&b, body("add 10 uM S at 30 s\nremove 100 uM S at 30 s\n")).unwrap();
    let (code, doc) = diff_json(a.to_str().unwrap(), b.to_str().unwrap());
    assert_eq!(code, 1, "{doc:#}");
    let order = detail(&doc, "event", "remove 100 uM S at 30 s", "order");
    assert!(
        order["old"].as_str().unwrap().starts_with("remove"),
        "{order}"
    );
    assert!(order["new"].as_str().unwrap().starts_with("add"), "{order}");
    let (code, _) = diff_json(a.to_str().unwrap(), a.to_str().unwrap());
    assert_eq!(code, 0);
}

/// Issue 23, finding 1: `diff -- '--output=../keep:m.mech' m.mech` passed
/// the revision to `git show` as an option and wrote a file outside the
/// repository; a range gave an empty model. Both are refused (E0804), and
/// nothing is written.
#[test]
fn revisions_cannot_inject_git_options_or_be_ranges() {
    let outer = tempfile::tempdir().unwrap();
    let dir = outer.path().join("repo");
    std::fs::create_dir(&dir).unwrap();
    init_repo(&dir);
    let text = "species A = 1 uM\nspecies B\nparam k = 2 /s\nstep r A -> B with k\n";
    std::fs::write(dir.join("m.mech"), text).unwrap();
    git(&dir, &["add", "."]);
    git(&dir, &["commit", "-q", "-m", "one"]);
    std::fs::write(dir.join("m.mech"), text.replace("2 /s", "3 /s")).unwrap();
    git(&dir, &["commit", "-q", "-am", "two"]);
    for side in [
        "--output=../keep:m.mech",
        "-p:m.mech",
        "HEAD~1..HEAD:m.mech",
        "HEAD...HEAD~1:m.mech",
        "no-such-rev:m.mech",
    ] {
        let out = run_in(&dir, &["diff", "--", side, "m.mech"]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{side}: {stderr}");
        assert!(stderr.contains("E0804"), "{side}: {stderr}");
    }
    assert!(
        !outer.path().join("keep").exists(),
        "git wrote a file outside the repository"
    );
    let entries: Vec<_> = std::fs::read_dir(outer.path()).unwrap().collect();
    assert_eq!(entries.len(), 1, "only the repository is in the folder");
    // A single revision still works: k changed, so exit 1 (docs/version-control.md).
    let out = run_in(&dir, &["diff", "HEAD~1:m.mech", "m.mech"]);
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(String::from_utf8_lossy(&out.stdout).contains("k"));
}

/// A revision is read into memory (no temporary folder: with TMPDIR
/// pointing nowhere it still loads), its `use` lines name files of the same
/// revision, and a `use` that is missing there or climbs out of the
/// repository is an error at that `use` line (E0804, exit 2).
#[test]
fn revisions_load_in_memory_and_their_use_errors_are_located() {
    let repo = tempfile::tempdir().unwrap();
    let dir = repo.path();
    init_repo(dir);
    std::fs::create_dir_all(dir.join("parts")).unwrap();
    std::fs::write(dir.join("parts/k.mech"), "param k = 2 /s\n").unwrap();
    std::fs::write(
        dir.join("m.mech"),
        "use \"parts/k.mech\"\nspecies A = 1 uM\nspecies B\nstep r A -> B with k\n",
    )
    .unwrap();
    std::fs::write(dir.join("out.mech"), "use \"../../x.mech\"\nspecies A\n").unwrap();
    std::fs::write(dir.join("gap.mech"), "species A\nuse \"parts/none.mech\"\n").unwrap();
    git(dir, &["add", "."]);
    git(dir, &["commit", "-q", "-m", "one"]);
    let run_without_tmp = |args: &[&str]| {
        Command::new(bin())
            .args(args)
            .current_dir(dir)
            .env("TMPDIR", dir.join("no-such-folder"))
            .output()
            .expect("ratewright runs")
    };
    let same = run_without_tmp(&["diff", "HEAD:m.mech", "m.mech"]);
    assert_eq!(
        same.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&same.stderr)
    );
    for (file, code, line) in [("out.mech", "E0804", ":1:"), ("gap.mech", "E0804", ":2:")] {
        let out = run_without_tmp(&["diff", &format!("HEAD:{file}"), "m.mech"]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{file}: {stderr}");
        assert!(stderr.contains(code), "{file}: {stderr}");
        assert!(
            stderr.contains(&format!("HEAD:{file}{line}")),
            "{file}: located at the use line: {stderr}"
        );
    }
}
