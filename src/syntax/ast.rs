//! The syntax tree: statements as written, with spans, before any name is
//! resolved or unit converted. Number and unit texts are kept as written so
//! the formatter can print them back unchanged.

use crate::diagnostics::Span;

#[derive(Debug, Clone, PartialEq)]
pub struct Ident {
    pub name: String,
    pub span: Span,
}

/// A number with an optional unit, as written.
#[derive(Debug, Clone, PartialEq)]
pub struct Quantity {
    /// The number as written (with its sign).
    pub number: String,
    pub number_span: Span,
    pub unit: Option<(String, Span)>,
    pub span: Span,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AstBinOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
}

impl AstBinOp {
    pub fn symbol(self) -> &'static str {
        match self {
            AstBinOp::Add => "+",
            AstBinOp::Sub => "-",
            AstBinOp::Mul => "*",
            AstBinOp::Div => "/",
            AstBinOp::Pow => "^",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub enum AstExpr {
    Number(String, Span),
    Name(Ident),
    Neg(Box<AstExpr>, Span),
    Binary(AstBinOp, Box<AstExpr>, Box<AstExpr>, Span),
    Call(Ident, Vec<AstExpr>, Span),
    Paren(Box<AstExpr>, Span),
}

impl AstExpr {
    pub fn span(&self) -> Span {
        match self {
            AstExpr::Number(_, s)
            | AstExpr::Neg(_, s)
            | AstExpr::Binary(_, _, _, s)
            | AstExpr::Call(_, _, s)
            | AstExpr::Paren(_, s) => *s,
            AstExpr::Name(i) => i.span,
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct SpeciesDecl {
    pub name: Ident,
    pub value: Option<Quantity>,
    pub description: Option<String>,
}

#[derive(Debug, Clone, PartialEq)]
pub enum ParamValue {
    Quantity(Quantity),
    Expr(AstExpr),
}

#[derive(Debug, Clone, PartialEq)]
pub struct StepTerm {
    /// The coefficient as written (`2`, `0.5`, `1/2`), if any.
    pub coefficient: Option<(String, Span)>,
    pub name: Ident,
    /// For terms of a `total`: whether preceded by a minus sign.
    pub negative: bool,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Side {
    /// Empty for `0` / `∅`.
    pub terms: Vec<StepTerm>,
    /// How an empty side was written (`0` or `∅`).
    pub empty_text: Option<String>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub enum RateAst {
    MassAction(Vec<AstExpr>),
    Law(AstExpr),
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UnitKey {
    Concentration,
    Time,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EventKindAst {
    Add,
    Remove,
}

#[derive(Debug, Clone, PartialEq)]
pub enum StatementKind {
    Mechanism {
        name: Ident,
        description: Option<String>,
    },
    Units(Vec<(UnitKey, String, Span)>),
    Species(Vec<SpeciesDecl>),
    Fixed(SpeciesDecl),
    Param {
        name: Ident,
        value: ParamValue,
        description: Option<String>,
    },
    Step {
        name: Ident,
        lhs: Side,
        reversible: bool,
        arrow_text: String,
        arrow_span: Span,
        rhs: Side,
        rate: RateAst,
        rate_span: Span,
        description: Option<String>,
    },
    Total {
        name: Ident,
        terms: Vec<StepTerm>,
        value: Option<Quantity>,
    },
    Observe {
        name: Ident,
        expr: AstExpr,
    },
    AssumeSteady(Vec<Ident>),
    AssumeEquilibrium(Vec<Ident>),
    Event {
        kind: EventKindAst,
        amount: Quantity,
        target: Ident,
        time: Quantity,
    },
    Set {
        target: Ident,
        value: Quantity,
        time: Quantity,
    },
    Use {
        path: String,
        span: Span,
    },
}

impl StatementKind {
    /// The statement's keyword (for messages and formatting runs).
    pub fn keyword(&self) -> &'static str {
        match self {
            StatementKind::Mechanism { .. } => "mechanism",
            StatementKind::Units(_) => "units",
            StatementKind::Species(_) => "species",
            StatementKind::Fixed(_) => "fixed",
            StatementKind::Param { .. } => "param",
            StatementKind::Step { .. } => "step",
            StatementKind::Total { .. } => "total",
            StatementKind::Observe { .. } => "observe",
            StatementKind::AssumeSteady(_) | StatementKind::AssumeEquilibrium(_) => "assume",
            StatementKind::Event {
                kind: EventKindAst::Add,
                ..
            } => "add",
            StatementKind::Event {
                kind: EventKindAst::Remove,
                ..
            } => "remove",
            StatementKind::Set { .. } => "set",
            StatementKind::Use { .. } => "use",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Statement {
    pub kind: StatementKind,
    pub span: Span,
}

/// One physical line (or, for a statement continued inside parentheses,
/// several): an optional statement and an optional trailing comment.
#[derive(Debug, Clone, PartialEq)]
pub struct Line {
    pub statement: Option<Statement>,
    /// The comment text including `#`.
    pub comment: Option<String>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct File {
    pub lines: Vec<Line>,
}

impl File {
    pub fn statements(&self) -> impl Iterator<Item = &Statement> {
        self.lines.iter().filter_map(|l| l.statement.as_ref())
    }
}
