//! `ratewright control FILE`: metabolic control analysis at the steady
//! state (CLI.md, second round). JSON shape: `state` (species → value),
//! `fluxes` (step → value), `elasticities` (step → species or param →
//! value), `flux_control` (step whose flux is controlled → step → value),
//! `concentration_control` (species → step → value); also
//! `flux_response`, `concentration_response`, `theorem_residuals`,
//! `stability`. Coefficients are scaled; an undefined one (zero flux or
//! concentration) is `null`.

use super::Format;
use super::common::{EXIT_MODEL, pad_end, report_failure, write_stdout};
use super::run::model_with_overrides;
use crate::control::{ControlAnalysis, control};
use crate::sim::steady::Stability;
use serde_json::{Map, Value, json};
use std::process::ExitCode;

/// The same arguments as `steady`: the analysis is at its steady state.
pub use super::steady::Args;

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == Format::Json;
    let (model, sources) = match model_with_overrides(&args.file, &args.set, json) {
        Ok(m) => m,
        Err(code) => return code,
    };
    let a = match control(&model) {
        Ok(a) => a,
        Err(d) => return report_failure(&[d], &sources, json, EXIT_MODEL),
    };
    let text = if json {
        format!(
            "{}\n",
            serde_json::to_string_pretty(&document(&a)).unwrap_or_default()
        )
    } else {
        human(&a)
    };
    match write_stdout(&text) {
        Ok(()) => ExitCode::SUCCESS,
        Err(code) => code,
    }
}

fn number(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

fn table(rows: &[String], columns: &[String], values: &[Vec<f64>]) -> Value {
    Value::Object(
        rows.iter()
            .zip(values)
            .map(|(r, row)| {
                (
                    r.clone(),
                    Value::Object(
                        columns
                            .iter()
                            .zip(row)
                            .map(|(c, v)| (c.clone(), number(*v)))
                            .collect(),
                    ),
                )
            })
            .collect(),
    )
}

fn stability_word(s: Stability) -> &'static str {
    match s {
        Stability::Stable => "stable",
        Stability::Unstable => "unstable",
        Stability::Marginal => "marginal",
    }
}

fn document(a: &ControlAnalysis) -> Value {
    let mut elasticities = Map::new();
    for (k, step) in a.steps.iter().enumerate() {
        let mut row: Map<String, Value> = a
            .species
            .iter()
            .zip(&a.elasticities[k])
            .map(|(s, v)| (s.clone(), number(*v)))
            .collect();
        row.extend(
            a.params
                .iter()
                .zip(&a.param_elasticities[k])
                .map(|(p, v)| (p.clone(), number(*v))),
        );
        elasticities.insert(step.clone(), Value::Object(row));
    }
    json!({
        "state": Value::Object(a.species.iter().zip(&a.state).map(|(s, v)| (s.clone(), number(*v))).collect()),
        "fluxes": Value::Object(a.steps.iter().zip(&a.fluxes).map(|(s, v)| (s.clone(), number(*v))).collect()),
        "stability": stability_word(a.stability),
        "elasticities": elasticities,
        "flux_control": table(&a.steps, &a.steps, &a.flux_control),
        "concentration_control": table(&a.species, &a.steps, &a.concentration_control),
        "flux_response": table(&a.steps, &a.params, &a.flux_response),
        "concentration_response": table(&a.species, &a.params, &a.concentration_response),
        "theorem_residuals": {
            "flux_summation": a.residuals[0],
            "concentration_summation": a.residuals[1],
            "flux_connectivity": a.residuals[2],
            "concentration_connectivity": a.residuals[3],
        },
    })
}

fn matrix_text(title: &str, rows: &[String], columns: &[String], values: &[Vec<f64>]) -> String {
    let width = rows
        .iter()
        .chain(columns)
        .map(|s| s.chars().count())
        .max()
        .unwrap_or(4)
        .max(10);
    let mut out = format!("{title}\n  {}", pad_end("", width));
    for c in columns {
        out.push_str(&format!("  {:>width$}", c));
    }
    out.push('\n');
    for (r, row) in rows.iter().zip(values) {
        out.push_str(&format!("  {}", pad_end(r, width)));
        for v in row {
            let cell = if v.is_finite() {
                format!("{v:.4}")
            } else {
                "—".to_string()
            };
            out.push_str(&format!("  {:>width$}", cell));
        }
        out.push('\n');
    }
    out.push('\n');
    out
}

fn human(a: &ControlAnalysis) -> String {
    let mut out = format!(
        "control analysis at the steady state ({})\n\n",
        stability_word(a.stability)
    );
    out.push_str("fluxes:\n");
    for (s, v) in a.steps.iter().zip(&a.fluxes) {
        out.push_str(&format!("  {} = {v:.6e}\n", pad_end(s, 12)));
    }
    out.push('\n');
    out.push_str(&matrix_text(
        "flux control coefficients (row: flux of; column: step):",
        &a.steps,
        &a.steps,
        &a.flux_control,
    ));
    out.push_str(&matrix_text(
        "concentration control coefficients (row: species; column: step):",
        &a.species,
        &a.steps,
        &a.concentration_control,
    ));
    out.push_str(&matrix_text(
        "elasticities (row: step; column: species):",
        &a.steps,
        &a.species,
        &a.elasticities,
    ));
    if !a.params.is_empty() {
        out.push_str(&matrix_text(
            "flux response coefficients (row: flux of; column: param):",
            &a.steps,
            &a.params,
            &a.flux_response,
        ));
    }
    out.push_str(&format!(
        "theorems (largest relative residual): flux summation {:.1e}, concentration summation {:.1e}, flux connectivity {:.1e}, concentration connectivity {:.1e}\n",
        a.residuals[0], a.residuals[1], a.residuals[2], a.residuals[3]
    ));
    out
}
