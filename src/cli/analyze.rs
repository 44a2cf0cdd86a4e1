//! `ratewright analyze`: stoichiometry, rank, conservation laws, the reduced
//! system and the network's structure, as readable tables or as JSON (the
//! schema is documented in docs/analysis.md and fixed by CLI.md).
//!
//! The JSON is written field by field rather than built as one value: the
//! dense matrices of a network with thousands of species and steps would
//! otherwise take far more memory than the analysis itself.

use super::Format;
use super::common::{EXIT_MODEL, load_model, pad_end, pad_start, report_failure};
use crate::algebra::print::{Syntax, print_expr};
use crate::model::{Coef, Model};
use crate::network::{self, Analysis, NonNegativeBasis};
use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{One, Signed};
use serde_json::{Value, json};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    pub format: Format,
}

/// Matrices wider or taller than this are left to `--format json` in the
/// human output.
const MAX_HUMAN_ROWS: usize = 60;
const MAX_HUMAN_COLUMNS: usize = 24;

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == Format::Json;
    let (model, sources) = match load_model(&args.file, json) {
        Ok(x) => x,
        Err(code) => return code,
    };
    let analysis = match network::analyze(&model) {
        Ok(a) => a,
        Err(d) => return report_failure(&[d], &sources, json, EXIT_MODEL),
    };
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let written = if json {
        write_json(&mut out, &model, &analysis)
    } else {
        write_human(&mut out, &model, &analysis)
    };
    // A closed pipe (`| head`) ends the command as in every other command:
    // exit 1, "cannot write to standard output".
    match written.and_then(|_| out.flush()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(_) => super::common::run_error("cannot write to standard output"),
    }
}

fn coef_text(c: &Coef) -> String {
    if c.is_integer() {
        c.numer().to_string()
    } else {
        format!("{}/{}", c.numer(), c.denom())
    }
}

fn coef_json(c: &Coef) -> Value {
    if c.is_integer() {
        json!(c.numer())
    } else {
        json!(format!("{}/{}", c.numer(), c.denom()))
    }
}

fn big_json(c: &BigRational) -> Value {
    if c.is_integer() {
        match i64::try_from(c.numer()) {
            Ok(v) => json!(v),
            Err(_) => json!(c.numer().to_string()),
        }
    } else {
        json!(format!("{}/{}", c.numer(), c.denom()))
    }
}

/// `E + 2 ES - P` from (name, coefficient) pairs.
fn combination(terms: impl IntoIterator<Item = (String, BigInt)>) -> String {
    let mut s = String::new();
    for (name, c) in terms {
        let magnitude = c.abs();
        let body = if magnitude.is_one() {
            name
        } else {
            format!("{magnitude} {name}")
        };
        if s.is_empty() {
            if c.is_negative() {
                s.push('-');
            }
            s.push_str(&body);
        } else {
            s.push_str(if c.is_negative() { " - " } else { " + " });
            s.push_str(&body);
        }
    }
    if s.is_empty() { "0".into() } else { s }
}

fn complex_text(model: &Model, c: &network::Complex) -> String {
    if c.is_empty() {
        return "0".into();
    }
    c.iter()
        .map(|(i, v)| {
            if v.is_one() {
                model.species[*i].name.clone()
            } else {
                format!("{} {}", coef_text(v), model.species[*i].name)
            }
        })
        .collect::<Vec<_>>()
        .join(" + ")
}

fn law_terms<'a>(
    model: &'a Model,
    law: &'a network::ConservationLaw,
) -> impl Iterator<Item = (String, BigInt)> + 'a {
    law.coefficients
        .iter()
        .map(|(i, c)| (model.species[*i].name.clone(), c.clone()))
}

fn formula_text(analysis: &Analysis, d: &network::DependentSpecies) -> String {
    let m = &analysis.reduced.model;
    print_expr(&d.formula, &|s| m.name_of(s).to_string(), Syntax::Mech)
}

fn law_kind(law: &network::ConservationLaw) -> &'static str {
    if law.user_total.is_some() {
        "user"
    } else if law.coefficients.iter().all(|(_, c)| c.is_positive()) {
        "nonnegative"
    } else {
        "integer"
    }
}

fn nonnegative_text(n: NonNegativeBasis) -> &'static str {
    match n {
        NonNegativeBasis::NoLaws => "no_laws",
        NonNegativeBasis::Spans => "spans",
        NonNegativeBasis::Partial => "partial",
        NonNegativeBasis::NoneExist => "none_exist",
        NonNegativeBasis::GaveUp { .. } => "gave_up",
    }
}

fn names(model: &Model, idx: &[usize]) -> Vec<String> {
    idx.iter().map(|i| model.species[*i].name.clone()).collect()
}

fn write_json(out: &mut impl Write, model: &Model, a: &Analysis) -> std::io::Result<()> {
    let r = &a.reduced;
    let species: Vec<&str> = model.species.iter().map(|s| s.name.as_str()).collect();
    let steps: Vec<&str> = model.steps.iter().map(|s| s.name.as_str()).collect();
    let field =
        |out: &mut dyn Write, key: &str, value: &Value, first: bool| -> std::io::Result<()> {
            write!(
                out,
                "{}\n  {}: {}",
                if first { "{" } else { "," },
                json!(key),
                value
            )
        };
    field(out, "model", &json!(model.name), true)?;
    field(out, "species", &json!(species), false)?;
    field(out, "steps", &json!(steps), false)?;
    // Dense species × steps, written a row at a time.
    let mut by_species: Vec<Vec<(usize, Coef)>> = vec![Vec::new(); model.species.len()];
    for (j, col) in a.columns.iter().enumerate() {
        for (i, c) in col {
            by_species[*i].push((j, *c));
        }
    }
    write!(out, ",\n  \"stoichiometry\": [")?;
    for (i, entries) in by_species.iter().enumerate() {
        let cells = entries.iter().map(|(j, c)| (*j, coef_json(c).to_string()));
        write_dense_row(out, i == 0, model.steps.len(), cells)?;
    }
    write!(out, "]")?;
    field(out, "rank", &json!(a.rank), false)?;
    let laws: Vec<Value> = r
        .laws
        .iter()
        .map(|law| {
            let coefficients: serde_json::Map<String, Value> = law
                .coefficients
                .iter()
                .map(|(i, c)| {
                    let v = i64::try_from(c)
                        .map(|v| json!(v))
                        .unwrap_or_else(|_| json!(c.to_string()));
                    (model.species[*i].name.clone(), v)
                })
                .collect();
            json!({
                "name": law.name,
                "coefficients": coefficients,
                "value": law.value,
                "kind": law_kind(law),
                "equation": format!("{} = {}", combination(law_terms(model, law)), law_right_side(model, law)),
            })
        })
        .collect();
    field(out, "conservation_laws", &Value::Array(laws), false)?;
    field(
        out,
        "nonnegative_basis",
        &json!(nonnegative_text(a.nonnegative)),
        false,
    )?;
    let redundant: Vec<&str> = a
        .redundant_totals
        .iter()
        .map(|t| model.totals[*t].name.as_str())
        .collect();
    field(out, "redundant_totals", &json!(redundant), false)?;
    field(
        out,
        "independent",
        &json!(names(model, &r.independent)),
        false,
    )?;
    let dependent: Vec<usize> = r.dependent.iter().map(|d| d.species).collect();
    field(out, "dependent", &json!(names(model, &dependent)), false)?;
    let formulas: serde_json::Map<String, Value> = r
        .dependent
        .iter()
        .map(|d| {
            (
                model.species[d.species].name.clone(),
                json!(formula_text(a, d)),
            )
        })
        .collect();
    field(out, "dependent_formulas", &Value::Object(formulas), false)?;
    write!(out, ",\n  \"link_matrix\": [")?;
    for (i, entries) in r.link_matrix.iter().enumerate() {
        let cells = entries.iter().map(|(p, v)| (*p, big_json(v).to_string()));
        write_dense_row(out, i == 0, r.independent.len(), cells)?;
    }
    write!(out, "]")?;
    write!(out, ",\n  \"reduced_stoichiometry\": [")?;
    for (p, entries) in r.reduced_stoichiometry.iter().enumerate() {
        let cells = entries.iter().map(|(j, c)| (*j, coef_json(c).to_string()));
        write_dense_row(out, p == 0, model.steps.len(), cells)?;
    }
    write!(out, "]")?;
    let s = &a.structure;
    let complexes: Vec<String> = s.complexes.iter().map(|c| complex_text(model, c)).collect();
    field(out, "complexes", &json!(complexes), false)?;
    let reactions: Vec<Value> = s
        .edges
        .iter()
        .map(|(from, to, j)| json!({"from": from, "to": to, "step": model.steps[*j].name}))
        .collect();
    field(out, "reactions", &Value::Array(reactions), false)?;
    field(out, "linkage_classes", &json!(s.linkage_classes), false)?;
    field(
        out,
        "terminal_strong_linkage_classes",
        &json!(s.terminal_classes),
        false,
    )?;
    field(out, "deficiency", &json!(s.deficiency), false)?;
    field(out, "reversible", &json!(s.reversible), false)?;
    field(out, "weakly_reversible", &json!(s.weakly_reversible), false)?;
    field(out, "mass_action", &json!(s.mass_action), false)?;
    field(out, "deficiency_note", &json!(s.deficiency_note()), false)?;
    field(
        out,
        "never_produced",
        &json!(names(model, &s.never_produced)),
        false,
    )?;
    field(
        out,
        "never_consumed",
        &json!(names(model, &s.never_consumed)),
        false,
    )?;
    let never_fire: Vec<&str> = s
        .never_fire
        .iter()
        .map(|j| model.steps[*j].name.as_str())
        .collect();
    field(out, "never_fire", &json!(never_fire), false)?;
    writeln!(out, "\n}}")
}

/// Writes one dense JSON row of `len` cells from sparse (column, JSON text)
/// pairs sorted by column; the other cells are 0.
fn write_dense_row(
    out: &mut dyn Write,
    first: bool,
    len: usize,
    cells: impl Iterator<Item = (usize, String)>,
) -> std::io::Result<()> {
    let mut row = String::with_capacity(2 * len + 2);
    if !first {
        row.push(',');
    }
    row.push('[');
    let mut next = 0;
    for (col, text) in cells {
        for k in next..col {
            row.push_str(if k == 0 { "0" } else { ",0" });
        }
        if col > 0 {
            row.push(',');
        }
        row.push_str(&text);
        next = col + 1;
    }
    for k in next..len {
        row.push_str(if k == 0 { "0" } else { ",0" });
    }
    row.push(']');
    out.write_all(row.as_bytes())
}

/// A right-aligned table with a header row and a first column of labels.
fn table(
    out: &mut impl Write,
    corner: &str,
    columns: &[String],
    rows: &[(String, Vec<String>)],
) -> std::io::Result<()> {
    let label_width = rows
        .iter()
        .map(|r| r.0.chars().count())
        .chain([corner.chars().count()])
        .max()
        .unwrap_or(0);
    let widths: Vec<usize> = (0..columns.len())
        .map(|j| {
            rows.iter()
                .map(|r| r.1[j].chars().count())
                .chain([columns[j].chars().count()])
                .max()
                .unwrap_or(1)
        })
        .collect();
    write!(out, "  {}", pad_end(corner, label_width))?;
    for (c, w) in columns.iter().zip(&widths) {
        write!(out, "  {}", pad_start(c, *w))?;
    }
    writeln!(out)?;
    for (label, cells) in rows {
        write!(out, "  {}", pad_end(label, label_width))?;
        for (c, w) in cells.iter().zip(&widths) {
            write!(out, "  {}", pad_start(c, *w))?;
        }
        writeln!(out)?;
    }
    Ok(())
}

/// A value for people: 12 significant digits, so sums of converted
/// quantities print as 2000 rather than 2000.0000000000002.
fn number(v: f64) -> String {
    let rounded = format!("{v:.11e}").parse::<f64>().unwrap_or(v);
    crate::algebra::print::plain_literal(rounded)
}

fn write_human(out: &mut impl Write, model: &Model, a: &Analysis) -> std::io::Result<()> {
    let r = &a.reduced;
    let n = model.species.len();
    let title = model.name.clone().unwrap_or_else(|| "mechanism".into());
    writeln!(
        out,
        "{title}: {n} species, {} steps, rank {} ({} conservation law{})",
        model.steps.len(),
        a.rank,
        r.laws.len(),
        if r.laws.len() == 1 { "" } else { "s" }
    )?;

    writeln!(
        out,
        "\nStoichiometric matrix N (rows: species, columns: steps; fixed species excluded)"
    )?;
    if n <= MAX_HUMAN_ROWS && model.steps.len() <= MAX_HUMAN_COLUMNS {
        let columns: Vec<String> = model.steps.iter().map(|s| s.name.clone()).collect();
        let rows: Vec<(String, Vec<String>)> = (0..n)
            .map(|i| {
                (
                    model.species[i].name.clone(),
                    (0..model.steps.len())
                        .map(|j| coef_text(&a.coefficient(i, j)))
                        .collect(),
                )
            })
            .collect();
        table(out, "", &columns, &rows)?;
    } else {
        writeln!(
            out,
            "  ({n} × {}: too large to print here; use --format json)",
            model.steps.len()
        )?;
    }

    let unit = model.units.concentration.symbol();
    writeln!(
        out,
        "\nConservation laws ({} = {n} species − rank {})",
        r.laws.len(),
        a.rank
    )?;
    if r.laws.is_empty() {
        writeln!(out, "  none: every species can change independently")?;
    }
    let equations: Vec<String> = r
        .laws
        .iter()
        .map(|law| {
            format!(
                "{} = {}",
                combination(law_terms(model, law)),
                law_right_side(model, law)
            )
        })
        .collect();
    // Align the values, but do not let one long law push every line far right.
    let width = equations
        .iter()
        .map(|e| e.chars().count())
        .filter(|w| *w <= 48)
        .max()
        .unwrap_or(0);
    for (law, equation) in r.laws.iter().zip(&equations) {
        let origin = match law.user_total {
            Some(_) => "your total",
            None if law.coefficients.iter().all(|(_, c)| c.is_positive()) => {
                "found: conserved moiety"
            }
            None => "found",
        };
        writeln!(
            out,
            "  {}    value {} {unit}   ({origin})",
            pad_end(equation, width),
            number(law.value)
        )?;
    }
    for t in &a.redundant_totals {
        writeln!(
            out,
            "  note: your total `{}` is a combination of earlier laws, so it adds no law",
            model.totals[*t].name
        )?;
    }
    match a.nonnegative {
        NonNegativeBasis::Partial => writeln!(
            out,
            "  note: the non-negative laws (moieties) do not span every law; the rest have mixed signs"
        )?,
        NonNegativeBasis::NoneExist => writeln!(
            out,
            "  note: no law with only non-negative coefficients exists"
        )?,
        NonNegativeBasis::GaveUp { blocks } => writeln!(
            out,
            "  note: the search for non-negative laws was too large in {blocks} group(s) of species; those laws are an integer basis"
        )?,
        NonNegativeBasis::NoLaws | NonNegativeBasis::Spans => {}
    }

    writeln!(out, "\nReduced system (Reder 1988: N = L · N_R)")?;
    let indep = names(model, &r.independent);
    writeln!(
        out,
        "  independent ({}): {}",
        indep.len(),
        if indep.is_empty() {
            "none".into()
        } else {
            indep.join(", ")
        }
    )?;
    if r.dependent.is_empty() {
        writeln!(out, "  dependent: none")?;
    } else {
        writeln!(out, "  dependent ({}):", r.dependent.len())?;
        for d in &r.dependent {
            writeln!(
                out,
                "    {} = {}",
                model.species[d.species].name,
                formula_text(a, d)
            )?;
        }
        if n <= MAX_HUMAN_ROWS && r.independent.len() <= MAX_HUMAN_COLUMNS {
            writeln!(
                out,
                "  link matrix L (rows: species, columns: independent species)"
            )?;
            let rows: Vec<(String, Vec<String>)> = (0..n)
                .map(|i| {
                    let mut cells = vec!["0".to_string(); r.independent.len()];
                    for (p, v) in &r.link_matrix[i] {
                        cells[*p] = if v.is_integer() {
                            v.numer().to_string()
                        } else {
                            format!("{}/{}", v.numer(), v.denom())
                        };
                    }
                    (model.species[i].name.clone(), cells)
                })
                .collect();
            table(out, "", &indep, &rows)?;
        }
    }

    let s = &a.structure;
    writeln!(
        out,
        "\nNetwork structure (fixed species left out of complexes)"
    )?;
    if s.complexes.len() <= MAX_HUMAN_ROWS {
        let texts: Vec<String> = s.complexes.iter().map(|c| complex_text(model, c)).collect();
        writeln!(out, "  complexes ({}): {}", texts.len(), texts.join(", "))?;
        for (k, class) in s.linkage_classes.iter().enumerate() {
            let members: Vec<&str> = class.iter().map(|c| texts[*c].as_str()).collect();
            writeln!(out, "  linkage class {}: {}", k + 1, members.join(", "))?;
        }
    } else {
        writeln!(out, "  complexes: {}", s.complexes.len())?;
        writeln!(out, "  linkage classes: {}", s.linkage_classes.len())?;
    }
    writeln!(
        out,
        "  deficiency = {} complexes − {} linkage classes − rank {} = {}",
        s.complexes.len(),
        s.linkage_classes.len(),
        a.rank,
        s.deficiency
    )?;
    writeln!(
        out,
        "  reversible: {}; weakly reversible: {}",
        yes(s.reversible),
        yes(s.weakly_reversible)
    )?;
    writeln!(out, "  {}", s.deficiency_note())?;

    let list = |v: &[usize]| {
        if v.is_empty() {
            "none".to_string()
        } else {
            names(model, v).join(", ")
        }
    };
    writeln!(out, "\nSpecies and steps")?;
    writeln!(out, "  never produced: {}", list(&s.never_produced))?;
    writeln!(out, "  never consumed: {}", list(&s.never_consumed))?;
    let never: Vec<&str> = s
        .never_fire
        .iter()
        .map(|j| model.steps[*j].name.as_str())
        .collect();
    writeln!(
        out,
        "  steps that can never fire from the initial state: {}",
        if never.is_empty() {
            "none".to_string()
        } else {
            never.join(", ")
        }
    )?;
    Ok(())
}

fn yes(b: bool) -> &'static str {
    if b { "yes" } else { "no" }
}

/// The right side of a law's equation: its name, or a multiple of the
/// user's total when the law's integer coefficients scale the total's
/// (`total Ot = 1/2 H2O + O2` is the law `2 O2 + H2O = 2 Ot`).
fn law_right_side(model: &Model, law: &crate::network::ConservationLaw) -> String {
    let Some(t) = law.user_total else {
        return law.name.clone();
    };
    let scale = law.coefficients.first().and_then(|(i, c)| {
        let written = model.totals[t].terms.iter().find(|(k, _)| k == i)?.1;
        let c: f64 = num_traits::ToPrimitive::to_f64(c)?;
        Some(c / crate::model::coef_f64(written))
    });
    match scale {
        Some(f) if f != 1.0 && f.is_finite() => {
            format!("{} {}", crate::algebra::print::plain_literal(f), law.name)
        }
        _ => law.name.clone(),
    }
}
