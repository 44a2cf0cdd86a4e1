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

/// The six NIST problems of ../shared/data/nist-strd, their models as
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
    root().join("../shared/data/nist-strd")
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
/// which the fit must not report as determined.
#[test]
fn nist_strd_certified_values_from_both_starts() {
    for scale in ["linear", "log"] {
        let failures = nist_failures(scale);
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

fn nist_failures(scale: &str) -> Vec<String> {
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
                &["--free", &free, "--scale", scale],
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
                if !(relative(v, c.values[i]) <= 1e-6) {
                    failures.push(format!(
                        "{} start {}: {n} = {v} vs certified {}",
                        problem.file,
                        k + 1,
                        c.values[i]
                    ));
                }
                if !(relative(se, c.stderr[i]) <= 1e-3) {
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
