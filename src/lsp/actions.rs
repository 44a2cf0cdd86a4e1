//! Code actions: fixes for the diagnostics in a range of the document —
//! take the did-you-mean suggestion of an unknown name, declare an unknown
//! name of a step's sides as a species, and give a reversible step its
//! missing reverse constant as a new param.
//!
//! Each action is the text edit the user would type; the edit names the
//! document version it was computed from.

use super::analysis::{Analysis, Kind, ParsedFile};
use crate::diagnostics::{Code, Diagnostic, FileId};
use crate::model::units::Dim;
use crate::syntax::{RateAst, StatementKind};

/// One fix: a title and byte-offset edits of the document.
pub struct Fix {
    pub title: String,
    pub edits: Vec<(usize, usize, String)>,
    pub preferred: bool,
    /// The diagnostic it fixes.
    pub fixes: Diagnostic,
}

/// The fixes for the diagnostics whose primary span meets `start..end`.
pub fn fixes(analysis: &Analysis, start: usize, end: usize) -> Vec<Fix> {
    let Some(file) = analysis.main() else {
        return Vec::new();
    };
    // The document is the first file the load reads.
    let main = FileId(0);
    let mut out = Vec::new();
    for d in &analysis.loaded.diagnostics {
        let Some(span) = d.primary_span() else {
            continue;
        };
        if span.file != main || span.end < start || span.start > end {
            continue;
        }
        match d.code {
            Code::UnknownName => {
                if let Some(suggested) = d.help.as_deref().and_then(suggestion) {
                    out.push(Fix {
                        title: format!("Replace with `{suggested}`"),
                        edits: vec![(span.start, span.end, suggested.to_string())],
                        preferred: true,
                        fixes: d.clone(),
                    });
                }
                let name = file.text.get(span.start..span.end).unwrap_or("");
                if !name.is_empty() && names_a_species_place(file, span.start) {
                    let at = species_insertion(file);
                    out.push(Fix {
                        title: format!("Declare `{name}` as a species"),
                        edits: vec![(at, at, format!("\nspecies {name}"))],
                        preferred: false,
                        fixes: d.clone(),
                    });
                }
            }
            Code::MissingReverseConstant => {
                if let Some(fix) = reverse_constant(analysis, file, span.start, d) {
                    out.push(fix);
                }
            }
            _ => {}
        }
    }
    out
}

/// The name in a help line "did you mean `NAME`?".
fn suggestion(help: &str) -> Option<&str> {
    let rest = help.strip_prefix("did you mean `")?;
    let end = rest.find('`')?;
    Some(&rest[..end])
}

/// Whether `offset` is in a step's sides or a total's terms, where only
/// species stand.
fn names_a_species_place(file: &ParsedFile, offset: usize) -> bool {
    file.tree.statements().any(|s| match &s.kind {
        StatementKind::Step { lhs, rhs, .. } => [lhs, rhs]
            .iter()
            .any(|side| side.span.start <= offset && offset < side.span.end),
        StatementKind::Total { terms, .. } => terms
            .iter()
            .any(|t| t.span.start <= offset && offset < t.span.end),
        StatementKind::AssumeSteady(list) => list
            .iter()
            .any(|i| i.span.start <= offset && offset <= i.span.end),
        _ => false,
    })
}

/// The end of the line of the last species statement (or of the units or
/// mechanism line, or the file's start): where a new species goes.
fn species_insertion(file: &ParsedFile) -> usize {
    let mut at = None;
    for s in file.tree.statements() {
        match &s.kind {
            StatementKind::Species(_) => at = Some(s.span.end),
            StatementKind::Mechanism { .. } | StatementKind::Units(_) if at.is_none() => {
                at = Some(s.span.end)
            }
            _ => {}
        }
    }
    at.map(|end| line_end(&file.text, end)).unwrap_or(0)
}

fn line_end(text: &str, offset: usize) -> usize {
    text[offset.min(text.len())..]
        .find(['\n', '\r'])
        .map_or(text.len(), |e| offset + e)
}

fn reverse_constant(
    analysis: &Analysis,
    file: &ParsedFile,
    offset: usize,
    d: &Diagnostic,
) -> Option<Fix> {
    let statement = file
        .tree
        .statements()
        .find(|s| s.span.start <= offset && offset <= s.span.end)?;
    let StatementKind::Step {
        name, rhs, rate, ..
    } = &statement.kind
    else {
        return None;
    };
    let RateAst::MassAction(constants) = rate else {
        return None;
    };
    let forward = constants.first()?;
    let forward_text = file.text.get(forward.span().start..forward.span().end)?;
    let plain = forward_text
        .chars()
        .all(|c| c.is_alphanumeric() || c == '_');
    let stem = if plain {
        format!("{forward_text}_rev")
    } else {
        format!("k_{}_rev", name.name)
    };
    let mut new_name = stem.clone();
    let mut n = 2;
    while analysis.declaration(&new_name).is_some() {
        new_name = format!("{stem}{n}");
        n += 1;
    }
    let order: f64 = rhs
        .terms
        .iter()
        .map(|t| match &t.coefficient {
            None => 1.0,
            Some((c, _)) => c.parse().unwrap_or(1.0),
        })
        .sum();
    let unit = if order.fract() == 0.0 {
        Dim::mass_action_constant(order as i32).display_in(analysis.units())
    } else {
        String::new()
    };
    // After the forward constant's param when it is in this file, else
    // before the step.
    let forward_param = file
        .declarations
        .iter()
        .find(|p| p.kind == Kind::Param && p.name == forward_text)
        .and_then(|p| file.statements().get(p.statement).map(|s| s.span.end));
    let line = format!(
        "param {new_name} = 1 {unit} \"reverse constant of {}: placeholder value, set it\"",
        name.name
    );
    let param_edit = match forward_param {
        Some(end) => {
            let at = line_end(&file.text, end);
            (at, at, format!("\n{line}"))
        }
        None => {
            let at = statement.span.start;
            let line_start = file.text[..at].rfind(['\n', '\r']).map_or(0, |p| p + 1);
            (line_start, line_start, format!("{line}\n"))
        }
    };
    let end = forward.span().end;
    Some(Fix {
        title: format!("Add a reverse constant `{new_name}` as a new param"),
        edits: vec![(end, end, format!(", {new_name}")), param_edit],
        preferred: true,
        fixes: d.clone(),
    })
}
