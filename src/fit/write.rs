//! The model file with fitted values in place.
//!
//! Why: the fitted file should stay the practitioner's own file under
//! version control: layout, comments and descriptions kept, only the values
//! of the fitted params (and initial values) replaced, each in the unit it
//! was written in, with one comment line saying how the values were
//! obtained (no date, so refitting the same data changes nothing).
//!
//! Invariant: the text outside the replaced quantities and the provenance
//! line is unchanged; the result parses to the same model but for the
//! fitted values.

use super::Fit;
use crate::diagnostics::FileId;
use crate::model::Model;
use crate::model::units::parse_unit;
use crate::syntax::ast::{ParamValue, StatementKind};

/// The first line of the provenance comment.
pub const PROVENANCE: &str = "# fitted by `ratewright fit`";

/// Writes `fit`'s values into `text` (the model's main file).
pub fn with_fitted_values(
    text: &str,
    file: FileId,
    model: &Model,
    fit: &Fit,
    data: &[String],
) -> Result<String, String> {
    let tree = crate::syntax::parse(text, file)
        .map_err(|_| "the model file does not parse".to_string())?;
    let mut edits: Vec<(usize, usize, String)> = Vec::new();
    for p in &fit.params {
        let written = tree.statements().find_map(|s| match &s.kind {
            StatementKind::Param {
                name,
                value: ParamValue::Quantity(q),
                ..
            } if name.name == p.name => Some(q),
            _ => None,
        });
        let Some(q) = written else {
            return Err(format!(
                "`{}` is not a param written with a value in the model file (a named constant of the derived law, or an initial value), so it cannot be written in place; derive the mechanism in its constants (`derive --format mech --constants`) and fit that file",
                p.name
            ));
        };
        // The value in the unit it was written in.
        let (value, unit) = match &q.unit {
            Some((u, _)) => {
                let parsed = parse_unit(u).map_err(|e| e.to_string())?;
                (p.value / parsed.factor_to(model.units), format!(" {u}"))
            }
            None => (p.value, String::new()),
        };
        edits.push((
            q.span.start,
            q.span.end,
            format!("{}{unit}", shortest(value)),
        ));
    }
    edits.sort_by_key(|e| e.0);
    let mut out = String::new();
    let mut at = 0;
    for (start, end, replacement) in edits {
        out.push_str(&text[at..start]);
        out.push_str(&replacement);
        at = end;
    }
    out.push_str(&text[at..]);
    // The provenance line replaces an earlier one, else goes first.
    let line = format!(
        "{PROVENANCE} to {}: SSR {}, n {}, free {}\n",
        data.join(", "),
        shortest(fit.ssr),
        fit.n,
        fit.params
            .iter()
            .map(|p| p.name.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    );
    let kept: String = out
        .split_inclusive('\n')
        .filter(|l| !l.starts_with(PROVENANCE))
        .collect();
    Ok(format!("{line}{kept}"))
}

/// The shortest decimal that reads back as the same number.
fn shortest(v: f64) -> String {
    let text = format!("{v}");
    if text.len() > 12 && v != 0.0 {
        let exp = format!("{v:e}");
        if exp.len() < text.len() {
            return exp;
        }
    }
    text
}
