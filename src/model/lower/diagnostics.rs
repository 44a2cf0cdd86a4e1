//! Small helpers that word diagnostics the same way across lowering.

use crate::model::expr::Expr;
use crate::model::ir::*;

pub(super) fn is_plain_number(e: &Expr) -> bool {
    matches!(e, Expr::Number(_)) || matches!(e, Expr::Neg(x) if matches!(**x, Expr::Number(_)))
}

pub(super) fn kind_word(s: Sym) -> &'static str {
    match s {
        Sym::Species(_) => "a species",
        Sym::Fixed(_) => "a fixed species",
        Sym::Param(_) => "a param",
        Sym::Total(_) => "a total",
        Sym::Observable(_) => "an observable",
    }
}

pub(super) fn context_help(context: &str) -> String {
    match context {
        "a param's value" => "a param's expression may use only other params and numbers (it is a constant)".into(),
        "a rate constant" => "a mass-action constant uses params, fixed species and totals; for rates that depend on species write `law EXPR`".into(),
        "a rate law" => "a law uses species, fixed species, params, totals and `t`".into(),
        _ => format!("check what {context} may use in docs/language.md"),
    }
}

pub(super) fn fmt_num(v: f64) -> String {
    let s = format!("{v}");
    if s.len() > 12 { format!("{v:.6e}") } else { s }
}
