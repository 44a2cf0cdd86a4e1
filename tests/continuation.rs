//! `scan --steady --follow` (issue 16): the steady-state branch of
//! Schlögl's second model (Schlögl 1972) against the closed-form cubic,
//! its two folds against the cubic's discriminant, the branch followed
//! through the hysteresis loop in both directions, and the Hopf point of
//! the Brusselator at B = 1 + A² (Prigogine & Lefever 1968).

mod common;

use common::ratewright;
use std::path::{Path, PathBuf};

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// Schlögl's second model with A and B buffered:
/// dX/dt = k1·A·X² − k2·X³ − k3·X + k4·B.
const SCHLOGL: &str = "mechanism schlogl \"Schlögl's second model: a cubic steady state\"
species X = 0.1 uM
fixed A = 1 uM
fixed B = 0.2 uM
param k1 = 3 /uM^2/s
param k2 = 1 /uM^2/s
param k3 = 2.5 /s
param k4 = 1 /s
step auto A + 2 X <=> 3 X with k1, k2
step exchange X <=> B with k3, k4
";
const K1A: f64 = 3.0;
const K2: f64 = 1.0;
const K3: f64 = 2.5;
const K4: f64 = 1.0;

/// The cubic's coefficients in X at buffered B: a X³ + b X² + c X + d.
fn cubic(b_value: f64) -> [f64; 4] {
    [-K2, K1A, -K3, K4 * b_value]
}

/// Its discriminant 18abcd − 4b³d + b²c² − 4ac³ − 27a²d² (zero where two
/// roots meet: the folds).
fn discriminant(b_value: f64) -> f64 {
    let [a, b, c, d] = cubic(b_value);
    18.0 * a * b * c * d - 4.0 * b.powi(3) * d + b * b * c * c
        - 4.0 * a * c.powi(3)
        - 27.0 * a * a * d * d
}

/// The folds in closed form: the double roots X of the cubic, where its
/// X-derivative −3k2X² + 2k1A·X − k3 vanishes, and the B there.
fn folds() -> [(f64, f64); 2] {
    let root = (4.0 * K1A * K1A - 12.0 * K2 * K3).sqrt();
    [
        (2.0 * K1A - root) / (6.0 * K2),
        (2.0 * K1A + root) / (6.0 * K2),
    ]
    .map(|x| {
        let b = (K2 * x.powi(3) - K1A * x * x + K3 * x) / K4;
        (b, x)
    })
}

/// (B, X, stability, point) rows of a followed branch, and stderr.
fn follow(model: &Path, vary: &str) -> (Vec<(f64, f64, String, String)>, String) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("branch.csv");
    let plot = dir.path().join("branch.svg");
    let o = ratewright(&[
        "scan",
        model.to_str().unwrap(),
        "--vary",
        vary,
        "--steady",
        "--follow",
        "--measure",
        "X",
        "-o",
        out.to_str().unwrap(),
        "--plot",
        plot.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&o.stderr).to_string();
    assert!(o.status.success(), "{stderr}");
    let svg = std::fs::read_to_string(&plot).unwrap();
    assert!(svg.contains("<svg"), "a figure was written");
    let text = std::fs::read_to_string(out).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("B,X,stability,point"));
    let rows = lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[0].parse().unwrap(),
                f[1].parse().unwrap(),
                f[2].to_string(),
                f[3].to_string(),
            )
        })
        .collect();
    (rows, stderr)
}

fn special(rows: &[(f64, f64, String, String)], kind: &str) -> Vec<(f64, f64)> {
    rows.iter()
        .filter(|r| r.3 == kind)
        .map(|r| (r.0, r.1))
        .collect()
}

#[test]
fn schlogl_folds_match_the_cubic_discriminant_in_both_directions() {
    let dir = tempfile::tempdir().unwrap();
    let model = write(dir.path(), "schlogl.mech", SCHLOGL);
    let closed_form = folds();
    // The closed form is a double root: the discriminant vanishes there.
    for (b, _) in closed_form {
        assert!(
            discriminant(b).abs() < 1e-12,
            "discriminant at {b}: {}",
            discriminant(b)
        );
    }
    for vary in ["B=0..1.2:61", "B=1.2..0:61"] {
        let (rows, stderr) = follow(&model, vary);
        let mut found = special(&rows, "fold");
        found.sort_by(|a, b| a.1.total_cmp(&b.1));
        assert_eq!(found.len(), 2, "{vary}: two folds: {found:?}");
        // Sorted by X, like the closed form (the lower branch's fold, at
        // the larger B, first).
        for ((b, x), (b_want, x_want)) in found.iter().zip(closed_form) {
            assert!(
                (b - b_want).abs() <= 1e-6 * b_want,
                "{vary}: fold at B = {b} vs {b_want}"
            );
            assert!(
                (x - x_want).abs() <= 1e-6 * x_want,
                "{vary}: fold at X = {x} vs {x_want}"
            );
        }
        assert_eq!(stderr.matches("fold (saddle-node)").count(), 2, "{stderr}");
        // Every branch point is a root of the cubic at its B.
        for (b, x, _, _) in &rows {
            let [a3, a2, a1, a0] = cubic(*b);
            let residual = a3 * x.powi(3) + a2 * x * x + a1 * x + a0;
            assert!(residual.abs() < 1e-8, "({b}, {x}): residual {residual}");
        }
        // Stable on the outer branches, unstable on the middle one (the
        // cubic's slope there is positive: dF/dX > 0).
        for (b, x, stability, point) in &rows {
            if !point.is_empty() {
                continue;
            }
            let slope = -3.0 * K2 * x * x + 2.0 * K1A * x - K3;
            let want = if slope < 0.0 { "stable" } else { "unstable" };
            if slope.abs() > 1e-6 {
                assert_eq!(stability, want, "({b}, {x})");
            }
        }
        // The branch passes the whole bistable range: three steady states
        // at B = 0.5 appear among its points.
        let crossings = rows
            .windows(2)
            .filter(|w| (w[0].0 - 0.5) * (w[1].0 - 0.5) <= 0.0)
            .count();
        assert_eq!(
            crossings, 3,
            "{vary}: the branch crosses B = 0.5 three times"
        );
    }
}

#[test]
fn brusselator_hopf_point_is_at_one_plus_a_squared() {
    // Brusselator with unit rate constants: steady state X = A, Y = B/A;
    // trace of the Jacobian B − 1 − A², determinant A², so a Hopf point at
    // B = 1 + A² with angular frequency A (Prigogine & Lefever 1968).
    let dir = tempfile::tempdir().unwrap();
    for a in [1.0f64, 1.5] {
        let model = write(
            dir.path(),
            "brusselator.mech",
            &format!(
                "mechanism brusselator \"Brusselator, unit rate constants\"
species X = 1 uM, Y = 1 uM
fixed A = {a} uM
fixed B = 1.5 uM
param k1 = 1 /s
param k2 = 1 /uM^2/s
param k3 = 1 /uM/s
param k4 = 1 /s
step feed A -> A + X with k1
step auto 2 X + Y -> 3 X with k2
step convert B + X -> B + Y with k3
step decay X -> 0 with k4
"
            ),
        );
        let want = 1.0 + a * a;
        let (rows, stderr) = follow(&model, &format!("B=1..{}:41", want + 1.0));
        let hopf = special(&rows, "hopf");
        assert_eq!(hopf.len(), 1, "A = {a}: {rows:?}");
        assert!(
            (hopf[0].0 - want).abs() <= 1e-6 * want,
            "A = {a}: Hopf at B = {} vs {want}",
            hopf[0].0
        );
        assert!(
            (hopf[0].1 - a).abs() <= 1e-6 * a,
            "X = A at the steady state"
        );
        let line = stderr.lines().find(|l| l.contains("Hopf point")).unwrap();
        let frequency: f64 = line
            .split("angular frequency ")
            .nth(1)
            .and_then(|r| r.split(')').next())
            .unwrap()
            .parse()
            .unwrap();
        assert!((frequency - a).abs() <= 1e-5 * a, "{line}");
        // Stable before, unstable after.
        for (b, _, stability, point) in &rows {
            if point.is_empty() && (b - want).abs() > 1e-3 {
                assert_eq!(
                    stability,
                    if *b < want { "stable" } else { "unstable" },
                    "B = {b}"
                );
            }
        }
    }
}

#[test]
fn follow_refuses_what_it_cannot_follow() {
    let dir = tempfile::tempdir().unwrap();
    let model = write(dir.path(), "schlogl.mech", SCHLOGL);
    let m = model.to_str().unwrap();
    for (args, needle) in [
        (
            vec![
                "scan",
                m,
                "--vary",
                "B=0..1",
                "--vary",
                "k1=1..2",
                "--steady",
                "--follow",
                "--measure",
                "X",
            ],
            "exactly one",
        ),
        (
            vec![
                "scan",
                m,
                "--vary",
                "X=0..1",
                "--steady",
                "--follow",
                "--measure",
                "X",
            ],
            "species",
        ),
        (
            vec![
                "scan",
                m,
                "--vary",
                "B=0..1",
                "--at",
                "1 s",
                "--follow",
                "--measure",
                "X",
            ],
            "--steady",
        ),
    ] {
        let o = ratewright(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
        let e = String::from_utf8_lossy(&o.stderr);
        assert!(e.contains(needle), "{args:?}: {e}");
    }
}
