//! Text → syntax tree. A pre-pass checks limits (size, nesting) and blanks
//! line breaks and comments inside parentheses so the grammar can stay
//! line-oriented; byte offsets are unchanged by it, so spans point into the
//! user's text.

use super::ast::*;
use crate::diagnostics::{Code, Diagnostic, FileId, Span};
use pest::Parser;
use pest::iterators::Pair;
use pest::pratt_parser::{Assoc, Op, PrattParser};
use std::sync::OnceLock;

#[derive(pest_derive::Parser)]
#[grammar = "../grammar/mechanism.pest"]
struct MechanismParser;

/// Largest accepted source file (bytes).
pub const MAX_FILE_BYTES: usize = 64 * 1024 * 1024;
/// Deepest accepted nesting of parentheses.
pub const MAX_NESTING: usize = 200;
/// At most this many operators in one statement. A chain of operators
/// becomes a tree as deep as the chain is long, and every later pass over
/// expressions recurses over it; the bound keeps that depth within the
/// command thread's stack (a product of 2 million factors overflowed it,
/// docs/reliability.md finding 3), with room for the nesting on top.
pub const MAX_OPERATORS: usize = 1_000_000;

/// Parses one file's text. Returns the tree or the diagnostics that stop it.
pub fn parse(text: &str, file: FileId) -> Result<File, Vec<Diagnostic>> {
    if text.len() > MAX_FILE_BYTES {
        return Err(vec![
            Diagnostic::error(
                Code::InputTooLarge,
                format!(
                    "file is {} bytes; the limit is {} bytes",
                    text.len(),
                    MAX_FILE_BYTES
                ),
            )
            .with_label(Span::new(file, 0, 0), "file starts here")
            .with_help("split the mechanism into several files joined with `use`"),
        ]);
    }
    let prepared = blank_inside_parentheses(text, file)?;
    let pairs = MechanismParser::parse(Rule::file, &prepared)
        .map_err(|e| vec![syntax_error(e, file, text)])?;
    let mut builder = Builder {
        file,
        errors: Vec::new(),
    };
    let mut out = File::default();
    for pair in pairs.flatten().filter(|p| p.as_rule() == Rule::line) {
        let span = builder.span(&pair);
        let mut line = Line {
            statement: None,
            comment: None,
            span,
        };
        for inner in pair.into_inner() {
            match inner.as_rule() {
                Rule::comment => {
                    line.comment = Some(
                        text[inner.as_span().start()..inner.as_span().end()]
                            .trim_end()
                            .to_string(),
                    )
                }
                _ => line.statement = builder.statement(inner),
            }
        }
        out.lines.push(line);
    }
    if builder.errors.is_empty() {
        Ok(out)
    } else {
        Err(builder.errors)
    }
}

/// Replaces line breaks and comments inside parentheses by spaces (same
/// byte length), and checks nesting depth and balance.
fn blank_inside_parentheses(text: &str, file: FileId) -> Result<String, Vec<Diagnostic>> {
    let bytes = text.as_bytes();
    let mut out = bytes.to_vec();
    let mut depth = 0usize;
    let mut open_at: Vec<usize> = Vec::new();
    let mut in_string = false;
    let mut operators = 0usize;
    let mut statement_start = 0usize;
    let mut i = 0;
    while i < bytes.len() {
        let b = bytes[i];
        if !in_string && matches!(b, b'+' | b'-' | b'*' | b'/' | b'^') {
            operators += 1;
            if operators > MAX_OPERATORS {
                return Err(vec![
                    Diagnostic::error(
                        Code::InputTooLarge,
                        format!("a statement has more than {MAX_OPERATORS} operators"),
                    )
                    .with_label(
                        Span::new(file, statement_start, statement_start + 1),
                        "this statement",
                    )
                    .with_help("split the expression into named params or observables"),
                ]);
            }
        }
        if in_string {
            if b == b'"' || b == b'\n' {
                in_string = false;
            }
            i += 1;
            continue;
        }
        match b {
            b'"' => in_string = true,
            b'#' => {
                let end = bytes[i..]
                    .iter()
                    .position(|&c| c == b'\n')
                    .map(|p| i + p)
                    .unwrap_or(bytes.len());
                if depth > 0 {
                    out[i..end].iter_mut().for_each(|c| *c = b' ');
                }
                i = end;
                continue;
            }
            b'(' => {
                depth += 1;
                open_at.push(i);
                if depth > MAX_NESTING {
                    return Err(vec![
                        Diagnostic::error(
                            Code::NestingTooDeep,
                            format!("parentheses are nested more than {MAX_NESTING} deep"),
                        )
                        .with_label(Span::new(file, i, i + 1), "this parenthesis is too deep")
                        .with_help("split the expression into named params or observables"),
                    ]);
                }
            }
            b')' => {
                if depth == 0 {
                    return Err(vec![
                        Diagnostic::error(Code::UnclosedParen, "`)` without a matching `(`")
                            .with_label(Span::new(file, i, i + 1), "nothing to close here")
                            .with_help("remove it or add the missing `(`"),
                    ]);
                }
                depth -= 1;
                open_at.pop();
            }
            b'\n' | b'\r' if depth > 0 => out[i] = b' ',
            b'\n' => {
                operators = 0;
                statement_start = i + 1;
            }
            _ => {}
        }
        i += 1;
    }
    if let Some(&at) = open_at.first() {
        return Err(vec![
            Diagnostic::error(Code::UnclosedParen, "`(` is never closed")
                .with_label(Span::new(file, at, at + 1), "opened here")
                .with_help("add the missing `)`; an expression may continue over lines only inside parentheses"),
        ]);
    }
    // Only ASCII bytes were replaced by ASCII spaces, so this stays UTF-8.
    String::from_utf8(out).map_err(|_| {
        vec![Diagnostic::error(
            Code::NotUtf8,
            "internal: text stopped being UTF-8",
        )]
    })
}

fn rule_word(rule: &Rule) -> String {
    use Rule::*;
    let w = match rule {
        EOI => "end of file",
        newline => "end of line",
        line | statement => "a statement",
        comment => "a comment",
        ident => "a name",
        kw_mechanism => "`mechanism`",
        kw_units => "`units`",
        kw_species => "`species`",
        kw_fixed => "`fixed`",
        kw_param => "`param`",
        kw_step => "`step`",
        kw_total => "`total`",
        kw_observe => "`observe`",
        kw_assume => "`assume`",
        kw_steady => "`steady`",
        kw_equilibrium => "`equilibrium`",
        kw_add => "`add`",
        kw_remove => "`remove`",
        kw_set => "`set`",
        kw_at => "`at`",
        kw_use => "`use`",
        kw_with => "`with`",
        kw_law => "`law`",
        kw_concentration => "`concentration`",
        kw_time => "`time`",
        kw_volume => "`volume`",
        kw_temperature => "`temperature`",
        kw_mass => "`mass`",
        kw_activity => "`activity`",
        kw_energy => "`energy`",
        kw_enthalpy => "`enthalpy`",
        kw_entropy => "`entropy`",
        kw_of => "`of`",
        kw_when => "`when`",
        kw_every => "`every`",
        kw_from => "`from`",
        kw_to => "`to`",
        colon => "`:`",
        comparison => "a comparison (`>`, `<`, `>=`, `<=`)",
        conversion => "`mass` or `activity`",
        temperature_law => "`at` and a reference temperature",
        arrhenius | eyring => "`energy` or `enthalpy`",
        volume_quantity | volume_unit => "a volume (e.g. `10 uL`)",
        event_action => "`add`, `remove` or `set`",
        condition | condition_side => "an expression or a number with a unit",
        stock_item | stock_addition => "a stock concentration and a species (e.g. `1 mM S`)",
        add_action | remove_action => "an amount and a species, or a volume",
        equals => "`=`",
        comma => "`,`",
        plus | add => "`+`",
        minus | sub | neg => "`-`",
        mul => "`*`",
        div => "`/`",
        pow => "`^`",
        lparen => "`(`",
        rparen => "`)`",
        string => "a quoted description",
        number | signed_number | bare_number => "a number",
        quantity => "a number with an optional unit",
        unit | unit_word | unit_factor => "a unit",
        arrow | reversible_arrow | irreversible_arrow => "an arrow (`->` or `<=>`)",
        rate => "`with` or `law`",
        side | term | empty_side => "a species (or `0` for none)",
        coefficient => "a coefficient",
        expr | paren | call => "an expression",
        _ => return format!("{rule:?}"),
    };
    w.to_string()
}

fn syntax_error(e: pest::error::Error<Rule>, file: FileId, text: &str) -> Diagnostic {
    use pest::error::{ErrorVariant, InputLocation};
    let (start, end) = match e.location {
        InputLocation::Pos(p) => (p, p),
        InputLocation::Span((a, b)) => (a, b),
    };
    let start = crate::diagnostics::floor_char_boundary(text, start);
    // Point at the offending token (up to the next space), or one character.
    let rest = &text[start..];
    let token_len = rest
        .find(|c: char| c.is_whitespace())
        .unwrap_or(rest.len())
        .min(40);
    let end = if end > start {
        end
    } else {
        start + token_len.max(rest.chars().next().map(char::len_utf8).unwrap_or(0))
    };
    let found = if rest.is_empty() || rest.starts_with(['\n', '\r']) {
        "the end of the line".to_string()
    } else {
        // Control and invisible characters (NUL, escape sequences, bidi
        // overrides, zero-width spaces) are shown escaped, so the message
        // never drives or misleads the user's terminal.
        let token = &text[start..crate::diagnostics::floor_char_boundary(text, end)];
        let invisible = |c: char| {
            c.is_control()
                || matches!(c, '\u{200B}'..='\u{200F}' | '\u{202A}'..='\u{202E}' | '\u{2060}'..='\u{2069}' | '\u{FEFF}')
        };
        format!(
            "`{}`",
            token
                .chars()
                .map(|c| if invisible(c) {
                    c.escape_default().to_string()
                } else {
                    c.to_string()
                })
                .collect::<String>()
        )
    };
    let line_start = text[..start].rfind('\n').map(|i| i + 1).unwrap_or(0);
    // `step r 0 A -> B`, `step r 0/1 A -> B`: the grammar reads `0` as the
    // empty side and then stops, so "expected an arrow" alone would not say
    // why the species after it is wrong.
    let after_empty_side = matches!(
        text[line_start..start].split_whitespace().last(),
        Some("0" | "∅")
    ) && matches!(&e.variant, ErrorVariant::ParsingError { positives, .. }
        if positives.iter().any(|r| matches!(r, Rule::arrow | Rule::rate)));
    let message = match &e.variant {
        ErrorVariant::ParsingError {
            positives,
            negatives: _,
        } => {
            let mut words: Vec<String> = positives.iter().map(rule_word).collect();
            words.sort();
            words.dedup();
            let after = if after_empty_side {
                " after the empty side `0`"
            } else {
                ""
            };
            match words.len() {
                0 => format!("unexpected {found}"),
                1 => format!("expected {}{after}, found {found}", words[0]),
                _ => {
                    let last = words.pop().unwrap_or_default();
                    format!(
                        "expected {} or {last}{after}, found {found}",
                        words.join(", ")
                    )
                }
            }
        }
        ErrorVariant::CustomError { message } => message.clone(),
    };
    let first_word = text[line_start..].split_whitespace().next().unwrap_or("");
    let help = if start == line_start || text[line_start..start].trim().is_empty() {
        match crate::diagnostics::did_you_mean(first_word, STATEMENT_KEYWORDS) {
            Some(k) => format!("did you mean `{k}`? Every line starts with a statement keyword"),
            None => format!(
                "a line starts with one of: {}; `#` starts a comment",
                STATEMENT_KEYWORDS.join(", ")
            ),
        }
    } else if after_empty_side {
        "`0` alone means no species, and a coefficient cannot be 0: remove the `0`, or write a positive coefficient".to_string()
    } else {
        "see docs/language.md for the form of each statement".to_string()
    };
    Diagnostic::error(Code::Syntax, message)
        .with_label(Span::new(file, start, end), "here")
        .with_help(help)
}

/// The words that start a statement (the help of a syntax error lists
/// them; an editor completes them at a line start).
pub const STATEMENT_KEYWORDS: [&str; 17] = [
    "mechanism",
    "units",
    "species",
    "fixed",
    "param",
    "step",
    "total",
    "observe",
    "assume",
    "add",
    "remove",
    "set",
    "use",
    "volume",
    "temperature",
    "when",
    "every",
];

fn pratt() -> &'static PrattParser<Rule> {
    static P: OnceLock<PrattParser<Rule>> = OnceLock::new();
    P.get_or_init(|| {
        PrattParser::new()
            .op(Op::infix(Rule::add, Assoc::Left) | Op::infix(Rule::sub, Assoc::Left))
            .op(Op::infix(Rule::mul, Assoc::Left) | Op::infix(Rule::div, Assoc::Left))
            .op(Op::prefix(Rule::neg))
            .op(Op::infix(Rule::pow, Assoc::Right))
    })
}

struct Builder {
    file: FileId,
    errors: Vec<Diagnostic>,
}

fn string_text(pair: Pair<Rule>) -> String {
    pair.into_inner()
        .next()
        .map(|p| p.as_str().to_string())
        .unwrap_or_default()
}

impl Builder {
    fn span(&self, pair: &Pair<Rule>) -> Span {
        Span::new(self.file, pair.as_span().start(), pair.as_span().end())
    }

    fn ident(&self, pair: Pair<Rule>) -> Ident {
        Ident {
            name: pair.as_str().to_string(),
            span: self.span(&pair),
        }
    }

    fn quantity(&self, pair: Pair<Rule>) -> Quantity {
        let span = self.span(&pair);
        let mut q = Quantity {
            number: String::new(),
            number_span: span,
            unit: None,
            span,
        };
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::signed_number => {
                    q.number = p.as_str().to_string();
                    q.number_span = self.span(&p);
                }
                Rule::unit | Rule::volume_unit => {
                    q.unit = Some((p.as_str().to_string(), self.span(&p)))
                }
                _ => {}
            }
        }
        q
    }

    fn statement(&mut self, pair: Pair<Rule>) -> Option<Statement> {
        let span = self.span(&pair);
        let rule = pair.as_rule();
        let mut it = pair
            .into_inner()
            .filter(|p| !matches!(p.as_rule(), Rule::equals | Rule::comma));
        let kind = match rule {
            Rule::mechanism_stmt => {
                it.next();
                let name = self.ident(it.next()?);
                StatementKind::Mechanism {
                    name,
                    description: it.next().map(string_text),
                }
            }
            Rule::units_stmt => {
                it.next();
                let settings = it
                    .map(|s| {
                        let mut inner = s.into_inner();
                        let key = match inner.next().map(|k| k.as_rule()) {
                            Some(Rule::kw_time) => UnitKey::Time,
                            _ => UnitKey::Concentration,
                        };
                        let unit = inner.next();
                        let (text, span) = unit
                            .map(|u| (u.as_str().to_string(), self.span(&u)))
                            .unwrap_or_default();
                        (key, text, span)
                    })
                    .collect();
                StatementKind::Units(settings)
            }
            Rule::species_stmt => {
                it.next();
                StatementKind::Species(it.map(|d| self.species_decl(d)).collect())
            }
            Rule::fixed_stmt => {
                it.next();
                let name = self.ident(it.next()?);
                let value = Some(self.quantity(it.next()?));
                let mut conversions = Vec::new();
                let mut description = None;
                for p in it {
                    match p.as_rule() {
                        Rule::conversion => conversions.push(self.conversion(p)?),
                        Rule::string => description = Some(string_text(p)),
                        _ => {}
                    }
                }
                StatementKind::Fixed(SpeciesDecl {
                    name,
                    value,
                    conversions,
                    description,
                })
            }
            Rule::param_stmt => {
                it.next();
                let name = self.ident(it.next()?);
                let mut value_parts = it.next()?.into_inner();
                let value_pair = value_parts.next()?;
                let value = match (value_pair.as_rule(), value_parts.next()) {
                    (Rule::quantity | Rule::bare_number, Some(law)) => {
                        self.temperature_law(self.quantity(value_pair), law)?
                    }
                    (Rule::quantity, None) => ParamValue::Quantity(self.quantity(value_pair)),
                    _ => ParamValue::Expr(self.expr(value_pair)),
                };
                StatementKind::Param {
                    name,
                    value,
                    description: it.next().map(string_text),
                }
            }
            Rule::step_stmt => {
                it.next();
                let name = self.ident(it.next()?);
                let lhs = self.side(it.next()?);
                let arrow = it.next()?;
                let arrow_span = self.span(&arrow);
                let arrow_text = arrow.as_str().to_string();
                let reversible = arrow
                    .into_inner()
                    .next()
                    .is_some_and(|a| a.as_rule() == Rule::reversible_arrow);
                let rhs = self.side(it.next()?);
                let rate_pair = it.next()?;
                let rate_span = self.span(&rate_pair);
                let rate_inner = rate_pair.into_inner().next()?;
                let rate = match rate_inner.as_rule() {
                    Rule::mass_action => RateAst::MassAction(
                        rate_inner
                            .into_inner()
                            .filter(|p| p.as_rule() == Rule::expr)
                            .map(|p| self.expr(p))
                            .collect(),
                    ),
                    _ => RateAst::Law(
                        self.expr(
                            rate_inner
                                .into_inner()
                                .find(|p| p.as_rule() == Rule::expr)?,
                        ),
                    ),
                };
                StatementKind::Step {
                    name,
                    lhs,
                    reversible,
                    arrow_text,
                    arrow_span,
                    rhs,
                    rate,
                    rate_span,
                    description: it.next().map(string_text),
                }
            }
            Rule::total_stmt => {
                it.next();
                let name = self.ident(it.next()?);
                let combination = it.next()?;
                let mut terms = Vec::new();
                let mut negative_next = false;
                for p in combination.into_inner() {
                    match p.as_rule() {
                        Rule::signed_term => {
                            let mut neg = false;
                            for q in p.into_inner() {
                                match q.as_rule() {
                                    Rule::minus => neg = true,
                                    Rule::term => terms.push(self.term(q, neg)),
                                    _ => {}
                                }
                            }
                        }
                        Rule::sign => {
                            negative_next = p
                                .into_inner()
                                .next()
                                .is_some_and(|s| s.as_rule() == Rule::minus)
                        }
                        Rule::term => terms.push(self.term(p, negative_next)),
                        _ => {}
                    }
                }
                let value = it.next().map(|q| self.quantity(q));
                StatementKind::Total { name, terms, value }
            }
            Rule::observe_stmt => {
                it.next();
                let name = self.ident(it.next()?);
                StatementKind::Observe {
                    name,
                    expr: self.expr(it.next()?),
                }
            }
            Rule::assume_stmt => {
                it.next();
                let which = it.next()?;
                let steady = which.as_rule() == Rule::assume_steady;
                let names: Vec<Ident> = which
                    .into_inner()
                    .filter(|p| p.as_rule() == Rule::ident)
                    .map(|p| self.ident(p))
                    .collect();
                if steady {
                    StatementKind::AssumeSteady(names)
                } else {
                    StatementKind::AssumeEquilibrium(names)
                }
            }
            Rule::add_stmt | Rule::remove_stmt => {
                it.next();
                let action = self.action(it.next()?, rule == Rule::add_stmt)?;
                let time = self.quantity(it.find(|p| p.as_rule() == Rule::quantity)?);
                StatementKind::Event {
                    action,
                    timing: TimingAst::At(time),
                }
            }
            Rule::set_stmt => {
                it.next();
                let target = self.ident(it.next()?);
                let value = self.quantity(it.next()?);
                let time = self.quantity(it.find(|p| p.as_rule() == Rule::quantity)?);
                StatementKind::Event {
                    action: ActionAst::Set { target, value },
                    timing: TimingAst::At(time),
                }
            }
            Rule::when_stmt => {
                it.next();
                let condition = it.next()?;
                let condition_span = self.span(&condition);
                let mut parts = condition.into_inner();
                let lhs = self.condition_side(parts.next()?)?;
                let comparison = match parts.next()?.as_str() {
                    ">=" => Comparison::GreaterEqual,
                    "<=" => Comparison::LessEqual,
                    "<" => Comparison::Less,
                    _ => Comparison::Greater,
                };
                let rhs = self.condition_side(parts.next()?)?;
                let action = self.event_action(it.find(|p| p.as_rule() == Rule::event_action)?)?;
                StatementKind::Event {
                    action,
                    timing: TimingAst::When {
                        lhs,
                        comparison,
                        rhs,
                        span: condition_span,
                    },
                }
            }
            Rule::every_stmt => {
                it.next();
                let period = self.quantity(it.next()?);
                let mut from = None;
                let mut to = None;
                let mut action = None;
                let mut after = Rule::kw_every;
                for p in it {
                    match p.as_rule() {
                        Rule::kw_from | Rule::kw_to => after = p.as_rule(),
                        Rule::quantity | Rule::bare_number if after == Rule::kw_from => {
                            from = Some(self.quantity(p))
                        }
                        Rule::quantity | Rule::bare_number => to = Some(self.quantity(p)),
                        Rule::event_action => action = Some(self.event_action(p)?),
                        _ => {}
                    }
                }
                StatementKind::Event {
                    action: action?,
                    timing: TimingAst::Every {
                        period,
                        from,
                        to: to?,
                    },
                }
            }
            Rule::volume_stmt => {
                it.next();
                StatementKind::Volume(self.quantity(it.next()?))
            }
            Rule::temperature_stmt => {
                it.next();
                StatementKind::Temperature(self.quantity(it.next()?))
            }
            Rule::use_stmt => {
                it.next();
                let s = it.next()?;
                let span = self.span(&s);
                StatementKind::Use {
                    path: string_text(s),
                    span,
                }
            }
            // Every rule that is not a statement, listed so that a new
            // statement rule in the grammar is a compile error here.
            Rule::EOI
            | Rule::WHITESPACE
            | Rule::file
            | Rule::newline
            | Rule::line
            | Rule::comment
            | Rule::end_of_statement
            | Rule::statement
            | Rule::ident_char
            | Rule::ident
            | Rule::kw_mechanism
            | Rule::kw_units
            | Rule::kw_species
            | Rule::kw_fixed
            | Rule::kw_param
            | Rule::kw_step
            | Rule::kw_total
            | Rule::kw_observe
            | Rule::kw_assume
            | Rule::kw_steady
            | Rule::kw_equilibrium
            | Rule::kw_add
            | Rule::kw_remove
            | Rule::kw_set
            | Rule::kw_at
            | Rule::kw_use
            | Rule::kw_with
            | Rule::kw_law
            | Rule::kw_concentration
            | Rule::kw_time
            | Rule::equals
            | Rule::comma
            | Rule::plus
            | Rule::minus
            | Rule::lparen
            | Rule::rparen
            | Rule::string
            | Rule::string_text
            | Rule::number
            | Rule::signed_number
            | Rule::unit_word
            | Rule::unit_power
            | Rule::unit_factor
            | Rule::unit
            | Rule::quantity
            | Rule::bare_number
            | Rule::unit_setting
            | Rule::species_decl
            | Rule::param_value
            | Rule::side
            | Rule::empty_side
            | Rule::term
            | Rule::coefficient
            | Rule::arrow
            | Rule::reversible_arrow
            | Rule::irreversible_arrow
            | Rule::rate
            | Rule::mass_action
            | Rule::rate_law
            | Rule::linear_combination
            | Rule::signed_term
            | Rule::sign
            | Rule::assume_steady
            | Rule::assume_equilibrium
            | Rule::event_amount
            | Rule::kw_volume
            | Rule::kw_temperature
            | Rule::kw_mass
            | Rule::kw_activity
            | Rule::kw_energy
            | Rule::kw_enthalpy
            | Rule::kw_entropy
            | Rule::kw_of
            | Rule::kw_when
            | Rule::kw_every
            | Rule::kw_from
            | Rule::kw_to
            | Rule::colon
            | Rule::comparison
            | Rule::conversion
            | Rule::temperature_law
            | Rule::arrhenius
            | Rule::eyring
            | Rule::add_action
            | Rule::remove_action
            | Rule::stock_addition
            | Rule::stock_item
            | Rule::volume_quantity
            | Rule::volume_unit
            | Rule::condition
            | Rule::condition_side
            | Rule::event_action
            | Rule::expr
            | Rule::infix
            | Rule::add
            | Rule::sub
            | Rule::mul
            | Rule::div
            | Rule::pow
            | Rule::prefix
            | Rule::neg
            | Rule::primary
            | Rule::paren
            | Rule::call => return None,
        };
        Some(Statement { kind, span })
    }

    fn species_decl(&self, pair: Pair<Rule>) -> SpeciesDecl {
        let mut decl = SpeciesDecl {
            name: Ident {
                name: String::new(),
                span: self.span(&pair),
            },
            value: None,
            conversions: Vec::new(),
            description: None,
        };
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::ident => decl.name = self.ident(p),
                Rule::quantity => decl.value = Some(self.quantity(p)),
                Rule::conversion => {
                    if let Some(c) = self.conversion(p) {
                        decl.conversions.push(c)
                    }
                }
                Rule::string => decl.description = Some(string_text(p)),
                _ => {}
            }
        }
        decl
    }

    fn conversion(&self, pair: Pair<Rule>) -> Option<Conversion> {
        let mut inner = pair.into_inner();
        let kind = match inner.next()?.as_rule() {
            Rule::kw_mass => ConversionKind::Mass,
            _ => ConversionKind::Activity,
        };
        Some(Conversion {
            kind,
            value: self.quantity(inner.next()?),
        })
    }

    fn temperature_law(&self, value: Quantity, law: Pair<Rule>) -> Option<ParamValue> {
        let mut inner = law.into_inner();
        inner.next();
        let reference = self.quantity(inner.next()?);
        let form = inner.next()?;
        let is_arrhenius = form.as_rule() == Rule::arrhenius;
        let mut quantities = form
            .into_inner()
            .filter(|p| p.as_rule() == Rule::quantity)
            .map(|p| self.quantity(p));
        let first = quantities.next()?;
        let law = if is_arrhenius {
            TemperatureLawAst::Energy(first)
        } else {
            TemperatureLawAst::Enthalpy(first, quantities.next())
        };
        Some(ParamValue::AtTemperature {
            value,
            reference,
            law,
        })
    }

    fn condition_side(&self, pair: Pair<Rule>) -> Option<ConditionSide> {
        let inner = pair.into_inner().next()?;
        Some(match inner.as_rule() {
            Rule::quantity => ConditionSide::Quantity(self.quantity(inner)),
            _ => ConditionSide::Expr(self.expr(inner)),
        })
    }

    /// An `add_action` (`adding`) or `remove_action` pair.
    fn action(&self, pair: Pair<Rule>, adding: bool) -> Option<ActionAst> {
        let inner = pair.into_inner().next()?;
        let kind = if adding {
            EventKindAst::Add
        } else {
            EventKindAst::Remove
        };
        Some(match inner.as_rule() {
            Rule::stock_addition => {
                let mut parts = inner.into_inner();
                let volume = self.quantity(parts.next()?);
                let contents = parts
                    .filter(|p| p.as_rule() == Rule::stock_item)
                    .filter_map(|item| {
                        let mut q = item.into_inner();
                        let amount = self.quantity(q.next()?);
                        Some((amount, self.ident(q.next()?)))
                    })
                    .collect();
                ActionAst::Stock { volume, contents }
            }
            Rule::volume_quantity => ActionAst::Withdraw {
                volume: self.quantity(inner),
            },
            _ => {
                let mut parts = inner.into_inner();
                let amount = self.quantity(parts.next()?);
                let target = self.ident(parts.next()?);
                ActionAst::Change {
                    kind,
                    amount,
                    target,
                }
            }
        })
    }

    fn event_action(&self, pair: Pair<Rule>) -> Option<ActionAst> {
        let mut parts = pair.into_inner().filter(|p| p.as_rule() != Rule::equals);
        let keyword = parts.next()?.as_rule();
        match keyword {
            Rule::kw_add | Rule::kw_remove => self.action(parts.next()?, keyword == Rule::kw_add),
            _ => {
                let target = self.ident(parts.next()?);
                let value = self.quantity(parts.next()?);
                Some(ActionAst::Set { target, value })
            }
        }
    }

    fn side(&self, pair: Pair<Rule>) -> Side {
        let span = self.span(&pair);
        let mut side = Side {
            terms: Vec::new(),
            empty_text: None,
            span,
        };
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::empty_side => side.empty_text = Some(p.as_str().to_string()),
                Rule::term => side.terms.push(self.term(p, false)),
                _ => {}
            }
        }
        side
    }

    fn term(&self, pair: Pair<Rule>, negative: bool) -> StepTerm {
        let span = self.span(&pair);
        let mut coefficient = None;
        let mut name = Ident {
            name: String::new(),
            span,
        };
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::coefficient => coefficient = Some((p.as_str().to_string(), self.span(&p))),
                Rule::ident => name = self.ident(p),
                _ => {}
            }
        }
        StepTerm {
            coefficient,
            name,
            negative,
            span,
        }
    }

    fn expr(&self, pair: Pair<Rule>) -> AstExpr {
        let file = self.file;
        pratt()
            .map_primary(|p| self.primary(p))
            .map_prefix(|op, rhs| {
                let span = Span::new(file, op.as_span().start(), rhs.span().end);
                AstExpr::Neg(Box::new(rhs), span)
            })
            .map_infix(|lhs, op, rhs| {
                let op = match op.as_rule() {
                    Rule::add => AstBinOp::Add,
                    Rule::sub => AstBinOp::Sub,
                    Rule::mul => AstBinOp::Mul,
                    Rule::div => AstBinOp::Div,
                    _ => AstBinOp::Pow,
                };
                let span = lhs.span().join(rhs.span());
                AstExpr::Binary(op, Box::new(lhs), Box::new(rhs), span)
            })
            .parse(pair.into_inner())
    }

    fn primary(&self, pair: Pair<Rule>) -> AstExpr {
        let span = self.span(&pair);
        match pair.as_rule() {
            Rule::number => AstExpr::Number(pair.as_str().to_string(), span),
            Rule::ident => AstExpr::Name(self.ident(pair)),
            Rule::paren => {
                let inner = pair.into_inner().find(|p| p.as_rule() == Rule::expr);
                match inner {
                    Some(e) => AstExpr::Paren(Box::new(self.expr(e)), span),
                    None => AstExpr::Number("0".into(), span),
                }
            }
            Rule::call => {
                let mut inner = pair.into_inner();
                let name = inner.next().map(|p| self.ident(p)).unwrap_or(Ident {
                    name: String::new(),
                    span,
                });
                let args = inner
                    .filter(|p| p.as_rule() == Rule::expr)
                    .map(|p| self.expr(p))
                    .collect();
                AstExpr::Call(name, args, span)
            }
            Rule::expr => self.expr(pair),
            _ => AstExpr::Number("0".into(), span),
        }
    }
}
