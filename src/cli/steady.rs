//! `ratewright steady FILE`: the steady state in the stoichiometric class of
//! the initial state, the eigenvalues of the reduced Jacobian there, and
//! stability. JSON shape (CLI.md): `state` (species → value), `eigenvalues`
//! ([real, imaginary] pairs), `stable`; also `observables`, `stability`,
//! `units`.

use super::Format;
use super::common::{EXIT_MODEL, pad_end, report_failure, write_stdout};
use super::run::{model_with_overrides, sim_failure};
use crate::diagnostics::Diagnostic;
use crate::sim::steady::{Stability, steady_state};
use crate::sim::{Prepared, Settings};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// Override a param, initial value, fixed species or total (`S=5mM`); repeatable.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    pub format: Format,
}

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == Format::Json;
    let (model, sources) = match model_with_overrides(&args.file, &args.set, json) {
        Ok(m) => m,
        Err(code) => return code,
    };
    let prepared = match Prepared::reduced(&model) {
        Ok(p) => p,
        Err(d) => return report_failure(&[d], &sources, json, EXIT_MODEL),
    };
    let result = match steady_state(&prepared, &Settings::default()) {
        Ok(s) => s,
        Err(e) if json => {
            let d = Diagnostic::error(e.code(), e.to_string());
            return report_failure(&[d], &sources, json, EXIT_MODEL);
        }
        Err(e) => return sim_failure(&e),
    };
    let m = &prepared.model;
    let nsp = m.species.len();
    // A steady state does not run the protocol. Where a `when` event's
    // condition holds at the state found, the protocol would have fired it
    // on the way there, so the state is not the one the assay reaches.
    if let Some(refusal) = triggered_on_the_way(m, &result.values[..nsp]) {
        if json {
            let d = Diagnostic::error(crate::diagnostics::Code::NoSteadyState, refusal);
            return report_failure(&[d], &sources, json, EXIT_MODEL);
        }
        return super::common::run_error(format!("[E0702] {refusal}"));
    }
    let stability = match result.stability {
        Stability::Stable => "stable",
        Stability::Unstable => "unstable",
        Stability::Marginal => "marginal",
    };
    match args.format {
        Format::Json => {
            let state: serde_json::Map<String, serde_json::Value> = m
                .species
                .iter()
                .zip(&result.values)
                .map(|(s, v)| (s.name.clone(), serde_json::json!(v)))
                .collect();
            let observables: serde_json::Map<String, serde_json::Value> = m
                .observables
                .iter()
                .zip(&result.values[nsp..])
                .map(|(o, v)| (o.name.clone(), serde_json::json!(v)))
                .collect();
            let eig: Vec<[f64; 2]> = result
                .eigenvalues
                .iter()
                .map(|(re, im)| [*re, *im])
                .collect();
            let v = serde_json::json!({
                "state": state,
                "observables": observables,
                "eigenvalues": eig,
                "stable": result.stability == Stability::Stable,
                "stability": stability,
                "units": { "concentration": m.units.concentration.symbol(), "time": m.units.time.symbol() },
                "residual": result.residual,
            });
            let text = serde_json::to_string_pretty(&v).unwrap_or_default();
            if let Err(failed) = write_stdout(&format!("{text}\n")) {
                return failed;
            }
        }
        Format::Human => {
            let conc = m.units.concentration.symbol();
            let time = m.units.time.symbol();
            let width = m
                .species
                .iter()
                .map(|s| s.name.chars().count())
                .chain(m.observables.iter().map(|o| o.name.chars().count()))
                .max()
                .unwrap_or(1);
            let mut lines = vec![format!("steady state ({conc}):")];
            for (s, v) in m.species.iter().zip(&result.values) {
                lines.push(format!("  {}  {v:.6e}", pad_end(&s.name, width)));
            }
            if !m.observables.is_empty() {
                lines.push("observables:".into());
                for (o, v) in m.observables.iter().zip(&result.values[nsp..]) {
                    lines.push(format!("  {}  {v:.6e}", pad_end(&o.name, width)));
                }
            }
            lines.push(format!("eigenvalues of the reduced Jacobian (1/{time}):"));
            for (re, im) in &result.eigenvalues {
                if *im == 0.0 {
                    lines.push(format!("  {re:.6e}"));
                } else {
                    lines.push(format!(
                        "  {re:.6e} {} {:.6e}i",
                        if *im < 0.0 { "-" } else { "+" },
                        im.abs()
                    ));
                }
            }
            if result.eigenvalues.is_empty() {
                lines.push("  (none: no species varies independently)".into());
            }
            lines.push(format!(
                "{stability} (max |dy/dt| = {:.2e} {conc}/{time})",
                result.residual
            ));
            lines.push(String::new());
            if let Err(failed) = write_stdout(&lines.join("\n")) {
                return failed;
            }
        }
    }
    ExitCode::SUCCESS
}

/// The refusal when a `when` event's condition holds at the steady state.
pub(crate) fn triggered_on_the_way(model: &crate::model::Model, species: &[f64]) -> Option<String> {
    model.events.iter().find_map(|e| match &e.timing {
        crate::model::Timing::When(trigger) if model.eval_at(&trigger.rising, species, 0.0) > 0.0 => Some(format!(
            "at the steady state `{}` holds, so the protocol's `when` event would have fired on the way there; a steady state does not run the protocol: follow it with `ratewright run`, or remove the event",
            trigger.text
        )),
        _ => None,
    })
}
