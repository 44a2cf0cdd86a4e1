//! `ratewright derive`: steady-state / rapid-equilibrium rate laws.
//!
//! Options override the file's `assume` lines; the output is a readable
//! report, LaTeX, JSON (schema in docs/derive.md) or a new mechanism file.

use super::common::{self, EXIT_MODEL, EXIT_USAGE, load_model, report_failure, write_atomic};
use crate::diagnostics::Code;
use crate::ratelaw::{self, Progress, Request, Target, output};
use clap::ValueEnum;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum, Default)]
pub enum DeriveFormat {
    #[default]
    Human,
    Latex,
    Json,
    Mech,
}

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// Species at quasi-steady state (overrides `assume steady`).
    #[arg(long, value_delimiter = ',', value_name = "A,B,..")]
    pub steady: Option<Vec<String>>,
    /// Steps at rapid equilibrium (overrides `assume equilibrium`); `--equilibrium ""` for none.
    #[arg(long, value_delimiter = ',', value_name = "STEP,..")]
    pub equilibrium: Option<Vec<String>>,
    /// Rate of change of one species instead of the overall reaction.
    #[arg(long, value_name = "SPECIES", conflicts_with = "flux")]
    pub species: Option<String>,
    /// Net rate of one step instead of the overall reaction.
    #[arg(long, value_name = "STEP")]
    pub flux: Option<String>,
    /// Output form.
    #[arg(long, value_enum, default_value_t = DeriveFormat::Human)]
    pub format: DeriveFormat,
    /// Largest number of spanning-tree terms to expand.
    #[arg(long, value_name = "N", default_value_t = ratelaw::DEFAULT_MAX_TERMS)]
    pub max_terms: u64,
    /// Write the output to a file instead of standard output.
    #[arg(short = 'o', long, value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// With `--format mech`: params are the named kinetic constants (kcat,
    /// Km_*, Ki_*, ...) valued at the file's params, and the law is written
    /// in them.
    #[arg(long)]
    pub constants: bool,
    /// Report the time spent loading and deriving on standard error.
    #[arg(long)]
    pub timing: bool,
}

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == DeriveFormat::Json;
    if args.constants && args.format != DeriveFormat::Mech {
        return common::usage_error_as(
            json,
            "`--constants` writes a mechanism: use it with `--format mech`".to_string(),
        );
    }
    // The output path is checked before any work (exit 2).
    if let Some(path) = &args.output
        && let Err(e) = super::output::sink_for(path)
    {
        return common::usage_error_as(json, e);
    }
    let start = Instant::now();
    let (model, sources) = match load_model(&args.file, json) {
        Ok(x) => x,
        Err(code) => return code,
    };
    let inputs: Vec<PathBuf> = sources.files().iter().map(|f| f.path.clone()).collect();
    if let Some(path) = &args.output
        && let Err(e) = common::refuse_input_overwrite(path, &inputs)
    {
        return common::usage_error_as(json, e);
    }
    let loaded = start.elapsed();
    let clean = |v: &Option<Vec<String>>| {
        v.as_ref().map(|names| {
            names
                .iter()
                .map(|s| s.trim().to_string())
                .filter(|s| !s.is_empty())
                .collect::<Vec<_>>()
        })
    };
    let request = Request {
        steady: clean(&args.steady),
        equilibrium: clean(&args.equilibrium),
        target: match (&args.species, &args.flux) {
            (Some(s), _) => Target::Species(s.clone()),
            (_, Some(f)) => Target::Flux(f.clone()),
            _ => Target::Overall,
        },
        max_terms: args.max_terms,
    };
    // A progress line on stderr for long enumerations only.
    let mut shown = false;
    let mut total = 0.0;
    let mut on_progress = |p: Progress| match p {
        Progress::Start { estimated_trees } => total = estimated_trees,
        Progress::Trees(n) => {
            if total > 1e6 {
                shown = true;
                stderr_text!(
                    "\rderive: {n} of about {total:.0} spanning-tree terms ({:.0}%)",
                    100.0 * n as f64 / total
                );
            }
        }
    };
    let derive_start = Instant::now();
    let result = ratelaw::derive_with_progress(&model, &request, &mut on_progress);
    if shown {
        stderr_line!();
    }
    let derived_in = derive_start.elapsed();
    let derivation = match result {
        Ok(d) => d,
        Err(diag) => {
            let from_options = diag.labels.is_empty() && diag.code == Code::BadDerivationRequest;
            let code = if from_options { EXIT_USAGE } else { EXIT_MODEL };
            return report_failure(&[diag], &sources, json, code);
        }
    };
    let text = match args.format {
        DeriveFormat::Human => output::human(&derivation, &model),
        DeriveFormat::Latex => output::latex(&derivation, &model),
        DeriveFormat::Json => {
            let mut s = serde_json::to_string_pretty(&output::json(&derivation, &model))
                .unwrap_or_default();
            s.push('\n');
            s
        }
        DeriveFormat::Mech => {
            let source = args
                .file
                .file_name()
                .map(|s| s.to_string_lossy().to_string())
                .unwrap_or_default();
            match output::mechanism(&derivation, &model, &source, args.constants) {
                Ok(s) => in_canonical_layout(s),
                Err(output::MechanismError::Usage(e)) => return common::usage_error_as(json, e),
                Err(output::MechanismError::Model(diag)) => {
                    return report_failure(&[*diag], &sources, json, EXIT_MODEL);
                }
            }
        }
    };
    if args.timing {
        stderr_line!(
            "timing: load {:.3} ms, derive {:.3} ms, {} spanning-tree terms",
            loaded.as_secs_f64() * 1e3,
            derived_in.as_secs_f64() * 1e3,
            derivation.trees
        );
    }
    match &args.output {
        Some(path) => {
            if let Err(e) = write_atomic(path, text.as_bytes(), &inputs) {
                return common::run_error(e);
            }
        }
        None => {
            if let Err(failed) = common::write_stdout(&text) {
                return failed;
            }
        }
    }
    ExitCode::SUCCESS
}

/// The derived mechanism as `fmt` would lay it out, so that a derived file
/// kept under version control passes `fmt --check` as written.
fn in_canonical_layout(text: String) -> String {
    let mut sources = crate::diagnostics::SourceMap::new();
    let id = sources.add(std::path::PathBuf::from("derived.mech"), text.clone());
    match crate::syntax::parse(&text, id) {
        Ok(tree) => crate::syntax::format::format_file(&tree, &text),
        // The printer writes the language; if it ever did not, the text as
        // printed is still the best output (and `check` will locate it).
        Err(_) => text,
    }
}
