//! Quantities and units: numbers as written, the `units` line of each
//! file, and conversion of every quantity to the model's default units.
//!
//! Invariants: a number accepted here is finite (and not an underflow to
//! 0); every value leaves in the model's units, converted once.

use super::*;
use crate::diagnostics::{Code, Diagnostic, Span, did_you_mean};
use crate::model::ir::*;
use crate::model::units::{ConcUnit, Dim, TimeUnit, UnitExpr, Units, parse_unit};
use crate::syntax::{self, AstBinOp, AstExpr, Ident, Quantity, StatementKind, UnitKey};

pub(super) fn file_units(tree: Option<&syntax::File>, diags: &mut Vec<Diagnostic>) -> FileUnits {
    let mut units = Units::default();
    let Some(tree) = tree else {
        return FileUnits { units };
    };
    let mut seen = false;
    for st in tree.statements() {
        if let StatementKind::Units(settings) = &st.kind {
            if seen {
                diags.push(
                    Diagnostic::error(Code::DuplicateStatement, "`units` is given more than once")
                        .with_label(st.span, "second `units`")
                        .with_help("give each default unit once, in one `units` line"),
                );
            }
            seen = true;
            let mut given: Vec<&UnitKey> = Vec::new();
            for (key, text, span) in settings {
                if given.contains(&key) {
                    let what = match key {
                        UnitKey::Concentration => "concentration",
                        UnitKey::Time => "time",
                    };
                    diags.push(
                        Diagnostic::error(
                            Code::DuplicateStatement,
                            format!("the {what} unit is given twice in one `units` line"),
                        )
                        .with_label(*span, "given again")
                        .with_help("give each default unit once"),
                    );
                }
                given.push(key);
                match key {
                    UnitKey::Concentration => match ConcUnit::parse(text) {
                        Some(u) => units.concentration = u,
                        None => diags.push(unknown_unit(
                            text,
                            *span,
                            "a concentration unit",
                            &["M", "mM", "uM", "nM", "pM"],
                        )),
                    },
                    UnitKey::Time => match TimeUnit::parse(text) {
                        Some(u) => units.time = u,
                        None => diags.push(unknown_unit(
                            text,
                            *span,
                            "a time unit",
                            &["s", "ms", "min", "h", "d"],
                        )),
                    },
                }
            }
        }
    }
    FileUnits { units }
}

pub(super) fn unknown_unit(text: &str, span: Span, what: &str, choices: &[&str]) -> Diagnostic {
    let hint = did_you_mean(text, choices.iter().copied())
        .map(|c| format!("did you mean `{c}`? "))
        .unwrap_or_default();
    Diagnostic::error(Code::UnknownUnit, format!("`{text}` is not {what}"))
        .with_label(span, "unknown unit")
        .with_help(format!("{hint}{what} is one of: {}", choices.join(", ")))
}

impl Lowerer<'_> {
    /// A number as written, checked finite.
    pub(super) fn number(&mut self, text: &str, span: Span) -> Option<f64> {
        // A mantissa with a non-zero digit that parses to 0 has underflowed
        // (`1e-400`): silently zero would change the model.
        let mantissa = text.split(['e', 'E']).next().unwrap_or(text);
        let nonzero = mantissa.chars().any(|c| c.is_ascii_digit() && c != '0');
        match text.parse::<f64>() {
            Ok(v) if v == 0.0 && nonzero => {
                self.error(
                    Diagnostic::error(Code::BadNumber, format!("`{text}` is too small to represent: it would be 0"))
                        .with_label(span, "underflows")
                        .with_help("numbers other than 0 must be at least about 5e-324 in size; write 0 if zero is meant"),
                );
                None
            }
            Ok(v) if v.is_finite() => Some(v),
            _ => {
                self.error(
                    Diagnostic::error(Code::BadNumber, format!("`{text}` is not a finite number"))
                        .with_label(span, "out of range")
                        .with_help("numbers must lie within about ±1.8e308"),
                );
                None
            }
        }
    }

    /// A quantity converted to default units, with its unit's dimension (if a unit was written).
    pub(super) fn quantity(
        &mut self,
        q: &Quantity,
        file_units: Units,
    ) -> Option<(f64, Option<Dim>)> {
        let value = self.number(&q.number, q.number_span)?;
        // Numbers without a unit are in the writing file's default units; the
        // conversion to the model's units depends on the dimension, known
        // only from context, so callers convert them (see `in_model_units`).
        match &q.unit {
            None => Some((value, None)),
            Some((text, span)) => match parse_unit(text) {
                Ok(u) => {
                    let v = u.convert(value, self.model.units);
                    if !v.is_finite() {
                        self.error(
                            Diagnostic::error(
                                Code::BadNumber,
                                "value overflows after unit conversion",
                            )
                            .with_label(q.span, "too large"),
                        );
                        return None;
                    }
                    Some((v, Some(u.dim())))
                }
                Err(msg) => {
                    let word = text
                        .trim_start_matches(['1', '/'])
                        .split(['/', '*', '^', '·'])
                        .next()
                        .unwrap_or(text);
                    let all = ["M", "mM", "uM", "nM", "pM", "s", "ms", "min", "h", "d"];
                    let hint = did_you_mean(word, all)
                        .map(|c| format!("did you mean `{c}`? "))
                        .unwrap_or_default();
                    let _ = file_units;
                    self.error(Diagnostic::error(Code::UnknownUnit, msg.to_string()).with_label(*span, "not a unit").with_help(format!(
                        "{hint}units are products of concentration (M, mM, uM, nM, pM) and time (s, ms, min, h, d) powers, e.g. `/uM/s`"
                    )));
                    None
                }
            },
        }
    }

    /// Converts a unitless number written in `file_units` for a quantity of
    /// dimension `dim` to the model's units.
    pub(super) fn in_model_units(&self, value: f64, dim: Dim, file_units: Units) -> f64 {
        let u = UnitExpr {
            conc: Some((file_units.concentration, dim.conc)),
            time: Some((file_units.time, dim.time)),
        };
        u.convert(value, self.model.units)
    }

    pub(super) fn concentration(
        &mut self,
        q: &Quantity,
        file_units: Units,
        what: &str,
    ) -> Option<f64> {
        self.quantity_of(q, file_units, Dim::CONC, what)
    }

    pub(super) fn time(&mut self, q: &Quantity, file_units: Units) -> Option<f64> {
        self.quantity_of(q, file_units, Dim::TIME, "a time")
    }

    pub(super) fn quantity_of(
        &mut self,
        q: &Quantity,
        file_units: Units,
        dim: Dim,
        what: &str,
    ) -> Option<f64> {
        let (v, d) = self.quantity(q, file_units)?;
        match d {
            None => Some(self.in_model_units(v, dim, file_units)),
            Some(d) if d == dim => Some(v),
            Some(d) => {
                let units = self.model.units;
                self.error(
                    Diagnostic::error(
                        Code::DimensionMismatch,
                        format!(
                            "{what} needs a unit of dimension {}, but `{}` has dimension {}",
                            dim.display_in(units),
                            q.unit.as_ref().map(|u| u.0.as_str()).unwrap_or(""),
                            d.display_in(units)
                        ),
                    )
                    .with_label(q.span, "wrong dimension")
                    .with_help(format!(
                        "write it in {} (or leave the unit out to use the default)",
                        dim.display_in(units)
                    )),
                );
                None
            }
        }
    }

    /// `param k = NaN /s` or `param k = fast /s`: an undeclared word where
    /// the number of a quantity belongs, followed by unit words. Reported
    /// once, for the word; the unit words are not names to resolve.
    pub(super) fn word_in_place_of_a_number<'e>(&self, e: &'e AstExpr) -> Option<&'e Ident> {
        let undeclared = |name: &str| !self.names.contains_key(name) && !RESERVED.contains(&name);
        let undeclared_unit = |x: &AstExpr| matches!(x, AstExpr::Name(u) if undeclared(&u.name) && parse_unit(&u.name).is_ok());
        match e {
            AstExpr::Name(word) if undeclared(&word.name) => Some(word),
            AstExpr::Binary(AstBinOp::Div | AstBinOp::Mul, lhs, rhs, _) if undeclared_unit(rhs) => {
                self.word_in_place_of_a_number(lhs)
            }
            _ => None,
        }
    }

    pub(super) fn report_word_for_a_number(&mut self, word: &Ident) {
        let lower = word.name.to_ascii_lowercase();
        if matches!(lower.as_str(), "nan" | "inf" | "infinity") {
            self.error(
                Diagnostic::error(
                    Code::BadNumber,
                    format!("`{}` is not a finite number", word.name),
                )
                .with_label(word.span, "not a number")
                .with_help("a value must be a finite number, e.g. `param k = 0.5 /s`"),
            );
        } else {
            self.unknown_name(word, "anything");
        }
    }

    /// `param K = 1 /h` where `h` is also a declared name: the text reads as
    /// a quantity and as an expression.
    pub(super) fn check_quantity_ambiguity(&mut self, q: &Quantity) {
        let Some((unit, span)) = &q.unit else { return };
        // Only `N /word...` also reads as an expression (`N / word`): the
        // language has no implicit product, so `2 uM/s` or `77.27 s` are
        // quantities whatever params exist.
        if !unit.trim_start().starts_with('/') {
            return;
        }
        let words: Vec<&str> = unit
            .split(['/', '*', '·'])
            .map(|w| w.split('^').next().unwrap_or(w))
            .filter(|w| !w.is_empty() && *w != "1")
            .collect();
        // The expression reading is valid only if every word is a param
        // (a param's expression may use params only).
        let is_param = |w: &str| matches!(self.names.get(w), Some((Decl::Sym(Sym::Param(_)), _)));
        if words.is_empty() || !words.iter().all(|w| is_param(w)) {
            return;
        }
        let w = words[0];
        let as_expr = format!(
            "({} / {})",
            q.number,
            unit.trim_start_matches('/').replace('/', " / ")
        );
        self.error(
            Diagnostic::error(Code::AmbiguousQuantity, format!("`{} {unit}` reads both as a quantity with unit `{unit}` and as an expression over the param `{w}`", q.number))
                .with_label(*span, "unit or name?")
                .with_help(format!("for the expression write `{as_expr}`; for the unit rename the param `{w}`")),
        );
    }
}
