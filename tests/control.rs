//! `ratewright control` end to end: control coefficients of linear
//! pathways against their closed forms in elasticities, response
//! coefficients against finite differences of `steady` on every demo model
//! with a stable steady state, and the summation and connectivity theorems
//! at round-off.

mod common;

use common::{models, ratewright};
use serde_json::Value;
use std::path::Path;

fn control_json(path: &Path, extra: &[&str]) -> Value {
    let mut args = vec!["control", path.to_str().unwrap(), "--format", "json"];
    args.extend_from_slice(extra);
    let out = ratewright(&args);
    assert!(
        out.status.success(),
        "{}: {}",
        path.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn write(dir: &Path, name: &str, text: &str) -> std::path::PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn f(j: &Value, a: &str, b: &str, c: &str) -> f64 {
    j[a][b][c]
        .as_f64()
        .unwrap_or_else(|| panic!("{a}.{b}.{c} in {j}"))
}

/// Two steps, S0 <=> X -> P: C^J_1 = ε²/(ε² − ε¹), C^J_2 = −ε¹/(ε² − ε¹),
/// C^X_1 = 1/(ε² − ε¹) = −C^X_2 (Kacser & Burns 1973; Heinrich & Rapoport
/// 1974), with the elasticities as reported; and the closed-form steady
/// state X = k1 S0/(k−1 + k2), ε¹ = −k−1 X/(k1 S0 − k−1 X), ε² = 1.
#[test]
fn two_step_pathway_closed_forms() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "two.mech",
        "fixed S0 = 10 uM\nspecies X = 1 uM\nfixed P = 0 uM\nparam k1 = 2 /s\nparam km1 = 1 /s\nparam k2 = 3 /s\n\
         step v1 S0 <=> X with k1, km1\nstep v2 X -> P with k2\n",
    );
    let j = control_json(&p, &[]);
    let x = 2.0 * 10.0 / (1.0 + 3.0);
    assert!((j["state"]["X"].as_f64().unwrap() - x).abs() < 1e-9 * x);
    let e1 = -x / (2.0 * 10.0 - x);
    assert!((f(&j, "elasticities", "v1", "X") - e1).abs() < 1e-10);
    assert!((f(&j, "elasticities", "v2", "X") - 1.0).abs() < 1e-10);
    let d = 1.0 - e1;
    for flux in ["v1", "v2"] {
        assert!((f(&j, "flux_control", flux, "v1") - 1.0 / d).abs() < 1e-10);
        assert!((f(&j, "flux_control", flux, "v2") + e1 / d).abs() < 1e-10);
    }
    assert!((f(&j, "concentration_control", "X", "v1") - 1.0 / d).abs() < 1e-10);
    assert!((f(&j, "concentration_control", "X", "v2") + 1.0 / d).abs() < 1e-10);
}

/// Three steps, S0 <=> X1 <=> X2 -> P: with ε^i_j the elasticity of step i
/// to X_j, C^J_1 = ε²₁ε³₂/D, C^J_2 = −ε¹₁ε³₂/D, C^J_3 = ε¹₁ε²₂/D,
/// D = ε²₁ε³₂ − ε¹₁ε³₂ + ε¹₁ε²₂ (Fell 1997, Understanding the Control of
/// Metabolism, ch. 5, from memory); the scaled summation and connectivity
/// theorems to 1e-10 (Kacser & Burns 1973).
#[test]
fn three_step_pathway_closed_forms_and_theorems() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "three.mech",
        "fixed S0 = 10 uM\nspecies X1 = 1 uM, X2 = 1 uM\nfixed P = 0 uM\n\
         param k1 = 2 /s\nparam km1 = 1 /s\nparam k2 = 3 /s\nparam km2 = 0.5 /s\nparam k3 = 1.5 /s\n\
         step v1 S0 <=> X1 with k1, km1\nstep v2 X1 <=> X2 with k2, km2\nstep v3 X2 -> P with k3\n",
    );
    let j = control_json(&p, &[]);
    let e = |step: &str, x: &str| f(&j, "elasticities", step, x);
    let (e11, e21, e22, e32) = (e("v1", "X1"), e("v2", "X1"), e("v2", "X2"), e("v3", "X2"));
    let d = e21 * e32 - e11 * e32 + e11 * e22;
    let closed = [e21 * e32 / d, -e11 * e32 / d, e11 * e22 / d];
    for (k, step) in ["v1", "v2", "v3"].iter().enumerate() {
        let c = f(&j, "flux_control", "v3", step);
        assert!(
            (c - closed[k]).abs() < 1e-10,
            "C^J_{step} = {c}, closed form {}",
            closed[k]
        );
    }
    // Scaled summation: Σ_k C^J_k = 1, Σ_k C^X_k = 0; connectivity:
    // Σ_k C^J_k ε^k_X = 0, Σ_k C^Xh_k ε^k_Xi = −δ_hi.
    let steps = ["v1", "v2", "v3"];
    let sum: f64 = steps.iter().map(|s| f(&j, "flux_control", "v3", s)).sum();
    assert!((sum - 1.0).abs() < 1e-10);
    for x in ["X1", "X2"] {
        let s: f64 = steps
            .iter()
            .map(|k| f(&j, "concentration_control", x, k))
            .sum();
        assert!(s.abs() < 1e-10, "{x}: {s}");
        let c: f64 = steps
            .iter()
            .map(|k| f(&j, "flux_control", "v3", k) * e(k, x))
            .sum();
        assert!(c.abs() < 1e-10, "connectivity {x}: {c}");
        for h in ["X1", "X2"] {
            let c: f64 = steps
                .iter()
                .map(|k| f(&j, "concentration_control", h, k) * e(k, x))
                .sum();
            let expected = if h == x { -1.0 } else { 0.0 };
            assert!((c - expected).abs() < 1e-10, "{h} {x}: {c}");
        }
    }
}

/// Every demo model with a stable steady state: the scaled concentration
/// response to each param equals central finite differences of `steady
/// --set` (d ln S / d ln p, to 1e-4 relative plus 1e-6),
/// and the theorems' residuals are at round-off.
#[test]
fn responses_match_finite_differences_of_steady() {
    let steady = |path: &Path, set: Option<String>| -> Option<Value> {
        let mut args = vec![
            "steady".to_string(),
            path.to_str().unwrap().to_string(),
            "--format".into(),
            "json".into(),
        ];
        if let Some(s) = set {
            args.extend(["--set".into(), s]);
        }
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        let out = ratewright(&refs);
        out.status
            .success()
            .then(|| serde_json::from_slice(&out.stdout).unwrap())
    };
    let mut checked = 0;
    for path in models() {
        let Some(base) = steady(&path, None) else {
            continue;
        };
        if base["stable"] != true {
            continue;
        }
        let out = ratewright(&["control", path.to_str().unwrap(), "--format", "json"]);
        if !out.status.success() {
            continue;
        }
        let j: Value = serde_json::from_slice(&out.stdout).unwrap();
        for (name, r) in j["theorem_residuals"].as_object().unwrap() {
            assert!(
                r.as_f64().unwrap() < 1e-10,
                "{}: {name} {r}",
                path.display()
            );
        }
        let text = std::fs::read_to_string(&path).unwrap();
        let value_of = |p: &str| -> Option<f64> {
            let line = text
                .lines()
                .find(|l| l.trim_start().starts_with(&format!("param {p} ")))?;
            line.split('=')
                .nth(1)?
                .split_whitespace()
                .next()?
                .parse()
                .ok()
        };
        let unit_of = |p: &str| -> String {
            let line = text
                .lines()
                .find(|l| l.trim_start().starts_with(&format!("param {p} ")))
                .unwrap();
            let rest = line.split('=').nth(1).unwrap().trim();
            let unit: Vec<&str> = rest
                .split_whitespace()
                .skip(1)
                .take_while(|w| !w.starts_with('"'))
                .collect();
            unit.join(" ")
        };
        let h = 1e-3;
        let params: Vec<String> = j["concentration_response"]
            .as_object()
            .unwrap()
            .values()
            .next()
            .and_then(Value::as_object)
            .map(|row| row.keys().cloned().collect())
            .unwrap_or_default();
        for p in params {
            let Some(v) = value_of(&p) else { continue };
            let unit = unit_of(&p);
            let up = steady(&path, Some(format!("{p}={} {unit}", v * (1.0 + h))));
            let down = steady(&path, Some(format!("{p}={} {unit}", v * (1.0 - h))));
            let (Some(up), Some(down)) = (up, down) else {
                continue;
            };
            for (species, per_param) in j["concentration_response"].as_object().unwrap() {
                let Some(r) = per_param[&p].as_f64() else {
                    continue;
                };
                let (a, b) = (
                    up["state"][species].as_f64().unwrap(),
                    down["state"][species].as_f64().unwrap(),
                );
                let s0 = base["state"][species].as_f64().unwrap();
                if s0.abs() < 1e-9 || a <= 0.0 || b <= 0.0 {
                    continue;
                }
                let fd = (a.ln() - b.ln()) / ((1.0 + h) / (1.0 - h)).ln();
                assert!(
                    (fd - r).abs() <= 1e-4 * r.abs() + 1e-6,
                    "{}: d ln {species}/d ln {p}: control {r}, finite differences {fd}",
                    path.display()
                );
                checked += 1;
            }
        }
    }
    assert!(checked > 20, "only {checked} responses checked");
}
