//! The language of real assays (issue 15), end to end through the CLI:
//! dilution by additions against its closed form and against libSBML +
//! SciPy, totals through additions (full and reduced runs), repeated
//! events against the same events written out, state-triggered events
//! against the closed-form crossing and SciPy's event location, lab units
//! against their definitions, Arrhenius and Eyring values against hand
//! calculations with CODATA 2018 constants, and located errors.

mod common;

use common::{ensure_python, python, ratewright, root};
use std::path::{Path, PathBuf};

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// Runs `run` and returns the CSV (header, rows).
fn run_csv(model: &Path, extra: &[&str]) -> (Vec<String>, Vec<Vec<f64>>) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out.csv");
    let mut args = vec!["run", model.to_str().unwrap(), "-o", out.to_str().unwrap()];
    args.extend_from_slice(extra);
    let o = ratewright(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    parse_csv(&std::fs::read_to_string(out).unwrap())
}

fn parse_csv(text: &str) -> (Vec<String>, Vec<Vec<f64>>) {
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

fn column(header: &[String], name: &str) -> usize {
    header
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name} in {header:?}"))
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * b.abs().max(1e-300)
}

const DILUTION: &str =
    "mechanism dilution \"An inert dye diluted by additions of buffer and substrate\"
volume 200 uL
species D = 10 uM
species S = 0
species P = 0
step conversion S -> P with k
param k = 0.001 /s
add 10 uL of 1 mM S at 600 s
add 50 uL of 0 uM S at 900 s
remove 50 uL at 1000 s
";

#[test]
fn dilution_by_additions_follows_the_closed_form_and_conserves_amounts() {
    // An inert species diluted by an addition keeps its amount: c·V/(V+ΔV)
    // (mass balance, common practice). 10 uM in 200 uL; +10 uL; +50 uL;
    // a withdrawal leaves concentrations unchanged.
    let dir = tempfile::tempdir().unwrap();
    let model = write(dir.path(), "dilution.mech", DILUTION);
    let (h, rows) = run_csv(
        &model,
        &["--until", "1200 s", "--points", "13", "--amounts"],
    );
    let (t, d, vol, amount) = (
        column(&h, "t"),
        column(&h, "D"),
        column(&h, "volume"),
        column(&h, "amount(D)"),
    );
    let at = |time: f64, which: usize| -> Vec<f64> {
        rows.iter()
            .filter(|r| r[t] == time)
            .map(|r| r[which])
            .collect()
    };
    // Each event's time appears twice: before, then after.
    assert_eq!(at(600.0, d), vec![10.0, 10.0 * 200.0 / 210.0]);
    assert_eq!(
        at(900.0, d),
        vec![10.0 * 200.0 / 210.0, 10.0 * 200.0 / 260.0]
    );
    assert_eq!(at(1000.0, vol), vec![260.0, 210.0]);
    // The dye's amount (uM × uL = pmol) is 2000 pmol until the withdrawal
    // takes 50/260 of the mixture.
    for r in &rows {
        let expected = if r[t] > 1000.0 || (r[t] == 1000.0 && r[vol] == 210.0) {
            2000.0 * 210.0 / 260.0
        } else {
            2000.0
        };
        assert!(
            close(r[amount], expected, 1e-12),
            "t = {}: {} vs {expected}",
            r[t],
            r[amount]
        );
    }
    // S: 1 mM × 10/210 at 600 s, then first-order decay and the dilution
    // by 210/260 at 900 s (closed form of A → P with dilution).
    let s = column(&h, "S");
    let s_600 = 1000.0 * 10.0 / 210.0;
    let s_900_before = s_600 * (-0.001f64 * 300.0).exp();
    let s_at_900 = at(900.0, s);
    assert!(
        close(s_at_900[0], s_900_before, 1e-5),
        "{s_at_900:?} vs {s_900_before}"
    );
    assert!(close(s_at_900[1], s_900_before * 210.0 / 260.0, 1e-5));
}

#[test]
fn dilution_and_triggers_agree_with_libsbml_and_scipy() {
    // The emitted SBML (compartment of changing size, triggered and timed
    // events) read by libSBML and integrated by SciPy's Radau with event
    // functions (tests/python/sbml_assay_simulate.py), against `run`.
    ensure_python();
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "assay.mech",
        "mechanism assay \"Substrate fed into a well; an inhibitor added when product passes 5 uM\"
volume 200 uL
species E = 0.1 mg/mL mass 28.5 kDa
species S = 100 uM, P = 0, I = 0
param k_cat = 12 /s
param K_m = 20 uM
param K_i = 0.5 uM
step turnover S -> P law k_cat * E * S / (K_m * (1 + I / K_i) + S)
when P > 5 uM: add 1 uM I
every 2 min from 0 s to 10 min: add 5 uL of 10 mM S
remove 20 uL at 300 s
",
    );
    let xml = dir.path().join("assay.xml");
    let o = ratewright(&[
        "emit",
        model.to_str().unwrap(),
        "--target",
        "sbml",
        "-o",
        xml.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let times = "1,30,100,250,400,700";
    let (h, rows) = run_csv(
        &model,
        &["--times", times, "--rtol", "1e-10", "--atol", "1e-14"],
    );
    let reference = python(
        &root().join("tests/python/sbml_assay_simulate.py"),
        &[xml.to_str().unwrap(), times],
    );
    assert!(
        reference.status.success(),
        "{}",
        String::from_utf8_lossy(&reference.stderr)
    );
    let text = String::from_utf8(reference.stdout).unwrap();
    let (rh, rrows) = parse_csv(&text);
    assert_eq!(rows.len(), rrows.len());
    for name in ["E", "S", "P", "I"] {
        let (a, b) = (column(&h, name), column(&rh, name));
        for (r, q) in rows.iter().zip(&rrows) {
            assert!(
                (r[a] - q[b]).abs() <= 1e-6 * q[b].abs() + 1e-9,
                "{name} at t = {}: {} vs {}",
                r[0],
                r[a],
                q[b]
            );
        }
    }
    // The compartment (litres) against the volume column (uL).
    let (v, c) = (column(&h, "volume"), column(&rh, "compartment"));
    for (r, q) in rows.iter().zip(&rrows) {
        assert!(close(r[v] * 1e-6, q[c], 1e-12));
    }
    assert!(
        text.contains("# fired,"),
        "the trigger fired in the reference"
    );
}

#[test]
fn a_trigger_fires_at_the_closed_form_crossing() {
    // A → P, first order: P(t) = A0 (1 − e^{−kt}), so P passes 5 uM at
    // t* = −ln(1 − 5/A0)/k (first-order kinetics, common practice).
    // Adding 1 uM of an inert marker there shows the firing time in the
    // event rows; it fires once (P never falls back below 5).
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "crossing.mech",
        "species A = 20 uM, P = 0, M = 0\nstep decay A -> P with k\nparam k = 0.1 /s\nstep keep M -> M with k0\nparam k0 = 0 /s\nwhen P > 5 uM: add 1 uM M\n",
    );
    let (h, rows) = run_csv(
        &model,
        &[
            "--until", "40 s", "--points", "5", "--rtol", "1e-10", "--atol", "1e-14",
        ],
    );
    let (t, m) = (column(&h, "t"), column(&h, "M"));
    let star = -(1.0f64 - 5.0 / 20.0).ln() / 0.1;
    let jump: Vec<&Vec<f64>> = rows
        .windows(2)
        .filter(|w| w[0][t] == w[1][t] && w[0][m] != w[1][m])
        .map(|w| &w[1])
        .collect();
    assert_eq!(jump.len(), 1, "one firing: {rows:?}");
    assert!(
        close(jump[0][t], star, 1e-8),
        "fired at {} vs {star}",
        jump[0][t]
    );
    assert_eq!(rows.last().unwrap()[m], 1.0);
}

#[test]
fn a_repeated_event_equals_the_same_events_written_one_by_one() {
    let dir = tempfile::tempdir().unwrap();
    let head = "volume 100 uL\nspecies S = 0, P = 0\nstep use S -> P with k\nparam k = 0.01 /s\n";
    let every = write(
        dir.path(),
        "every.mech",
        &format!("{head}every 10 min from 5 min to 35 min: add 5 uL of 2 mM S\n"),
    );
    let listed: String = [5, 15, 25, 35]
        .iter()
        .map(|m| format!("add 5 uL of 2 mM S at {m} min\n"))
        .collect();
    let one_by_one = write(dir.path(), "listed.mech", &format!("{head}{listed}"));
    let a = run_csv(&every, &["--until", "1 h", "--points", "61"]);
    let b = run_csv(&one_by_one, &["--until", "1 h", "--points", "61"]);
    assert_eq!(a, b);
    // 4 additions, each time twice.
    assert_eq!(a.1.len(), 61 + 4);
}

#[test]
fn totals_follow_additions_in_full_and_reduced_runs() {
    // An enzyme with a total, diluted by an addition of substrate: the
    // total falls by V/(V+ΔV) and the reduced run (dependent species from
    // the totals) equals the full one.
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "total.mech",
        "volume 200 uL\nspecies E = 1 uM, S = 50 uM, ES = 0, P = 0\nstep bind E + S <=> ES with k1, k2\nstep cat ES -> E + P with k3\nparam k1 = 1 /uM/s\nparam k2 = 1 /s\nparam k3 = 0.5 /s\ntotal E_t = E + ES\nadd 20 uL of 500 uM S at 30 s\n",
    );
    let full = run_csv(&model, &["--until", "60 s", "--points", "13", "--full"]);
    let reduced = run_csv(&model, &["--until", "60 s", "--points", "13", "--reduced"]);
    let (h, rows) = &full;
    let (e, es) = (column(h, "E"), column(h, "ES"));
    for (a, b) in rows.iter().zip(&reduced.1) {
        for k in 0..a.len() {
            assert!(
                (a[k] - b[k]).abs() <= 1e-5 * a[k].abs().max(1e-3),
                "column {} at t = {}: {} vs {}",
                h[k],
                a[0],
                a[k],
                b[k]
            );
        }
        let total = a[e] + a[es];
        let expected = if a[0] > 30.0 || (a[0] == 30.0 && a[column(h, "volume")] > 200.0) {
            200.0 / 220.0
        } else {
            1.0
        };
        assert!(
            close(total, expected, 1e-6),
            "E + ES = {total} at t = {}",
            a[0]
        );
    }
}

#[test]
fn lab_units_convert_by_their_definitions() {
    // SI Brochure, 9th edition: 1 mg/mL = 1 g/L, dalton = g/mol, litre and
    // prefixes; IUBMB (1961): 1 U = 1 µmol/min.
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "units.mech",
        "volume 250 uL\nspecies A = 0.1 mg/mL mass 28.5 kDa\nspecies B = 2 nmol\nspecies C = 2 U/mL activity 40 U/mg mass 50 kDa\nspecies D = 6 U/mL activity 600 /min\nspecies F = 3 pmol\nstep none A + B + C + D + F -> A + B + C + D + F with k\nparam k = 0 /uM^4/s\n",
    );
    let (h, rows) = run_csv(&model, &["--times", "0"]);
    let r = &rows[0];
    // 0.1 g/L / 28 500 g/mol = 3.508772e-6 M.
    assert!(close(r[column(&h, "A")], 0.1 / 28_500.0 * 1e6, 1e-14));
    // 2 nmol in 250 uL = 8 uM.
    assert!(close(r[column(&h, "B")], 8.0, 1e-14));
    // 2 U/mL / 40 U/mg = 0.05 mg/mL; / 50 kDa = 1 uM.
    assert!(close(r[column(&h, "C")], 1.0, 1e-14));
    // 6 U/mL = 6 umol/min/mL = 6 mM/min; per site 600/min → 10 uM of sites.
    assert!(close(r[column(&h, "D")], 10.0, 1e-12));
    assert!(close(r[column(&h, "F")], 0.012, 1e-14));
    // Days: 1 d = 86 400 s (SI Brochure, table 8).
    let day = write(
        dir.path(),
        "day.mech",
        "species A = 1 uM\nstep d1 A -> 0 with k\nparam k = 1 /d\n",
    );
    let (h, rows) = run_csv(&day, &["--times", "0,86400"]);
    assert!(close(rows[1][column(&h, "A")], (-1.0f64).exp(), 1e-5));
}

#[test]
fn arrhenius_and_eyring_values_match_hand_calculations() {
    // CODATA 2018: R = 8.314462618 J/(mol K), k_B = 1.380649e-23 J/K,
    // h = 6.62607015e-34 J s. Arrhenius: k(T) = k_ref exp(−Ea/R (1/T − 1/T_ref));
    // Eyring: k(T) = (k_B T/h) exp(ΔS/R) exp(−ΔH/(R T)).
    let r = 8.314462618;
    let (kb, h) = (1.380649e-23, 6.62607015e-34);
    let arrhenius = 12.0 * (-55_000.0 / r * (1.0 / 310.15 - 1.0 / 298.15f64)).exp();
    let eyring = kb * 310.15 / h * (-20.0f64 / r).exp() * (-80_000.0 / (r * 310.15f64)).exp();
    let eyring_ratio =
        3.0 * (310.15 / 298.15) * (-50_000.0 / r * (1.0 / 310.15 - 1.0 / 298.15f64)).exp();
    let dir = tempfile::tempdir().unwrap();
    let ey25 = kb * 298.15 / h * (-20.0f64 / r).exp() * (-80_000.0 / (r * 298.15f64)).exp();
    let text = format!(
        "temperature 37 C\nspecies A = 1 uM, B = 1 uM, C = 1 uM\nparam ka = 12 /s at 25 C energy 55 kJ/mol\nparam ke = {ey25} /s at 25 C enthalpy 80 kJ/mol entropy -20 J/mol/K\nparam kr = 3 /s at 298.15 K enthalpy 50 kJ/mol\nstep a A -> 0 with ka\nstep b B -> 0 with ke\nstep c C -> 0 with kr\n"
    );
    let model = write(dir.path(), "temp.mech", &text);
    let o = ratewright(&["emit", model.to_str().unwrap(), "--target", "json"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let json: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let value = |name: &str| -> f64 {
        json["params"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["name"] == name)
            .unwrap()["value"]
            .as_f64()
            .unwrap()
    };
    assert!(
        close(value("ka"), arrhenius, 1e-9),
        "{} vs {arrhenius}",
        value("ka")
    );
    assert!(
        close(value("ke"), eyring, 1e-9),
        "{} vs {eyring}",
        value("ke")
    );
    assert!(close(value("kr"), eyring_ratio, 1e-9));
    // `--set temperature=25 C` gives back the reference values.
    let (hh, rows) = run_csv(
        &model,
        &[
            "--set",
            "temperature=25 C",
            "--times",
            "0,1",
            "--rtol",
            "1e-10",
            "--atol",
            "1e-14",
        ],
    );
    assert!(close(rows[1][column(&hh, "A")], (-12.0f64).exp(), 1e-5));
    assert!(close(rows[1][column(&hh, "C")], (-3.0f64).exp(), 1e-5));
}

#[test]
fn new_statements_have_located_errors_with_codes() {
    let dir = tempfile::tempdir().unwrap();
    let cases = [
        ("species S = 2 nmol\n", "E0412", "2 nmol"),
        (
            "volume 100 uL\nremove 150 uL at 5 s\n",
            "E0413",
            "remove 150 uL at 5 s",
        ),
        ("species E = 0.1 mg/mL\n", "E0414", "0.1 mg/mL"),
        ("temperature 37\n", "E0415", "37"),
        (
            "species S = 1\nparam k = 1\nwhen k > 2: add 1 S\n",
            "E0416",
            "k > 2",
        ),
        ("species S = 1 uM\nwhen S > 2 s: add 1 uM S\n", "E0416", "S"),
        (
            "species S = 1\nadd 10 uL of 1 mM S at 1 s\n",
            "E0412",
            "10 uL",
        ),
        ("species S = 1\nevery 0 s to 1 h: add 1 S\n", "E0409", "0 s"),
        (
            "volume 100 uL\nspecies S = 1\nadd 10 uL of 1 mM Q at 1 s\n",
            "E0201",
            "Q",
        ),
        (
            "species S = 1\nparam k = 1 /s at 25 C energy 55 kg\n",
            "E0301",
            "kg",
        ),
    ];
    for (text, code, label) in cases {
        let model = write(dir.path(), "bad.mech", text);
        let o = ratewright(&["check", model.to_str().unwrap(), "--format", "json"]);
        assert!(!o.status.success(), "{text} passed");
        let json: serde_json::Value = serde_json::from_slice(&o.stdout)
            .unwrap_or_else(|_| panic!("{}", String::from_utf8_lossy(&o.stdout)));
        let diags = json["diagnostics"].as_array().unwrap();
        let d = diags
            .iter()
            .find(|d| d["code"] == code)
            .unwrap_or_else(|| panic!("{text}: no {code} in {json}"));
        let labelled: Vec<String> = d["labels"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| {
                let at = |key: &str| l[key].as_u64().unwrap() as usize;
                let line: Vec<char> = text.lines().nth(at("line") - 1).unwrap().chars().collect();
                assert_eq!(at("line"), at("end_line"));
                line[at("column") - 1..at("end_column") - 1]
                    .iter()
                    .collect()
            })
            .collect();
        assert!(
            labelled.iter().any(|l| l == label),
            "{text}: {code} labels {labelled:?}, wanted `{label}`"
        );
    }
}

#[test]
fn the_new_statements_format_canonically_and_round_trip() {
    let dir = tempfile::tempdir().unwrap();
    let text = "volume   200 uL\ntemperature 37 C\nspecies E = 0.1 mg/mL   mass 28.5 kDa\nspecies S = 10 uM\nspecies P = 0\nparam k_cat = 12 /s   at 25 C energy 55 kJ/mol\nparam K_m = 20 uM\nstep turnover S -> P law k_cat*E*S/(K_m+S)\nwhen P>5 uM:add 1 uM S\nevery 10 min from 0 s to 1 h:   add 5 uL of 10 mM S, 1 uM P\nremove 20 uL at 900 s\nset S = 2 uM at 1000 s\n";
    let model = write(dir.path(), "fmt.mech", text);
    let o = ratewright(&["fmt", model.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let formatted = std::fs::read_to_string(&model).unwrap();
    for line in [
        "volume 200 uL",
        "species E = 0.1 mg/mL mass 28.5 kDa",
        "param k_cat = 12 /s at 25 C energy 55 kJ/mol",
        "when P > 5 uM: add 1 uM S",
        "every 10 min from 0 s to 1 h: add 5 uL of 10 mM S, 1 uM P",
    ] {
        assert!(
            formatted
                .lines()
                .any(|l| l.split_whitespace().collect::<Vec<_>>().join(" ") == line),
            "{line} not in\n{formatted}"
        );
    }
    let again = ratewright(&["fmt", "--check", model.to_str().unwrap()]);
    assert!(
        again.status.success(),
        "fmt is idempotent: {}",
        String::from_utf8_lossy(&again.stderr)
    );
    let check = ratewright(&["check", model.to_str().unwrap()]);
    assert!(
        check.status.success(),
        "{}",
        String::from_utf8_lossy(&check.stderr)
    );
}

#[test]
fn diff_reports_a_changed_stock_and_volume() {
    let dir = tempfile::tempdir().unwrap();
    let a = write(
        dir.path(),
        "a.mech",
        "volume 200 uL\nspecies S = 1 uM\nstep u S -> 0 with k\nparam k = 1 /s\nadd 10 uL of 1 mM S at 5 s\n",
    );
    let b = write(
        dir.path(),
        "b.mech",
        "volume 250 uL\nspecies S = 1 uM\nstep u S -> 0 with k\nparam k = 1 /s\nadd 10 uL of 2 mM S at 5 s\n",
    );
    let o = ratewright(&["diff", a.to_str().unwrap(), b.to_str().unwrap()]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("volume"), "{out}");
    assert!(out.contains("stock: 1000 uM S → 2000 uM S"), "{out}");
    assert!(out.contains("volume 200 uL → volume 250 uL"), "{out}");
}

#[test]
fn the_emitted_python_runs_the_assay_protocol_like_run() {
    // The python target's own driver (SciPy BDF, solve_ivp event functions
    // for `when`) against `run`: dilutions, a withdrawal, repeated and
    // triggered events, each event time twice in both outputs.
    ensure_python();
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "feed.mech",
        "volume 200 uL\nspecies E = 0.1 mg/mL mass 28.5 kDa\nspecies S = 100 uM, P = 0, I = 0\nfixed B = 50 mM\nparam k_cat = 12 /s\nparam K_m = 20 uM\nparam K_i = 0.5 uM\nstep turnover S -> P law k_cat * E * S / (K_m * (1 + I / K_i) + S) * B / (B + 1 mM)\nparam unit_b = 1 mM\nwhen P > 5 uM: add 1 uM I\nevery 10 min from 0 s to 1 h: add 5 uL of 10 mM S\nremove 20 uL at 1500 s\n"
            .replace("(B + 1 mM)", "(B + unit_b)")
            .as_str(),
    );
    let script = dir.path().join("feed.py");
    let o = ratewright(&[
        "emit",
        model.to_str().unwrap(),
        "--target",
        "python",
        "-o",
        script.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let shared = [
        "--until", "3000", "--points", "7", "--rtol", "1e-10", "--atol", "1e-14",
    ];
    let py_csv = dir.path().join("py.csv");
    let mut args: Vec<&str> = shared.to_vec();
    args.extend(["-o", py_csv.to_str().unwrap()]);
    let out = python(&script, &args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let (h1, r1) = parse_csv(&std::fs::read_to_string(&py_csv).unwrap());
    let (h2, r2) = run_csv(&model, &shared);
    assert_eq!(h1, h2);
    rows_agree("python", &h1, &r1, &r2);
}

/// Every value of `got` within 1e-6 relative of `run`'s (plus 1e-9 of its
/// column's largest value, for values near zero).
fn rows_agree(what: &str, header: &[String], got: &[Vec<f64>], run: &[Vec<f64>]) {
    assert_eq!(got.len(), run.len(), "{what}: {got:?}\n{run:?}");
    for (a, b) in got.iter().zip(run) {
        for k in 0..a.len() {
            let scale = run.iter().map(|r| r[k].abs()).fold(0.0, f64::max);
            assert!(
                (a[k] - b[k]).abs() <= 1e-6 * b[k].abs() + 1e-9 * scale,
                "{what}: {} at t = {}: {} vs run {}",
                header[k],
                a[0],
                a[k],
                b[k]
            );
        }
    }
}

/// Substrate fed by repeated stock additions, an inhibitor stock (with more
/// of the fixed buffer B) added each time the product rises through 5 uM,
/// a withdrawal, and an enzyme conserved as E + ES + EI: dilutions push P
/// back under 5 uM, so the trigger fires many times.
const FEED: &str =
    "mechanism feed \"Substrate fed into a well; an inhibitor stock added when product passes 5 uM\"
volume 200 uL
species E = 0.1 uM, ES = 0, EI = 0
species S = 20 uM, P = 0, I = 0
fixed B = 50 mM
param k_on = 2 /uM/s
param k_off = 10 /s
param k_cat = 0.5 /s
param ki_on = 1 /uM/s
param ki_off = 0.2 /s
param unit_b = 1 mM
step bind E + S <=> ES with k_on, k_off
step turnover ES -> E + P law k_cat * ES * B / (B + unit_b)
step inhibit E + I <=> EI with ki_on, ki_off
observe signal = 3 * P + 0.5
when P > 5 uM: add 4 uL of 50 uM I, 10 mM B
every 5 min from 5 min to 25 min: add 5 uL of 2 mM S
remove 20 uL at 700 s
";

/// Output times between and at events (300 s and 700 s are event times).
const FEED_TIMES: &str = "20,100,200,299,300,450,699,700,800,1000,1400,1600";

/// The emitted file's CSV (from `produce`, given the emitted file's path)
/// against `run --times` on FEED, full and reduced: same header, and every
/// value within 1e-6 relative (plus 1e-9 of its column's largest value,
/// for the species near zero).
fn feed_agrees_with_run(target: &str, file: &str, produce: &dyn Fn(&Path) -> String) {
    let dir = tempfile::tempdir().unwrap();
    let model = write(dir.path(), "feed.mech", FEED);
    let (h2, r2) = run_csv(
        &model,
        &["--times", FEED_TIMES, "--rtol", "1e-10", "--atol", "1e-14"],
    );
    // The trigger fired (each firing adds 4 uL) and more than once.
    let vol = column(&h2, "volume");
    assert!(r2[2][vol] > 204.0, "{r2:?}");
    for reduced in [false, true] {
        let emitted = dir.path().join(format!("{reduced}")).join(file);
        std::fs::create_dir_all(emitted.parent().unwrap()).unwrap();
        let mut args = vec![
            "emit",
            model.to_str().unwrap(),
            "--target",
            target,
            "-o",
            emitted.to_str().unwrap(),
        ];
        if reduced {
            args.push("--reduced");
        }
        let o = ratewright(&args);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let (h1, r1) = parse_csv(&produce(&emitted));
        assert_eq!(h1, h2, "{target} (reduced {reduced})");
        rows_agree(&format!("{target} (reduced {reduced})"), &h1, &r1, &r2);
    }
}

fn stdout_of(mut command: std::process::Command, what: &str) -> String {
    let out = command
        .output()
        .unwrap_or_else(|e| panic!("{what} runs: {e}"));
    assert!(
        out.status.success(),
        "{what}: {}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn the_emitted_r_runs_the_assay_protocol_like_run() {
    // The r target's driver (deSolve's LSODA, its root finding for `when`)
    // run by Rscript as a script, against `run`.
    common::ensure_r();
    feed_agrees_with_run("r", "feed.R", &|file| {
        let mut c = std::process::Command::new("Rscript");
        c.arg(file)
            .args(["--times", FEED_TIMES, "--rtol", "1e-10", "--atol", "1e-14"]);
        stdout_of(c, "Rscript")
    });
}

#[test]
fn the_emitted_octave_runs_the_assay_protocol_like_run() {
    // The octave target's driver (ode15s, its Events option for `when`)
    // under octave-cli, against `run`.
    common::ensure_octave();
    feed_agrees_with_run("octave", "feed.m", &|file| {
        let script = file.with_file_name("check.m");
        std::fs::write(
            &script,
            format!(
                "m = feed();\nr = m.simulate(m, [{FEED_TIMES}], 1e-10, 1e-12);\nprintf('%s\\n', strjoin([{{'t'}}, m.species_names, m.observable_names, {{'volume'}}], ','));\nfor i = 1:rows(r)\n  printf('%s\\n', strjoin(arrayfun(@(v) sprintf('%.17g', v), r(i, :), 'UniformOutput', false), ','));\nend\n"
            ),
        )
        .unwrap();
        let mut c = std::process::Command::new("octave-cli");
        c.args(["--no-gui", "--quiet", "--no-window-system", "check.m"])
            .current_dir(file.parent().unwrap());
        stdout_of(c, "octave-cli")
    });
}

#[test]
fn a_trigger_fires_where_nothing_is_integrated() {
    // No step changes A, so the reduced run has an empty state; `when t > 2 s`
    // must still fire there. Mass balance (common practice): 1 uM in 100 uL
    // plus 10 uL of 5 uM is 150 pmol in 110 uL; the trigger then adds 1 uM.
    let dir = tempfile::tempdir().unwrap();
    let model = write(
        dir.path(),
        "still.mech",
        "units concentration uM, time s\nvolume 100 uL\nfixed F = 2 uM\nspecies A = 1 uM\nparam k = 3 /s\nobserve o = k*F\nadd 10 uL of 5 uM A, 1 uM F at 1 s\nwhen t > 2 s: add 1 uM A\n",
    );
    for extra in [&[][..], &["--reduced"][..]] {
        let (h, rows) = run_csv(&model, &[&["--times", "0,1.5,2.5,4"][..], extra].concat());
        let a = column(&h, "A");
        let after_stock = 150.0 / 110.0;
        let want = [1.0, after_stock, after_stock + 1.0, after_stock + 1.0];
        for (r, w) in rows.iter().zip(want) {
            assert!(
                close(r[a], w, 1e-12),
                "{extra:?}: t = {}: {} vs {w}",
                r[0],
                r[a]
            );
        }
    }
}
