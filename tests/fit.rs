//! `ratewright fit` end to end, checked against outside references: the
//! NIST StRD nonlinear regression problems (certified values), textbook
//! model selection on synthetic inhibition data, and located errors for
//! bad data.

mod common;

use common::{ratewright, root};
use serde_json::Value;
use std::path::{Path, PathBuf};

struct Nist {
    law: &'static str,
    file: &'static str,
}

/// The six NIST problems of tests/data/nist-strd (NIST StRD, public domain,
/// copied from the project's shared data so CI has them), their models as
/// NIST states them (README there).
const NIST: [Nist; 6] = [
    Nist {
        file: "Misra1a",
        law: "b1*(1-exp(-b2*x))",
    },
    Nist {
        file: "Chwirut2",
        law: "exp(-b1*x)/(b2+b3*x)",
    },
    Nist {
        file: "DanWood",
        law: "b1*x^b2",
    },
    Nist {
        file: "Misra1b",
        law: "b1*(1-(1+b2*x/2)^(-2))",
    },
    Nist {
        file: "Eckerle4",
        law: "(b1/b2)*exp(-0.5*((x-b3)/b2)^2)",
    },
    Nist {
        file: "Thurber",
        law: "(b1 + b2*x + b3*x^2 + b4*x^3)/(1 + b5*x + b6*x^2 + b7*x^3)",
    },
];

struct Certified {
    names: Vec<String>,
    starts: [Vec<f64>; 2],
    values: Vec<f64>,
    stderr: Vec<f64>,
    ssr: f64,
    data: Vec<(f64, f64)>,
}

fn nist_dir() -> PathBuf {
    root().join("tests/data/nist-strd")
}

/// Reads a NIST StRD file: starting values, certified values and standard
/// deviations, the residual sum of squares, and the (y, x) data.
fn read_nist(name: &str) -> Certified {
    let text = std::fs::read_to_string(nist_dir().join(format!("{name}.dat"))).unwrap();
    let mut c = Certified {
        names: vec![],
        starts: [vec![], vec![]],
        values: vec![],
        stderr: vec![],
        ssr: 0.0,
        data: vec![],
    };
    let mut in_data = false;
    for line in text.lines() {
        let tokens: Vec<&str> = line.split_whitespace().collect();
        if in_data {
            if let [y, x] = tokens[..] {
                c.data.push((y.parse().unwrap(), x.parse().unwrap()));
            }
            continue;
        }
        if tokens.len() == 6 && tokens[1] == "=" && tokens[0].starts_with('b') {
            c.names.push(tokens[0].to_string());
            c.starts[0].push(tokens[2].parse().unwrap());
            c.starts[1].push(tokens[3].parse().unwrap());
            c.values.push(tokens[4].parse().unwrap());
            c.stderr.push(tokens[5].parse().unwrap());
        }
        if line.trim_start().starts_with("Residual Sum of Squares:") {
            c.ssr = tokens.last().unwrap().parse().unwrap();
        }
        if line.starts_with("Data:") && tokens.get(1) == Some(&"y") {
            in_data = true;
        }
    }
    assert!(!c.data.is_empty() && !c.names.is_empty(), "{name}");
    c
}

fn fit_json(dir: &Path, mech: &str, csv: &str, extra: &[&str]) -> Value {
    let m = dir.join("model.mech");
    let d = dir.join("data.csv");
    std::fs::write(&m, mech).unwrap();
    std::fs::write(&d, csv).unwrap();
    let (ms, ds) = (
        m.to_string_lossy().to_string(),
        d.to_string_lossy().to_string(),
    );
    let mut args = vec![
        "fit",
        ms.as_str(),
        "--data",
        ds.as_str(),
        "--format",
        "json",
    ];
    args.extend_from_slice(extra);
    let out = ratewright(&args);
    assert!(
        out.status.success(),
        "fit failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn relative(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

/// Every NIST problem from both of NIST's starting points, on the params'
/// own scale (as NIST states them): estimates to 6 significant digits of
/// the certified values, standard errors to 3, the residual sum of squares
/// to 6 (NIST StRD, certified values). On the default log scale, every
/// start but Eckerle4's first reaches the certified values too; from that
/// one the log-scale path runs to a flat line (b1, b2 growing together),
/// which the fit must not report as determined. With geodesic acceleration
/// (`--step geodesic`, Transtrum & Sethna 2012) every start reaches them on
/// both scales, that one included.
#[test]
fn nist_strd_certified_values_from_both_starts() {
    for scale in ["linear", "log"] {
        let failures = nist_failures(scale, "geodesic");
        assert!(
            failures.is_empty(),
            "geodesic steps, scale {scale}:\n{}",
            failures.join("\n")
        );
        let failures = nist_failures(scale, "plain");
        let expected: &[&str] = if scale == "log" {
            &["Eckerle4 start 1"]
        } else {
            &[]
        };
        let unexpected: Vec<&String> = failures
            .iter()
            .filter(|f| !expected.iter().any(|e| f.starts_with(e)))
            .collect();
        assert!(
            unexpected.is_empty(),
            "scale {scale}:\n{}",
            failures.join("\n")
        );
    }
    // The log-scale failure is flagged: undetermined, with warnings.
    let dir = tempfile::tempdir().unwrap();
    let c = read_nist("Eckerle4");
    let (mech, csv) = nist_files(&NIST[4], &c);
    let free: Vec<String> = c
        .names
        .iter()
        .zip(&c.starts[0])
        .map(|(n, s)| format!("{n}={s}"))
        .collect();
    let j = fit_json(dir.path(), &mech, &csv, &["--free", &free.join(",")]);
    assert!(!j["warnings"].as_array().unwrap().is_empty(), "{j}");
}

fn nist_files(problem: &Nist, c: &Certified) -> (String, String) {
    let params: String = c.names.iter().map(|n| format!("param {n} = 1\n")).collect();
    let mech = format!(
        "species y\nparam x = 0\n{params}step s 0 -> y law {}\n",
        problem.law
    );
    let csv: String = std::iter::once("v,x\n".to_string())
        .chain(c.data.iter().map(|(y, x)| format!("{y},{x}\n")))
        .collect();
    (mech, csv)
}

fn nist_failures(scale: &str, step: &str) -> Vec<String> {
    let dir = tempfile::tempdir().unwrap();
    let mut failures = Vec::new();
    for problem in NIST {
        let c = read_nist(problem.file);
        let (mech, csv) = nist_files(&problem, &c);
        for (k, start) in c.starts.iter().enumerate() {
            let free: Vec<String> = c
                .names
                .iter()
                .zip(start)
                .map(|(n, s)| format!("{n}={s}"))
                .collect();
            let free = free.join(",");
            let j = fit_json(
                dir.path(),
                &mech,
                &csv,
                &["--free", &free, "--scale", scale, "--step", step],
            );
            let ssr = j["ssr"].as_f64().unwrap();
            if relative(ssr, c.ssr) > 1e-6 {
                failures.push(format!(
                    "{} start {}: SSR {ssr} vs certified {}",
                    problem.file,
                    k + 1,
                    c.ssr
                ));
            }
            for (i, n) in c.names.iter().enumerate() {
                let p = &j["parameters"][n];
                let (v, se) = (
                    p["value"].as_f64().unwrap(),
                    p["stderr"].as_f64().unwrap_or(f64::NAN),
                );
                if relative(v, c.values[i]).is_nan() || relative(v, c.values[i]) > 1e-6 {
                    failures.push(format!(
                        "{} start {}: {n} = {v} vs certified {}",
                        problem.file,
                        k + 1,
                        c.values[i]
                    ));
                }
                if relative(se, c.stderr[i]).is_nan() || relative(se, c.stderr[i]) > 1e-3 {
                    failures.push(format!(
                        "{} start {}: se({n}) = {se} vs certified {}",
                        problem.file,
                        k + 1,
                        c.stderr[i]
                    ));
                }
            }
            assert_eq!(j["n"].as_u64().unwrap() as usize, c.data.len());
            assert_eq!(
                j["dof"].as_u64().unwrap() as usize,
                c.data.len() - c.names.len()
            );
        }
    }
    failures
}

// ---------------------------------------------------------------------------
// Inhibition studies: synthetic rate tables from the published laws
// (Segel 1975, ch. 3), fitted in the named constants.

fn inhibition_mechanism(kind: &str) -> String {
    let (species, steps, forms) = match kind {
        "competitive" => ("species EI", "step block E + I <=> EI with ki, kmi", "EI"),
        "uncompetitive" => (
            "species ESI",
            "step block ES + I <=> ESI with kj, kmj",
            "ESI",
        ),
        _ => (
            "species EI, ESI",
            "step block E + I <=> EI with ki, kmi\nstep block2 ES + I <=> ESI with kj, kmj",
            "EI, ESI",
        ),
    };
    format!(
        "species S = 10 uM, P, I = 1 uM\nspecies E = 0.01 uM, ES\n{species}\n\
         param k1 = 1 /uM/s\nparam km1 = 5 /s\nparam k2 = 2 /s\n\
         param ki = 1 /uM/s\nparam kmi = 2 /s\nparam kj = 1 /uM/s\nparam kmj = 5 /s\n\
         step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\n{steps}\n\
         total Et = E + ES + {}\nassume steady E, ES, {forms}\n",
        forms.replace(", ", " + ")
    )
}

/// Free constants of each inhibition type's law, with starting values.
fn inhibition_free(kind: &str) -> &'static str {
    match kind {
        "competitive" => "kcat=1,Km_S=3,Ki_I=1",
        "uncompetitive" => "kcat=1,Km_S=3,Kii_I=1",
        _ => "kcat=1,Km_S=3,Ki_I=1,Kii_I=1",
    }
}

/// SplitMix64 (Steele, Lea & Flood 2014) and Box–Muller normal deviates.
struct Noise(u64);
impl Noise {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform().max(1e-300), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }
}

/// A substrate × inhibitor table from v = V S / (Km (1 + I/Ki) + S (1 +
/// I/Kii)) with normal noise of standard deviation `sd` (uM/s).
fn inhibition_table(ki: f64, kii: f64, sd: f64, seed: u64) -> String {
    let (v, km) = (2.0 * 0.01, 7.0);
    let mut noise = Noise(seed);
    let mut out = String::from("S,I,v\n");
    for i in [0.0, 1.0, 3.0, 9.0] {
        for s in [1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0] {
            let rate = v * s / (km * (1.0 + i / ki) + s * (1.0 + i / kii));
            out.push_str(&format!("{s},{i},{}\n", rate + sd * noise.normal()));
        }
    }
    out
}

fn fit_one(dir: &Path, kind: &str, csv: &str, extra: &[&str]) -> Value {
    let mut args = vec!["--free", inhibition_free(kind)];
    args.extend_from_slice(extra);
    fit_json(dir, &inhibition_mechanism(kind), csv, &args)
}

/// The named constants of a competitive inhibitor come back from noiseless
/// data exactly (the law is Segel's), and the fitted rate is the derived
/// law in those constants.
#[test]
fn named_constants_are_recovered_from_a_noiseless_inhibition_study() {
    let dir = tempfile::tempdir().unwrap();
    let csv = inhibition_table(2.0, f64::INFINITY, 0.0, 1);
    let j = fit_one(dir.path(), "competitive", &csv, &[]);
    assert!(
        j["rate_of"].as_str().unwrap().contains("named constants"),
        "{j}"
    );
    for (name, truth) in [("kcat", 2.0), ("Km_S", 7.0), ("Ki_I", 2.0)] {
        let v = j["parameters"][name]["value"].as_f64().unwrap();
        assert!(relative(v, truth) < 1e-6, "{name} = {v}, true {truth}");
    }
    assert_eq!(j["parameters"]["Km_S"]["unit"], "uM");
    assert_eq!(j["parameters"]["kcat"]["unit"], "/s");
}

/// AICc and the extra-sum-of-squares F test choose the inhibition type the
/// data were made from (common practice: Motulsky & Christopoulos 2004),
/// and the reported F equals the hand computation from the two SSRs.
#[test]
fn model_selection_finds_the_true_inhibition_type() {
    let dir = tempfile::tempdir().unwrap();
    let kinds = ["competitive", "uncompetitive", "mixed"];
    for (truth, ki, kii) in [
        ("competitive", 2.0, f64::INFINITY),
        ("uncompetitive", f64::INFINITY, 5.0),
        ("mixed", 2.0, 5.0),
    ] {
        let csv = inhibition_table(ki, kii, 0.0002, 7);
        let mut fits = Vec::new();
        for kind in kinds {
            let j = fit_one(dir.path(), kind, &csv, &[]);
            fits.push((
                kind,
                j["aicc"].as_f64().unwrap(),
                j["ssr"].as_f64().unwrap(),
                j["n"].as_u64().unwrap(),
            ));
        }
        let best = fits.iter().min_by(|a, b| a.1.total_cmp(&b.1)).unwrap();
        if truth == "mixed" {
            assert_eq!(best.0, "mixed", "{fits:?}");
        } else {
            // The nested pair: the true one-constant type against mixed,
            // which fits one more constant; the F test must not prefer mixed.
            let (small, large) = (fits.iter().find(|f| f.0 == truth).unwrap(), fits[2]);
            let n = small.3 as f64;
            let f = ((small.2 - large.2) / 1.0) / (large.2 / (n - 4.0));
            assert!(f < 4.3, "{truth}: F = {f} prefers mixed");
            assert_eq!(best.0, truth, "{fits:?}");
        }
    }
    // The comparison document: ranking and the F test as computed by hand.
    let csv = inhibition_table(2.0, 5.0, 0.0002, 7);
    let d = dir.path().join("study.csv");
    std::fs::write(&d, &csv).unwrap();
    let (mc, mm) = (dir.path().join("c.mech"), dir.path().join("m.mech"));
    std::fs::write(&mc, inhibition_mechanism("competitive")).unwrap();
    std::fs::write(&mm, inhibition_mechanism("mixed")).unwrap();
    let out = ratewright(&[
        "fit",
        mc.to_str().unwrap(),
        mm.to_str().unwrap(),
        "--data",
        d.to_str().unwrap(),
        "--free",
        "kcat=1,Km_S=3,Ki_I=1,Kii_I=1",
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(
        j["ranking"][0]["file"].as_str().unwrap(),
        mm.to_str().unwrap(),
        "{j}"
    );
    let weights: f64 = j["ranking"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["akaike_weight"].as_f64().unwrap())
        .sum();
    assert!((weights - 1.0).abs() < 1e-12);
    let (small, large) = (&j["models"][0], &j["models"][1]);
    let (s1, s2) = (
        small["ssr"].as_f64().unwrap(),
        large["ssr"].as_f64().unwrap(),
    );
    let dof = large["dof"].as_f64().unwrap();
    let hand = (s1 - s2) / (s2 / dof);
    let reported = j["f_tests"][0]["f"].as_f64().unwrap();
    assert!(relative(reported, hand) < 1e-12, "F {reported} vs {hand}");
    assert!(j["f_tests"][0]["p_value"].as_f64().unwrap() < 0.05);
    // The competitive model has no Kii_I: skipped there, with a warning.
    assert!(small["warnings"].to_string().contains("Kii_I"), "{small}");
}

/// Coverage of the 95% intervals: 200 seeded synthetic inhibition studies
/// from known constants; the asymptotic and the profile intervals each
/// contain the true value in 90-99% of them (the nominal 95%, common
/// practice).
#[test]
fn interval_coverage_on_synthetic_rate_tables() {
    let dir = tempfile::tempdir().unwrap();
    let truth = [("kcat", 2.0), ("Km_S", 7.0), ("Ki_I", 2.0)];
    assert_coverage(&truth, 200, |seed| {
        let csv = inhibition_table(2.0, f64::INFINITY, 0.0005, 1000 + seed);
        fit_one(dir.path(), "competitive", &csv, &["--profile"])
    });
}

/// Fits `runs` seeded data sets and checks that the asymptotic and the
/// profile 95% intervals of each true value contain it in 90–99% of them
/// (counted separately).
fn assert_coverage(truth: &[(&str, f64)], runs: u64, fit: impl Fn(u64) -> Value) {
    let mut asymptotic = vec![0usize; truth.len()];
    let mut profile = vec![0usize; truth.len()];
    for seed in 0..runs {
        let j = fit(seed);
        for (k, (name, value)) in truth.iter().enumerate() {
            let p = &j["parameters"][name];
            let inside = |key: &str| {
                let lo = p[key][0].as_f64().unwrap_or(f64::NAN);
                let hi = p[key][1].as_f64().unwrap_or(f64::NAN);
                lo <= *value && *value <= hi
            };
            asymptotic[k] += inside("ci95") as usize;
            profile[k] += inside("profile95") as usize;
        }
    }
    for k in 0..truth.len() {
        for (what, count) in [("asymptotic", asymptotic[k]), ("profile", profile[k])] {
            let share = count as f64 / runs as f64;
            assert!(
                (0.90..=0.99).contains(&share),
                "{} {what} coverage {share}",
                truth[k].0
            );
        }
    }
}

/// Bad data: each problem is an error located at its file, row and column.
#[test]
fn bad_data_gets_located_errors() {
    let dir = tempfile::tempdir().unwrap();
    let m = dir.path().join("c.mech");
    std::fs::write(&m, inhibition_mechanism("competitive")).unwrap();
    for (csv, needle, located) in [
        ("S,I,v\n1,0,0.1\n2,x,0.2\n", "is not a number", "x"),
        ("S,Q,v\n1,0,0.1\n2,0,0.2\n", "not a species", "Q"),
        ("S,I,v\n1,0,0.1\n-2,0,0.2\n", "negative concentration", "-2"),
        ("S,I,v\n1,0,0.1\n2,0\n", "has 2 cells", "2,0"),
        ("S [mg],I,v\n1,0,0.1\n", "unknown unit", "S [mg]"),
        (
            "S [min],I,v\n1,0,0.1\n2,0,0.2\n3,0,0.1\n4,0,0.4\n",
            "dimension",
            "S [min]",
        ),
        ("S,I,rate\n1,0,0.1\n", "no response column", "S"),
    ] {
        let d = dir.path().join("bad.csv");
        std::fs::write(&d, csv).unwrap();
        let out = ratewright(&[
            "fit",
            m.to_str().unwrap(),
            "--data",
            d.to_str().unwrap(),
            "--free",
            "kcat=1,Km_S=3,Ki_I=1",
            "--format",
            "json",
        ]);
        assert_eq!(out.status.code(), Some(1), "{csv}");
        let j: Value = serde_json::from_slice(&out.stdout).unwrap();
        let diag = &j["diagnostics"][0];
        assert!(
            diag["message"].as_str().unwrap().contains(needle),
            "{csv}: {diag}"
        );
        assert_eq!(diag["code"], "E0901");
        assert!(
            diag["file"].as_str().unwrap().ends_with("bad.csv"),
            "{diag}"
        );
        let line = diag["line"].as_u64().unwrap() as usize;
        let column = diag["column"].as_u64().unwrap() as usize;
        let text_line = csv.lines().nth(line - 1).unwrap();
        assert!(
            text_line[column - 1..].starts_with(located),
            "{csv}: {diag}"
        );
    }
    // A free name the model does not have, and a missing data file.
    let d = dir.path().join("good.csv");
    std::fs::write(&d, "S,I,v\n1,0,0.1\n2,0,0.2\n4,0,0.3\n8,0,0.35\n").unwrap();
    let out = ratewright(&[
        "fit",
        m.to_str().unwrap(),
        "--data",
        d.to_str().unwrap(),
        "--free",
        "Km_Z=3",
    ]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("did you mean `Km_S`"));
    let out = ratewright(&[
        "fit",
        m.to_str().unwrap(),
        "--data",
        "/nonexistent.csv",
        "--free",
        "Km_S",
    ]);
    assert_eq!(out.status.code(), Some(2));
}

// ---------------------------------------------------------------------------
// Progress curves.

const FOUR_STEPS: &str = "species A = 10 uM, B, C, D, F\n\
    param k1 = 0.5 /s\nparam k2 = 0.2 /s\nparam k3 = 0.3 /s\nparam k4 = 0.1 /s\nparam k5 = 0.05 /s\n\
    step s1 A -> B with k1\nstep s2 B -> C with k2\nstep s3 C <=> D with k3, k4\nstep s4 D -> F with k5\n";

/// Three series (A(0) = 5, 10, 20 uM) of B and D at 16 times each, made
/// by `run` of the true model with seeded noise (sd 0.02 uM).
fn four_step_curves(dir: &Path) -> (String, Value) {
    let mut noise = Noise(42);
    let mut csv = String::from("series,t,A(0),B,D\n");
    let mut series = Vec::new();
    for (k, a0) in [5.0, 10.0, 20.0].iter().enumerate() {
        let m = dir.join("truth.mech");
        std::fs::write(&m, FOUR_STEPS.replace("A = 10 uM", &format!("A = {a0} uM"))).unwrap();
        let out_csv = dir.join("truth.csv");
        let out = ratewright(&[
            "run",
            m.to_str().unwrap(),
            "--until",
            "30",
            "--points",
            "16",
            "-o",
            out_csv.to_str().unwrap(),
        ]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let text = std::fs::read_to_string(&out_csv).unwrap();
        let (mut ts, mut bs, mut ds) = (vec![], vec![], vec![]);
        for line in text.lines().skip(1) {
            let v: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
            let (b, d) = (v[2] + 0.02 * noise.normal(), v[4] + 0.02 * noise.normal());
            csv.push_str(&format!("{},{},{a0},{b},{d}\n", k + 1, v[0]));
            ts.push(v[0]);
            bs.push(b);
            ds.push(d);
        }
        series.push(serde_json::json!({"A0": a0, "t": ts, "B": bs, "D": ds}));
    }
    (csv, serde_json::json!({"series": series, "k5": 0.05}))
}

/// Against SciPy (least_squares around solve_ivp Radau, rtol 1e-10) on the
/// same curves: the same optimum to 1e-6 relative and the same standard
/// errors to 1e-3.
#[test]
fn progress_curves_agree_with_scipy() {
    let dir = tempfile::tempdir().unwrap();
    let (csv, mut spec) = four_step_curves(dir.path());
    let start = [("k1", 0.3), ("k2", 0.3), ("k3", 0.2), ("k4", 0.2)];
    spec["start"] = serde_json::json!(
        start
            .iter()
            .map(|(n, v)| (n.to_string(), Value::from(*v)))
            .collect::<serde_json::Map<String, Value>>()
    );
    let free: Vec<String> = start.iter().map(|(n, v)| format!("{n}={v}")).collect();
    let spec_path = dir.path().join("spec.json");
    std::fs::write(&spec_path, spec.to_string()).unwrap();
    let out = common::python(
        &root().join("tests/python/fit_progress_scipy.py"),
        &[spec_path.to_str().unwrap()],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let reference: Value = serde_json::from_slice(&out.stdout).unwrap();
    // Plain and geodesic-accelerated steps reach the same optimum.
    for step in ["plain", "geodesic"] {
        let free = free.join(",");
        let j = fit_json(
            dir.path(),
            FOUR_STEPS,
            &csv,
            &["--free", &free, "--step", step],
        );
        assert_eq!(j["n"], 96);
        for (name, _) in start {
            let (v, se) = (
                j["parameters"][name]["value"].as_f64().unwrap(),
                j["parameters"][name]["stderr"].as_f64().unwrap(),
            );
            let (rv, rse) = (
                reference["params"][name].as_f64().unwrap(),
                reference["stderr"][name].as_f64().unwrap(),
            );
            assert!(
                relative(v, rv) < 1e-6,
                "{step} steps, {name}: {v} vs SciPy {rv}"
            );
            assert!(
                relative(se, rse) < 1e-3,
                "{step} steps, se({name}): {se} vs SciPy {rse}"
            );
        }
        assert!(
            relative(
                j["ssr"].as_f64().unwrap(),
                reference["ssr"].as_f64().unwrap()
            ) < 1e-8
        );
    }
}

/// `-o fitted.mech`: the model file with the fitted values in place, each
/// in the unit it was written in, layout and comments kept, one provenance
/// line (replaced, not added, on a refit, which moves the value only at
/// round-off). Never over an input.
#[test]
fn the_fitted_model_is_written_in_place() {
    let dir = tempfile::tempdir().unwrap();
    let model = dir.path().join("decay.mech");
    // Invented: first-order decay written in minutes; data in seconds.
    std::fs::write(&model, "# a decay\nspecies A = 1 uM, B  # start\nparam k = 0.5 /min \"rate\"\nstep s A -> B with k\n").unwrap();
    let data = dir.path().join("d.csv");
    let mut csv = String::from("t [s],A\n");
    for t in [0.0, 30.0, 60.0, 120.0, 240.0] {
        csv.push_str(&format!(
            "{t},{}\n",
            (-0.02 * t / 60.0 * 60.0f64).exp() * 1.0
        ));
    }
    std::fs::write(&data, &csv).unwrap();
    let out_path = dir.path().join("fitted.mech");
    let run = |m: &Path, o: &Path| {
        ratewright(&[
            "fit",
            m.to_str().unwrap(),
            "--data",
            data.to_str().unwrap(),
            "--free",
            "k",
            "-o",
            o.to_str().unwrap(),
        ])
    };
    let r = run(&model, &out_path);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let text = std::fs::read_to_string(&out_path).unwrap();
    // k = 0.02 /s = 1.2 /min.
    let line = text.lines().find(|l| l.starts_with("param k")).unwrap();
    let value: f64 = line.split_whitespace().nth(3).unwrap().parse().unwrap();
    assert!(relative(value, 1.2) < 1e-6, "{line}");
    assert!(line.contains("/min") && line.contains("\"rate\""), "{line}");
    assert!(text.starts_with("# fitted by `ratewright fit`"), "{text}");
    assert!(
        text.contains("# a decay\nspecies A = 1 uM, B  # start\n"),
        "{text}"
    );
    assert!(
        ratewright(&["check", "--deny-warnings", out_path.to_str().unwrap()])
            .status
            .success()
    );
    // Refit the written file into a second one: the same text.
    let again = dir.path().join("again.mech");
    assert!(run(&out_path, &again).status.success());
    let again_text = std::fs::read_to_string(&again).unwrap();
    assert_eq!(again_text.lines().count(), text.lines().count());
    assert_eq!(again_text.matches("# fitted by").count(), 1);
    let line = again_text
        .lines()
        .find(|l| l.starts_with("param k"))
        .unwrap();
    let refit: f64 = line.split_whitespace().nth(3).unwrap().parse().unwrap();
    assert!(relative(refit, value) < 1e-9, "{line}");
    // Never over an input.
    let before = std::fs::read_to_string(&model).unwrap();
    let r = run(&model, &model);
    assert_eq!(r.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&model).unwrap(), before);
}

/// Multi-start: from Eckerle4's first NIST start the log-scale path fails
/// (above); with starts over bounds around the certified region the best
/// optimum is the certified one (NIST StRD), and the spread is reported.
#[test]
fn multi_start_finds_the_certified_optimum_of_eckerle4() {
    let dir = tempfile::tempdir().unwrap();
    let c = read_nist("Eckerle4");
    let (mech, csv) = nist_files(&NIST[4], &c);
    let free = "b1=1:0.1..10,b2=10:1..100,b3=500:300..600";
    let j = fit_json(dir.path(), &mech, &csv, &["--free", free, "--starts", "16"]);
    for (i, n) in c.names.iter().enumerate() {
        let v = j["parameters"][n]["value"].as_f64().unwrap();
        assert!(relative(v, c.values[i]) < 1e-6, "{n} = {v}");
    }
    assert!(j["warnings"].to_string().contains("multi-start"), "{j}");
}

/// `NAME[series]`: one value per series. The four-step curves without
/// their A(0) column, with A(0) free per series: the three starting
/// amounts (5, 10, 20 uM, the values the data were made with) lie in their
/// 95% intervals, and the shared constants in theirs.
#[test]
fn per_series_free_values() {
    let dir = tempfile::tempdir().unwrap();
    let (csv, _) = four_step_curves(dir.path());
    let without: String = csv
        .lines()
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            format!("{},{},{},{}\n", cells[0], cells[1], cells[3], cells[4])
        })
        .collect();
    let j = fit_json(
        dir.path(),
        FOUR_STEPS,
        &without,
        &["--free", "k1=0.3,k2=0.3,k3=0.2,k4=0.2,A(0)[series]=8"],
    );
    for (name, truth) in [
        ("A(0)[1]", 5.0),
        ("A(0)[2]", 10.0),
        ("A(0)[3]", 20.0),
        ("k1", 0.5),
        ("k4", 0.1),
    ] {
        let p = &j["parameters"][name];
        let (lo, hi) = (
            p["ci95"][0].as_f64().unwrap(),
            p["ci95"][1].as_f64().unwrap(),
        );
        assert!(
            lo <= truth && truth <= hi,
            "{name}: [{lo}, {hi}] misses {truth}: {j}"
        );
    }
    assert_eq!(j["parameters"].as_object().unwrap().len(), 7);
}

/// `--plot`: a figure of the data, the fitted curves (one per inhibitor
/// level) and the residuals, committed with the other outputs; refused
/// before any work for several models or a wrong extension.
#[test]
fn the_fit_figure_is_drawn() {
    let dir = tempfile::tempdir().unwrap();
    let csv = inhibition_table(2.0, f64::INFINITY, 0.0002, 3);
    let m = dir.path().join("c.mech");
    std::fs::write(&m, inhibition_mechanism("competitive")).unwrap();
    let d = dir.path().join("d.csv");
    std::fs::write(&d, &csv).unwrap();
    let svg = dir.path().join("fit.svg");
    let base = [
        "fit",
        m.to_str().unwrap(),
        "--data",
        d.to_str().unwrap(),
        "--free",
        "kcat=1,Km_S=3,Ki_I=1",
    ];
    let mut args = base.to_vec();
    args.extend(["--plot", svg.to_str().unwrap()]);
    let out = ratewright(&args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&svg).unwrap();
    // 28 data points and 28 residuals as circles; four curves, one per I.
    assert_eq!(text.matches("<circle").count(), 56, "circles");
    for level in ["I = 0", "I = 1", "I = 3", "I = 9"] {
        assert!(text.contains(level), "no curve labelled {level}");
    }
    let mut args = base.to_vec();
    args.extend(["--plot", "fit.pdf"]);
    assert_eq!(ratewright(&args).status.code(), Some(2));
    let out = ratewright(&[
        "fit",
        m.to_str().unwrap(),
        m.to_str().unwrap(),
        "--data",
        d.to_str().unwrap(),
        "--free",
        "kcat",
        "--plot",
        svg.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2));
}

/// `NAME[series]` in a rate table: two enzyme preparations (series 1 and
/// 2) with their own kcat and a shared Km, from noiseless Michaelis–Menten
/// data (v = kcat·Et·S/(Km + S), Michaelis & Menten 1913): both kcats and
/// the shared Km come back exactly.
#[test]
fn per_series_values_in_a_rate_table() {
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from("series,S,I,v\n");
    for (series, kcat) in [(1, 2.0), (2, 3.5)] {
        for s in [1.0, 2.0, 4.0, 8.0, 16.0, 32.0] {
            csv.push_str(&format!("{series},{s},0,{}\n", kcat * 0.01 * s / (7.0 + s)));
        }
    }
    let j = fit_one_with(dir.path(), "competitive", &csv, "kcat[series]=1,Km_S=3");
    for (name, truth) in [("kcat[1]", 2.0), ("kcat[2]", 3.5), ("Km_S", 7.0)] {
        let v = j["parameters"][name]["value"].as_f64().unwrap();
        assert!(relative(v, truth) < 1e-6, "{name} = {v}: {j}");
    }
}

fn fit_one_with(dir: &Path, kind: &str, csv: &str, free: &str) -> Value {
    fit_json(dir, &inhibition_mechanism(kind), csv, &["--free", free])
}

#[test]
fn the_double_reciprocal_view_is_drawn_for_rate_tables_only() {
    let dir = tempfile::tempdir().unwrap();
    let root = common::root();
    let figure = dir.path().join("lb.svg");
    let o = ratewright(&[
        "fit",
        root.join("models/lipase_competitive.mech")
            .to_str()
            .unwrap(),
        "--data",
        root.join("models/data/lipase_inhibition.csv")
            .to_str()
            .unwrap(),
        "--free",
        "kcat=10,Km_S=10,Ki_I=1",
        "--plot",
        figure.to_str().unwrap(),
        "--reciprocal",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let svg = std::fs::read_to_string(&figure).unwrap();
    assert!(
        svg.contains("1/S (1/(uM))"),
        "the axis names the reciprocal"
    );
    let o = ratewright(&[
        "fit",
        root.join("models/plate_reader.mech").to_str().unwrap(),
        "--data",
        root.join("models/data/plate_reader.csv").to_str().unwrap(),
        "--free",
        "k_cat=2",
        "--plot",
        dir.path().join("pc.svg").to_str().unwrap(),
        "--reciprocal",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("rate table"));
    assert!(
        !dir.path().join("pc.svg").exists(),
        "nothing written on refusal"
    );
}

/// Progress curves of A ⇌ B from two starts, from the closed form
/// B = A0·k1/(k1 + k2)·(1 − e^{−(k1+k2)t}) (first-order relaxation, common
/// practice) with normal noise of standard deviation `sd`.
fn relaxation_curves(k1: f64, k2: f64, sd: f64, seed: u64) -> String {
    let mut noise = Noise(seed);
    let mut out = String::from("series,t,A(0),B\n");
    for (series, a0) in [(1, 5.0), (2, 10.0)] {
        for k in 1..=15 {
            let t = k as f64 * 0.8;
            let b = a0 * k1 / (k1 + k2) * (1.0 - (-(k1 + k2) * t).exp());
            out.push_str(&format!("{series},{t},{a0},{}\n", b + sd * noise.normal()));
        }
    }
    out
}

#[test]
fn interval_coverage_on_synthetic_progress_curves() {
    // 200 seeded data sets from known constants; the 95% intervals
    // (asymptotic and profile, counted separately) should contain the
    // truth in 90–99% of them.
    let dir = tempfile::tempdir().unwrap();
    let mech = "species A = 5 uM, B = 0\nparam k1 = 0.3 /s\nparam k2 = 0.2 /s\nstep flip A <=> B with k1, k2\n";
    let truth = [("k1", 0.4), ("k2", 0.1)];
    assert_coverage(&truth, 200, |seed| {
        let csv = relaxation_curves(0.4, 0.1, 0.05, 5000 + seed);
        fit_json(dir.path(), mech, &csv, &["--free", "k1,k2", "--profile"])
    });
}
