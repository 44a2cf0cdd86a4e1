//! A [`Comparison`] as text for people and as the JSON document described
//! in docs/version-control.md (schema version [`SCHEMA_VERSION`]). Both are
//! returned as strings; the command prints them.

use super::consequences::{Both, RateLawStatus};
use super::items::number;
use super::{ChangeKind, Comparison, Detail, ItemKind, Shown};
use serde_json::{Value, json};

/// Bumped only when a field changes meaning or disappears; new fields may
/// be added within a version.
pub const SCHEMA_VERSION: u32 = 1;

fn shown_text(s: &Shown) -> String {
    match s {
        Shown::Quantity {
            value,
            unit: Some(u),
        } => format!("{} {u}", number(*value)),
        Shown::Quantity { value, unit: None } => number(*value),
        Shown::Text(t) => t.clone(),
        Shown::Flag(true) => "yes".into(),
        Shown::Flag(false) => "no".into(),
        Shown::Names(n) if n.is_empty() => "(none)".into(),
        Shown::Names(n) => n.join(", "),
        Shown::Absent => "(not given)".into(),
    }
}

fn shown_json(s: &Shown) -> Value {
    match s {
        Shown::Quantity { value, unit } => json!({ "value": value, "unit": unit }),
        Shown::Text(t) => json!(t),
        Shown::Flag(b) => json!(b),
        Shown::Names(n) => json!(n),
        Shown::Absent => Value::Null,
    }
}

fn aspect_words(d: &Detail) -> &'static str {
    match d.aspect {
        "initial" => "initial value",
        "evaluated" => "value (from its definition)",
        "reversible" => "reversible",
        "direction" => "written the other way round (same dynamics)",
        other => other,
    }
}

fn section_title(kind: ItemKind) -> &'static str {
    match kind {
        ItemKind::Species => "species",
        ItemKind::Fixed => "fixed species",
        ItemKind::Param => "params",
        ItemKind::Step => "steps",
        ItemKind::Total => "totals",
        ItemKind::Observable => "observables",
        ItemKind::Event => "events",
        ItemKind::Assumption => "assumptions",
        ItemKind::Condition => "assay conditions",
    }
}

fn both_line<T: std::fmt::Display + PartialEq>(label: &str, b: &Both<T>) -> String {
    if b.changed() {
        format!("  {label}: {} → {}\n", b.old, b.new)
    } else {
        format!("  {label}: {} (unchanged)\n", b.old)
    }
}

/// The readable report. `old` and `new` name the two sides.
pub fn human(c: &Comparison, old: &str, new: &str) -> String {
    let mut out = String::new();
    if !c.changed() {
        out.push_str(&format!("no change in meaning between {old} and {new}\n"));
        return out;
    }
    let n = c.changes.len();
    out.push_str(&format!(
        "{n} change{} in meaning from {old} to {new}\n",
        if n == 1 { "" } else { "s" }
    ));
    let mut section = None;
    for ch in &c.changes {
        if section != Some(ch.item) {
            out.push_str(&format!("\n{}\n", section_title(ch.item)));
            section = Some(ch.item);
        }
        let name = ch.name();
        match ch.kind {
            ChangeKind::Added => {
                out.push_str(&format!("  + {}\n", ch.new_text.as_deref().unwrap_or(name)))
            }
            ChangeKind::Removed => {
                out.push_str(&format!("  - {}\n", ch.old_text.as_deref().unwrap_or(name)))
            }
            ChangeKind::Renamed => out.push_str(&format!(
                "  ~ {} → {}  (renamed, same content)\n",
                ch.old_name.as_deref().unwrap_or(""),
                ch.new_name.as_deref().unwrap_or("")
            )),
            ChangeKind::Changed => {
                out.push_str(&format!("  * {name}\n"));
                for d in &ch.details {
                    out.push_str(&format!(
                        "      {}: {} → {}\n",
                        aspect_words(d),
                        shown_text(&d.old),
                        shown_text(&d.new)
                    ));
                }
            }
        }
    }
    out.push_str("\nconsequences\n");
    match &c.consequences.network {
        Ok(f) => {
            out.push_str(&both_line("rank of the stoichiometry", &f.rank));
            out.push_str(&both_line("conservation laws", &f.conservation_laws));
            for l in &f.gained {
                out.push_str(&format!("    gained: {} = {}\n", l.name, l.combination));
            }
            for l in &f.lost {
                out.push_str(&format!("    lost: {} = {}\n", l.name, l.combination));
            }
            out.push_str(&both_line(
                "reduced dimension (independent species)",
                &f.reduced_dimension,
            ));
            out.push_str(&both_line("deficiency", &f.deficiency));
            let wr = Both {
                old: yes_no(f.weakly_reversible.old),
                new: yes_no(f.weakly_reversible.new),
            };
            out.push_str(&both_line("weakly reversible", &wr));
        }
        Err(reason) => out.push_str(&format!("  network analysis not compared: {reason}\n")),
    }
    if let Some(r) = &c.consequences.rate_law {
        match r.status {
            RateLawStatus::Unchanged => out.push_str(&format!(
                "  derived rate law: unchanged\n    v = {}\n",
                r.new.as_deref().unwrap_or("")
            )),
            RateLawStatus::Changed => out.push_str(&format!(
                "  derived rate law: changed\n    old: v = {}\n    new: v = {}\n",
                r.old.as_deref().unwrap_or(""),
                r.new.as_deref().unwrap_or("")
            )),
            RateLawStatus::NotCompared => out.push_str(&format!(
                "  derived rate law: not compared ({})\n",
                r.reason.as_deref().unwrap_or("")
            )),
        }
    }
    out
}

fn yes_no(b: bool) -> &'static str {
    if b { "yes" } else { "no" }
}

fn both_json<T: serde::Serialize + PartialEq>(b: &Both<T>) -> Value {
    json!({ "old": b.old, "new": b.new, "changed": b.changed() })
}

/// The JSON document (schema in docs/version-control.md).
pub fn json(c: &Comparison, old: &str, new: &str) -> Value {
    let changes: Vec<Value> = c
        .changes
        .iter()
        .map(|ch| {
            json!({
                "item": ch.item.word(),
                "change": ch.kind.word(),
                "name": ch.name(),
                "old_name": ch.old_name,
                "new_name": ch.new_name,
                "old": ch.old_text,
                "new": ch.new_text,
                "details": ch.details.iter().map(|d| json!({ "aspect": d.aspect, "old": shown_json(&d.old), "new": shown_json(&d.new) })).collect::<Vec<_>>(),
            })
        })
        .collect();
    let network = match &c.consequences.network {
        Ok(f) => json!({
            "rank": both_json(&f.rank),
            "conservation_laws": both_json(&f.conservation_laws),
            "laws_gained": f.gained.iter().map(|l| json!({ "name": l.name, "combination": l.combination })).collect::<Vec<_>>(),
            "laws_lost": f.lost.iter().map(|l| json!({ "name": l.name, "combination": l.combination })).collect::<Vec<_>>(),
            "reduced_dimension": both_json(&f.reduced_dimension),
            "deficiency": both_json(&f.deficiency),
            "weakly_reversible": both_json(&f.weakly_reversible),
        }),
        Err(reason) => json!({ "error": reason }),
    };
    let rate_law = c.consequences.rate_law.as_ref().map(|r| {
        json!({
            "status": match r.status { RateLawStatus::Unchanged => "unchanged", RateLawStatus::Changed => "changed", RateLawStatus::NotCompared => "not_compared" },
            "old": r.old,
            "new": r.new,
            "reason": r.reason,
        })
    });
    json!({
        "schema_version": SCHEMA_VERSION,
        "old": old,
        "new": new,
        "changed": c.changed(),
        "changes": changes,
        "consequences": { "network": network, "rate_law": rate_law },
    })
}
