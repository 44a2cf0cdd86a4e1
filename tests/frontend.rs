//! The front end end to end: every listed diagnostic as a user sees it
//! (insta snapshots), the demo models, `fmt`, and property tests.

mod common;

use proptest::prelude::*;
use ratewright::diagnostics::{Code, render_human};
use ratewright::model::{Loaded, load_path, load_str};
use std::path::Path;

fn load(text: &str) -> Loaded {
    load_str(text, Path::new("example.mech"))
}

/// All diagnostics of `text`, rendered as the terminal shows them.
fn rendered(loaded: &Loaded) -> String {
    loaded
        .diagnostics
        .iter()
        .map(|d| render_human(d, &loaded.sources))
        .collect::<Vec<_>>()
        .join("\n")
}

fn codes(loaded: &Loaded) -> Vec<Code> {
    loaded.diagnostics.iter().map(|d| d.code).collect()
}

const GOOD_HEAD: &str = "species S = 20 uM, E = 0.1 uM, ES, P\nparam k1 = 2 /uM/s\nparam km1 = 40 /s\nparam k2 = 12 /s\n";

macro_rules! diagnostic_snapshot {
    ($name:ident, $code:expr, $text:expr) => {
        #[test]
        fn $name() {
            let loaded = load($text);
            assert!(
                codes(&loaded).contains(&$code),
                "expected {:?}, got {:?}",
                $code,
                codes(&loaded)
            );
            insta::assert_snapshot!(rendered(&loaded));
        }
    };
}

diagnostic_snapshot!(
    syntax_error_says_what_was_expected,
    Code::Syntax,
    "species S = 20 uM\nstep bind S -> with k1\n"
);
diagnostic_snapshot!(misspelt_keyword, Code::Syntax, "specis S = 20 uM\n");
diagnostic_snapshot!(
    unknown_name_with_suggestion,
    Code::UnknownName,
    &format!("{GOOD_HEAD}step bind E + S <=> ES with k1, km_1\nstep cat ES -> E + P with k2\n")
);
diagnostic_snapshot!(
    duplicate_name,
    Code::DuplicateName,
    &format!(
        "{GOOD_HEAD}param k2 = 3 /s\nstep bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\n"
    )
);
diagnostic_snapshot!(
    reversible_without_reverse_constant,
    Code::MissingReverseConstant,
    &format!(
        "{GOOD_HEAD}step bind E + S <=> ES with k1\nstep cat ES -> E + P with k2\nobserve x = km1\n"
    )
);
diagnostic_snapshot!(
    irreversible_with_two_constants,
    Code::ExtraReverseConstant,
    &format!("{GOOD_HEAD}step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2, km1\n")
);
diagnostic_snapshot!(
    unit_dimension_mismatch,
    Code::DimensionMismatch,
    "species S = 20 uM, E = 0.1 uM, ES, P\nparam k1 = 2 /s\nparam km1 = 40 /s\nparam k2 = 12 /s\nstep bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\n"
);
diagnostic_snapshot!(
    cyclic_params,
    Code::ParamCycle,
    "species A = 1 uM\nparam a = b * 2\nparam b = c + 1\nparam c = a / 3\nstep decay A -> 0 with a\n"
);
diagnostic_snapshot!(
    total_not_conserved,
    Code::TotalNotConserved,
    &format!(
        "{GOOD_HEAD}step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\ntotal wrong = E + ES + S\n"
    )
);
diagnostic_snapshot!(
    total_value_inconsistent,
    Code::TotalInconsistent,
    &format!("{GOOD_HEAD}step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\ntotal E_t = E + ES = 0.5 uM\nspecies Q\n").replace("species Q\n", "").replace("ES, P", "ES = 0 uM, P")
);
diagnostic_snapshot!(
    event_on_a_param,
    Code::EventTarget,
    &format!(
        "{GOOD_HEAD}step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\nadd 5 uM k1 at 10 s\n"
    )
);
diagnostic_snapshot!(
    negative_initial_value,
    Code::NegativeInitial,
    "species A = -1 uM\nparam k = 1 /s\nstep decay A -> 0 with k\n"
);
diagnostic_snapshot!(
    unused_param_warning,
    Code::UnusedParam,
    &format!(
        "{GOOD_HEAD}param spare = 3 /s\nstep bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\n"
    )
);
diagnostic_snapshot!(
    untouched_species_warning,
    Code::UntouchedSpecies,
    &format!(
        "{GOOD_HEAD}species Lonely = 1 uM\nstep bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\n"
    )
);
diagnostic_snapshot!(
    equal_sides_warning,
    Code::NoOpStep,
    &format!(
        "{GOOD_HEAD}step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\nstep idle E -> E with k2\n"
    )
);
diagnostic_snapshot!(
    unknown_unit,
    Code::UnknownUnit,
    "species A = 1 uMol\nparam k = 1 /s\nstep decay A -> 0 with k\n"
);
diagnostic_snapshot!(
    ambiguous_quantity,
    Code::AmbiguousQuantity,
    "species A = 1 uM\nparam h = 2 \"a Hill coefficient\"\nparam k = 1 /h\nstep decay A -> 0 with k\n"
);

#[test]
fn cyclic_use_points_into_the_right_file() {
    let loaded = load_path(Path::new("tests/fixtures/use_cycle_a.mech"));
    assert!(
        codes(&loaded).contains(&Code::UseCycle),
        "{:?}",
        codes(&loaded)
    );
    insta::assert_snapshot!(rendered(&loaded));
}

#[test]
fn demo_models_pass_check_deny_warnings_and_are_fmt_stable() {
    let models = common::models();
    assert!(models.len() >= 6, "models/ holds the demo set");
    for path in &models {
        let out = common::ratewright(&["check", "--deny-warnings", path.to_str().unwrap()]);
        assert!(
            out.status.success(),
            "{}: {}",
            path.display(),
            String::from_utf8_lossy(&out.stderr)
        );
        let out = common::ratewright(&["fmt", "--check", path.to_str().unwrap()]);
        assert!(
            out.status.success(),
            "{} is not fmt-stable: {}",
            path.display(),
            String::from_utf8_lossy(&out.stderr)
        );
    }
}

#[test]
fn check_json_carries_positions_and_codes() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("m.mech");
    std::fs::write(&file, "species A = 1 uM\nstep decay A -> 0 with kk\n").unwrap();
    let out = common::ratewright(&["check", "--format", "json", file.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("json");
    let d = &v["diagnostics"][0];
    assert_eq!(d["code"], "E0201");
    assert_eq!(d["severity"], "error");
    assert_eq!(d["line"], 2);
    assert_eq!(d["column"], 24);
    assert!(d["file"].as_str().unwrap().ends_with("m.mech"));
    assert!(d["message"].as_str().unwrap().contains("kk"));
}

#[test]
fn exit_codes_follow_the_cli_design() {
    assert_eq!(
        common::ratewright(&["check", "models/robertson.mech"])
            .status
            .code(),
        Some(0)
    );
    assert_eq!(
        common::ratewright(&["check", "no/such/file.mech"])
            .status
            .code(),
        Some(2)
    );
    assert_eq!(
        common::ratewright(&["check", "--bogus-flag", "models/robertson.mech"])
            .status
            .code(),
        Some(2)
    );
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("w.mech");
    std::fs::write(
        &file,
        "species A = 1 uM\nparam k = 1 /s\nparam unused = 2 /s\nstep decay A -> 0 with k\n",
    )
    .unwrap();
    assert_eq!(
        common::ratewright(&["check", file.to_str().unwrap()])
            .status
            .code(),
        Some(0)
    );
    assert_eq!(
        common::ratewright(&["check", "--deny-warnings", file.to_str().unwrap()])
            .status
            .code(),
        Some(1)
    );
}

#[test]
fn fmt_rewrites_atomically_and_check_mode_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("m.mech");
    let messy = "species   A=1 uM   # start\nparam k=1 /s\nstep decay  A->0 with k\n";
    std::fs::write(&file, messy).unwrap();
    assert_eq!(
        common::ratewright(&["fmt", "--check", file.to_str().unwrap()])
            .status
            .code(),
        Some(1)
    );
    assert_eq!(std::fs::read_to_string(&file).unwrap(), messy);
    assert!(
        common::ratewright(&["fmt", file.to_str().unwrap()])
            .status
            .success()
    );
    let formatted = std::fs::read_to_string(&file).unwrap();
    assert_eq!(
        formatted,
        "species A = 1 uM  # start\nparam k = 1 /s\nstep decay A -> 0 with k\n"
    );
    assert_eq!(
        common::ratewright(&["fmt", "--check", file.to_str().unwrap()])
            .status
            .code(),
        Some(0)
    );
}

#[test]
fn unit_conversion_follows_si_definitions() {
    // SI Brochure (BIPM, 9th ed.): 1 mM = 1000 uM, 1 min = 60 s; hence
    // 1e6 /M/s = 1 /uM/s and 0.5 /min = 1/120 /s.
    let loaded = load(
        "units concentration uM, time s\nspecies A = 1 mM\nspecies B\nparam kf = 1e6 /M/s\nparam kr = 0.5 /min\nstep s 2 A <=> B with kf, kr\n",
    );
    let m = loaded.model.expect("valid");
    assert!((m.species[0].initial - 1000.0).abs() < 1e-9);
    assert!((m.params[0].value - 1.0).abs() < 1e-12);
    assert!((m.params[1].value - 1.0 / 120.0).abs() < 1e-15);
}

#[test]
fn events_convert_and_totals_fix_start_values() {
    let loaded = load(
        "units concentration uM, time min\nspecies S = 20 uM, E, ES, P\nparam k1 = 2 /uM/s\nparam km1 = 40 /s\nparam k2 = 12 /s\nstep bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\ntotal E_t = E + ES = 50 nM\nadd 1 mM S at 90 s\n",
    );
    let m = loaded.model.expect("valid");
    assert!(
        (m.species[1].initial - 0.05).abs() < 1e-15,
        "E follows from E_t"
    );
    let (time, _, _, amount) = m.events[0]
        .timed_species_change()
        .expect("a timed addition");
    assert!((time - 1.5).abs() < 1e-15, "90 s = 1.5 min");
    assert!((amount - 1000.0).abs() < 1e-9);
    assert!(
        (m.params[0].value - 120.0).abs() < 1e-9,
        "2 /uM/s = 120 /uM/min"
    );
}

#[test]
fn unicode_arrows_empty_sides_and_continued_lines() {
    let loaded = load(
        "species A = 1 uM, B\nparam k = 1 /s\nparam kin = 0.1 uM/s\nparam kk = (k +   # continued\n    k)\nstep make ∅ → A with kin\nstep conv A ⇌ B with k, kk\nstep gone B -> 0 with k\n",
    );
    assert!(loaded.model.is_some(), "{}", rendered(&loaded));
    let m = loaded.model.unwrap();
    assert!(m.steps[1].reversible);
    assert!(m.steps[0].reactants.is_empty());
    assert!((m.params[2].value - 2.0).abs() < 1e-15);
}

fn model_files() -> Vec<String> {
    common::models()
        .iter()
        .map(|p| std::fs::read_to_string(p).unwrap())
        .collect()
}

/// A generated mechanism with `n` species in a chain of mixed steps.
fn generated(seed: u64, n: usize) -> String {
    let mut x = seed
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    let mut next = || {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (x >> 33) as usize
    };
    let mut s = String::from("units concentration uM, time s\n");
    for i in 0..n {
        s.push_str(&format!(
            "species X{i} = {} uM  \"form {i}\"\n",
            next() % 10
        ));
    }
    s.push_str("param kf1 = 1.5 /s\nparam kf2 = 0.2 /uM/s\nparam kr = 3 /s\n");
    for j in 0..n.saturating_sub(1) {
        let (a, b) = (j, j + 1);
        match next() % 3 {
            0 => s.push_str(&format!("step r{j} X{a} -> X{b} with kf1\n")),
            1 => s.push_str(&format!(
                "step r{j} X{a} <=> X{b}   with kf1, kr   # reversible\n"
            )),
            _ => s.push_str(&format!("step r{j} X{a} + X{b} -> 2 X{b} with kf2\n")),
        }
    }
    s.push_str("observe sum = X0 + 2 * X1\n");
    s
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, .. ProptestConfig::default() })]

    #[test]
    fn any_text_gives_a_model_or_diagnostics(text in "\\PC{0,200}") {
        let loaded = load(&text);
        prop_assert!(loaded.model.is_some() || loaded.diagnostics.iter().any(|d| d.is_error()));
        for d in &loaded.diagnostics {
            let _ = render_human(d, &loaded.sources);
        }
    }

    #[test]
    fn statement_shaped_text_never_panics(lines in proptest::collection::vec(
        "(species|param|step|total|observe|add|set|fixed|assume steady|assume equilibrium|use) [A-Za-z0-9_ =+<>\\-()*/^,.\"#µ∅→⇌]{0,40}", 0..8)) {
        let text = lines.join("\n");
        let loaded = load(&text);
        prop_assert!(loaded.model.is_some() || loaded.diagnostics.iter().any(|d| d.is_error()));
        if let Ok(tree) = ratewright::syntax::parse(&text, ratewright::diagnostics::FileId(0)) {
            let once = ratewright::syntax::format::format_file(&tree, &text);
            let tree2 = ratewright::syntax::parse(&once, ratewright::diagnostics::FileId(0)).expect("formatted text parses");
            prop_assert_eq!(&ratewright::syntax::format::format_file(&tree2, &once), &once);
        }
    }

    #[test]
    fn fmt_is_idempotent_and_keeps_the_model(seed in 0u64..10_000, n in 2usize..30) {
        let text = generated(seed, n);
        check_fmt_round_trip(&text);
    }
}

fn check_fmt_round_trip(text: &str) {
    use ratewright::diagnostics::FileId;
    let tree = ratewright::syntax::parse(text, FileId(0)).expect("parses");
    let once = ratewright::syntax::format::format_file(&tree, text);
    let tree2 = ratewright::syntax::parse(&once, FileId(0)).expect("formatted text parses");
    let twice = ratewright::syntax::format::format_file(&tree2, &once);
    assert_eq!(once, twice, "fmt is idempotent");
    let a = load(text).model.expect("original is valid");
    let b = load(&once).model.expect("formatted is valid");
    assert_eq!(
        a.without_spans(),
        b.without_spans(),
        "fmt keeps the meaning"
    );
}

#[test]
fn fmt_keeps_every_demo_model() {
    for text in model_files() {
        check_fmt_round_trip(&text);
    }
}

#[test]
fn a_bare_event_value_and_unit_words_as_params_are_valid() {
    // LANGUAGE.md: a number without a unit is in the default units, also
    // in `set NAME = N at T`; and without an implicit product `2 uM/s` or
    // `77.27 s` can only be quantities, even where `uM` and `s` are params.
    let loaded =
        load("species A = 1, B\nparam k = 1 /s\nstep conv A -> B with k\nset A = 2 at 1\n");
    let model = loaded.model.as_ref().expect("loads");
    assert!(
        codes(&loaded).iter().all(|c| !c.as_str().starts_with('E')),
        "{}",
        rendered(&loaded)
    );
    let (time, _, _, amount) = model.events[0]
        .timed_species_change()
        .expect("a timed addition");
    assert_eq!(amount, 2.0);
    assert_eq!(time, 1.0);
    let words = load(
        "param uM = 2\nparam s = 3\nparam k2 = 2 uM/s\nparam tau = 77.27 s\nobserve o = uM*s*k2*tau\n",
    );
    assert!(
        codes(&words).iter().all(|c| !c.as_str().starts_with('E')),
        "{}",
        rendered(&words)
    );
    // `0.1 /s` still reads both ways while `s` is a param.
    let ambiguous = load("param s = 3\nparam w = 0.1 /s\n");
    assert!(codes(&ambiguous).contains(&Code::AmbiguousQuantity));
}

#[test]
fn a_total_smaller_than_its_given_species_is_reported_once() {
    // E_t = 50 nM cannot hold ES = 0.2 uM (E would start at -0.15 uM): one
    // error, not a second one advising to leave out a value E already lacks.
    let loaded = load(
        "units concentration uM\nspecies E, S = 10, ES = 0.2, P\nparam k = 1 /s\nparam kb = 1 /uM/s\n\
         step b E + S <=> ES with kb, k\nstep c ES -> E + P with k\ntotal Et = E + ES = 50 nM\n",
    );
    let count = codes(&loaded)
        .iter()
        .filter(|c| **c == Code::TotalInconsistent)
        .count();
    assert_eq!(count, 1, "{}", rendered(&loaded));
}

/// Every mechanism file under `dir` (recursively), sorted.
fn mechanisms_under(dir: &Path) -> Vec<std::path::PathBuf> {
    let mut out = Vec::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(d) = todo.pop() {
        for entry in std::fs::read_dir(&d).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                todo.push(path);
            } else if path.extension().is_some_and(|e| e == "mech") {
                out.push(path);
            }
        }
    }
    out.sort();
    out
}

/// The IR's stated invariants (head of src/model/ir.rs) hold for every
/// model that lowers: the demo models, the fixtures, and the hostile inputs
/// that lower (with warnings at most).
#[test]
fn every_lowered_model_keeps_the_ir_invariants() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut checked = 0;
    for dir in ["models", "tests/fixtures", "tests/bad_inputs"] {
        for path in mechanisms_under(&root.join(dir)) {
            let loaded = load_path(&path);
            let Some(model) = loaded.model else { continue };
            if let Err(broken) = ratewright::model::validate(&model) {
                panic!(
                    "{}: {}",
                    path.display(),
                    broken
                        .iter()
                        .map(ToString::to_string)
                        .collect::<Vec<_>>()
                        .join("; ")
                );
            }
            checked += 1;
        }
    }
    // models/ alone holds 6 mechanisms that lower.
    assert!(checked >= 6, "only {checked} models lowered");
}

/// The checker finds what it promises to find: each invariant broken on
/// purpose in a model that keeps them all.
#[test]
fn validate_reports_each_broken_invariant() {
    use ratewright::model::{Rate, validate};
    let loaded = load(
        "species A = 1 uM\nspecies B\nparam k = 2 /s\nparam k2 = 3 * k\n\
         step r A <=> B with k, k2\ntotal T = A + B = 1 uM\n",
    );
    let good = loaded.model.expect("lowers");
    assert_eq!(validate(&good), Ok(()));
    let broken = |change: &dyn Fn(&mut ratewright::model::Model)| {
        let mut m = good.clone();
        change(&mut m);
        validate(&m).expect_err("a broken invariant").len()
    };
    assert_eq!(broken(&|m| m.species[0].initial = -1.0), 2); // and the total disagrees
    assert_eq!(broken(&|m| m.param_order.reverse()), 1);
    assert_eq!(
        broken(
            &|m| if let Rate::MassAction { reverse, .. } = &mut m.steps[0].rate {
                *reverse = None
            }
        ),
        1
    );
    assert_eq!(broken(&|m| m.totals[0].value = 5.0), 1);
    assert_eq!(broken(&|m| m.params[1].name = "k".into()), 2); // repeated, and looks up to the other
    assert_eq!(broken(&|m| m.steps[0].span.end = m.steps[0].span.start), 1);
}
