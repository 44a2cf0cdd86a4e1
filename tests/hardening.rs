//! Hardening: hostile and malformed input, limits, numerical hostility and
//! output safety (issue 8). Every file in tests/bad_inputs/ must give exit
//! code 1 and a located diagnostic; each diagnostic is snapshotted as a user
//! sees it. The fuzz targets live in fuzz/ (cargo-fuzz); the property tests
//! at the end run the same checks in `cargo test`.

mod common;

use common::{ratewright, root};
use proptest::prelude::*;
use ratewright::diagnostics::{Code, render_human};
use ratewright::model::{Loaded, load_path, load_str};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Every corpus file (`*.mech`) in tests/bad_inputs/, as paths relative to
/// the crate root (so snapshots do not depend on where the checkout lives).
fn corpus() -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(root().join("tests/bad_inputs"))
        .expect("tests/bad_inputs exists")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "mech"))
        .map(|p| PathBuf::from("tests/bad_inputs").join(p.file_name().expect("a file name")))
        .collect();
    files.sort();
    files
}

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

/// A `path:line:column` position in rendered output: miette's header
/// `╭─[path:L:C]` or the plain form used for over-long lines.
fn has_location(text: &str) -> bool {
    text.lines().any(|l| {
        let Some(at) = l.find(".mech:").or_else(|| l.find(".inc:")) else {
            return false;
        };
        let rest = &l[at..];
        let rest = &rest[rest.find(':').map(|i| i + 1).unwrap_or(0)..];
        let mut parts = rest.splitn(3, ':');
        let line = parts.next().unwrap_or("");
        let col: String = parts
            .next()
            .unwrap_or("")
            .chars()
            .take_while(char::is_ascii_digit)
            .collect();
        !line.is_empty() && line.chars().all(|c| c.is_ascii_digit()) && !col.is_empty()
    })
}

#[test]
fn corpus_has_at_least_sixty_files() {
    let n = corpus().len();
    assert!(
        n >= 60,
        "tests/bad_inputs has {n} files; issue 8 asks for at least 60"
    );
}

/// The library's view: errors (never only warnings), every error located,
/// and the whole rendering snapshotted.
#[test]
fn corpus_diagnostics_are_located_and_snapshotted() {
    let _cwd = root(); // cargo runs integration tests from the crate root
    for path in corpus() {
        let loaded = load_path(&path);
        let stem = path
            .file_stem()
            .and_then(|s| s.to_str())
            .expect("a UTF-8 file name")
            .to_string();
        assert!(
            loaded.model.is_none(),
            "{stem}: a model was produced from a bad input"
        );
        let errors: Vec<_> = loaded.diagnostics.iter().filter(|d| d.is_error()).collect();
        assert!(
            !errors.is_empty(),
            "{stem}: no error, only {:?}",
            codes(&loaded)
        );
        for d in &errors {
            assert!(
                d.primary_span().is_some(),
                "{stem}: error {:?} `{}` has no location",
                d.code,
                d.message
            );
        }
        let text = rendered(&loaded);
        assert!(
            has_location(&text),
            "{stem}: rendering has no path:line:column\n{text}"
        );
        insta::assert_snapshot!(format!("bad_{stem}"), text);
    }
}

/// The user's view: `ratewright check FILE` exits 1 and prints a located
/// diagnostic. A run still going after 300 s counts as a hang; the speed of
/// each file is measured by bench/hardening.sh (docs/reliability.md), not
/// asserted here.
#[test]
fn corpus_check_exits_1_with_a_located_diagnostic() {
    for path in corpus() {
        let p = path.to_str().expect("UTF-8 path");
        let out = ratewright_within(&["check", p], Duration::from_secs(300))
            .unwrap_or_else(|| panic!("{p}: check still running after 300 s"));
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(
            out.status.code(),
            Some(1),
            "{p}: exit code {:?}\n{stderr}",
            out.status.code()
        );
        assert!(
            has_location(&stderr),
            "{p}: no path:line:column in\n{stderr}"
        );
        assert!(
            !stderr.contains("internal failure") && !stderr.contains("panicked"),
            "{p}: crashed\n{stderr}"
        );
    }
}

#[test]
fn corpus_json_diagnostics_carry_line_and_column() {
    for path in corpus() {
        let p = path.to_str().expect("UTF-8 path");
        let out = ratewright(&["check", "--format", "json", p]);
        assert_eq!(out.status.code(), Some(1), "{p}");
        let report: serde_json::Value =
            serde_json::from_slice(&out.stdout).unwrap_or_else(|e| panic!("{p}: not JSON ({e})"));
        let located = report["diagnostics"]
            .as_array()
            .expect("a diagnostics array")
            .iter()
            .any(|d| {
                d["severity"] == "error"
                    && d["line"].as_u64().is_some()
                    && d["column"].as_u64().is_some()
            });
        assert!(located, "{p}: no located error in {report}");
    }
}

// ---------------------------------------------------------------- output safety

fn temp_files_in(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .expect("readable dir")
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".tmp"))
        .collect()
}

#[test]
fn output_never_overwrites_the_input_file() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let text =
        std::fs::read_to_string(root().join("models/protease_assay.mech")).expect("demo model");
    // A model whose name has an output extension, so only the input check
    // can stop the write; reached by its name, through `./`, and through a
    // symlink.
    let model = dir.path().join("assay.csv");
    std::fs::write(&model, &text).expect("write model");
    let m = model.to_str().expect("UTF-8 path");
    let link = dir.path().join("link.csv");
    std::os::unix::fs::symlink(&model, &link).expect("symlink");
    for target in [model.clone(), dir.path().join(".").join("assay.csv"), link] {
        let out = ratewright(&[
            "run",
            m,
            "--points",
            "5",
            "-o",
            target.to_str().expect("UTF-8"),
        ]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_ne!(
            out.status.code(),
            Some(0),
            "run -o {} succeeded over its input",
            target.display()
        );
        assert!(stderr.contains("refusing to overwrite"), "{stderr}");
        assert_eq!(
            std::fs::read_to_string(&model).expect("model still there"),
            text,
            "the input changed"
        );
    }
    let plain = dir.path().join("m.mech");
    std::fs::write(&plain, &text).expect("write model");
    let p = plain.to_str().expect("UTF-8 path");
    for args in [
        vec!["run", p, "--points", "5", "-o", p],
        vec!["run", p, "--points", "5", "--plot", p],
        vec!["emit", p, "--target", "json", "-o", p],
    ] {
        let out = ratewright(&args);
        assert_ne!(
            out.status.code(),
            Some(0),
            "{args:?} succeeded over its input"
        );
        assert_eq!(
            std::fs::read_to_string(&plain).expect("model still there"),
            text,
            "{args:?} changed the input"
        );
    }
    assert!(temp_files_in(dir.path()).is_empty());
}

#[test]
fn a_failed_run_leaves_the_previous_output_untouched() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let model = dir.path().join("blowup.mech");
    // dA/dt = k A^2 (net of 2 A -> 3 A) is infinite at t = 1/(k A0) = 10 s
    // (A(t) = A0 / (1 - k A0 t), the closed form of the Riccati equation).
    std::fs::write(
        &model,
        "species A = 1 uM\nparam k = 0.1 /uM/s\nstep grow 2 A -> 3 A with k\n",
    )
    .expect("write");
    let out_path = dir.path().join("out.csv");
    std::fs::write(&out_path, "previous result\n").expect("write");
    let out = ratewright(&[
        "run",
        model.to_str().expect("UTF-8"),
        "--until",
        "20",
        "-o",
        out_path.to_str().expect("UTF-8"),
    ]);
    assert_eq!(out.status.code(), Some(1));
    assert_eq!(
        std::fs::read_to_string(&out_path).expect("still there"),
        "previous result\n"
    );
    assert!(temp_files_in(dir.path()).is_empty());
}

/// SIGINT at every stage of a long `run -o`: while integrating, and the
/// moment the temporary output file appears. Afterwards there is either no
/// output or the complete one, and never a temporary file.
#[test]
fn sigint_leaves_no_partial_file() {
    let model = root().join("models/robertson.mech");
    for stage in ["integrating", "writing"] {
        let dir = tempfile::tempdir().expect("a temp dir");
        let out_path = dir.path().join("robertson.csv");
        let mut child = Command::new(common::bin())
            .args([
                "run",
                model.to_str().expect("UTF-8"),
                "--points",
                "3000000",
                "-o",
                out_path.to_str().expect("UTF-8"),
            ])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("spawn");
        let started = Instant::now();
        match stage {
            "integrating" => std::thread::sleep(Duration::from_millis(300)),
            _ => {
                while temp_files_in(dir.path()).is_empty()
                    && started.elapsed() < Duration::from_secs(120)
                {
                    if child.try_wait().expect("wait").is_some() {
                        break;
                    }
                    std::thread::sleep(Duration::from_millis(2));
                }
            }
        }
        let kill = Command::new("kill")
            .args(["-INT", &child.id().to_string()])
            .status()
            .expect("the kill command runs");
        assert!(
            kill.success() || child.try_wait().expect("wait").is_some(),
            "{stage}: kill -INT failed"
        );
        let status = child.wait().expect("wait");
        let leftovers = temp_files_in(dir.path());
        assert!(
            leftovers.is_empty(),
            "{stage}: SIGINT left {leftovers:?} (exit {status:?})"
        );
        if out_path.exists() {
            let text = std::fs::read_to_string(&out_path).expect("read");
            assert_eq!(
                text.lines().count(),
                3_000_001,
                "{stage}: the output is partial"
            );
        }
        assert!(
            !status.success() || out_path.exists(),
            "{stage}: success without output"
        );
    }
}

// ---------------------------------------------------------------- limits

fn write_temp(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).expect("write a temp file");
    p
}

fn check_file(p: &Path) -> (Option<i32>, String) {
    let out = ratewright(&["check", p.to_str().expect("UTF-8 path")]);
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn nesting_of_100000_parentheses_is_refused_without_stack_overflow() {
    let text = format!(
        "species A = 1 uM\nparam k = {}1{} /s\nstep r A -> 0 with k\n",
        "(".repeat(100_000),
        ")".repeat(100_000)
    );
    let loaded = load(&text);
    assert_eq!(codes(&loaded), vec![Code::NestingTooDeep]);
    let unbalanced = format!("param k = {}1\n", "(".repeat(100_000));
    assert_eq!(codes(&load(&unbalanced)), vec![Code::NestingTooDeep]);
    let dir = tempfile::tempdir().expect("a temp dir");
    let (code, stderr) = check_file(&write_temp(dir.path(), "deep.mech", text.as_bytes()));
    assert_eq!(code, Some(1), "{stderr}");
    assert!(
        stderr.contains("E0104") && stderr.contains("deep.mech:2:"),
        "{stderr}"
    );
}

/// 200 levels (the limit) pass every stage that walks expressions: check,
/// analyze, run and emit. The library is called on the test thread's
/// default stack.
#[test]
fn nesting_at_the_limit_works_end_to_end() {
    let depth = ratewright::syntax::parse::MAX_NESTING;
    let deep = format!("{}k0{}", "(".repeat(depth), ")".repeat(depth));
    let text = format!(
        "species A = 1 uM, B\nparam k0 = 0.5 /s\nparam k = {deep}\nstep r A -> B law {deep} * A\nobserve o = {deep} * B\n"
    );
    let loaded = load(&text);
    assert!(loaded.model.is_some(), "{}", rendered(&loaded));
    let over = format!(
        "param k = {}1{}\n",
        "(".repeat(depth + 1),
        ")".repeat(depth + 1)
    );
    assert_eq!(codes(&load(&over)), vec![Code::NestingTooDeep]);
    let dir = tempfile::tempdir().expect("a temp dir");
    let p = write_temp(dir.path(), "deep.mech", text.as_bytes());
    let ps = p.to_str().expect("UTF-8");
    for args in [
        vec!["check", ps],
        vec!["analyze", ps],
        vec!["run", ps, "--until", "2", "--points", "3"],
        vec!["emit", ps, "--target", "python"],
    ] {
        let out = ratewright(&args);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    // A(t) = exp(-k0 t) for first-order decay: at t = 2 s with k0 = 0.5 /s, A = e^-1.
    let out = ratewright(&[
        "run",
        ps,
        "--times",
        "2",
        "-o",
        dir.path().join("a.csv").to_str().expect("UTF-8"),
    ]);
    assert_eq!(out.status.code(), Some(0));
    let csv = std::fs::read_to_string(dir.path().join("a.csv")).expect("csv");
    let a: f64 = csv
        .lines()
        .last()
        .and_then(|l| l.split(',').nth(1))
        .and_then(|v| v.parse().ok())
        .expect("a value of A");
    assert!((a - (-1.0f64).exp()).abs() < 1e-5, "A(2) = {a}");
}

fn load(text: &str) -> Loaded {
    load_str(text, Path::new("example.mech"))
}

#[test]
fn files_over_64_mib_and_endless_sources_are_refused() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let limit = ratewright::syntax::parse::MAX_FILE_BYTES;
    let line = "# padding padding padding padding padding padding padding padding\n";
    let mut big = String::from("species A = 1 uM\n");
    while big.len() <= limit {
        big.push_str(line);
    }
    let p = write_temp(dir.path(), "huge.mech", big.as_bytes());
    let (code, stderr) = check_file(&p);
    assert_eq!(code, Some(1), "{stderr}");
    assert!(
        stderr.contains("E0106") && stderr.contains("huge.mech:1:1"),
        "{stderr}"
    );
    drop(big);
    // `use` of a device that never ends stops at the limit instead of
    // reading until memory runs out.
    let p = write_temp(
        dir.path(),
        "zero.mech",
        b"use \"/dev/zero\"\nspecies A = 1 uM\n",
    );
    let (code, stderr) = check_file(&p);
    assert_eq!(code, Some(1), "{stderr}");
    assert!(stderr.contains("E0106"), "{stderr}");
}

#[test]
fn very_long_lines_are_read_and_located() {
    let dir = tempfile::tempdir().expect("a temp dir");
    // 200,000 terms on one line (about 800 kB).
    let sum = vec!["1"; 200_000].join(" + ");
    let good = format!(
        "species A = 1 uM\nparam k = 1 /s\nstep r A -> 0 with k\nobserve o = ({sum}) * A\n"
    );
    let (code, stderr) = check_file(&write_temp(dir.path(), "long.mech", good.as_bytes()));
    assert_eq!(code, Some(0), "{stderr}");
    let bad = format!("species A = 1 uM\nparam k = {sum} + nope\nstep r A -> 0 with k\n");
    let (code, stderr) = check_file(&write_temp(dir.path(), "long_bad.mech", bad.as_bytes()));
    assert_eq!(code, Some(1), "{stderr}");
    let column = "param k = ".len() + sum.len() + " + ".len() + 1;
    assert!(
        stderr.contains(&format!("long_bad.mech:2:{column}")),
        "{stderr}"
    );
    assert!(
        stderr.len() < 10_000,
        "the diagnostic echoes the whole line ({} bytes)",
        stderr.len()
    );
}

/// CRLF, CR-only and mixed line endings, a byte-order mark and tabs are
/// layout only: the model is the same as from the plain file.
#[test]
fn line_endings_bom_and_tabs_do_not_change_the_model() {
    let dir = tempfile::tempdir().expect("a temp dir");
    for name in common::models() {
        let text = std::fs::read_to_string(&name).expect("demo model");
        let plain = load_path(&name)
            .model
            .expect("demo models load")
            .without_spans();
        let variants: Vec<(&str, Vec<u8>)> = vec![
            ("crlf", text.replace('\n', "\r\n").into_bytes()),
            ("cr", text.replace('\n', "\r").into_bytes()),
            (
                "bom",
                [b"\xEF\xBB\xBF".as_slice(), text.as_bytes()].concat(),
            ),
            ("tabs", tabs_for_spaces(&text).into_bytes()),
            (
                "bom_crlf_tabs",
                [
                    b"\xEF\xBB\xBF".as_slice(),
                    tabs_for_spaces(&text).replace('\n', "\r\n").as_bytes(),
                ]
                .concat(),
            ),
        ];
        for (kind, bytes) in variants {
            let p = write_temp(dir.path(), &format!("{kind}.mech"), &bytes);
            let loaded = load_path(&p);
            let model = loaded
                .model
                .as_ref()
                .unwrap_or_else(|| panic!("{} as {kind}: {}", name.display(), rendered(&loaded)));
            assert!(
                model.without_spans() == plain,
                "{} as {kind}: a different model",
                name.display()
            );
        }
    }
}

/// Every space outside quoted descriptions and comments becomes a tab.
fn tabs_for_spaces(text: &str) -> String {
    let mut out = String::new();
    let (mut in_string, mut in_comment) = (false, false);
    for c in text.chars() {
        match c {
            '"' if !in_comment => in_string = !in_string,
            '#' if !in_string => in_comment = true,
            '\n' => (in_string, in_comment) = (false, false),
            _ => {}
        }
        out.push(if c == ' ' && !in_string && !in_comment {
            '\t'
        } else {
            c
        });
    }
    out
}

#[test]
fn huge_coefficients_are_exact_or_a_clear_error() {
    // 2^62 fits a 64-bit rational exactly and must stay exact.
    let loaded =
        load("species A = 1 uM, B\nparam k = 1 /s\nstep r 4611686018427387904 A -> 3 B with k\n");
    let model = loaded.model.expect("2^62 is accepted");
    let change = model.net_change(0);
    assert_eq!(
        change[0].1,
        ratewright::model::Coef::from_integer(-4_611_686_018_427_387_904)
    );
    // Beyond that: a located E0407, never a wrapped value.
    for text in [
        "species A = 1 uM, B\nparam k = 1 /s\nstep r 99999999999999999999 A -> B with k\n",
        "species A = 1 uM, B\nparam k = 1 /s\nstep r 9000000000000000000 A + 9000000000000000000 A -> B with k\n",
        "species A = 1 uM\nparam k = 1 /s\nstep r 1/9000000000000000007 A -> 1/9000000000000000001 A with k\n",
    ] {
        let loaded = load(text);
        assert!(
            codes(&loaded).contains(&Code::BadCoefficient),
            "{text}: {:?}",
            codes(&loaded)
        );
        assert!(
            loaded
                .diagnostics
                .iter()
                .all(|d| d.primary_span().is_some())
        );
    }
}

// ---------------------------------------------------------------- numerical hostility
//
// Reference solutions are the closed forms of first-order kinetics:
// A → B with rate constant k: A(t) = A0·e^(−kt); A → B → C (consecutive
// first-order reactions, Bateman 1910): B(t) = A0·k1/(k2 − k1)·(e^(−k1 t) − e^(−k2 t));
// 2A → 3A (net A → 2A at rate k·A²): A(t) = A0/(1 − k·A0·t), infinite at
// t = 1/(k·A0) (separable Riccati equation).

fn model_file(dir: &Path, name: &str, text: &str) -> String {
    write_temp(dir, name, text.as_bytes())
        .to_str()
        .expect("UTF-8")
        .to_string()
}

/// The values of one column of `run -o x.csv`.
fn run_csv(args: &[&str], dir: &Path) -> (Option<i32>, String, Vec<Vec<f64>>) {
    let out_path = dir.join("out.csv");
    let _ = std::fs::remove_file(&out_path);
    let mut full: Vec<&str> = args.to_vec();
    let o = out_path.to_str().expect("UTF-8").to_string();
    full.extend(["-o", o.as_str()]);
    let out = ratewright(&full);
    let rows = std::fs::read_to_string(&out_path)
        .map(|csv| {
            csv.lines()
                .skip(1)
                .map(|l| l.split(',').map(|v| v.parse().expect("a number")).collect())
                .collect()
        })
        .unwrap_or_default();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
        rows,
    )
}

const STIFF_1E20: &str = "species A = 1 uM, B, C\nparam kfast = 1e10 /s\nparam kslow = 1e-10 /s\nstep fast A -> B with kfast\nstep slow B -> C with kslow\n";

#[test]
fn zero_rate_constants_keep_every_species_at_its_start() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(
        dir.path(),
        "zero.mech",
        "species A = 1 uM, B\nparam k = 0 /s\nstep r A -> B with k\n",
    );
    let (code, stderr, rows) =
        run_csv(&["run", &m, "--until", "100", "--points", "11"], dir.path());
    assert_eq!(code, Some(0), "{stderr}");
    assert_eq!(rows.len(), 11);
    assert!(rows.iter().all(|r| r[1] == 1.0 && r[2] == 0.0), "{rows:?}");
}

#[test]
fn a_rate_constant_of_1e300_fails_with_a_clear_message_and_writes_nothing() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(
        dir.path(),
        "fast.mech",
        "species A = 1 uM, B\nparam k = 1e300 /s\nstep r A -> B with k\n",
    );
    let (code, stderr, rows) = run_csv(&["run", &m, "--until", "1"], dir.path());
    assert_eq!(code, Some(1), "{stderr}");
    assert!(
        stderr.contains("[E0701]") && stderr.contains("t = 0"),
        "{stderr}"
    );
    assert!(rows.is_empty() && !dir.path().join("out.csv").exists());
}

#[test]
fn stiffness_ratio_1e20_integrates_to_the_closed_form() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(dir.path(), "stiff.mech", STIFF_1E20);
    for method in ["bdf", "esdirk"] {
        let (code, stderr, rows) = run_csv(
            &[
                "run",
                &m,
                "--times",
                "1e-10,1e10,5e10",
                "--method",
                method,
                "--rtol",
                "1e-8",
            ],
            dir.path(),
        );
        assert_eq!(code, Some(0), "{method}: {stderr}");
        let (k1, k2) = (1e10f64, 1e-10f64);
        for r in &rows {
            let t = r[0];
            let a = (-k1 * t).exp();
            let b = k1 / (k2 - k1) * ((-k1 * t).exp() - (-k2 * t).exp());
            assert!(
                (r[1] - a).abs() < 1e-6,
                "{method}: A({t}) = {} vs {a}",
                r[1]
            );
            // rtol bounds the local error; the global error after ~1e3 steps is larger.
            assert!(
                (r[2] - b).abs() < 1e-5 * b.max(1e-3),
                "{method}: B({t}) = {} vs {b}",
                r[2]
            );
            assert!(
                (r[1] + r[2] + r[3] - 1.0).abs() < 1e-9,
                "{method}: mass not conserved at {t}"
            );
        }
    }
}

#[test]
fn blow_up_is_reported_just_before_the_singularity() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(
        dir.path(),
        "blowup.mech",
        "species A = 1 uM\nparam k = 0.1 /uM/s\nstep grow 2 A -> 3 A with k\n",
    );
    let (code, stderr, _) = run_csv(&["run", &m, "--until", "20"], dir.path());
    assert_eq!(code, Some(1), "{stderr}");
    let t: f64 = stderr
        .split("failed at t = ")
        .nth(1)
        .and_then(|s| s.split(':').next())
        .and_then(|s| s.trim().parse().ok())
        .unwrap_or_else(|| panic!("no time in {stderr}"));
    // 1/(k A0) = 10 s.
    assert!(t > 9.9 && t <= 10.0, "failed at t = {t}");
    assert!(stderr.contains("species `A`"), "{stderr}");
}

/// A step far faster than the output grid with loose tolerances: the solver
/// may overshoot zero by a rounding-level amount, never by more than the
/// absolute tolerance, and the total is kept.
#[test]
fn overshoot_below_zero_stays_within_the_absolute_tolerance() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(
        dir.path(),
        "overshoot.mech",
        "species A = 1 uM, B\nparam k = 1e6 /s\nstep r A -> B with k\n",
    );
    for (method, rtol, atol) in [
        ("bdf", "0.5", "1e-3"),
        ("esdirk", "0.5", "1e-3"),
        ("bdf", "1e-3", "1e-12"),
    ] {
        let (code, stderr, rows) = run_csv(
            &[
                "run", &m, "--until", "10", "--points", "101", "--method", method, "--rtol", rtol,
                "--atol", atol,
            ],
            dir.path(),
        );
        assert_eq!(code, Some(0), "{stderr}");
        let atol: f64 = atol.parse().expect("a number");
        for r in &rows[1..] {
            assert!(
                r[1] > -atol,
                "{method} rtol {rtol}: A = {} at t = {}",
                r[1],
                r[0]
            );
            assert!(
                (r[1] + r[2] - 1.0).abs() < 1e-6,
                "{method}: A + B = {}",
                r[1] + r[2]
            );
        }
    }
}

#[test]
fn default_end_time_covers_the_slow_scale_at_stiffness_1e20() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(dir.path(), "stiff.mech", STIFF_1E20);
    let (code, stderr, rows) = run_csv(&["run", &m], dir.path());
    assert_eq!(code, Some(0), "{stderr}");
    let end = rows.last().expect("rows");
    // 1/kslow = 1e10 s: the default end time should reach it.
    assert!(end[0] >= 1e10, "the default run ends at t = {}", end[0]);
}

#[test]
fn steady_state_at_stiffness_1e20_is_stable() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(dir.path(), "stiff.mech", STIFF_1E20);
    let out = ratewright(&["steady", &m, "--format", "json"]);
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    assert_eq!(v["stable"], true, "{v}");
}

#[test]
fn steady_state_with_zero_rate_constants_is_the_start() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(
        dir.path(),
        "zero.mech",
        "species A = 1 uM, B\nparam k = 0 /s\nstep r A -> B with k\n",
    );
    let out = ratewright(&["steady", &m, "--format", "json"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    assert_eq!(v["state"]["A"], 1.0);
}

// ---------------------------------------------------------------- fuzz regressions

/// Inputs the fuzz targets flagged (crashes, timeouts), kept in
/// fuzz/regressions/<target>/. Each must now load and derive (or refuse with
/// a diagnostic) without panicking. The first line names the derive target.
#[test]
fn fuzz_regressions_derive_or_refuse_cleanly() {
    let dir = root().join("fuzz/regressions/derive_small");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("fuzz/regressions/derive_small")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    files.sort();
    assert!(!files.is_empty());
    for path in files {
        let text = std::fs::read_to_string(&path).expect("UTF-8");
        let target = match text
            .lines()
            .next()
            .and_then(|l| l.split("derive target: ").nth(1))
            .map(|t| t.trim_end_matches(')'))
        {
            Some(t) if t.starts_with("species ") => {
                ratewright::ratelaw::Target::Species(t["species ".len()..].to_string())
            }
            Some(t) if t.starts_with("flux ") => {
                ratewright::ratelaw::Target::Flux(t["flux ".len()..].to_string())
            }
            _ => ratewright::ratelaw::Target::Overall,
        };
        let loaded = load_path(&path);
        let Some(model) = loaded.model.clone() else {
            panic!("{}: {}", path.display(), rendered(&loaded))
        };
        let request = ratewright::ratelaw::Request {
            target,
            max_terms: 20_000,
            ..Default::default()
        };
        match ratewright::ratelaw::derive(&model, &request) {
            Ok(d) => assert!(
                !d.denominator().is_zero(),
                "{}: zero denominator",
                path.display()
            ),
            Err(diag) => assert!(diag.is_error(), "{}: {:?}", path.display(), diag.code),
        }
    }
}

// ---------------------------------------------------------------- property tests
//
// The fuzz targets' checks in `cargo test` form (CI runs these on every
// build; fuzz/run.sh runs the coverage-guided versions): mutated demo
// models and corpus files through the front end and network analysis, and
// generated enzyme mechanisms through rate-law derivation. No panic; every
// error is located.

const TOKENS: &[&str] = &[
    "species ",
    "fixed ",
    "param ",
    "step ",
    "total ",
    "observe ",
    "assume steady ",
    "assume equilibrium ",
    "add ",
    "remove ",
    "set ",
    " at ",
    "use \"x.mech\"",
    " with ",
    " law ",
    "->",
    "<=>",
    "→",
    "⇌",
    "∅",
    " + ",
    " - ",
    " * ",
    " / ",
    "^",
    "(",
    ")",
    ",",
    "=",
    "\"",
    "#",
    "\n",
    "\r\n",
    "\t",
    "0",
    "1e308",
    "1e-320",
    "-1",
    "9223372036854775807",
    "1/3",
    " uM",
    " /uM/s",
    " min",
    "µM",
    "exp(",
    "min(",
    "pow(",
    "t",
    "pi",
    "A",
    "E",
    "\u{FEFF}",
    "\u{202E}",
    "\0",
];

fn floor_boundary(s: &str, mut i: usize) -> usize {
    i = i.min(s.len());
    while !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

fn mutate(text: &str, edits: &[(u8, usize, usize)]) -> String {
    let mut s = text.to_string();
    for &(kind, a, b) in edits {
        let len = s.len().max(1);
        let at = floor_boundary(&s, a % len);
        match kind % 4 {
            0 => s.insert_str(at, TOKENS[b % TOKENS.len()]),
            1 => {
                let end = floor_boundary(&s, (at + b % 12).min(s.len()));
                s.replace_range(at..end, "");
            }
            2 => {
                let line_start = s[..at].rfind('\n').map(|i| i + 1).unwrap_or(0);
                let line_end = s[at..].find('\n').map(|i| at + i + 1).unwrap_or(s.len());
                let line = s[line_start..line_end].to_string();
                s.insert_str(line_start, &line);
            }
            _ => {
                let end = floor_boundary(&s, (at + 1 + b % 8).min(s.len()));
                let piece = s[at..end].to_string();
                s.insert_str(at, &piece.repeat(1 + b % 3));
            }
        }
    }
    s
}

fn seed_texts() -> Vec<String> {
    let mut seeds: Vec<String> = common::models()
        .iter()
        .map(|p| std::fs::read_to_string(p).expect("demo model"))
        .collect();
    seeds.extend(
        corpus()
            .iter()
            .filter_map(|p| std::fs::read_to_string(root().join(p)).ok()),
    );
    seeds
}

/// A small enzyme mechanism steered by `bytes`, as the derive_small fuzz
/// target builds it: 2–6 forms, up to 8 steps binding substrates and
/// releasing products, some reversible, some at rapid equilibrium.
fn enzyme_mechanism(bytes: &[u8]) -> String {
    let mut it = bytes.iter().copied();
    let mut next = move || it.next().unwrap_or(0);
    let forms = 2 + (next() % 5) as usize;
    let mut t = String::from("units concentration uM, time s\n");
    for f in 0..forms {
        t += &format!("species E{f}{}\n", if f == 0 { " = 0.01" } else { "" });
    }
    for l in ["A", "B", "I", "X"] {
        t += &format!("species {l} = {}\n", 1 + next() % 50);
    }
    t += "species P\nspecies Q\nspecies R\n";
    let mut equilibrium = Vec::new();
    for s in 0..1 + (next() % 8) as usize {
        let (from, to, flags) = (next() as usize % forms, next() as usize % forms, next());
        let to = if to == from { (to + 1) % forms } else { to };
        let mut lhs = format!("E{from}");
        if flags & 1 != 0 {
            lhs += &format!(
                " + {}{}",
                if flags & 0x40 != 0 { "2 " } else { "" },
                ["A", "B", "I", "X"][(flags as usize >> 4) % 4]
            );
        }
        let mut rhs = format!("E{to}");
        if flags & 2 != 0 {
            rhs += &format!(" + {}", ["P", "Q", "R"][(flags as usize >> 2) % 3]);
        }
        t += &format!("param kf{s} = {}\n", 1 + next() % 100);
        if flags & 4 != 0 {
            t += &format!("param kr{s} = {}\n", 1 + next() % 100);
            if flags & 0x88 == 0x88 {
                equilibrium.push(format!("s{s}"));
            }
            t += &format!("step s{s} {lhs} <=> {rhs} with kf{s}, kr{s}\n");
        } else {
            t += &format!("step s{s} {lhs} -> {rhs} with kf{s}\n");
        }
    }
    let names: Vec<String> = (0..forms).map(|f| format!("E{f}")).collect();
    t += &format!("assume steady {}\n", names.join(", "));
    if !equilibrium.is_empty() {
        t += &format!("assume equilibrium {}\n", equilibrium.join(", "));
    }
    if next() & 1 != 0 {
        t += &format!("total E_t = {}\n", names.join(" + "));
    }
    t
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, ..ProptestConfig::default() })]

    #[test]
    fn mutated_models_give_a_model_or_located_errors(seed in any::<prop::sample::Index>(), edits in proptest::collection::vec((any::<u8>(), any::<usize>(), any::<usize>()), 1..8)) {
        let seeds = seed_texts();
        let text = mutate(&seeds[seed.index(seeds.len())], &edits);
        let loaded = load(&text);
        for d in loaded.diagnostics.iter().filter(|d| d.is_error()) {
            prop_assert!(d.primary_span().is_some(), "unlocated {:?} `{}` for\n{}", d.code, d.message, text);
            let _ = render_human(d, &loaded.sources);
        }
        if let Some(model) = loaded.model {
            let _ = ratewright::network::analyze(&model);
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn generated_enzyme_mechanisms_derive_or_refuse(bytes in proptest::collection::vec(any::<u8>(), 0..40), target in 0u8..3) {
        let text = enzyme_mechanism(&bytes);
        let loaded = load(&text);
        let model = loaded.model.clone();
        prop_assert!(model.is_some(), "{}\n{}", text, rendered(&loaded));
        let target = match target {
            0 => ratewright::ratelaw::Target::Species("P".into()),
            1 => ratewright::ratelaw::Target::Flux("s0".into()),
            _ => ratewright::ratelaw::Target::Overall,
        };
        let request = ratewright::ratelaw::Request { target, max_terms: 20_000, ..Default::default() };
        match ratewright::ratelaw::derive(&model.expect("checked"), &request) {
            Ok(d) => prop_assert!(!d.denominator().is_zero()),
            Err(diag) => prop_assert!(diag.is_error()),
        }
    }
}

/// Runs the binary with a deadline; `None` if it had to be killed.
fn ratewright_within(args: &[&str], limit: Duration) -> Option<std::process::Output> {
    let mut child = Command::new(common::bin())
        .args(args)
        .current_dir(root())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    let started = Instant::now();
    while started.elapsed() < limit {
        if child.try_wait().expect("wait").is_some() {
            return Some(child.wait_with_output().expect("output"));
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    let _ = child.kill();
    let _ = child.wait();
    None
}

#[test]
fn a_scan_of_ten_billion_points_is_refused() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(
        dir.path(),
        "scan.mech",
        "species A = 1 uM, B\nparam k = 1 /s\nstep r A -> B with k\n",
    );
    let out = ratewright_within(
        &[
            "scan",
            &m,
            "--vary",
            "k=1..2:100000",
            "--vary",
            "A=1..2:100000",
            "--measure",
            "A",
            "--at",
            "1",
        ],
        Duration::from_secs(20),
    );
    let out = out.expect("still running after 20 s");
    assert_eq!(
        out.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Rewriting a file keeps its mode; a new output gets the mode a newly
/// created file gets (0666 less the umask), never the temporary file's 0600.
/// A file's permission bits.
fn mode_of(path: &Path) -> u32 {
    use std::os::unix::fs::PermissionsExt;
    std::fs::metadata(path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        .permissions()
        .mode()
        & 0o777
}

#[test]
fn written_files_keep_or_get_ordinary_permissions() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = dir.path().join("m.mech");
    std::fs::write(
        &m,
        "species A = 1 uM\nparam   k = 1 /s\nstep r A -> 0 with k\n",
    )
    .expect("write");
    for mode in [0o644, 0o664, 0o600] {
        std::fs::set_permissions(&m, std::fs::Permissions::from_mode(mode)).expect("chmod");
        std::fs::write(
            &m,
            "species A = 1 uM\nparam   k = 1 /s\nstep r A -> 0 with k\n",
        )
        .expect("write");
        let out = ratewright(&["fmt", m.to_str().expect("UTF-8")]);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(
            std::fs::read_to_string(&m)
                .expect("read")
                .contains("param k = 1 /s"),
            "fmt did not rewrite"
        );
        let after = mode_of(&m);
        assert_eq!(
            after, mode,
            "fmt changed the mode from {mode:o} to {after:o}"
        );
    }
    // A new file: compare with what the system gives a file created here.
    let reference = dir.path().join("reference");
    std::fs::write(&reference, "").expect("write");
    let expected = mode_of(&reference);
    let csv = dir.path().join("out.csv");
    let out = ratewright(&[
        "run",
        m.to_str().expect("UTF-8"),
        "--points",
        "3",
        "-o",
        csv.to_str().expect("UTF-8"),
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let got = mode_of(&csv);
    assert_eq!(
        got, expected,
        "new output has mode {got:o}, a new file here gets {expected:o}"
    );
    // A figure goes through the same atomic path: ordinary mode, no
    // temporary file left, and never over the input.
    let svg = dir.path().join("fig.svg");
    let out = ratewright(&[
        "run",
        m.to_str().expect("UTF-8"),
        "--points",
        "3",
        "--plot",
        svg.to_str().expect("UTF-8"),
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let got = mode_of(&svg);
    assert_eq!(got, expected, "new figure has mode {got:o}");
    assert!(temp_files_in(dir.path()).is_empty());
    let before = std::fs::read(&m).expect("read");
    let out = ratewright(&[
        "run",
        m.to_str().expect("UTF-8"),
        "--plot",
        m.to_str().expect("UTF-8"),
    ]);
    assert_ne!(out.status.code(), Some(0));
    assert_eq!(std::fs::read(&m).expect("read"), before);
}

/// Old Mac line endings (a lone CR): a diagnostic names the right line and
/// shows it as a line, not the whole file as one.
#[test]
fn cr_only_files_are_located_by_line() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = write_temp(
        dir.path(),
        "cr.mech",
        b"species A = 1 uM\rparam k = 1 /s\rstep r A -> Q with k\r",
    );
    let (code, text) = check_file(&m);
    assert_eq!(code, Some(1), "{text}");
    assert!(text.contains("cr.mech:3:13"), "{text}");
    assert!(
        !text.contains("species A = 1 uM\rparam"),
        "the file is shown as one line: {text}"
    );
}

/// A named pipe that nobody writes to reads as empty at once instead of
/// blocking `check` forever; one with a writer is read to its end.
#[test]
fn a_named_pipe_without_a_writer_does_not_block() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let fifo = dir.path().join("pipe.mech");
    let made = Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .expect("mkfifo runs");
    assert!(made.success());
    let path = fifo.to_str().expect("UTF-8");
    let out = ratewright_within(&["check", path], Duration::from_secs(20));
    assert!(out.is_some(), "check blocked on a pipe without a writer");
    let writer = {
        let fifo = fifo.clone();
        std::thread::spawn(move || {
            std::fs::write(&fifo, "species A = 1 uM\nstep r A -> Q with k\n").expect("write")
        })
    };
    let out = ratewright_within(&["check", path], Duration::from_secs(20)).expect("check finishes");
    writer.join().expect("the writer");
    // The writer's text was read: its unknown names are reported.
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("unknown name `Q`"));
}

/// A measured expression that is not a finite number fails the point like
/// a failed run (left empty); when it fails everywhere, the scan fails
/// with a message and writes nothing. Tolerances must be finite.
#[test]
fn scans_refuse_non_finite_measurements_and_tolerances() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let m = model_file(
        dir.path(),
        "m.mech",
        "species A = 1 uM\nparam k = 1 /s\nstep r A -> 0 with k\n",
    );
    let csv = dir.path().join("scan.csv");
    let o = csv.to_str().expect("UTF-8");
    let out = ratewright(&[
        "scan",
        &m,
        "--vary",
        "k=0.5..2:3",
        "--measure",
        "1/0",
        "--at",
        "1",
        "-o",
        o,
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(err.contains("not a finite number"), "{err}");
    assert!(!csv.exists());
    // Finite at some points only: those are kept, the rest left empty.
    let out = ratewright(&[
        "scan",
        &m,
        "--vary",
        "k=0..2:3",
        "--measure",
        "1/k",
        "--at",
        "1",
        "-o",
        o,
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    let text = std::fs::read_to_string(&csv).expect("the scan");
    assert!(!text.contains("inf") && !text.contains("NaN"), "{text}");
    assert!(err.contains("1 of 3 points failed"), "{err}");
    for flag in ["--atol", "--rtol"] {
        let out = ratewright(&["run", &m, flag, "inf"]);
        assert_eq!(out.status.code(), Some(2), "{flag} inf accepted");
    }
}

/// Small mechanisms on which `derive` ran for seconds to minutes when
/// fuzzed (fuzz/regressions/derive_small_hangs/). Each must finish (with a
/// rate or a diagnostic) within 60 s: a hang guard, not a speed target
/// (release build: all 13 under 0.9 s, docs/reliability.md).
#[test]
fn derive_finishes_on_the_fuzzed_slow_mechanisms() {
    let dir = root().join("fuzz/regressions/derive_small_hangs");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("the directory")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    files.sort();
    for path in files {
        let text = std::fs::read_to_string(&path).expect("UTF-8");
        let mut args = vec![
            "derive".to_string(),
            path.to_str().expect("UTF-8").to_string(),
        ];
        if let Some(t) = text
            .lines()
            .next()
            .and_then(|l| l.split("derive target: ").nth(1))
            .map(|t| t.trim_end_matches(')'))
        {
            if let Some(s) = t.strip_prefix("species ") {
                args.extend(["--species".to_string(), s.to_string()]);
            } else if let Some(s) = t.strip_prefix("flux ") {
                args.extend(["--flux".to_string(), s.to_string()]);
            }
        }
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let out = ratewright_within(&args, Duration::from_secs(60));
        assert!(
            out.is_some(),
            "{}: derive still running after 60 s",
            path.display()
        );
    }
}

// ------------------------------------------- findings of the 2026-12-02 audit

const LONG_NAME_CHARS: usize = 100_000;

/// Human tables padded names with `{:width$}`, which panics past a width of
/// 65,535 ("Formatting argument out of range"). A 100,000-character name
/// must print in `run`'s table, `steady`, `analyze` and `derive`.
#[test]
fn names_of_100000_characters_print_in_every_human_table() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let a = "A".repeat(LONG_NAME_CHARS);
    let decay = model_file(
        dir.path(),
        "longname.mech",
        &format!("species {a} = 1 uM\nspecies B\nparam k = 1 /s\nstep r {a} -> B with k\n"),
    );
    let s = format!("S{}", "X".repeat(LONG_NAME_CHARS));
    let c = format!("C{}", "X".repeat(LONG_NAME_CHARS));
    let michaelis_menten = model_file(
        dir.path(),
        "mm_long.mech",
        &format!(
            "species {s} = 100 uM\nspecies P\nspecies E = 0.1 uM\nspecies {c}\n\
             param k1 = 10 /uM/s\nparam km1 = 50 /s\nparam k2 = 20 /s\n\
             step bind E + {s} <=> {c} with k1, km1\nstep cat {c} -> E + P with k2\n\
             total E_t = E + {c}\nassume steady E, {c}\n"
        ),
    );
    let commands: [(&[&str], &str); 4] = [
        (&["run", &decay, "--times", "0,1"], "(concentrations in uM)"),
        (&["steady", &decay], "stable"),
        (&["analyze", &decay], "never consumed"),
        (&["derive", &michaelis_menten], "kinetic constants"),
    ];
    for (args, last_part) in commands {
        let out = ratewright(args);
        let stdout = String::from_utf8_lossy(&out.stdout);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(0), "{}: {stderr}", args[0]);
        assert!(
            !stderr.contains("internal failure"),
            "{}: {stderr}",
            args[0]
        );
        assert!(stdout.contains(last_part), "{}: output cut short", args[0]);
        let long = if args[0] == "derive" { &s } else { &a };
        assert!(
            stdout.contains(long.as_str()),
            "{}: the name is missing",
            args[0]
        );
    }
}

/// Spawns the binary with standard error (or output) closed from the
/// start: the reading end is dropped before the command writes anything.
fn with_closed_stream(args: &[&str], close_stderr: bool) -> std::process::Output {
    let mut command = Command::new(common::bin());
    command.args(args).current_dir(root());
    if close_stderr {
        command.stdout(Stdio::null()).stderr(Stdio::piped());
    } else {
        command.stdout(Stdio::piped()).stderr(Stdio::piped());
    }
    let mut child = command.spawn().expect("the binary runs");
    if close_stderr {
        drop(child.stderr.take());
    } else {
        drop(child.stdout.take());
    }
    child.wait_with_output().expect("the binary ends")
}

/// `check` of many bad files into a closed pipe (`2>&1 | head -1`) panicked
/// in `eprintln!` and exited 101. A closed stderr is ignored; a closed
/// stdout ends the command with exit 1 and a message, never a panic.
#[test]
fn closed_standard_error_and_output_do_not_crash() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let binary = write_temp(dir.path(), "binary.mech", &[0x93, 0x61, 0x52, 0xf9, 0xf6]);
    let b = binary.to_str().expect("UTF-8");
    let mut args = vec!["check"];
    args.extend(std::iter::repeat_n(b, 80));
    let out = with_closed_stream(&args, true);
    assert_eq!(out.status.code(), Some(1), "check with stderr closed");

    let good = "models/protease_assay.mech";
    for args in [
        vec!["check", "--format", "json", good],
        vec!["steady", good],
        vec!["run", good],
        vec!["analyze", good],
        vec!["derive", good],
        vec!["emit", good, "--target", "python"],
        vec!["diff", good, good],
    ] {
        let out = with_closed_stream(&args, false);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(
            !stderr.contains("panicked") && !stderr.contains("internal failure"),
            "{args:?}: {stderr}"
        );
        assert_eq!(out.status.code(), Some(1), "{args:?}: {stderr}");
        assert!(
            stderr.contains("cannot write to standard output"),
            "{args:?}: {stderr}"
        );
    }
}

/// A `use` that cannot be read is E0102 ("file cannot be read") at the
/// `use` line, a model error (exit 1); the same failure for the file named
/// on the command line is a usage error (exit 2) whose JSON names the file.
#[test]
fn unreadable_files_are_e0102_with_exit_2_as_arguments_and_1_through_use() {
    let dir = tempfile::tempdir().expect("a temp dir");
    std::fs::create_dir(dir.path().join("sub")).expect("mkdir");
    for (name, used) in [
        ("missing.mech", "no_such_file.mech"),
        ("directory.mech", "sub"),
        ("empty_path.mech", ""),
    ] {
        let m = model_file(
            dir.path(),
            name,
            &format!("species A = 1 uM\nuse \"{used}\"\n"),
        );
        let out = ratewright(&["check", "--format", "json", &m]);
        assert_eq!(out.status.code(), Some(1), "{name}");
        let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
        let d = &report["diagnostics"][0];
        assert_eq!(d["code"], "E0102", "{name}: {report:#}");
        assert_eq!(d["line"], 2, "{name}: located at the `use` line");
        assert_eq!(d["file"], m.as_str(), "{name}");
    }
    let missing = dir.path().join("absent.mech");
    let missing = missing.to_str().expect("UTF-8");
    let sub = dir.path().join("sub");
    for argument in [missing, sub.to_str().expect("UTF-8")] {
        let out = ratewright(&["check", "--format", "json", argument]);
        assert_eq!(out.status.code(), Some(2), "{argument}");
        let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
        let d = &report["diagnostics"][0];
        assert_eq!(d["code"], "E0102");
        assert_eq!(d["file"], argument, "the unreadable file is named");
    }
}

/// `fmt` through a symlink rewrites the target and keeps the link; a hard
/// link is split by the atomic rename, and `fmt` says so (the decision is
/// recorded in docs/reliability.md).
#[test]
fn fmt_rewrites_a_symlinks_target_and_reports_split_hard_links() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let messy = "species   A=1 uM\nspecies B\nparam k=1 /s\nstep r A->B with k\n";
    let target = write_temp(dir.path(), "model.mech", messy.as_bytes());
    let link = dir.path().join("link.mech");
    std::os::unix::fs::symlink(&target, &link).expect("symlink");
    let out = ratewright(&["fmt", link.to_str().expect("UTF-8")]);
    assert_eq!(out.status.code(), Some(0));
    assert!(
        std::fs::symlink_metadata(&link)
            .expect("the link")
            .file_type()
            .is_symlink(),
        "the link was replaced by a file"
    );
    let formatted = std::fs::read_to_string(&target).expect("the target");
    assert_ne!(formatted, messy, "the target was not formatted");
    let check = ratewright(&["fmt", "--check", target.to_str().expect("UTF-8")]);
    assert_eq!(check.status.code(), Some(0));

    let original = write_temp(dir.path(), "hard.mech", messy.as_bytes());
    let other_name = dir.path().join("hard_other.mech");
    std::fs::hard_link(&original, &other_name).expect("hard link");
    let out = ratewright(&["fmt", original.to_str().expect("UTF-8")]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{stderr}");
    assert!(stderr.contains("other hard links"), "{stderr}");
    assert_eq!(std::fs::read_to_string(&other_name).expect("other"), messy);
    assert_eq!(std::fs::read_to_string(&original).expect("file"), formatted);
    assert!(temp_files_in(dir.path()).is_empty());
}

/// Follow-on diagnostics: a species whose own value failed gets no W0105
/// ("starts at 0"); `NaN /s` is one error, not also "unknown name `s`".
#[test]
fn a_failed_value_causes_no_follow_on_diagnostics() {
    for (text, code) in [
        (
            "species A = 1e400 uM\nspecies B\nparam k = 1 /s\nstep r A -> B with k\n",
            Code::BadNumber,
        ),
        (
            "species A = 1 /s\nspecies B\nparam k = 1 /s\nstep r A -> B with k\n",
            Code::DimensionMismatch,
        ),
        (
            "species A = 1 uM\nspecies B\nparam k = NaN /s\nstep r A -> B with k\n",
            Code::BadNumber,
        ),
        (
            "species A = 1 uM\nspecies B\nparam k = fast /s\nstep r A -> B with k\n",
            Code::UnknownName,
        ),
    ] {
        let loaded = load(text);
        assert_eq!(codes(&loaded), vec![code], "{text}");
    }
}

/// `--every 1e-300` counted its rows in a saturating cast and reported
/// 18446744073709551615 of them.
#[test]
fn an_every_interval_with_too_many_rows_says_so_readably() {
    for every in ["1e-300", "1e-9"] {
        let out = ratewright(&["run", "models/protease_assay.mech", "--every", every]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{stderr}");
        assert!(!stderr.contains("18446744073709551615"), "{stderr}");
        assert!(stderr.contains("at most 10,000,000"), "{stderr}");
    }
}

// Issue 23, findings 2, 5, 7, 8, 9, 11, 12 (fmt), 14: outputs.

fn run_in(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_ratewright"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the ratewright binary runs")
}

fn model_copy(dir: &Path) -> PathBuf {
    let m = dir.join("m.mech");
    std::fs::copy(root().join("models/protease_assay.mech"), &m).unwrap();
    m
}

#[cfg(unix)]
fn file_kind(p: &Path) -> &'static str {
    use std::os::unix::fs::FileTypeExt;
    let t = std::fs::symlink_metadata(p).unwrap().file_type();
    if t.is_symlink() {
        "symlink"
    } else if t.is_char_device() {
        "char"
    } else if t.is_fifo() {
        "fifo"
    } else if t.is_file() {
        "file"
    } else {
        "other"
    }
}

/// `-o /dev/null`, a FIFO, a character device and a symlink to
/// `/proc/self/fd/1` were replaced by regular files (finding 2). They are
/// written directly and stay what they were.
#[cfg(unix)]
#[test]
fn special_output_files_are_written_not_replaced() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    model_copy(d);
    for args in [
        vec!["emit", "m.mech", "--target", "python", "-o", "/dev/null"],
        vec!["derive", "m.mech", "-o", "/dev/null"],
    ] {
        let out = run_in(d, &args);
        assert_eq!(out.status.code(), Some(0), "{args:?}");
        assert_eq!(file_kind(Path::new("/dev/null")), "char");
    }
    // A FIFO with a reader gets the text and stays a FIFO.
    let fifo = d.join("pipe");
    assert!(
        Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .unwrap()
            .success()
    );
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || std::fs::read_to_string(fifo).unwrap())
    };
    let out = run_in(d, &["derive", "m.mech", "-o", "pipe"]);
    assert_eq!(out.status.code(), Some(0));
    let received = reader.join().unwrap();
    assert!(received.contains("v ="), "{received}");
    assert_eq!(file_kind(&fifo), "fifo");
    // A symlink to the process's standard output: the text arrives on
    // standard output, the link stays a link.
    std::os::unix::fs::symlink("/proc/self/fd/1", d.join("out1")).unwrap();
    let out = run_in(d, &["emit", "m.mech", "--target", "dot", "-o", "out1"]);
    assert_eq!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stdout).contains("digraph"));
    assert_eq!(file_kind(&d.join("out1")), "symlink");
    // `-o -` is standard output.
    let out = run_in(d, &["emit", "m.mech", "--target", "dot", "-o", "-"]);
    assert!(String::from_utf8_lossy(&out.stdout).contains("digraph"));
    // A character device made with mknod, where the test may (as root).
    let chr = d.join("chr");
    let made = Command::new("mknod")
        .arg(&chr)
        .args(["c", "1", "3"])
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success());
    if made {
        let out = run_in(d, &["emit", "m.mech", "--target", "dot", "-o", "chr"]);
        assert_eq!(out.status.code(), Some(0));
        assert_eq!(file_kind(&chr), "char");
        let out = run_in(d, &["fmt", "chr"]);
        assert_eq!(out.status.code(), Some(2));
        assert_eq!(file_kind(&chr), "char");
    }
}

/// `fmt` on a FIFO blocked forever (finding 5); on a device it would
/// replace the node. Both are refused before they are opened.
#[cfg(unix)]
#[test]
fn fmt_refuses_anything_but_a_regular_file_without_blocking() {
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("m.mech");
    assert!(
        Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .unwrap()
            .success()
    );
    for check in [false, true] {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_ratewright"));
        cmd.arg("fmt");
        if check {
            cmd.arg("--check");
        }
        let mut child = cmd.arg(&fifo).stderr(Stdio::piped()).spawn().unwrap();
        let deadline = Instant::now() + Duration::from_secs(20);
        let status = loop {
            if let Some(s) = child.try_wait().unwrap() {
                break s;
            }
            if Instant::now() > deadline {
                child.kill().unwrap();
                panic!("fmt blocked on a FIFO");
            }
            std::thread::sleep(Duration::from_millis(20));
        };
        assert_eq!(status.code(), Some(2));
        assert_eq!(file_kind(&fifo), "fifo");
    }
}

/// `fmt` replaced a read-only file (finding 14); it now refuses and keeps
/// the file, its text and its mode.
#[cfg(unix)]
#[test]
fn fmt_refuses_a_read_only_file_and_keeps_it() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    let m = dir.path().join("m.mech");
    let text = "species   A = 1 uM\n";
    std::fs::write(&m, text).unwrap();
    std::fs::set_permissions(&m, std::fs::Permissions::from_mode(0o444)).unwrap();
    let out = run_in(dir.path(), &["fmt", "m.mech"]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("read-only"));
    assert_eq!(std::fs::read_to_string(&m).unwrap(), text);
    let mode = std::fs::metadata(&m).unwrap().permissions().mode() & 0o777;
    assert_eq!(mode, 0o444);
}

/// `fmt` on Latin-1 said "not UTF-8" with no code or position (finding 12).
#[test]
fn fmt_locates_the_first_byte_that_is_not_utf8() {
    let out = ratewright(&["fmt", "--check", "tests/bad_inputs/encoding_latin1.mech"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1));
    assert!(stderr.contains("E0103"), "{stderr}");
    assert!(stderr.contains("encoding_latin1.mech:2:16"), "{stderr}");
}

/// Output paths are checked before any work, with exit 2 (finding 7), and
/// a failed command leaves every old output as it was (finding 8).
#[test]
fn outputs_are_checked_first_and_committed_together() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    model_copy(d);
    let scan = [
        "scan",
        "m.mech",
        "--vary",
        "k_on=1..2:2",
        "--measure",
        "P",
        "--at",
        "1",
    ];
    for extra in [["-o", "nodir/s.csv"], ["--plot", "nodir/x.svg"]] {
        let args: Vec<&str> = scan.iter().copied().chain(extra).collect();
        let out = run_in(d, &args);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{extra:?}: {stderr}");
        assert!(stderr.contains("does not exist"), "{stderr}");
    }
    // A table that cannot be written: the figure beside it is not replaced.
    std::fs::create_dir(d.join("c.csv")).unwrap();
    std::fs::write(d.join("fig.svg"), "old figure").unwrap();
    let out = run_in(d, &["run", "m.mech", "-o", "c.csv", "--plot", "fig.svg"]);
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(
        std::fs::read_to_string(d.join("fig.svg")).unwrap(),
        "old figure"
    );
    // One file of a pair cannot be written: neither is.
    std::fs::create_dir(d.join("q.c")).unwrap();
    let out = run_in(d, &["emit", "m.mech", "--target", "c", "-o", "q"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(!d.join("q.h").exists());
}

/// `scan -o same.svg --plot same.svg` wrote the table over the figure, and
/// `-o p.png` wrote CSV text under a PNG name (finding 9).
#[test]
fn scan_tables_must_be_named_csv() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    model_copy(d);
    let scan = [
        "scan",
        "m.mech",
        "--vary",
        "k_on=1..2:2",
        "--measure",
        "P",
        "--at",
        "1",
    ];
    for extra in [
        vec!["-o", "same.svg", "--plot", "same.svg"],
        vec!["-o", "p.png"],
        vec!["-o", "x.json"],
    ] {
        let args: Vec<&str> = scan.iter().copied().chain(extra.iter().copied()).collect();
        let out = run_in(d, &args);
        assert_eq!(out.status.code(), Some(2), "{extra:?}");
        for f in ["same.svg", "p.png", "x.json"] {
            assert!(!d.join(f).exists(), "{f} written for {extra:?}");
        }
    }
}

/// Usage errors under `--format json` printed nothing on standard output
/// (finding 11); they are the JSON report too.
#[test]
fn json_usage_errors_are_json_documents() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    model_copy(d);
    for args in [
        vec!["steady", "--format", "json", "--set", "nope=1", "m.mech"],
        vec!["steady", "--format", "json", "--set", "k_cat=-1", "m.mech"],
        vec!["derive", "--format", "json", "-o", "m.mech", "m.mech"],
    ] {
        let out = run_in(d, &args);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        let doc: serde_json::Value = serde_json::from_slice(&out.stdout)
            .unwrap_or_else(|e| panic!("{args:?}: not JSON ({e})"));
        assert_eq!(doc["ok"], false);
        assert_eq!(doc["diagnostics"][0]["code"], "E0801", "{args:?}");
    }
}

/// Standard output closed before the start (`>&-`, issue 23): every write
/// used to vanish with exit 0; now the command ends at once with exit 1 and
/// a message. `> /dev/null` stays a success.
#[test]
fn a_standard_output_closed_before_the_start_is_exit_1() {
    let bin = common::bin();
    for command in [
        "check models/protease_assay.mech",
        "derive models/protease_assay.mech",
    ] {
        let out = Command::new("sh")
            .arg("-c")
            .arg(format!("exec \"$0\" {command} >&-"))
            .arg(&bin)
            .current_dir(root())
            .output()
            .expect("sh runs");
        assert_eq!(out.status.code(), Some(1), "{command}");
        assert!(String::from_utf8_lossy(&out.stderr).contains("cannot write to standard output"));
        let out = Command::new("sh")
            .arg("-c")
            .arg(format!("exec \"$0\" {command} > /dev/null"))
            .arg(&bin)
            .current_dir(root())
            .output()
            .expect("sh runs");
        assert_eq!(out.status.code(), Some(0), "{command} > /dev/null");
    }
}

/// Names equal under Unicode normalisation (issue 23): `Å` written as one
/// code point (NFC) and as `A` with a combining ring (NFD) were two
/// species with no word; now a located warning (W0108) at both, which
/// `--deny-warnings` turns into exit 1 (Unicode Standard Annex #15).
#[test]
fn names_equal_under_normalisation_are_a_warning() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let text =
        "species \u{c5} = 1 uM, A\u{30a}\nparam k = 1 /s\nstep s \u{c5} -> A\u{30a} with k\n";
    let path = write_temp(dir.path(), "nfc.mech", text.as_bytes());
    let p = path.to_str().expect("UTF-8");
    let out = common::ratewright(&["check", "--format", "json", p]);
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    let diag = json["diagnostics"]
        .as_array()
        .unwrap()
        .iter()
        .find(|d| d["code"] == "W0108")
        .unwrap_or_else(|| panic!("no W0108: {json}"));
    assert_eq!(diag["labels"].as_array().unwrap().len(), 2, "{diag}");
    assert_eq!(
        common::ratewright(&["check", "--deny-warnings", p])
            .status
            .code(),
        Some(1)
    );
    // Plain ASCII and a name written the same way twice are no warning.
    let same = write_temp(
        dir.path(),
        "same.mech",
        "species \u{c5} = 1 uM, B\nparam k = 1 /s\nstep s \u{c5} -> B with k\n".as_bytes(),
    );
    assert!(
        common::ratewright(&["check", "--deny-warnings", same.to_str().unwrap()])
            .status
            .success()
    );
}

/// docs/reliability.md finding 3: a param that is a product of 2 million
/// factors (and a sum, a power tower, a chain of differences of as many
/// operators) is refused with a located E0106 by every command that reads
/// it, instead of overflowing the stack in a later pass; just under the
/// bound, the product is checked (and its tree, as deep as the chain, is
/// walked and dropped) without a crash.
#[test]
fn statements_with_millions_of_operators_are_refused_not_a_crash() {
    let dir = tempfile::tempdir().expect("a temp dir");
    let model = |ops: usize, op: &str| {
        let chain = vec!["1"; ops + 1].join(op);
        format!(
            "param k0 = 1 /s\nparam k = k0 * ({chain})\nspecies A = 1 uM\nstep decay A -> 0 with k\n"
        )
    };
    for (name, op) in [
        ("product", " * "),
        ("sum", " + "),
        ("tower", "^"),
        ("differences", "-"),
    ] {
        let path = write_temp(
            dir.path(),
            &format!("{name}.mech"),
            model(2_000_000, op).as_bytes(),
        );
        let p = path.to_str().expect("UTF-8");
        for args in [
            vec!["check", p],
            vec!["run", "--until", "1", p],
            vec!["fmt", "--check", p],
        ] {
            let out = common::ratewright(&args);
            let stderr = String::from_utf8_lossy(&out.stderr);
            assert_eq!(out.status.code(), Some(1), "{name} {args:?}: {stderr}");
            assert!(
                stderr.contains("E0106") && stderr.contains(":2:1"),
                "{name} {args:?}: {stderr}"
            );
        }
    }
    // 1 (k0 *) + 999,998 operators: within the bound.
    let path = write_temp(dir.path(), "under.mech", model(999_998, " * ").as_bytes());
    let out = common::ratewright(&["check", path.to_str().unwrap()]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}
