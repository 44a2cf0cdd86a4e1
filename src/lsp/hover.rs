//! Hover: what a name is, as a modeller needs it at a glance — its kind,
//! its value as written and in the model's units, its dimension, its
//! description; for a step its rate law, order and the dimension its
//! constants need; for a total its sum and value; for a name from a
//! `use`d file, the file it comes from.

use super::analysis::{Analysis, Declaration};
use crate::model::units::{Dim, Units, parse_quantity};
use crate::model::{Model, Sym};
use crate::syntax::format::{expr, quantity};
use crate::syntax::{ParamValue, Quantity, RateAst, Side, SpeciesDecl, StatementKind, StepTerm};

/// The hover text (Markdown) for the name at `offset` of the document.
pub fn hover_text(
    analysis: &Analysis,
    offset: usize,
) -> Option<(String, crate::diagnostics::Span)> {
    let (name, at) = analysis.name_at(0, offset)?;
    let Some(declaration) = analysis.declaration(name) else {
        return Some((
            format!("`{name}`: not declared in this model or the files it uses"),
            at,
        ));
    };
    let mut out = describe(analysis, declaration);
    if declaration.span.file.0 != 0
        && let Some(file) = analysis.files().get(declaration.span.file.0 as usize)
    {
        let line = file.lines.position(&file.text, declaration.span.start).line + 1;
        out.push_str(&format!(
            "\n\nfrom `{}`, line {line} (a `use`d file)",
            shown_path(analysis, &file.path)
        ));
    }
    Some((out, at))
}

/// A used file's path as the document's `use` line would name it.
fn shown_path(analysis: &Analysis, path: &std::path::Path) -> String {
    let base = analysis
        .main()
        .and_then(|m| m.path.parent())
        .map(std::path::Path::to_path_buf);
    match base.and_then(|b| path.strip_prefix(b).ok().map(|p| p.to_path_buf())) {
        Some(relative) => relative.display().to_string(),
        None => path.display().to_string(),
    }
}

fn describe(analysis: &Analysis, declaration: &Declaration) -> String {
    let file = &analysis.files()[declaration.span.file.0 as usize];
    let statements = file.statements();
    let Some(statement) = statements.get(declaration.statement) else {
        return format!("**{}** `{}`", declaration.kind.word(), declaration.name);
    };
    let units = analysis.units();
    let model = analysis.loaded.model.as_ref();
    let head = format!("**{}** `{}`", declaration.kind.word(), declaration.name);
    let mut lines = vec![head];
    match &statement.kind {
        StatementKind::Species(list) => {
            if let Some(s) = list.iter().find(|s| s.name.name == declaration.name) {
                species_lines(&mut lines, s, units, model, true);
            }
        }
        StatementKind::Fixed(s) => species_lines(&mut lines, s, units, model, false),
        StatementKind::Param {
            value, description, ..
        } => {
            match value {
                ParamValue::Quantity(q) => quantity_lines(&mut lines, q, units),
                ParamValue::AtTemperature { value: q, .. } => {
                    quantity_lines(&mut lines, q, units);
                    lines.push(
                        "given at a reference temperature; the model value is at the assay's"
                            .into(),
                    );
                }
                ParamValue::Expr(e) => lines.push(format!("value: `{}`", expr(e))),
            }
            if let Some(Sym::Param(i)) = model.and_then(|m| m.lookup(&declaration.name)) {
                let p = &model.expect("looked up in it").params[i];
                let unit = p.dim.map(|d| d.display_in(units)).unwrap_or_default();
                lines.push(format!("in model units: {} {unit}", number(p.value)));
                lines.push(match p.dim {
                    Some(d) => format!("dimension: {}", dimension_words(d)),
                    None => "dimension: not known (a bare number)".to_string(),
                });
            } else if let ParamValue::Quantity(q) = value {
                dimension_of_quantity(&mut lines, q, units);
            }
            description_line(&mut lines, description);
        }
        StatementKind::Step {
            lhs,
            rhs,
            reversible,
            rate,
            description,
            ..
        } => {
            let equation = file
                .text
                .get(lhs.span.start..rhs.span.end)
                .unwrap_or("")
                .trim()
                .to_string();
            lines.push(format!("`{equation}`"));
            step_lines(&mut lines, lhs, rhs, *reversible, rate, units);
            description_line(&mut lines, description);
        }
        StatementKind::Total { terms, value, .. } => {
            lines.push(format!("sum: `{}`", total_sum(terms)));
            match value {
                Some(q) => quantity_lines(&mut lines, q, units),
                None => {
                    if let Some(Sym::Total(i)) = model.and_then(|m| m.lookup(&declaration.name)) {
                        let t = &model.expect("looked up in it").totals[i];
                        lines.push(format!(
                            "value: {} {} (from the initial values)",
                            number(t.value),
                            units.concentration.symbol()
                        ));
                    } else {
                        lines.push("value: from the initial values".to_string());
                    }
                }
            }
        }
        StatementKind::Observe { expr: e, .. } => {
            lines.push(format!("`{}`", expr(e)));
            if let Some(m) = model
                && let Some(sym) = m.lookup(&declaration.name)
            {
                lines.push(format!("at the start: {}", number(m.initial_value(sym))));
            }
        }
        StatementKind::Mechanism { description, .. } => description_line(&mut lines, description),
        StatementKind::Units(_)
        | StatementKind::AssumeSteady(_)
        | StatementKind::AssumeEquilibrium(_)
        | StatementKind::Event { .. }
        | StatementKind::Volume(_)
        | StatementKind::Temperature(_)
        | StatementKind::Use { .. } => {}
    }
    lines.join("\n\n")
}

fn species_lines(
    lines: &mut Vec<String>,
    s: &SpeciesDecl,
    units: Units,
    model: Option<&Model>,
    dynamic: bool,
) {
    match &s.value {
        Some(q) => quantity_lines(lines, q, units),
        None => {
            let from_model = model.and_then(|m| match m.lookup(&s.name.name) {
                Some(Sym::Species(i)) if m.species[i].initial_given => Some(m.species[i].initial),
                _ => None,
            });
            match from_model {
                Some(v) => lines.push(format!(
                    "initial value: {} {} (from a total)",
                    number(v),
                    units.concentration.symbol()
                )),
                None if dynamic => lines.push("initial value: 0 (none written)".to_string()),
                None => {}
            }
        }
    }
    lines.push(format!(
        "dimension: {}",
        dimension_words(Dim::CONC).replace(
            "concentration",
            &format!("concentration ({})", units.concentration.symbol())
        )
    ));
    description_line(lines, &s.description);
}

fn quantity_lines(lines: &mut Vec<String>, q: &Quantity, units: Units) {
    let written = quantity(q);
    lines.push(format!("as written: `{written}`"));
    if let Ok((value, dim)) = parse_quantity(&written, units) {
        let unit = dim.map(|d| d.display_in(units)).unwrap_or_default();
        lines.push(format!("in model units: {} {unit}", number(value)));
    }
}

fn dimension_of_quantity(lines: &mut Vec<String>, q: &Quantity, units: Units) {
    match parse_quantity(&quantity(q), units) {
        Ok((_, Some(d))) => lines.push(format!("dimension: {}", dimension_words(d))),
        Ok((_, None)) => lines.push("dimension: not known (a bare number)".to_string()),
        Err(_) => {}
    }
}

fn description_line(lines: &mut Vec<String>, description: &Option<String>) {
    if let Some(d) = description {
        lines.push(format!("\"{d}\""));
    }
}

fn step_lines(
    lines: &mut Vec<String>,
    lhs: &Side,
    rhs: &Side,
    reversible: bool,
    rate: &RateAst,
    units: Units,
) {
    match rate {
        RateAst::MassAction(constants) => {
            let forward_order = order(&lhs.terms);
            let reverse_order = order(&rhs.terms);
            let forward = constants.first().map(expr).unwrap_or_default();
            let mut law = mass_action(&forward, &lhs.terms);
            if reversible && let Some(kr) = constants.get(1) {
                law = format!("{law} - {}", mass_action(&expr(kr), &rhs.terms));
            }
            lines.push(format!("rate law (mass action): `{law}`"));
            let mut order_line = format!("order: {} forward", number(forward_order));
            if reversible {
                order_line.push_str(&format!(", {} reverse", number(reverse_order)));
            }
            lines.push(order_line);
            let mut needs = format!(
                "forward constant needs {}",
                constant_dim(forward_order, units)
            );
            if reversible {
                needs.push_str(&format!(
                    "; reverse constant needs {}",
                    constant_dim(reverse_order, units)
                ));
            }
            lines.push(needs);
        }
        RateAst::Law(e) => {
            lines.push(format!("rate law: `{}`", expr(e)));
            lines.push(format!("a rate: needs {}", Dim::RATE.display_in(units)));
        }
    }
}

/// The dimension a mass-action constant of `order` needs, when the order
/// is whole.
fn constant_dim(order: f64, units: Units) -> String {
    if order.fract() == 0.0 && order.abs() < 1e6 {
        Dim::mass_action_constant(order as i32).display_in(units)
    } else {
        format!("concentration^(1-{}) per time", number(order))
    }
}

fn coefficient(term: &StepTerm) -> f64 {
    match &term.coefficient {
        None => 1.0,
        Some((text, _)) => match text.split_once('/') {
            Some((n, d)) => n.parse::<f64>().unwrap_or(1.0) / d.parse::<f64>().unwrap_or(1.0),
            None => text.parse().unwrap_or(1.0),
        },
    }
}

fn order(terms: &[StepTerm]) -> f64 {
    terms.iter().map(coefficient).sum()
}

fn mass_action(constant: &str, terms: &[StepTerm]) -> String {
    let mut parts = vec![constant.to_string()];
    for t in terms {
        match &t.coefficient {
            Some((c, _)) if c != "1" => parts.push(format!("{}^{c}", t.name.name)),
            _ => parts.push(t.name.name.clone()),
        }
    }
    parts.join(" * ")
}

fn total_sum(terms: &[StepTerm]) -> String {
    let mut out = String::new();
    for (i, t) in terms.iter().enumerate() {
        let coefficient = t
            .coefficient
            .as_ref()
            .map(|(c, _)| format!("{c} "))
            .unwrap_or_default();
        let sign = match (i, t.negative) {
            (0, false) => "",
            (0, true) => "-",
            (_, false) => " + ",
            (_, true) => " - ",
        };
        out.push_str(&format!("{sign}{coefficient}{}", t.name.name));
    }
    out
}

/// Powers of concentration and time in words.
fn dimension_words(d: Dim) -> String {
    let power = |word: &str, p: i32| match p {
        0 => None,
        1 => Some(word.to_string()),
        p => Some(format!("{word}^{p}")),
    };
    let parts: Vec<String> = [power("concentration", d.conc), power("time", d.time)]
        .into_iter()
        .flatten()
        .collect();
    if parts.is_empty() {
        "none (dimensionless)".to_string()
    } else {
        parts.join(" · ")
    }
}

/// A value as a modeller reads it: up to 6 significant digits.
fn number(v: f64) -> String {
    if v == 0.0 || (v.abs() >= 1e-4 && v.abs() < 1e6) {
        let s = format!("{:.6}", v);
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{v:e}")
    }
}
