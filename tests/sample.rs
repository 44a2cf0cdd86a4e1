//! End-to-end checks of `sample` (stochastic runs) against outside
//! references: closed-form distributions of textbook processes, the
//! chemical master equation solved with SciPy, and the deterministic `run`
//! in the large-volume limit. Every check runs at a fixed seed, so it
//! either always passes or always fails; the bounds are the ones a correct
//! sampler meets with probability at least 0.999 (so a seed was not hunted
//! for), and each is derived beside it.

mod common;

use common::{python, ratewright, root};
use std::path::{Path, PathBuf};

/// The Avogadro constant, exact since the 2019 SI redefinition (CODATA
/// 2018; Tiesinga et al., Rev. Mod. Phys. 93, 025010, 2021).
const AVOGADRO: f64 = 6.022_140_76e23;

/// Molecules per nM in 1 fL: 1e-9 mol/L · N_A · 1e-15 L.
fn omega_nm_fl() -> f64 {
    1e-9 * AVOGADRO * 1e-15
}

fn write_model(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn run_ok(args: &[&str]) -> (String, String) {
    let out = ratewright(args);
    assert!(
        out.status.success(),
        "ratewright {args:?} failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    (
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

/// Runs `sample` writing the runs CSV; returns (header, rows).
fn sample_runs(dir: &Path, model: &Path, extra: &[&str]) -> (Vec<String>, Vec<Vec<f64>>) {
    let out = dir.join("runs.csv");
    let mut args = vec![
        "sample",
        model.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    run_ok(&args);
    read_csv(&out)
}

fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(|v| v.parse::<f64>().unwrap()).collect())
        .collect();
    (header, rows)
}

/// The counts of column `col` at time `t` over all runs.
fn counts_at(rows: &[Vec<f64>], t: f64, col: usize) -> Vec<i64> {
    rows.iter()
        .filter(|r| (r[1] - t).abs() <= 1e-12 * t.max(1.0))
        .map(|r| r[col] as i64)
        .collect()
}

/// SciPy's answers to a list of requests (tests/python/sample_reference.py).
fn reference(dir: &Path, requests: serde_json::Value) -> Vec<serde_json::Value> {
    let spec = dir.join("requests.json");
    std::fs::write(
        &spec,
        serde_json::to_string(&serde_json::json!({ "requests": requests })).unwrap(),
    )
    .unwrap();
    let out = python(
        &root().join("tests/python/sample_reference.py"),
        &[spec.to_str().unwrap()],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Pearson's chi-square statistic of observed counts against a pmf, with
/// the bins below and above the central region (expected count under 5,
/// the usual rule: Cochran 1954, Biometrics 10:417) merged into their
/// neighbours. Returns (statistic, degrees of freedom).
fn chi_square(samples: &[i64], pmf: &dyn Fn(i64) -> f64, support_max: i64) -> (f64, usize) {
    let n = samples.len() as f64;
    let mut bins: Vec<(f64, f64)> = Vec::new(); // (observed, expected)
    let mut acc = (0.0, 0.0);
    for k in 0..=support_max {
        acc.0 += samples.iter().filter(|&&s| s == k).count() as f64;
        acc.1 += n * pmf(k);
        if acc.1 >= 5.0 {
            bins.push(acc);
            acc = (0.0, 0.0);
        }
    }
    // Whatever remains (the upper tail, and anything beyond support_max)
    // joins the last bin.
    let beyond = samples.iter().filter(|&&s| s > support_max).count() as f64;
    let tail_expected = n - bins.iter().map(|b| b.1).sum::<f64>() - acc.1;
    let last = bins.last_mut().unwrap();
    last.0 += acc.0 + beyond;
    last.1 += acc.1 + tail_expected.max(0.0);
    let stat = bins.iter().map(|(o, e)| (o - e) * (o - e) / e).sum();
    (stat, bins.len() - 1)
}

fn ln_factorial(n: i64) -> f64 {
    (1..=n).map(|k| (k as f64).ln()).sum()
}

fn mean_var(v: &[i64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().map(|&x| x as f64).sum::<f64>() / n;
    let var = v.iter().map(|&x| (x as f64 - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, var)
}

#[test]
fn birth_death_is_poisson_at_stationarity() {
    // ∅ → A at λ molecules/s, A → ∅ at μ per molecule: the stationary
    // distribution is Poisson(λ/μ) (Gardiner, Handbook of Stochastic
    // Methods, sec. 7.1, the birth–death master equation; from memory).
    // λ/μ = 20; at t = 12 the mean is within λ/μ · e^(−12) = 1.2e-4 of
    // it, far inside the sampling error, so t = 12 samples it.
    // Started empty, the count is Poisson at every time, with mean
    // (λ/μ)(1 − e^(−μt)) (the M/M/∞ queue started empty; Gross & Harris,
    // Fundamentals of Queueing Theory; from memory): checked at t = 0.5, 1
    // and 2 too, where the counts are low and death is a critical reaction
    // for the leap.
    let dir = tempfile::tempdir().unwrap();
    let omega = omega_nm_fl();
    let lambda = 20.0;
    let model = write_model(
        dir.path(),
        "birth_death.mech",
        &format!(
            "units concentration nM, time s\nspecies A\nparam l = {:e} nM/s\nparam m = 1 /s\nstep birth 0 -> A with l\nstep death A -> 0 with m\n",
            lambda / omega
        ),
    );
    let runs = 2500;
    // Exact runs, and tau-leaping (at these counts mostly its exact steps
    // and leaps with critical reactions, the parts that must keep it
    // unbiased at low counts).
    let mut checks = Vec::new();
    for method in ["exact", "leap"] {
        let (header, rows) = sample_runs(
            dir.path(),
            &model,
            &[
                "--volume",
                "1 fL",
                "--runs",
                "2500",
                "--seed",
                "2026",
                "--times",
                "0.5,1,2,12",
                "--method",
                method,
            ],
        );
        assert_eq!(header, ["run", "t", "A"]);
        for t in [0.5, 1.0, 2.0, 12.0] {
            // At t = 12 this is λ/μ within 1.2e-4.
            let mean = lambda * (1.0 - f64::exp(-t));
            let pmf = |k: i64| (-mean + k as f64 * mean.ln() - ln_factorial(k)).exp();
            let a = counts_at(&rows, t, 2);
            assert_eq!(a.len(), runs);
            let (stat, df) = chi_square(&a, &pmf, 60);
            checks.push((method, t, stat, df));
        }
        // Mean and variance at stationarity within 4 standard errors:
        // sqrt(λ/n) for the mean, sqrt((μ4 − σ⁴)/n) = sqrt((λ + 2λ²)/n) for
        // the variance (Poisson central moments μ4 = λ + 3λ²).
        let (m, v) = mean_var(&counts_at(&rows, 12.0, 2));
        let n = runs as f64;
        assert!(
            (m - lambda).abs() < 4.0 * (lambda / n).sqrt(),
            "{method}: mean {m}"
        );
        assert!(
            (v - lambda).abs() < 4.0 * ((lambda + 2.0 * lambda * lambda) / n).sqrt(),
            "{method}: variance {v}"
        );
    }
    // Critical values at 0.999 from SciPy, in one call.
    let requests: Vec<serde_json::Value> = checks
        .iter()
        .map(|c| serde_json::json!({ "kind": "chi2_ppf", "q": 0.999, "df": c.3 }))
        .collect();
    let critical = reference(dir.path(), serde_json::Value::Array(requests));
    for ((method, t, stat, df), c) in checks.into_iter().zip(critical) {
        let c = c.as_f64().unwrap();
        assert!(
            stat < c,
            "{method}, t = {t}: chi-square {stat} with {df} degrees of freedom ≥ {c}"
        );
    }
}

#[test]
fn first_order_decay_is_binomial_at_every_time() {
    // A → B from n0 molecules: each molecule survives to t independently
    // with probability e^(−kt), so A(t) ~ Binomial(n0, e^(−kt)) (McQuarrie
    // 1967, J. Appl. Prob. 4:413, the unimolecular reaction; from memory).
    let dir = tempfile::tempdir().unwrap();
    let omega = omega_nm_fl();
    let n0: i64 = 60;
    let k: f64 = 0.5;
    let model = write_model(
        dir.path(),
        "decay.mech",
        &format!(
            "units concentration nM, time s\nspecies A = {:e} nM, B\nparam k = {k} /s\nstep decay A -> B with k\n",
            n0 as f64 / omega
        ),
    );
    let times = [0.5, 1.0, 2.0, 4.0];
    let (_, rows) = sample_runs(
        dir.path(),
        &model,
        &[
            "--volume",
            "1 fL",
            "--runs",
            "3000",
            "--seed",
            "7",
            "--times",
            "0.5,1,2,4",
        ],
    );
    let mut requests = Vec::new();
    let mut stats = Vec::new();
    for &t in &times {
        let p: f64 = (-k * t).exp();
        let a = counts_at(&rows, t, 2);
        let b = counts_at(&rows, t, 3);
        assert!(
            a.iter().zip(&b).all(|(x, y)| x + y == n0),
            "A + B is conserved"
        );
        let pmf = |j: i64| {
            if j > n0 {
                return 0.0;
            }
            (ln_factorial(n0) - ln_factorial(j) - ln_factorial(n0 - j)
                + j as f64 * p.ln()
                + (n0 - j) as f64 * (1.0 - p).ln())
            .exp()
        };
        let (stat, df) = chi_square(&a, &pmf, n0);
        requests.push(serde_json::json!({ "kind": "chi2_ppf", "q": 0.999, "df": df }));
        stats.push((t, stat, df));
    }
    let critical = reference(dir.path(), serde_json::Value::Array(requests));
    for ((t, stat, df), c) in stats.into_iter().zip(critical) {
        let c = c.as_f64().unwrap();
        assert!(stat < c, "t = {t}: chi-square {stat} ({df} df) ≥ {c}");
    }
}

/// Total variation distance between a sample's histogram and a pmf.
fn total_variation(samples: &[i64], pmf: &[f64]) -> f64 {
    let n = samples.len() as f64;
    let top = samples
        .iter()
        .copied()
        .max()
        .unwrap_or(0)
        .max(pmf.len() as i64 - 1);
    0.5 * (0..=top)
        .map(|k| {
            let observed = samples.iter().filter(|&&s| s == k).count() as f64 / n;
            let expected = pmf.get(k as usize).copied().unwrap_or(0.0);
            (observed - expected).abs()
        })
        .sum::<f64>()
}

/// The total-variation distance a correct sampler stays under with
/// probability 1 − δ, from the Bretagnolle–Huber–Carol inequality
/// P(‖p̂ − p‖₁ ≥ λ) ≤ 2^K e^(−nλ²/2) for K categories and n draws (van der
/// Vaart & Wellner, Weak Convergence and Empirical Processes, 1996,
/// Proposition A.6.6): TV = ‖p̂ − p‖₁ / 2 ≤ ½ sqrt(2 (K ln 2 + ln(1/δ)) / n).
fn tv_bound(categories: usize, n: usize, delta: f64) -> f64 {
    0.5 * (2.0 * (categories as f64 * std::f64::consts::LN_2 + (1.0 / delta).ln()) / n as f64)
        .sqrt()
}

fn marginal(answer: &serde_json::Value, time: usize, species: usize) -> Vec<f64> {
    answer["marginals"][time][species]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect()
}

#[test]
fn dimerisation_and_a_small_enzyme_match_the_master_equation() {
    let dir = tempfile::tempdir().unwrap();
    let omega = omega_nm_fl();
    let runs = 4000;
    let times = [0.1, 0.5, 2.0];
    // 2 A ⇌ B from 30 molecules of A; k1 in /nM/s, k2 in /s.
    let (k1, k2) = (0.007, 1.0);
    let dimer = write_model(
        dir.path(),
        "dimer.mech",
        &format!(
            "units concentration nM, time s\nspecies A = {:e} nM, B\nparam k1 = {k1} /nM/s\nparam k2 = {k2} /s\nstep pair 2 A <=> B with k1, k2\n",
            30.0 / omega
        ),
    );
    // E + S ⇌ C → E + P with 4 enzyme and 20 substrate molecules.
    let (kon, koff, kcat) = (0.5, 2.0, 1.5);
    let enzyme = write_model(
        dir.path(),
        "enzyme.mech",
        &format!(
            "units concentration nM, time s\nspecies E = {:e} nM, S = {:e} nM, C, P\nparam kon = {kon} /nM/s\nparam koff = {koff} /s\nparam kcat = {kcat} /s\n\
             step bind E + S <=> C with kon, koff\nstep cat C -> E + P with kcat\n",
            4.0 / omega,
            20.0 / omega
        ),
    );
    let answers = reference(
        dir.path(),
        serde_json::json!([
            {
                "kind": "cme", "species": ["A", "B"], "initial": [30, 0], "omega": omega,
                "reactions": [
                    { "reactants": { "A": 2 }, "products": { "B": 1 }, "k": k1 },
                    { "reactants": { "B": 1 }, "products": { "A": 2 }, "k": k2 }
                ],
                "times": times
            },
            {
                "kind": "cme", "species": ["E", "S", "C", "P"], "initial": [4, 20, 0, 0],
                "omega": omega,
                "reactions": [
                    { "reactants": { "E": 1, "S": 1 }, "products": { "C": 1 }, "k": kon },
                    { "reactants": { "C": 1 }, "products": { "E": 1, "S": 1 }, "k": koff },
                    { "reactants": { "C": 1 }, "products": { "E": 1, "P": 1 }, "k": kcat }
                ],
                "times": times
            }
        ]),
    );
    // (model, SciPy answer, species column in the CSV and in the answer)
    let cases = [
        (&dimer, &answers[0], "A", 2, 0),
        (&enzyme, &answers[1], "P", 5, 3),
        (&enzyme, &answers[1], "C", 4, 2),
    ];
    for (model, answer, name, col, species) in cases {
        let (_, rows) = sample_runs(
            dir.path(),
            model,
            &[
                "--volume",
                "1 fL",
                "--runs",
                "4000",
                "--seed",
                "3",
                "--times",
                "0.1,0.5,2",
            ],
        );
        for (k, &t) in times.iter().enumerate() {
            let pmf = marginal(answer, k, species);
            let observed = counts_at(&rows, t, col);
            let tv = total_variation(&observed, &pmf);
            let categories = pmf.iter().filter(|&&p| p > 0.0).count();
            let bound = tv_bound(categories, runs, 1e-3);
            assert!(
                tv < bound,
                "{name} at t = {t}: total variation {tv} ≥ {bound} ({categories} categories)"
            );
        }
    }
}

/// A linear chain of `n` species fed by a source (200 molecules/s, each
/// step 4 /s, so about 50 molecules a species), with one second-order
/// step so that the leap's g_i for order 2 is exercised.
fn chain(n: usize, omega: f64) -> String {
    let mut s = format!(
        "units concentration nM, time s\nparam src = {:e} nM/s\nparam k = 4 /s\nparam k2 = {:e} /nM/s\n",
        200.0 / omega,
        0.004 * omega
    );
    for i in 1..=n {
        s.push_str(&format!("species X{i}\n"));
    }
    s.push_str("step feed 0 -> X1 with src\n");
    for i in 1..n {
        s.push_str(&format!("step s{i} X{i} -> X{} with k\n", i + 1));
    }
    s.push_str(&format!("step out X{n} -> 0 with k\n"));
    s.push_str("step pair X3 + X4 -> X5 with k2\n");
    s
}

#[test]
fn tau_leaping_agrees_with_exact_runs_on_a_twenty_species_network() {
    let dir = tempfile::tempdir().unwrap();
    let model = write_model(dir.path(), "chain.mech", &chain(20, omega_nm_fl()));
    let runs = 200.0;
    let common = [
        "--volume", "1 fL", "--runs", "200", "--times", "6", "--stats", "--seed",
    ];
    let stats = |method: &str, seed: &str, name: &str| {
        let out = dir.path().join(name);
        let mut args = vec![
            "sample",
            model.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ];
        args.extend_from_slice(&common);
        args.extend_from_slice(&[seed, "--method", method]);
        run_ok(&args);
        read_csv(&out)
    };
    let (header, exact) = stats("exact", "5", "exact.csv");
    let (_, leap) = stats("leap", "6", "leap.csv");
    assert_eq!(header.len(), 1 + 4 * 20);
    assert_eq!(&header[..5], &["t", "X1_mean", "X1_sd", "X1_q05", "X1_q95"]);
    for i in 0..20 {
        let (m1, s1) = (exact[0][1 + 4 * i], exact[0][2 + 4 * i]);
        let (m2, s2) = (leap[0][1 + 4 * i], leap[0][2 + 4 * i]);
        // Two independent ensembles: the difference of means has standard
        // error sqrt(s1²/n + s2²/n); 4.5 of them bound 20 comparisons at
        // a family-wise error under 1e-4 (Bonferroni).
        let se = ((s1 * s1 + s2 * s2) / runs).sqrt();
        assert!(
            (m1 - m2).abs() < 4.5 * se.max(1e-9),
            "X{}: exact mean {m1}, leap mean {m2} (se {se})",
            i + 1
        );
        // A sample sd has relative standard error about 1/sqrt(2(n−1))
        // (normal approximation) = 5 % at n = 200, so the ratio of two has
        // about 7 %; 5 of them. Counts this low are far from normal, so
        // only species with a mean of 5 or more are compared.
        if m1 >= 5.0 {
            assert!(
                (s2 / s1 - 1.0).abs() < 5.0 * 0.0709,
                "X{}: exact sd {s1}, leap sd {s2}",
                i + 1
            );
        }
    }
}

#[test]
fn the_same_seed_gives_the_same_output_whatever_the_jobs() {
    let dir = tempfile::tempdir().unwrap();
    // The 82-reaction chain runs the next-reaction method (above 80
    // reactions), the protease model the direct method; the leap runs on
    // the chain too.
    let chain_model = write_model(dir.path(), "chain.mech", &chain(80, omega_nm_fl()));
    let protease = root().join("models/protease_assay.mech");
    for (model, method) in [
        (chain_model.as_path(), "exact"),
        (chain_model.as_path(), "leap"),
        (protease.as_path(), "exact"),
    ] {
        let mut outputs = Vec::new();
        for (jobs, name) in [("1", "a.csv"), ("2", "b.csv"), ("2", "c.csv")] {
            let out = dir.path().join(name);
            run_ok(&[
                "sample",
                model.to_str().unwrap(),
                "--volume",
                "0.5 fL",
                "--runs",
                "40",
                "--until",
                "2",
                "--points",
                "5",
                "--method",
                method,
                "--jobs",
                jobs,
                "-o",
                out.to_str().unwrap(),
            ]);
            outputs.push(std::fs::read(&out).unwrap());
        }
        assert_eq!(outputs[0], outputs[1], "{method}: --jobs 1 and 2 differ");
        assert_eq!(
            outputs[1], outputs[2],
            "{method}: two runs of one command differ"
        );
        let text = String::from_utf8(outputs[0].clone()).unwrap();
        assert_eq!(text.lines().count(), 1 + 40 * 5);
        // Runs differ from one another (each has its own stream).
        let finals: Vec<&str> = text
            .lines()
            .filter(|l| l.split(',').nth(1) == Some("2.0"))
            .map(|l| l.split_once(',').unwrap().1)
            .collect();
        assert!(
            finals.iter().any(|f| *f != finals[0]),
            "{method}: all runs alike"
        );
    }
}

#[test]
fn statistics_are_those_of_the_runs_and_json_reports_the_conversion() {
    let dir = tempfile::tempdir().unwrap();
    let model = root().join("models/protease_assay.mech");
    let common = [
        "--volume",
        "0.2 fL",
        "--runs",
        "25",
        "--times",
        "0,30,600,650",
        "--seed",
        "9",
    ];
    let (_, rows) = sample_runs(dir.path(), &model, &common);
    let stats_path = dir.path().join("stats.csv");
    let mut args = vec![
        "sample",
        model.to_str().unwrap(),
        "--stats",
        "-o",
        stats_path.to_str().unwrap(),
    ];
    args.extend_from_slice(&common);
    run_ok(&args);
    let (header, stats) = read_csv(&stats_path);
    assert_eq!(header[0], "t");
    assert_eq!(header[1..5], ["S_mean", "S_sd", "S_q05", "S_q95"]);
    // Mean and sample sd of S at each time, recomputed from the runs.
    for row in &stats {
        let s = counts_at(&rows, row[0], 2);
        assert_eq!(s.len(), 25);
        let (m, v) = mean_var(&s);
        assert!((row[1] - m).abs() < 1e-9 * m.max(1.0));
        assert!((row[2] - v.sqrt()).abs() < 1e-9 * v.sqrt().max(1.0));
        // Quantiles by linear interpolation between order statistics
        // (Hyndman & Fan 1996, Am. Stat. 50:361, definition 7, R's default).
        let mut sorted: Vec<f64> = s.iter().map(|&v| v as f64).collect();
        sorted.sort_by(f64::total_cmp);
        for (p, got) in [(0.05, row[3]), (0.95, row[4])] {
            let h: f64 = 24.0 * p;
            let lo = h.floor() as usize;
            let q = sorted[lo] + (h - lo as f64) * (sorted[(lo + 1).min(24)] - sorted[lo]);
            assert!((got - q).abs() < 1e-9 * q.max(1.0), "q{p}: {got} vs {q}");
        }
    }
    // Counts: 20 uM of S in 0.2 fL are 20e-6 · N_A · 0.2e-15 = 2408.856...
    // molecules, rounded to 2409; 0.05 uM of E: 6.022 → 6. The addition
    // of 10 uM S at 600 s adds 1204 molecules.
    let start = counts_at(&rows, 0.0, 2);
    assert!(start.iter().all(|&s| s == 2409));
    let mut args = vec!["sample", model.to_str().unwrap(), "--format", "json"];
    args.extend_from_slice(&common);
    let (stdout, _) = run_ok(&args);
    let doc: serde_json::Value = serde_json::from_str(&stdout).unwrap();
    assert_eq!(doc["start_counts"]["S"], 2409);
    assert_eq!(doc["start_counts"]["E"], 6);
    let omega = 1e-6 * AVOGADRO * 0.2e-15;
    assert!((doc["molecules_per_unit"].as_f64().unwrap() - omega).abs() < 1e-9 * omega);
    // Stochastic constants (Gillespie 1977, sec. II): c = k/Ω for the
    // bimolecular binding, c = k for the first-order steps.
    let reactions = doc["reactions"].as_array().unwrap();
    let c_bind = reactions[0]["stochastic_constant"].as_f64().unwrap();
    assert!((c_bind - 2.0 / omega).abs() < 1e-12 * c_bind);
    assert_eq!(reactions[1]["stochastic_constant"].as_f64().unwrap(), 40.0);
    assert_eq!(reactions[2]["stochastic_constant"].as_f64().unwrap(), 12.0);
    assert_eq!(doc["t"].as_array().unwrap().len(), 4);
    // Observables on counts / Ω: signal = 850 P + 120 is linear, so its
    // mean is 850 mean(P)/Ω + 120 (P is column 3 of the runs).
    for (k, t) in [0.0, 30.0, 600.0, 650.0].into_iter().enumerate() {
        let p = counts_at(&rows, t, 3);
        let mean_p = p.iter().sum::<i64>() as f64 / p.len() as f64;
        let got = doc["observables"]["signal"]["mean"][k].as_f64().unwrap();
        let want = 850.0 * mean_p / omega + 120.0;
        assert!((got - want).abs() < 1e-9 * want, "t = {t}: {got} vs {want}");
    }
    // The addition at 600 s: S + ES + P grows by exactly 1204 molecules.
    let substrate_total = |t: f64| -> Vec<i64> {
        rows.iter()
            .filter(|r| r[1] == t)
            .map(|r| (r[2] + r[3] + r[5]) as i64)
            .collect()
    };
    assert!(substrate_total(30.0).iter().all(|&v| v == 2409));
    assert!(substrate_total(600.0).iter().all(|&v| v == 2409 + 1204));
}

#[test]
fn histograms_and_plots_are_written_together() {
    let dir = tempfile::tempdir().unwrap();
    let model = root().join("models/protease_assay.mech");
    let csv = dir.path().join("h.csv");
    let fig = dir.path().join("h.svg");
    let (stdout, _) = run_ok(&[
        "sample",
        model.to_str().unwrap(),
        "--volume",
        "0.05 fL",
        "--runs",
        "50",
        "--until",
        "100",
        "--points",
        "3",
        "--hist",
        "75",
        "-o",
        csv.to_str().unwrap(),
        "--plot",
        fig.to_str().unwrap(),
    ]);
    assert!(
        stdout.contains("counts at t = 75 s over 50 runs"),
        "{stdout}"
    );
    // The histogram's time is simulated but not written as a CSV row.
    let (_, rows) = read_csv(&csv);
    assert_eq!(rows.len(), 50 * 3);
    assert!(rows.iter().all(|r| r[1] != 75.0));
    let svg = std::fs::read_to_string(&fig).unwrap();
    assert!(svg.contains("<svg") && svg.contains("fraction of runs"));
    // `-o -`: the table alone on standard output, the report on standard
    // error.
    let (stdout, stderr) = run_ok(&[
        "sample",
        model.to_str().unwrap(),
        "--volume",
        "0.05 fL",
        "--runs",
        "2",
        "--times",
        "0,10",
        "-o",
        "-",
    ]);
    let lines: Vec<&str> = stdout.lines().collect();
    assert_eq!(lines[0], "run,t,S,P,E,ES");
    assert_eq!(lines.len(), 1 + 2 * 2, "{stdout}");
    assert!(stderr.contains("start counts"), "{stderr}");
    let band = dir.path().join("band.png");
    run_ok(&[
        "sample",
        model.to_str().unwrap(),
        "--volume",
        "0.05 fL",
        "--runs",
        "20",
        "--until",
        "100",
        "--plot",
        band.to_str().unwrap(),
    ]);
    assert!(std::fs::read(&band).unwrap().starts_with(b"\x89PNG"));
}

#[test]
fn bad_input_gives_located_errors_and_no_output() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("never.csv");
    let o = out.to_str().unwrap();
    let model = root().join("models/protease_assay.mech");
    let m = model.to_str().unwrap();
    let expect = |args: &[&str], code: i32, needles: &[&str]| {
        let r = ratewright(args);
        let stderr = String::from_utf8_lossy(&r.stderr);
        assert_eq!(r.status.code(), Some(code), "{args:?}: {stderr}");
        for n in needles {
            assert!(stderr.contains(n), "{args:?}: `{n}` not in\n{stderr}");
        }
        assert!(!out.exists(), "{args:?} wrote output");
        assert!(!stderr.contains("panicked"));
    };
    expect(&["sample", m, "-o", o], 2, &["--volume"]);
    expect(&["sample", m, "--volume", "1", "-o", o], 2, &["no unit"]);
    expect(
        &["sample", m, "--volume", "1 kg", "-o", o],
        2,
        &["not a volume unit"],
    );
    expect(
        &["sample", m, "--volume", "1 fL", "--runs", "0", "-o", o],
        2,
        &["--runs"],
    );
    let txt = dir.path().join("x.txt");
    expect(
        &["sample", m, "--volume", "1 fL", "-o", txt.to_str().unwrap()],
        2,
        &[".csv"],
    );
    expect(
        &["sample", m, "--volume", "1 fL", "--times", "5,1", "-o", o],
        2,
        &["increasing"],
    );
    expect(
        &["sample", m, "--volume", "1e10 L", "-o", o],
        1,
        &["E0706", "protease_assay.mech:"],
    );
    let half = write_model(
        dir.path(),
        "half.mech",
        "species A = 1 uM, B\nparam k = 1 /s\nstep half A -> 1/2 B with k\n",
    );
    expect(
        &[
            "sample",
            half.to_str().unwrap(),
            "--volume",
            "1 fL",
            "-o",
            o,
        ],
        1,
        &["E0704", "half.mech:3:", "1/2"],
    );
    let negative = write_model(
        dir.path(),
        "negative.mech",
        "species A = 10 uM, B\nparam k = 1 /s\nstep go A -> B law k * (A - 5)\n",
    );
    expect(
        &[
            "sample",
            negative.to_str().unwrap(),
            "--volume",
            "1 fL",
            "--until",
            "10",
            "-o",
            o,
        ],
        1,
        &["W0107", "E0705", "negative.mech:3:", "is -"],
    );
    let timed = write_model(
        dir.path(),
        "timed.mech",
        "species A = 10 uM, B\nparam k = 1 /s\nstep go A -> B law k * A * exp(-t)\n",
    );
    expect(
        &[
            "sample",
            timed.to_str().unwrap(),
            "--volume",
            "1 fL",
            "-o",
            o,
        ],
        1,
        &["E0704", "depends on the time t"],
    );
    // Under --format json a failure is the JSON report on standard output.
    let r = ratewright(&[
        "sample",
        half.to_str().unwrap(),
        "--volume",
        "1 fL",
        "--format",
        "json",
    ]);
    assert_eq!(r.status.code(), Some(1));
    let doc: serde_json::Value = serde_json::from_slice(&r.stdout).unwrap();
    assert_eq!(doc["ok"], false);
    assert_eq!(doc["diagnostics"][0]["code"], "E0704");
}

#[test]
fn a_positive_law_runs_with_a_warning_and_follows_its_mean() {
    // A → B with law k·A is first-order decay written as a law: the
    // propensity is k·n, so the mean is n0·e^(−kt) (as for the binomial
    // test above).
    let dir = tempfile::tempdir().unwrap();
    let omega = omega_nm_fl();
    let model = write_model(
        dir.path(),
        "law.mech",
        &format!(
            "units concentration nM, time s\nspecies A = {:e} nM, B\nparam k = 0.5 /s\nstep go A -> B law k * A\n",
            100.0 / omega
        ),
    );
    let out = dir.path().join("law.csv");
    let (_, stderr) = run_ok(&[
        "sample",
        model.to_str().unwrap(),
        "--volume",
        "1 fL",
        "--runs",
        "1000",
        "--times",
        "2",
        "--stats",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(stderr.contains("W0107"), "{stderr}");
    let (_, rows) = read_csv(&out);
    let p = (-1.0f64).exp();
    let (mean, sd) = (100.0 * p, (100.0 * p * (1.0 - p)).sqrt());
    assert!(
        (rows[0][1] - mean).abs() < 4.0 * sd / 1000f64.sqrt(),
        "{}",
        rows[0][1]
    );
}

#[test]
fn as_the_volume_grows_runs_approach_the_rate_equations_like_one_over_root_volume() {
    // 2 A ⇌ B in concentration units: the rate equations (`run`, checked
    // against SciPy in tests/sim.rs) are the large-volume limit of the
    // master equation, and a single run's deviation from them shrinks like
    // V^(−1/2) (the linear noise approximation: van Kampen, Stochastic
    // Processes in Physics and Chemistry, ch. X; Kurtz 1972, J. Chem. Phys.
    // 57:2976; from memory). Fitted on four volumes over a factor of 64.
    let dir = tempfile::tempdir().unwrap();
    let model = write_model(
        dir.path(),
        "dimer_conc.mech",
        "units concentration uM, time s\nspecies A = 1 uM, B\nparam k1 = 1 /uM/s\nparam k2 = 0.5 /s\nstep pair 2 A <=> B with k1, k2\n",
    );
    let ode = dir.path().join("ode.csv");
    run_ok(&[
        "run",
        model.to_str().unwrap(),
        "--times",
        "1",
        "--rtol",
        "1e-10",
        "--atol",
        "1e-14",
        "-o",
        ode.to_str().unwrap(),
    ]);
    let a_ode = read_csv(&ode).1[0][1];
    let mut points = Vec::new();
    for femtolitres in [0.04, 0.16, 0.64, 2.56] {
        let omega = 1e-6 * AVOGADRO * femtolitres * 1e-15;
        let volume = format!("{femtolitres} fL");
        let (_, rows) = sample_runs(
            dir.path(),
            &model,
            &[
                "--volume", &volume, "--runs", "800", "--seed", "4", "--times", "1",
            ],
        );
        let a: Vec<f64> = counts_at(&rows, 1.0, 2)
            .into_iter()
            .map(|n| n as f64 / omega)
            .collect();
        let rms = (a.iter().map(|x| (x - a_ode).powi(2)).sum::<f64>() / a.len() as f64).sqrt();
        points.push((femtolitres.ln(), rms.ln()));
        if femtolitres == 2.56 {
            // At the largest volume (about 1,500 molecules) the ensemble
            // mean is the rate equations' value within 4 standard errors
            // plus the O(1/Ω) bias, bounded here by 1/Ω.
            let n = a.len() as f64;
            let mean = a.iter().sum::<f64>() / n;
            let sd = (a.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
            assert!(
                (mean - a_ode).abs() < 4.0 * sd / n.sqrt() + 1.0 / omega,
                "mean {mean} against the rate equations' {a_ode}"
            );
        }
    }
    // Least-squares slope of ln(rms) against ln(V).
    let n = points.len() as f64;
    let (mx, my) = (
        points.iter().map(|p| p.0).sum::<f64>() / n,
        points.iter().map(|p| p.1).sum::<f64>() / n,
    );
    let slope = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum::<f64>()
        / points.iter().map(|p| (p.0 - mx).powi(2)).sum::<f64>();
    println!("fitted slope of ln(rms deviation) against ln(volume): {slope:.4}");
    // Each rms has a relative standard error of about 1/sqrt(2·800) = 2.5 %,
    // so the slope over ln 64 = 4.2 has about 0.01; 0.06 allows for the
    // small-volume corrections as well.
    assert!((slope + 0.5).abs() < 0.06, "slope {slope}");
}

#[test]
fn an_interrupted_ensemble_writes_nothing() {
    // SIGINT while the runs are under way: no output file and no temporary
    // file is left, the old file at the path is kept, and the exit is not
    // a success.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("runs.csv");
    std::fs::write(&out, "old\n").unwrap();
    let model = root().join("models/protease_assay.mech");
    let mut child = std::process::Command::new(common::bin())
        .args([
            "sample",
            model.to_str().unwrap(),
            "--volume",
            "100 fL",
            "--runs",
            "100000",
            "--until",
            "1200",
            "-o",
            out.to_str().unwrap(),
        ])
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    std::thread::sleep(std::time::Duration::from_millis(400));
    assert!(
        child.try_wait().unwrap().is_none(),
        "finished before the interrupt"
    );
    let kill = std::process::Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(kill.success());
    let status = child.wait().unwrap();
    assert!(!status.success());
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "old\n");
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, ["runs.csv"], "left behind: {names:?}");
}
