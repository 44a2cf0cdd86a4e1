//! The output shapes that other tools rely on (the command-line design,
//! "Fixed output shapes"), checked on every demo model, and the exit-code
//! convention (0 ok, 1 model errors or failed run, 2 usage) for every
//! subcommand.

mod common;

use common::{models, ratewright};
use ratewright::model::load_path;

fn json(out: &std::process::Output) -> serde_json::Value {
    serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "stdout is JSON ({e}): {}\n{}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        )
    })
}

#[test]
fn run_csv_header_is_t_species_in_order_then_observables() {
    let dir = tempfile::tempdir().unwrap();
    for path in models() {
        let model = load_path(&path).model.expect("demo models are valid");
        let out_csv = dir.path().join("out.csv");
        let out = ratewright(&[
            "run",
            path.to_str().unwrap(),
            "--points",
            "11",
            "-o",
            out_csv.to_str().unwrap(),
        ]);
        assert!(
            out.status.success(),
            "{}: {}",
            path.display(),
            String::from_utf8_lossy(&out.stderr)
        );
        let text = std::fs::read_to_string(&out_csv).unwrap();
        let header = text.lines().next().unwrap();
        let mut expected = vec!["t".to_string()];
        expected.extend(model.species.iter().map(|s| s.name.clone()));
        expected.extend(model.observables.iter().map(|o| o.name.clone()));
        assert_eq!(header, expected.join(","), "{}", path.display());
        let rows: Vec<&str> = text.lines().skip(1).collect();
        assert!(
            rows.len() >= 11,
            "{}: one row per output time",
            path.display()
        );
        for row in rows {
            assert_eq!(row.split(',').count(), expected.len());
            assert!(
                row.split(',').all(|v| v.parse::<f64>().is_ok()),
                "numeric row: {row}"
            );
        }
    }
}

#[test]
fn analyze_json_has_the_documented_keys() {
    for path in models() {
        let model = load_path(&path).model.unwrap();
        let out = ratewright(&["analyze", path.to_str().unwrap(), "--format", "json"]);
        assert!(out.status.success(), "{}", path.display());
        let v = json(&out);
        for key in [
            "species",
            "steps",
            "stoichiometry",
            "rank",
            "conservation_laws",
            "independent",
            "dependent",
            "complexes",
            "linkage_classes",
            "deficiency",
            "weakly_reversible",
        ] {
            assert!(
                v.get(key).is_some(),
                "{}: analyze json lacks `{key}`",
                path.display()
            );
        }
        let species: Vec<&str> = v["species"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s.as_str().unwrap())
            .collect();
        let declared: Vec<&str> = model.species.iter().map(|s| s.name.as_str()).collect();
        assert_eq!(species, declared);
        let n = v["stoichiometry"].as_array().unwrap();
        assert_eq!(n.len(), model.species.len(), "rows = species");
        assert!(
            n.iter()
                .all(|row| row.as_array().unwrap().len() == model.steps.len()),
            "columns = steps"
        );
        for law in v["conservation_laws"].as_array().unwrap() {
            assert!(
                law["name"].is_string()
                    && law["coefficients"].is_object()
                    && law.get("value").is_some()
            );
            assert!(
                law["coefficients"]
                    .as_object()
                    .unwrap()
                    .values()
                    .all(|c| c.is_i64()),
                "integer coefficients"
            );
        }
        let rank = v["rank"].as_u64().unwrap() as usize;
        assert_eq!(
            v["conservation_laws"].as_array().unwrap().len(),
            model.species.len() - rank
        );
    }
}

#[test]
fn derive_json_has_rate_numerator_denominator_and_constants() {
    for path in models() {
        let model = load_path(&path).model.unwrap();
        if model.assumptions.steady.is_empty() && model.assumptions.equilibrium.is_empty() {
            continue;
        }
        let out = ratewright(&["derive", path.to_str().unwrap(), "--format", "json"]);
        assert!(
            out.status.success(),
            "{}: {}",
            path.display(),
            String::from_utf8_lossy(&out.stderr)
        );
        let v = json(&out);
        for key in ["rate", "numerator", "denominator"] {
            assert!(
                v[key].is_string(),
                "{}: `{key}` is an expression string",
                path.display()
            );
        }
        assert!(
            v["constants"].is_object() || v["constants"].is_array(),
            "{}: constants",
            path.display()
        );
        // The rate is in the language's own syntax: it must compile as a law.
        let rate = v["rate"].as_str().unwrap();
        assert!(
            !rate.contains('·') && !rate.contains('\\'),
            "plain language syntax: {rate}"
        );
    }
}

#[test]
fn steady_json_has_state_eigenvalues_and_stability() {
    for name in ["kinase_cycle.mech", "protease_assay.mech"] {
        let path = common::root().join("models").join(name);
        let out = ratewright(&["steady", path.to_str().unwrap(), "--format", "json"]);
        assert!(
            out.status.success(),
            "{name}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let v = json(&out);
        assert!(v["state"].is_object(), "{name}: state is species → value");
        assert!(
            v["eigenvalues"]
                .as_array()
                .unwrap()
                .iter()
                .all(|p| p.as_array().is_some_and(|p| p.len() == 2)),
            "(re, im) pairs"
        );
        assert!(v["stable"].is_boolean());
    }
}

#[test]
fn usage_errors_exit_2_and_model_errors_exit_1_for_every_command() {
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.mech");
    std::fs::write(&bad, "species A = 1 uM\nstep decay A -> 0 with k_missing\n").unwrap();
    let bad = bad.to_str().unwrap();
    let good = "models/robertson.mech";
    let commands: [&[&str]; 7] = [
        &["analyze"],
        &["derive"],
        &["emit", "--target", "python"],
        &["run"],
        &["steady"],
        &[
            "scan",
            "--vary",
            "k1=0.01..0.1:3",
            "--measure",
            "A",
            "--at",
            "10",
        ],
        &["check"],
    ];
    for cmd in commands {
        let mut with_bad: Vec<&str> = vec![cmd[0], bad];
        with_bad.extend(&cmd[1..]);
        assert_eq!(
            ratewright(&with_bad).status.code(),
            Some(1),
            "{cmd:?} on a model with errors"
        );
        let mut with_flag: Vec<&str> = vec![cmd[0], good, "--no-such-option"];
        with_flag.extend(&cmd[1..]);
        assert_eq!(
            ratewright(&with_flag).status.code(),
            Some(2),
            "{cmd:?} with an unknown option"
        );
    }
    // `diff` follows the diff-tool convention: 0 same, 1 different, 2 trouble.
    assert_eq!(
        ratewright(&["diff", good, bad]).status.code(),
        Some(2),
        "diff with a broken side"
    );
    assert_eq!(ratewright(&["diff", good, good]).status.code(), Some(0));
}
