//! The canonical layout (`ratewright fmt`): statement order and comments
//! kept, one space between tokens, blank-line groups collapsed to one blank
//! line, and columns aligned within runs of consecutive one-line statements
//! of the same kind. A statement written over several lines (inside
//! parentheses) is kept as written, so comments inside it stay in place.
//! Formatting is a function of the syntax tree and the text, and is
//! idempotent: formatting formatted text changes nothing.

use super::ast::*;

/// Formats a parsed file. `text` is the file's text (for verbatim parts).
pub fn format_file(tree: &File, text: &str) -> String {
    let mut out: Vec<String> = Vec::new();
    let mut run: Vec<(Vec<String>, Option<String>)> = Vec::new();
    let mut run_kind: Option<&'static str> = None;
    let mut pending_blank = false;

    let flush = |run: &mut Vec<(Vec<String>, Option<String>)>, out: &mut Vec<String>| {
        out.extend(align(run));
        run.clear();
    };

    for line in &tree.lines {
        let verbatim = line
            .statement
            .as_ref()
            .map(|s| text.get(s.span.start..s.span.end).unwrap_or(""))
            .filter(|t| t.contains('\n'));
        match (&line.statement, verbatim) {
            (None, _) if line.comment.is_none() => {
                flush(&mut run, &mut out);
                run_kind = None;
                if !out.is_empty() {
                    pending_blank = true;
                }
                continue;
            }
            (None, _) => {
                flush(&mut run, &mut out);
                run_kind = None;
                if pending_blank {
                    out.push(String::new());
                    pending_blank = false;
                }
                out.push(line.comment.clone().unwrap_or_default().trim().to_string());
            }
            (Some(_), Some(verbatim)) => {
                flush(&mut run, &mut out);
                run_kind = None;
                if pending_blank {
                    out.push(String::new());
                    pending_blank = false;
                }
                let mut lines: Vec<String> =
                    verbatim.lines().map(|l| l.trim_end().to_string()).collect();
                if let (Some(last), Some(c)) = (lines.last_mut(), &line.comment) {
                    last.push_str("  ");
                    last.push_str(c.trim());
                }
                out.extend(lines);
            }
            (Some(st), None) => {
                let kind = st.kind.keyword();
                if run_kind != Some(kind) || pending_blank {
                    flush(&mut run, &mut out);
                }
                if pending_blank {
                    out.push(String::new());
                    pending_blank = false;
                }
                run_kind = Some(kind);
                run.push((
                    cells(&st.kind),
                    line.comment.as_ref().map(|c| c.trim().to_string()),
                ));
            }
        }
    }
    flush(&mut run, &mut out);
    while out.last().is_some_and(|l| l.is_empty()) {
        out.pop();
    }
    let mut s = out.join("\n");
    s.push('\n');
    s
}

fn width(s: &str) -> usize {
    s.chars().count()
}

/// Pads every cell but the last of each row to the widest cell of its
/// column in the run, then aligns trailing comments.
fn align(run: &[(Vec<String>, Option<String>)]) -> Vec<String> {
    let columns = run.iter().map(|(c, _)| c.len()).max().unwrap_or(0);
    let mut widths = vec![0usize; columns];
    for (cells, _) in run {
        let last = last_nonempty(cells);
        for (i, c) in cells.iter().enumerate() {
            if i < last {
                widths[i] = widths[i].max(width(c));
            }
        }
    }
    let rows: Vec<String> = run
        .iter()
        .map(|(cells, _)| {
            let last = last_nonempty(cells);
            let mut line = String::new();
            for (i, c) in cells.iter().enumerate().take(last + 1) {
                if i > 0 {
                    line.push(' ');
                }
                line.push_str(c);
                if i < last {
                    line.extend(std::iter::repeat_n(' ', widths[i] - width(c)));
                }
            }
            line.trim_end().to_string()
        })
        .collect();
    let comment_col = run
        .iter()
        .zip(&rows)
        .filter(|((_, c), _)| c.is_some())
        .map(|(_, r)| width(r))
        .max()
        .unwrap_or(0);
    rows.into_iter()
        .zip(run)
        .map(|(row, (_, comment))| match comment {
            Some(c) => {
                let pad = comment_col - width(&row) + 2;
                format!("{row}{}{c}", " ".repeat(pad))
            }
            None => row,
        })
        .collect()
}

fn last_nonempty(cells: &[String]) -> usize {
    cells.iter().rposition(|c| !c.is_empty()).unwrap_or(0)
}

fn quoted(s: &Option<String>) -> String {
    s.as_ref().map(|d| format!("\"{d}\"")).unwrap_or_default()
}

/// A quantity as written, with one space between number and unit.
pub fn quantity(q: &Quantity) -> String {
    match &q.unit {
        Some((u, _)) => format!("{} {u}", q.number),
        None => q.number.clone(),
    }
}

fn term(t: &StepTerm) -> String {
    match &t.coefficient {
        Some((c, _)) => format!("{c} {}", t.name.name),
        None => t.name.name.clone(),
    }
}

fn side(s: &Side) -> String {
    match &s.empty_text {
        Some(e) => e.clone(),
        None => s.terms.iter().map(term).collect::<Vec<_>>().join(" + "),
    }
}

fn names(list: &[Ident]) -> String {
    list.iter()
        .map(|i| i.name.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

/// The aligned columns of a one-name `species` or `fixed` statement.
fn decl_columns(kw: String, d: &SpeciesDecl) -> Vec<String> {
    vec![
        kw,
        d.name.name.clone(),
        d.value
            .as_ref()
            .map(|q| format!("= {}{}", quantity(q), conversions(&d.conversions)))
            .unwrap_or_default(),
        quoted(&d.description),
    ]
}

fn conversions(list: &[Conversion]) -> String {
    list.iter()
        .map(|c| {
            let word = match c.kind {
                ConversionKind::Mass => "mass",
                ConversionKind::Activity => "activity",
            };
            format!(" {word} {}", quantity(&c.value))
        })
        .collect()
}

fn species_decl(d: &SpeciesDecl) -> String {
    let mut s = d.name.name.clone();
    if let Some(q) = &d.value {
        s.push_str(" = ");
        s.push_str(&quantity(q));
        s.push_str(&conversions(&d.conversions));
    }
    if d.description.is_some() {
        s.push(' ');
        s.push_str(&quoted(&d.description));
    }
    s
}

/// The cells of a one-line statement, aligned column by column in a run.
fn cells(kind: &StatementKind) -> Vec<String> {
    let kw = kind.keyword().to_string();
    match kind {
        StatementKind::Mechanism { name, description } => {
            vec![kw, name.name.clone(), quoted(description)]
        }
        StatementKind::Units(settings) => {
            let parts: Vec<String> = settings
                .iter()
                .map(|(k, u, _)| match k {
                    UnitKey::Concentration => format!("concentration {u}"),
                    UnitKey::Time => format!("time {u}"),
                })
                .collect();
            vec![kw, parts.join(", ")]
        }
        StatementKind::Species(decls) if decls.len() == 1 => decl_columns(kw, &decls[0]),
        StatementKind::Species(decls) => vec![
            kw,
            decls
                .iter()
                .map(species_decl)
                .collect::<Vec<_>>()
                .join(", "),
        ],
        StatementKind::Fixed(d) => decl_columns(kw, d),
        StatementKind::Param {
            name,
            value,
            description,
        } => {
            let v = match value {
                ParamValue::Quantity(q) => quantity(q),
                ParamValue::Expr(e) => expr(e),
                ParamValue::AtTemperature {
                    value,
                    reference,
                    law,
                } => {
                    let law = match law {
                        TemperatureLawAst::Energy(e) => format!("energy {}", quantity(e)),
                        TemperatureLawAst::Enthalpy(h, None) => format!("enthalpy {}", quantity(h)),
                        TemperatureLawAst::Enthalpy(h, Some(s)) => {
                            format!("enthalpy {} entropy {}", quantity(h), quantity(s))
                        }
                    };
                    format!("{} at {} {law}", quantity(value), quantity(reference))
                }
            };
            vec![kw, name.name.clone(), format!("= {v}"), quoted(description)]
        }
        StatementKind::Step {
            name,
            lhs,
            arrow_text,
            rhs,
            rate,
            description,
            ..
        } => {
            let rate = match rate {
                RateAst::MassAction(cs) => format!(
                    "with {}",
                    cs.iter().map(expr).collect::<Vec<_>>().join(", ")
                ),
                RateAst::Law(e) => format!("law {}", expr(e)),
            };
            vec![
                kw,
                name.name.clone(),
                side(lhs),
                arrow_text.clone(),
                side(rhs),
                rate,
                quoted(description),
            ]
        }
        StatementKind::Total { name, terms, value } => {
            let mut comb = String::new();
            for (i, t) in terms.iter().enumerate() {
                match (i, t.negative) {
                    (0, true) => comb.push('-'),
                    (0, false) => {}
                    (_, true) => comb.push_str(" - "),
                    (_, false) => comb.push_str(" + "),
                }
                comb.push_str(&term(t));
            }
            vec![
                kw,
                name.name.clone(),
                format!("= {comb}"),
                value
                    .as_ref()
                    .map(|q| format!("= {}", quantity(q)))
                    .unwrap_or_default(),
            ]
        }
        StatementKind::Observe { name, expr: e } => {
            vec![kw, name.name.clone(), format!("= {}", expr(e))]
        }
        StatementKind::AssumeSteady(list) => vec![kw, format!("steady {}", names(list))],
        StatementKind::AssumeEquilibrium(list) => vec![kw, format!("equilibrium {}", names(list))],
        StatementKind::Event { action: a, timing } => match timing {
            TimingAst::At(time) => vec![kw, action_body(a), format!("at {}", quantity(time))],
            TimingAst::Every { period, from, to } => {
                let from = from
                    .as_ref()
                    .map(|f| format!(" from {}", quantity(f)))
                    .unwrap_or_default();
                vec![
                    kw,
                    format!("{}{from} to {}:", quantity(period), quantity(to)),
                    action(a),
                ]
            }
            TimingAst::When {
                lhs,
                comparison,
                rhs,
                ..
            } => vec![
                kw,
                format!(
                    "{} {} {}:",
                    condition_side(lhs),
                    comparison.symbol(),
                    condition_side(rhs)
                ),
                action(a),
            ],
        },
        StatementKind::Volume(q) | StatementKind::Temperature(q) => vec![kw, quantity(q)],
        StatementKind::Use { path, .. } => vec![kw, format!("\"{path}\"")],
    }
}

/// An event's action after its keyword (`1 uM S`, `10 uL of 1 mM S`).
fn action_body(a: &ActionAst) -> String {
    match a {
        ActionAst::Change { amount, target, .. } => format!("{} {}", quantity(amount), target.name),
        ActionAst::Stock { volume, contents } => format!(
            "{} of {}",
            quantity(volume),
            contents
                .iter()
                .map(|(q, n)| format!("{} {}", quantity(q), n.name))
                .collect::<Vec<_>>()
                .join(", ")
        ),
        ActionAst::Withdraw { volume } => quantity(volume),
        ActionAst::Set { target, value } => format!("{} = {}", target.name, quantity(value)),
    }
}

fn action(a: &ActionAst) -> String {
    format!("{} {}", a.keyword(), action_body(a))
}

fn condition_side(side: &ConditionSide) -> String {
    match side {
        ConditionSide::Quantity(q) => quantity(q),
        ConditionSide::Expr(e) => expr(e),
    }
}

/// An expression in canonical spacing; parentheses kept as written.
pub fn expr(e: &AstExpr) -> String {
    match e {
        AstExpr::Number(n, _) => n.clone(),
        AstExpr::Name(i) => i.name.clone(),
        AstExpr::Neg(x, _) => format!("-{}", expr(x)),
        AstExpr::Binary(AstBinOp::Pow, a, b, _) => format!("{}^{}", expr(a), expr(b)),
        AstExpr::Binary(op, a, b, _) => format!("{} {} {}", expr(a), op.symbol(), expr(b)),
        AstExpr::Call(f, args, _) => format!(
            "{}({})",
            f.name,
            args.iter().map(expr).collect::<Vec<_>>().join(", ")
        ),
        AstExpr::Paren(x, _) => format!("({})", expr(x)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnostics::FileId;

    fn fmt(text: &str) -> String {
        let tree = crate::syntax::parse(text, FileId(0)).expect("parses");
        format_file(&tree, text)
    }

    #[test]
    fn aligns_runs_and_keeps_comments() {
        let src = "species S = 20 uM \"sub\"\nspecies   P \"prod\"  # out\n\n\n# note\nstep a  E+S<=>ES with k1,k2\nstep cleave ES -> E + P with k3\n";
        let out = fmt(src);
        assert_eq!(
            out,
            "species S = 20 uM \"sub\"\nspecies P         \"prod\"  # out\n\n# note\nstep a      E + S <=> ES    with k1, k2\nstep cleave ES    ->  E + P with k3\n"
        );
        assert_eq!(fmt(&out), out);
    }

    #[test]
    fn keeps_multiline_statements_verbatim() {
        let src = "param K = (a +   # first\n   b)\nparam a = 1\n";
        let out = fmt(src);
        assert!(out.starts_with("param K = (a +   # first\n   b)\n"));
        assert_eq!(fmt(&out), out);
    }
}
