//! End-to-end tests of `ratewright analyze`: published check values and a
//! SymPy cross-check on every demo model and 100 seeded random networks.

mod common;

use common::{python, ratewright, root};
use serde_json::Value;
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;

fn analyze_json(path: &Path) -> Value {
    let out = ratewright(&["analyze", path.to_str().unwrap(), "--format", "json"]);
    assert!(
        out.status.success(),
        "analyze {} failed:\n{}{}",
        path.display(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("analyze prints JSON")
}

fn analyze_text(text: &str) -> Value {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("m.mech");
    std::fs::write(&path, text).unwrap();
    analyze_json(&path)
}

/// Laws as `{species: coefficient}` maps, by name.
fn laws(a: &Value) -> BTreeMap<String, BTreeMap<String, i64>> {
    a["conservation_laws"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| {
            let coefs = l["coefficients"]
                .as_object()
                .unwrap()
                .iter()
                .map(|(k, v)| (k.clone(), v.as_i64().unwrap()))
                .collect();
            (l["name"].as_str().unwrap().to_string(), coefs)
        })
        .collect()
}

fn map(pairs: &[(&str, i64)]) -> BTreeMap<String, i64> {
    pairs.iter().map(|(k, v)| (k.to_string(), *v)).collect()
}

#[test]
fn protease_assay_has_rank_two_and_the_two_textbook_laws() {
    // Michaelis–Menten scheme E + S <=> ES -> E + P: rank 2, conserved
    // E + ES and S + ES + P (a textbook result of enzyme kinetics, common practice).
    let a = analyze_json(&root().join("models/protease_assay.mech"));
    assert_eq!(a["rank"], 2);
    let l = laws(&a);
    assert_eq!(l.len(), 2);
    assert_eq!(l["E_t"], map(&[("E", 1), ("ES", 1)]));
    let substrate: Vec<_> = l
        .iter()
        .filter(|(k, _)| *k != "E_t")
        .map(|(_, v)| v.clone())
        .collect();
    assert_eq!(substrate, vec![map(&[("S", 1), ("ES", 1), ("P", 1)])]);
    // The user's total keeps its value (0.05 uM of enzyme, as written in the file).
    let et = a["conservation_laws"]
        .as_array()
        .unwrap()
        .iter()
        .find(|l| l["name"] == "E_t")
        .unwrap();
    assert!((et["value"].as_f64().unwrap() - 0.05).abs() < 1e-12);
    assert_eq!(a["independent"].as_array().unwrap().len(), 2);
    assert_eq!(a["dependent"].as_array().unwrap().len(), 2);
    // Complexes E+S, ES, E+P; one linkage class; deficiency 3 − 1 − 2 = 0
    // (the standard first example of chemical reaction network theory, common practice).
    assert_eq!(a["complexes"].as_array().unwrap().len(), 3);
    assert_eq!(a["deficiency"], 0);
    assert_eq!(a["weakly_reversible"], false);
}

#[test]
fn dimerisation_conserves_monomer_plus_twice_dimer() {
    // 2 M <=> D conserves M + 2 D (mass balance, common practice).
    let a = analyze_text("species M = 4 uM, D\nstep dimerise 2 M <=> D with 1.0, 0.5\n");
    assert_eq!(a["rank"], 1);
    assert_eq!(
        laws(&a).into_values().collect::<Vec<_>>(),
        vec![map(&[("M", 1), ("D", 2)])]
    );
    let law = &a["conservation_laws"][0];
    assert!((law["value"].as_f64().unwrap() - 4.0).abs() < 1e-12);
    // M has a start value, D does not: D follows from the total.
    assert_eq!(a["dependent"], serde_json::json!(["D"]));
}

#[test]
fn feinberg_1987_deficiency_zero_example() {
    // Feinberg 1987, Chem. Eng. Sci. 42:2229, worked example (from memory):
    // A <=> 2B, A + C <=> D, D -> B + E, B + E -> A + C: 5 complexes, 2 linkage
    // classes, rank 3, deficiency 0, weakly reversible (so the deficiency-zero
    // theorem gives one positive, stable steady state per compatibility class).
    let a = analyze_text(
        "species A = 1, B = 1, C = 1, D, E\n\
         step r1 A <=> 2 B with 1, 1\n\
         step r2 A + C <=> D with 1, 1\n\
         step r3 D -> B + E with 1\n\
         step r4 B + E -> A + C with 1\n",
    );
    assert_eq!(a["complexes"].as_array().unwrap().len(), 5);
    assert_eq!(a["linkage_classes"].as_array().unwrap().len(), 2);
    assert_eq!(a["rank"], 3);
    assert_eq!(a["deficiency"], 0);
    assert_eq!(a["weakly_reversible"], true);
    assert!(
        a["deficiency_note"]
            .as_str()
            .unwrap()
            .contains("exactly one steady state")
    );
}

#[test]
fn edelstein_network_has_deficiency_one() {
    // The Edelstein network A <=> 2A, A + B <=> C <=> B, a deficiency-one
    // network with several steady states discussed by Feinberg 1987
    // (Chem. Eng. Sci. 42:2229; from memory): 5 complexes, 2 linkage classes,
    // rank 2, deficiency 1.
    let a = analyze_text(
        "species A = 1, B = 1, C\n\
         step r1 A <=> 2 A with 1, 1\n\
         step r2 A + B <=> C with 1, 1\n\
         step r3 C <=> B with 1, 1\n",
    );
    assert_eq!(a["complexes"].as_array().unwrap().len(), 5);
    assert_eq!(a["linkage_classes"].as_array().unwrap().len(), 2);
    assert_eq!(a["rank"], 2);
    assert_eq!(a["deficiency"], 1);
    assert_eq!(a["reversible"], true);
}

#[test]
fn human_output_writes_laws_as_equations() {
    let out = ratewright(&["analyze", "models/protease_assay.mech"]);
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("E + ES = E_t"), "{text}");
    assert!(
        text.contains("deficiency = 3 complexes − 1 linkage classes − rank 2 = 0"),
        "{text}"
    );
}

#[test]
fn model_errors_exit_with_one_and_a_located_diagnostic() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.mech");
    std::fs::write(&path, "species A\nstep r A -> B with 1\n").unwrap();
    let out = ratewright(&["analyze", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("E0201"));
}

/// splitmix64: a small seeded generator so the random networks are the same on every run.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

/// A random mass-action network as .mech text and as the generator's own
/// record of each step's sides (the "truth" the cross-check rebuilds N from).
fn random_network(seed: u64) -> (String, Value) {
    let mut rng = Rng(seed);
    let nspecies = 2 + rng.below(8) as usize;
    let nfixed = rng.below(2) as usize;
    let nsteps = 1 + rng.below(10) as usize;
    let mut text = format!("mechanism random_{seed}\n");
    let species: Vec<String> = (0..nspecies).map(|i| format!("X{i}")).collect();
    for name in &species {
        match rng.below(3) {
            0 => writeln!(text, "species {name}").unwrap(),
            _ => writeln!(text, "species {name} = {} uM", 1 + rng.below(9)).unwrap(),
        }
    }
    let fixed: Vec<String> = (0..nfixed).map(|i| format!("F{i}")).collect();
    for name in &fixed {
        writeln!(text, "fixed {name} = 2 uM").unwrap();
    }
    let pool: Vec<&String> = species.iter().chain(fixed.iter()).collect();
    let mut steps = Vec::new();
    for j in 0..nsteps {
        let mut sides: Vec<BTreeMap<String, String>> = Vec::new();
        for _ in 0..2 {
            let mut side = BTreeMap::new();
            for _ in 0..rng.below(4) {
                let name = pool[rng.below(pool.len() as u64) as usize].clone();
                let coefficient = match rng.below(8) {
                    0 => "2",
                    1 => "3",
                    2 => "1/2",
                    _ => "1",
                };
                side.insert(name, coefficient.to_string());
            }
            sides.push(side);
        }
        let write_side = |side: &BTreeMap<String, String>| {
            if side.is_empty() {
                "0".to_string()
            } else {
                side.iter()
                    .map(|(n, c)| {
                        if c == "1" {
                            n.clone()
                        } else {
                            format!("{c} {n}")
                        }
                    })
                    .collect::<Vec<_>>()
                    .join(" + ")
            }
        };
        let reversible = rng.below(2) == 0;
        let (arrow, rate) = if reversible {
            ("<=>", "with 1.5, 0.5")
        } else {
            ("->", "with 1.5")
        };
        writeln!(
            text,
            "step r{j} {} {arrow} {} {rate}",
            write_side(&sides[0]),
            write_side(&sides[1])
        )
        .unwrap();
        let json_side = |side: &BTreeMap<String, String>| -> Value {
            side.iter()
                .map(|(n, c)| (n.clone(), Value::String(c.clone())))
                .collect::<serde_json::Map<_, _>>()
                .into()
        };
        steps.push(serde_json::json!([
            json_side(&sides[0]),
            json_side(&sides[1])
        ]));
    }
    (
        text,
        serde_json::json!({ "species": species, "steps": steps }),
    )
}

#[test]
fn sympy_confirms_laws_rank_link_matrix_and_deficiency() {
    let dir = tempfile::tempdir().unwrap();
    let mut args: Vec<String> = Vec::new();
    for model in common::models() {
        let a = analyze_json(&model);
        let name = model.file_stem().unwrap().to_string_lossy().to_string();
        let path = dir.path().join(format!("{name}.json"));
        std::fs::write(&path, a.to_string()).unwrap();
        args.push(path.to_string_lossy().to_string());
    }
    assert!(args.len() >= 6, "the demo models are present");
    let mut coverage: BTreeMap<String, usize> = BTreeMap::new();
    for seed in 0..100u64 {
        let (text, truth) = random_network(seed);
        let mech = dir.path().join(format!("random_{seed}.mech"));
        std::fs::write(&mech, &text).unwrap();
        let a = analyze_json(&mech);
        *coverage
            .entry(a["nonnegative_basis"].as_str().unwrap().to_string())
            .or_insert(0) += 1;
        let analysis = dir.path().join(format!("random_{seed}.json"));
        let truth_path = dir.path().join(format!("random_{seed}.truth.json"));
        std::fs::write(&analysis, a.to_string()).unwrap();
        std::fs::write(&truth_path, truth.to_string()).unwrap();
        args.push(format!("{}:{}", analysis.display(), truth_path.display()));
    }
    // The random set exercises every kind of law basis the analysis reports.
    for kind in ["no_laws", "spans", "partial", "none_exist"] {
        assert!(
            coverage.get(kind).is_some_and(|n| *n > 0),
            "no random network with `{kind}`: {coverage:?}"
        );
    }
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    let out = python(&root().join("tests/python/network_crosscheck.py"), &refs);
    let report = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "SymPy cross-check failed:\n{report}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        report.contains(&format!("{} passed, 0 failed", args.len())),
        "{report}"
    );
}

#[test]
fn user_totals_keep_their_names_and_a_redundant_one_adds_no_law() {
    // For E + S <=> ES -> E + P the laws are E + ES and S + ES + P (textbook
    // result, common practice); `twice` = 2·(E + ES) is no new law.
    let a = analyze_text(
        "species E = 1 uM, S = 5 uM, ES, P\n\
         step bind E + S <=> ES with 1, 1\n\
         step cat ES -> E + P with 1\n\
         total E_t = E + ES\n\
         total twice = 2 E + 2 ES\n\
         total substrate = S + ES + P\n",
    );
    let l = laws(&a);
    assert_eq!(l.keys().collect::<Vec<_>>(), vec!["E_t", "substrate"]);
    assert_eq!(l["substrate"], map(&[("S", 1), ("ES", 1), ("P", 1)]));
    assert_eq!(a["redundant_totals"], serde_json::json!(["twice"]));
    for law in a["conservation_laws"].as_array().unwrap() {
        assert_eq!(law["kind"], "user");
    }
    // ES (no start value) follows from E_t, P from the substrate total.
    assert_eq!(a["dependent"], serde_json::json!(["ES", "P"]));
    assert_eq!(a["dependent_formulas"]["ES"], "E_t - E");
}

#[test]
fn json_errors_are_a_json_report_with_exit_one() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.mech");
    std::fs::write(&path, "species A\nstep r A -> B with 1\n").unwrap();
    let out = ratewright(&["analyze", path.to_str().unwrap(), "--format", "json"]);
    assert_eq!(out.status.code(), Some(1));
    let report: Value = serde_json::from_slice(&out.stdout).expect("a JSON diagnostics report");
    assert!(report.to_string().contains("E0201"), "{report}");
}

#[test]
fn a_fractional_total_is_the_multiple_of_its_integer_law() {
    // 2 H2 + O2 -> 2 H2O written per H2 (common practice): O2 + H2O/2 is
    // conserved; the law with integer coefficients (CLI.md) is
    // 2 O2 + H2O, which is twice the total as written.
    let a = analyze_text(
        "species H2 = 2, O2 = 1, H2O\nstep burn H2 + 1/2 O2 -> H2O with 1\ntotal Ot = 1/2 H2O + O2\n",
    );
    let law = a["conservation_laws"]
        .as_array()
        .unwrap()
        .iter()
        .find(|l| l["name"] == "Ot")
        .expect("the user's total is a law");
    assert_eq!(law["coefficients"]["O2"], 2);
    assert_eq!(law["coefficients"]["H2O"], 1);
    assert_eq!(law["value"], 2.0);
    assert_eq!(law["equation"], "2 O2 + H2O = 2 Ot");
}
