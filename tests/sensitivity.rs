//! `ratewright sensitivity` (issue 16) against outside references: the
//! closed forms of A → B and A ⇌ B (first-order kinetics, common
//! practice), central finite differences of `run` on every model in
//! models/, and finite differences of `run` across each kind of event
//! (addition, withdrawal, `set`, addition of a stock, withdrawal of
//! volume, repeated and state-triggered events), full and reduced.

mod common;

use common::{models, ratewright};
use ratewright::model::{Model, ParamDef, load_path};
use std::path::{Path, PathBuf};

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn json(args: &[&str]) -> serde_json::Value {
    let o = ratewright(args);
    assert!(
        o.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_slice(&o.stdout).unwrap()
}

/// ∂output/∂parameter at each time from `sensitivity --format json`.
fn series(doc: &serde_json::Value, output: &str, parameter: &str) -> Vec<f64> {
    doc["sensitivities"][output][parameter]
        .as_array()
        .unwrap_or_else(|| panic!("no sensitivity of {output} to {parameter}"))
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect()
}

/// `run` at `times`: (header, rows).
fn run(model: &Path, times: &str, extra: &[&str]) -> (Vec<String>, Vec<Vec<f64>>) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out.csv");
    let mut args = vec![
        "run",
        model.to_str().unwrap(),
        "--times",
        times,
        "--rtol",
        "1e-12",
        "--atol",
        "1e-16",
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = ratewright(&args);
    assert!(
        o.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let text = std::fs::read_to_string(out).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(|c| c.parse::<f64>().unwrap()).collect())
        .collect();
    (header, rows)
}

fn sensitivity(model: &Path, times: &str, to: &str, extra: &[&str]) -> serde_json::Value {
    let mut args = vec![
        "sensitivity",
        model.to_str().unwrap(),
        "--times",
        times,
        "--to",
        to,
        "--rtol",
        "1e-12",
        "--atol",
        "1e-16",
        "--format",
        "json",
    ];
    args.extend_from_slice(extra);
    json(&args)
}

/// A central difference of `run` in one `--set NAME=VALUE`, extrapolated
/// (Richardson, from steps h and 2h) so its truncation error is O(h⁴):
/// `[column][time]` over every column of the run.
fn finite_difference(
    model: &Path,
    times: &str,
    name: &str,
    value: f64,
    extra: &[&str],
) -> (Vec<String>, Vec<Vec<f64>>) {
    let h = 1e-3 * value.abs();
    let at = |v: f64| {
        let set = format!("{name}={v:e}");
        let mut args: Vec<&str> = vec!["--set", &set];
        args.extend_from_slice(extra);
        run(model, times, &args)
    };
    let (header, plus1) = at(value + h);
    let (_, minus1) = at(value - h);
    let (_, plus2) = at(value + 2.0 * h);
    let (_, minus2) = at(value - 2.0 * h);
    let columns = header.len();
    let fd = (0..columns)
        .map(|c| {
            (0..plus1.len())
                .map(|t| {
                    let d1 = (plus1[t][c] - minus1[t][c]) / (2.0 * h);
                    let d2 = (plus2[t][c] - minus2[t][c]) / (4.0 * h);
                    (4.0 * d1 - d2) / 3.0
                })
                .collect()
        })
        .collect();
    (header, fd)
}

/// Checks every output's sensitivity to `parameter` (value `p`) against
/// the finite differences: relative 1e-5 where the normalised size
/// |∂y/∂p|·|p|/max|y| is at least 1e-3, else absolute 1e-8 in that
/// normalised measure (the "tiny" sensitivities, where a difference of
/// two runs is noise of their tolerance).
fn compare(
    what: &str,
    doc: &serde_json::Value,
    parameter: &str,
    p: f64,
    fd_header: &[String],
    fd: &[Vec<f64>],
    trajectory: &[Vec<f64>],
) {
    let mut checked = 0;
    for (c, name) in fd_header.iter().enumerate() {
        if name == "t" || name == "volume" || doc["sensitivities"].get(name).is_none() {
            continue;
        }
        let s = series(doc, name, parameter);
        let scale = trajectory
            .iter()
            .map(|r| r[c].abs())
            .fold(0.0f64, f64::max)
            .max(1e-300);
        for (t, (&got, &want)) in s.iter().zip(&fd[c]).enumerate() {
            let normalised = want.abs() * p.abs() / scale;
            let ok = if normalised >= 1e-3 {
                (got - want).abs() <= 1e-5 * want.abs()
            } else {
                (got - want).abs() * p.abs() / scale <= 1e-8
            };
            assert!(
                ok,
                "{what}: d({name})/d({parameter}) at time #{t}: {got} vs finite difference {want} (normalised size {normalised:.3e})"
            );
            checked += 1;
        }
    }
    assert!(checked > 0, "{what}: nothing compared");
}

/// The params with a value, and the first species with a non-zero start.
fn parameters_of(model: &Model) -> Vec<(String, String, f64)> {
    let mut out: Vec<(String, String, f64)> = model
        .params
        .iter()
        .filter(|p| matches!(p.definition, ParamDef::Value(_)) && p.value != 0.0)
        .map(|p| (p.name.clone(), p.name.clone(), p.value))
        .collect();
    if let Some(s) = model.species.iter().find(|s| s.initial > 0.0) {
        out.push((format!("{}(0)", s.name), s.name.clone(), s.initial));
    }
    out
}

/// Sensitivities of `model` to each of its params and one initial value,
/// against finite differences of `run` at `times`.
fn check_against_finite_differences(model_path: &Path, times: &str, extra: &[&str]) {
    let model = load_path(model_path).model.expect("the model loads");
    let parameters = parameters_of(&model);
    let to: Vec<&str> = parameters.iter().map(|(l, _, _)| l.as_str()).collect();
    let doc = sensitivity(model_path, times, &to.join(","), extra);
    let (_, trajectory) = run(model_path, times, extra);
    for (label, set_name, value) in &parameters {
        let (header, fd) = finite_difference(model_path, times, set_name, *value, extra);
        compare(
            &format!("{} {extra:?}", model_path.display()),
            &doc,
            label,
            *value,
            &header,
            &fd,
            &trajectory,
        );
    }
}

#[test]
fn first_order_decay_matches_its_closed_form() {
    // A → B: A = A0·e^{−kt}, ∂A/∂k = −t·A0·e^{−kt}, ∂A/∂A0 = e^{−kt},
    // B = A0 − A (first-order kinetics, common practice).
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "decay.mech",
        "species A = 2 uM, B = 0\nparam k = 0.3 /s\nstep go A -> B with k\n",
    );
    let times: [f64; 5] = [0.5, 1.0, 2.0, 5.0, 10.0];
    let list = times.map(|t| t.to_string()).join(",");
    for method in ["bdf", "esdirk"] {
        let doc = sensitivity(&model, &list, "k,A(0)", &["--method", method]);
        let (a_k, a_0, b_k) = (
            series(&doc, "A", "k"),
            series(&doc, "A", "A(0)"),
            series(&doc, "B", "k"),
        );
        for (i, &t) in times.iter().enumerate() {
            let e = (-0.3 * t).exp();
            let want = -t * 2.0 * e;
            assert!(
                (a_k[i] - want).abs() <= 1e-8 * want.abs(),
                "{method} t={t}: {} vs {want}",
                a_k[i]
            );
            assert!(
                (a_0[i] - e).abs() <= 1e-8 * e,
                "{method} t={t}: {} vs {e}",
                a_0[i]
            );
            assert!((b_k[i] + want).abs() <= 1e-8 * want.abs());
        }
    }
}

#[test]
fn reversible_isomerisation_matches_its_closed_form() {
    // A ⇌ B from A0, B0 = 0: A = A0·(k2 + k1·e^{−(k1+k2)t})/(k1 + k2)
    // (first-order relaxation, common practice); its derivatives in k1, k2
    // by the quotient rule.
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "iso.mech",
        "species A = 5 uM, B = 0\nparam k1 = 0.4 /s\nparam k2 = 0.1 /s\nstep flip A <=> B with k1, k2\n",
    );
    let (a0, k1, k2) = (5.0f64, 0.4f64, 0.1f64);
    let times = [0.3, 1.0, 3.0, 8.0, 20.0];
    let list = times.map(|t| t.to_string()).join(",");
    let doc = sensitivity(&model, &list, "k1,k2,A(0)", &[]);
    let (d1, d2, d0) = (
        series(&doc, "A", "k1"),
        series(&doc, "A", "k2"),
        series(&doc, "A", "A(0)"),
    );
    for (i, &t) in times.iter().enumerate() {
        let s = k1 + k2;
        let e = (-s * t).exp();
        let num = k2 + k1 * e;
        let want1 = a0 * ((e - k1 * t * e) * s - num) / (s * s);
        let want2 = a0 * ((1.0 - k1 * t * e) * s - num) / (s * s);
        let want0 = num / s;
        for (got, want, what) in [
            (d1[i], want1, "k1"),
            (d2[i], want2, "k2"),
            (d0[i], want0, "A(0)"),
        ] {
            assert!(
                (got - want).abs() <= 1e-8 * want.abs().max(1e-3),
                "dA/d{what} at t={t}: {got} vs {want}"
            );
        }
    }
}

#[test]
fn every_model_matches_finite_differences_of_run() {
    for path in models() {
        let model = load_path(&path).model.expect("demo models load");
        let prepared = ratewright::sim::Prepared::full(&model).unwrap();
        let until = ratewright::sim::default_until(&prepared.model, &prepared.system);
        // Away from event times, where a finite difference straddles a jump.
        let times: Vec<String> = [0.07, 0.23, 0.41, 0.77, 0.97]
            .iter()
            .map(|f| format!("{:e}", f * until))
            .collect();
        check_against_finite_differences(&path, &times.join(","), &[]);
    }
}

#[test]
fn sensitivities_through_each_kind_of_event_match_finite_differences() {
    let dir = tempfile::tempdir().unwrap();
    let base = "mechanism events \"Michaelis-Menten turnover with a protocol\"
volume 200 uL
species S = 50 uM, P = 0, E = 0.2 uM, ES = 0
param k_on = 1.5 /uM/s
param k_off = 20 /s
param k_cat = 8 /s
param K_half = 10 uM
step bind E + S <=> ES with k_on, k_off
step turn ES -> E + P with k_cat
";
    let protocols = [
        ("addition", "add 20 uM S at 5 s\n"),
        ("withdrawal", "remove 10 uM S at 5 s\n"),
        ("set", "set P = 1 uM at 5 s\n"),
        ("stock", "add 20 uL of 1 mM S at 5 s\n"),
        ("volume withdrawal", "remove 50 uL at 5 s\n"),
        (
            "repeated",
            "every 3 s from 2 s to 9 s: add 5 uL of 0.5 mM S\n",
        ),
        // Fires where P passes the param K_half: the event time moves with
        // every param, and with the threshold itself.
        ("triggered", "when P > K_half: add 10 uL of 2 mM S\n"),
    ];
    for (kind, protocol) in protocols {
        let model = write(
            dir.path(),
            &format!("{}.mech", kind.replace(' ', "_")),
            &format!("{base}{protocol}"),
        );
        check_against_finite_differences(&model, "1,4,6,9,14", &[]);
    }
}

#[test]
fn reduced_system_sensitivities_match_finite_differences_including_to_totals() {
    // In the reduced system E = E_t − ES follows its total; a sensitivity
    // to E_t perturbs the enzyme's total, which `run --set E_t=...` does.
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "reduced.mech",
        "mechanism reduced \"turnover with a written total and a stock addition\"
volume 200 uL
species S = 50 uM, P = 0, E = 0.2 uM, ES = 0
param k_on = 1.5 /uM/s
param k_off = 20 /s
param k_cat = 8 /s
step bind E + S <=> ES with k_on, k_off
step turn ES -> E + P with k_cat
total E_t = E + ES
add 20 uL of 1 mM S at 5 s
",
    );
    let times = "1,4,6,9,14";
    let doc = sensitivity(&model, times, "k_cat,E_t", &["--reduced"]);
    let (_, trajectory) = run(&model, times, &["--reduced"]);
    for (name, value) in [("k_cat", 8.0), ("E_t", 0.2)] {
        let (header, fd) = finite_difference(&model, times, name, value, &["--reduced"]);
        compare("reduced", &doc, name, value, &header, &fd, &trajectory);
    }
    // Full and reduced sensitivities to a param agree.
    let full = sensitivity(&model, times, "k_cat", &[]);
    for species in ["S", "P", "E", "ES"] {
        let (a, b) = (
            series(&full, species, "k_cat"),
            series(&doc, species, "k_cat"),
        );
        for (x, y) in a.iter().zip(&b) {
            assert!(
                (x - y).abs() <= 1e-6 * y.abs().max(1e-6),
                "{species}: {x} vs {y}"
            );
        }
    }
    // A total is a parameter of the reduced system only.
    let o = ratewright(&["sensitivity", model.to_str().unwrap(), "--to", "E_t"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--reduced"));
}

#[test]
fn a_network_above_the_sparse_threshold_matches_its_closed_form() {
    // 80 species in a chain X0 → X1 → … with one rate constant k, from
    // X0 = 1: X0 = e^{−kt}, X1 = k·t·e^{−kt} (consecutive first-order
    // steps of equal rate, common practice), so ∂X0/∂k = −t·e^{−kt} and
    // ∂X1/∂k = t·e^{−kt}·(1 − k·t). Above 60 states the sparse LU solves
    // the sensitivities, one column per parameter.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("species X0 = 1 uM\nparam k = 0.5 /s\nparam unused = 2 /s\n");
    for i in 1..80 {
        text.push_str(&format!("species X{i} = 0\n"));
    }
    for i in 0..79 {
        text.push_str(&format!("step s{i} X{i} -> X{} with k\n", i + 1));
    }
    let model = write(dir.path(), "chain.mech", &text);
    let times: [f64; 4] = [0.5, 1.0, 3.0, 6.0];
    let list = times.map(|t| t.to_string()).join(",");
    let doc = sensitivity(&model, &list, "k,unused,X0(0)", &[]);
    let (x0, x1, none) = (
        series(&doc, "X0", "k"),
        series(&doc, "X1", "k"),
        series(&doc, "X1", "unused"),
    );
    let initial = series(&doc, "X1", "X0(0)");
    for (i, &t) in times.iter().enumerate() {
        let e = (-0.5 * t).exp();
        assert!(
            (x0[i] + t * e).abs() <= 1e-8 * t * e,
            "t={t}: {} vs {}",
            x0[i],
            -t * e
        );
        let want = t * e * (1.0 - 0.5 * t);
        assert!(
            (x1[i] - want).abs() <= 1e-8 * (t * e),
            "t={t}: {} vs {want}",
            x1[i]
        );
        assert_eq!(none[i], 0.0);
        assert!((initial[i] - 0.5 * t * e).abs() <= 1e-8 * 0.5 * t * e);
    }
}

#[test]
fn plots_are_lines_for_a_few_pairs_and_a_heat_map_for_many() {
    let dir = tempfile::tempdir().unwrap();
    let model = common::root().join("models/protease_assay.mech");
    let m = model.to_str().unwrap();
    let lines = dir.path().join("lines.svg");
    let heat = dir.path().join("heat.svg");
    for (extra, path) in [
        (vec!["--of", "P", "--to", "k_cat,k_on"], &lines),
        (vec![], &heat),
    ] {
        let mut args = vec!["sensitivity", m, "--plot", path.to_str().unwrap()];
        args.extend(extra);
        let o = ratewright(&args);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let lines = std::fs::read_to_string(lines).unwrap();
    let heat = std::fs::read_to_string(heat).unwrap();
    // Lines carry a legend of ∂P/∂k_cat; the heat map names its rows
    // ∂ln y/∂ln p and has a colour bar of many cells.
    assert!(lines.contains("∂P/∂k_cat"), "legend of the line plot");
    assert!(heat.contains("∂ln S/∂ln k_off") && heat.contains("∂ln y/∂ln p"));
    assert!(heat.matches("<rect").count() > lines.matches("<rect").count() + 100);
}
