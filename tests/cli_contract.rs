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
        // docs/language.md: `volume` is a column whenever a volume is declared.
        if model.volume.is_some() {
            expected.push("volume".to_string());
        }
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
    let commands: [&[&str]; 8] = [
        &["analyze"],
        &["derive"],
        &["emit", "--target", "python"],
        &["run"],
        &["sample", "--volume", "1 fL", "--runs", "2"],
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

/// Every `--format json` command reports a model with errors the same way:
/// the JSON diagnostics report on standard output, exit 1. `steady` used to
/// print human diagnostics on standard error and nothing on standard output.
#[test]
fn json_commands_report_model_errors_as_json_on_stdout() {
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.mech");
    std::fs::write(&bad, "species A = 1 uM\nstep decay A -> 0 with k_missing\n").unwrap();
    let bad = bad.to_str().unwrap();
    for command in ["check", "analyze", "derive", "steady"] {
        let out = ratewright(&[command, bad, "--format", "json"]);
        assert_eq!(out.status.code(), Some(1), "{command}");
        let report = json(&out);
        assert_eq!(report["ok"], false, "{command}: {report:#}");
        assert_eq!(report["diagnostics"][0]["code"], "E0201", "{command}");
        assert_eq!(report["diagnostics"][0]["line"], 2, "{command}");
        assert!(out.stderr.is_empty(), "{command}: nothing for people");
    }
    let out = ratewright(&["sample", bad, "--volume", "1 fL", "--format", "json"]);
    assert_eq!(out.status.code(), Some(1), "sample");
    let report = json(&out);
    assert_eq!(report["diagnostics"][0]["code"], "E0201", "sample");
    assert_eq!(report["diagnostics"][0]["line"], 2, "sample");
    assert!(out.stderr.is_empty(), "sample: nothing for people");
}

/// `sample -o x.csv` (CLI.md, second round): `run,t,<species counts>`, one
/// row per run and output time; with `--stats`,
/// `t,<NAME_mean,NAME_sd,NAME_q05,NAME_q95 for each species>`, one row per
/// output time; on every demo model.
#[test]
fn sample_csv_shapes_are_runs_or_statistics_per_species() {
    let dir = tempfile::tempdir().unwrap();
    for path in models() {
        let model = load_path(&path).model.expect("demo models are valid");
        let names: Vec<String> = model.species.iter().map(|s| s.name.clone()).collect();
        for stats in [false, true] {
            let out_csv = dir.path().join("out.csv");
            let mut args = vec![
                "sample",
                path.to_str().unwrap(),
                "--volume",
                "1 fL",
                "--runs",
                "3",
                "--until",
                "0.01",
                "--points",
                "4",
                "-o",
                out_csv.to_str().unwrap(),
            ];
            if stats {
                args.push("--stats");
            }
            let out = ratewright(&args);
            if model.events.iter().any(|e| e.is_second_round()) {
                // Stochastic runs refuse volume changes and triggers with a
                // located E0704 (docs/language.md) rather than drop them.
                let err = String::from_utf8_lossy(&out.stderr);
                assert_eq!(out.status.code(), Some(1), "{}: {err}", path.display());
                assert!(err.contains("E0704") && err.contains(".mech:"), "{err}");
                continue;
            }
            assert!(
                out.status.success(),
                "{}: {}",
                path.display(),
                String::from_utf8_lossy(&out.stderr)
            );
            let text = std::fs::read_to_string(&out_csv).unwrap();
            let mut lines = text.lines();
            let header: Vec<&str> = lines.next().unwrap().split(',').collect();
            let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
            if stats {
                let mut expected = vec!["t".to_string()];
                for n in &names {
                    for part in ["mean", "sd", "q05", "q95"] {
                        expected.push(format!("{n}_{part}"));
                    }
                }
                assert_eq!(header, expected, "{}", path.display());
                assert_eq!(rows.len(), 4);
                assert!(rows.iter().flatten().all(|v| v.parse::<f64>().is_ok()));
            } else {
                let mut expected = vec!["run".to_string(), "t".to_string()];
                expected.extend(names.iter().cloned());
                assert_eq!(header, expected, "{}", path.display());
                assert_eq!(rows.len(), 3 * 4);
                for (k, row) in rows.iter().enumerate() {
                    assert_eq!(row.len(), expected.len());
                    assert_eq!(row[0], (k / 4 + 1).to_string(), "runs numbered from 1");
                    assert!(row[2..].iter().all(|v| v.parse::<u64>().is_ok()), "{row:?}");
                }
            }
        }
    }
}

/// Output paths are checked before any work: a figure that cannot be drawn
/// or any output over an input file (named directly or through a symlink)
/// is a usage error, exit 2, for every command that writes.
#[test]
fn bad_output_paths_are_usage_errors_before_any_work() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(common::root().join("models/protease_assay.mech")).unwrap();
    let model = dir.path().join("assay.mech");
    std::fs::write(&model, &text).unwrap();
    let link = dir.path().join("link.mech");
    std::os::unix::fs::symlink(&model, &link).unwrap();
    // Output names with the right extension, pointing at the input.
    let csv_input = dir.path().join("assay.csv");
    std::fs::write(&csv_input, &text).unwrap();
    let csv_link = dir.path().join("link.csv");
    std::os::unix::fs::symlink(&csv_input, &csv_link).unwrap();
    let svg_input = dir.path().join("assay.svg");
    std::fs::write(&svg_input, &text).unwrap();
    let (m, l) = (model.to_str().unwrap(), link.to_str().unwrap());
    let (c, cl) = (csv_input.to_str().unwrap(), csv_link.to_str().unwrap());
    let s = svg_input.to_str().unwrap();
    let pdf = dir.path().join("p.pdf");
    // The C target writes STEM.h and STEM.c: here STEM.c is the input.
    let c_input = dir.path().join("pair.c");
    std::fs::write(&c_input, &text).unwrap();
    let c_stem = dir.path().join("pair");
    let cases: [&[&str]; 12] = [
        &["run", m, "--plot", pdf.to_str().unwrap()],
        &["run", m, "-o", "p.txt"],
        &["run", c, "-o", c],
        &["run", c, "-o", cl],
        &["run", s, "--plot", s],
        &["emit", m, "--target", "python", "-o", m],
        &["emit", m, "--target", "python", "-o", l],
        &[
            "emit",
            c_input.to_str().unwrap(),
            "--target",
            "c",
            "-o",
            c_stem.to_str().unwrap(),
        ],
        &["derive", m, "-o", m],
        &["derive", m, "-o", l],
        &[
            "scan",
            c,
            "--vary",
            "k_on=1..2:2",
            "--measure",
            "P",
            "--at",
            "1",
            "-o",
            cl,
        ],
        &[
            "scan",
            m,
            "--vary",
            "k_on=1..2:2",
            "--measure",
            "P",
            "--at",
            "1",
            "--plot",
            pdf.to_str().unwrap(),
        ],
    ];
    for args in cases {
        let out = ratewright(args);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(stderr.starts_with("error: "), "{args:?}: {stderr}");
    }
    assert!(!pdf.exists());
    assert!(
        !dir.path().join("pair.h").exists(),
        "half of the C pair was written"
    );
    for (path, original) in [
        (&model, &text),
        (&csv_input, &text),
        (&svg_input, &text),
        (&c_input, &text),
    ] {
        assert_eq!(&std::fs::read_to_string(path).unwrap(), original);
    }
}

/// A file named on the command line that cannot be read is a usage error
/// (exit 2) for every command; the same failure through `use` is a model
/// error (exit 1), like any other error inside a mechanism.
#[test]
fn unreadable_arguments_exit_2_and_unreadable_uses_exit_1() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("absent.mech");
    let uses_missing = dir.path().join("uses.mech");
    std::fs::write(&uses_missing, "use \"absent.mech\"\nspecies A = 1 uM\n").unwrap();
    let commands: [&[&str]; 7] = [
        &["check"],
        &["analyze"],
        &["derive"],
        &["emit", "--target", "python"],
        &["run"],
        &["steady"],
        &["sample", "--volume", "1 fL"],
    ];
    for cmd in commands {
        for (file, code) in [
            (&missing, 2),
            (&dir.path().to_path_buf(), 2),
            (&uses_missing, 1),
        ] {
            let mut args: Vec<&str> = vec![cmd[0], file.to_str().unwrap()];
            args.extend(&cmd[1..]);
            let out = ratewright(&args);
            assert_eq!(
                out.status.code(),
                Some(code),
                "{args:?}: {}",
                String::from_utf8_lossy(&out.stderr)
            );
            assert!(String::from_utf8_lossy(&out.stderr).contains("E0102"));
        }
    }
}

/// Maps keyed by species follow declaration order, like the CSV header:
/// `steady --format json` `state` and `run -o x.json` `species`.
#[test]
fn json_maps_of_species_keep_declaration_order() {
    let dir = tempfile::tempdir().unwrap();
    for path in models() {
        let model = load_path(&path).model.expect("demo models are valid");
        let declared: Vec<&str> = model.species.iter().map(|s| s.name.as_str()).collect();
        let mut observables: Vec<&str> =
            model.observables.iter().map(|o| o.name.as_str()).collect();
        // The volume column goes with the observables' map.
        if model.volume.is_some() {
            observables.push("volume");
        }
        let out_json = dir.path().join("out.json");
        let p = path.to_str().unwrap();
        let out = ratewright(&["run", p, "--points", "3", "-o", out_json.to_str().unwrap()]);
        assert!(out.status.success(), "{p}");
        let written: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&out_json).unwrap()).unwrap();
        let keys = |v: &serde_json::Value| -> Vec<String> {
            v.as_object().unwrap().keys().cloned().collect()
        };
        assert_eq!(keys(&written["species"]), declared, "{p}: run -o x.json");
        assert_eq!(
            keys(&written["observables"]),
            observables,
            "{p}: run -o x.json"
        );
        let steady = ratewright(&["steady", p, "--format", "json"]);
        if steady.status.success() {
            let v = json(&steady);
            assert_eq!(keys(&v["state"]), declared, "{p}: steady state");
            assert_eq!(
                keys(&v["observables"]),
                observables,
                "{p}: steady observables"
            );
        }
    }
    // The check above can fail only if some model declares species out of
    // alphabetical order.
    let protease = load_path(&common::root().join("models/protease_assay.mech"))
        .model
        .unwrap();
    let names: Vec<&str> = protease.species.iter().map(|s| s.name.as_str()).collect();
    let mut sorted = names.clone();
    sorted.sort();
    assert_ne!(names, sorted);
}

/// Messages found wanting by the audit: counts agree with their noun, an
/// article agrees with its word, a name rule says what is wrong, and times
/// print as a person writes them.
#[test]
fn messages_read_correctly() {
    let dir = tempfile::tempdir().unwrap();
    let out_csv = dir.path().join("one.csv");
    let out = ratewright(&[
        "run",
        "models/protease_assay.mech",
        "--times",
        "0",
        "-o",
        out_csv.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("wrote 1 row to"), "{stderr}");

    let octave = dir.path().join("1abc.m");
    let out = ratewright(&[
        "emit",
        "models/protease_assay.mech",
        "--target",
        "octave",
        "-o",
        octave.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr.contains("cannot name an Octave function"),
        "{stderr}"
    );
    assert!(stderr.contains("must not start with a digit"), "{stderr}");
    let out = ratewright(&[
        "emit",
        "models/protease_assay.mech",
        "--target",
        "c",
        "-o",
        dir.path().join("a-b").to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("cannot name a C prefix"), "{stderr}");
    assert!(
        stderr.contains("only ASCII letters, digits and `_`"),
        "{stderr}"
    );

    // A rate constant of 1e300 /s fails at once: at t = 0, not "t = 0e0".
    let fast = dir.path().join("fast.mech");
    std::fs::write(
        &fast,
        "species A = 1 uM, B\nparam k = 1e300 /s\nstep r A -> B with k\n",
    )
    .unwrap();
    let out = ratewright(&["run", fast.to_str().unwrap()]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("failed at t = 0:"), "{stderr}");
    assert!(
        !stderr.contains("e0:") && !stderr.contains("e0;"),
        "{stderr}"
    );
}

/// docs/cli.md, the project's command reference, names every command the
/// binary has and every long option of each (read from `--help`).
#[test]
fn docs_cli_lists_every_command_and_option() {
    let doc = std::fs::read_to_string(common::root().join("docs/cli.md")).unwrap();
    let top = String::from_utf8(common::ratewright(&["--help"]).stdout).unwrap();
    let commands: Vec<String> = top
        .split("Commands:")
        .nth(1)
        .unwrap()
        .split("Options:")
        .next()
        .unwrap()
        .lines()
        .filter_map(|l| l.split_whitespace().next().map(str::to_string))
        .filter(|c| c != "help")
        .collect();
    assert!(commands.len() >= 11, "{commands:?}");
    for c in &commands {
        assert!(
            doc.contains(&format!("## `{c}`")),
            "docs/cli.md has no section for `{c}`"
        );
        let help = String::from_utf8(common::ratewright(&[c, "--help"]).stdout).unwrap();
        let section = doc
            .split(&format!("## `{c}`"))
            .nth(1)
            .unwrap()
            .split("\n## ")
            .next()
            .unwrap();
        for option in help
            .split_whitespace()
            .filter(|w| w.starts_with("--") && w.len() > 2)
        {
            let option = option
                .trim_end_matches(',')
                .split('=')
                .next()
                .unwrap()
                .split('<')
                .next()
                .unwrap();
            assert!(
                section.contains(option),
                "docs/cli.md does not describe `{c} {option}`"
            );
        }
    }
}
