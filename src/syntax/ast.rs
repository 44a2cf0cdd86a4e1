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
    /// `mass 28.5 kDa`, `activity 40 U/mg`, after the value.
    pub conversions: Vec<Conversion>,
    pub description: Option<String>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ConversionKind {
    /// A molar mass, to turn a mass concentration into a molar one.
    Mass,
    /// A specific activity (U/mg) or a turnover per active site (1/time),
    /// to turn an activity concentration (U/mL) into one of active sites.
    Activity,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Conversion {
    pub kind: ConversionKind,
    pub value: Quantity,
}

// One value a param line: the size of the largest variant costs nothing,
// and boxing it would only complicate every match over the syntax tree.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone, PartialEq)]
pub enum ParamValue {
    Quantity(Quantity),
    Expr(AstExpr),
    /// `12 /s at 25 C energy 55 kJ/mol`: a value at a reference temperature.
    AtTemperature {
        value: Quantity,
        reference: Quantity,
        law: TemperatureLawAst,
    },
}

#[derive(Debug, Clone, PartialEq)]
pub enum TemperatureLawAst {
    /// `energy Ea` (Arrhenius).
    Energy(Quantity),
    /// `enthalpy H [entropy S]` (Eyring).
    Enthalpy(Quantity, Option<Quantity>),
}

/// A side of a trigger's comparison: a number with a unit, or an expression.
#[derive(Debug, Clone, PartialEq)]
pub enum ConditionSide {
    Quantity(Quantity),
    Expr(AstExpr),
}

impl ConditionSide {
    pub fn span(&self) -> Span {
        match self {
            ConditionSide::Quantity(q) => q.span,
            ConditionSide::Expr(e) => e.span(),
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Comparison {
    Greater,
    GreaterEqual,
    Less,
    LessEqual,
}

impl Comparison {
    pub fn symbol(self) -> &'static str {
        match self {
            Comparison::Greater => ">",
            Comparison::GreaterEqual => ">=",
            Comparison::Less => "<",
            Comparison::LessEqual => "<=",
        }
    }
}

/// What an event line does.
#[derive(Debug, Clone, PartialEq)]
pub enum ActionAst {
    /// `add 1 uM S`, `remove 1 uM S`: one species' concentration.
    Change {
        kind: EventKindAst,
        amount: Quantity,
        target: Ident,
    },
    /// `add 10 uL of 1 mM S, 5 mM I`.
    Stock {
        volume: Quantity,
        contents: Vec<(Quantity, Ident)>,
    },
    /// `remove 50 uL`.
    Withdraw { volume: Quantity },
    /// `set S = 2 uM`.
    Set { target: Ident, value: Quantity },
}

/// When an event line acts.
#[derive(Debug, Clone, PartialEq)]
pub enum TimingAst {
    /// `... at TIME`
    At(Quantity),
    /// `every PERIOD [from START] to END: ...`
    Every {
        period: Quantity,
        from: Option<Quantity>,
        to: Quantity,
    },
    /// `when LHS > RHS: ...`
    When {
        lhs: ConditionSide,
        comparison: Comparison,
        rhs: ConditionSide,
        span: Span,
    },
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
    /// `add`, `remove` and `set` lines, and `when` and `every` lines.
    Event {
        action: ActionAst,
        timing: TimingAst,
    },
    /// `volume 200 uL`
    Volume(Quantity),
    /// `temperature 37 C`
    Temperature(Quantity),
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
                timing: TimingAst::When { .. },
                ..
            } => "when",
            StatementKind::Event {
                timing: TimingAst::Every { .. },
                ..
            } => "every",
            StatementKind::Event { action, .. } => action.keyword(),
            StatementKind::Volume(_) => "volume",
            StatementKind::Temperature(_) => "temperature",
            StatementKind::Use { .. } => "use",
        }
    }
}

impl ActionAst {
    pub fn keyword(&self) -> &'static str {
        match self {
            ActionAst::Change {
                kind: EventKindAst::Add,
                ..
            }
            | ActionAst::Stock { .. } => "add",
            ActionAst::Change {
                kind: EventKindAst::Remove,
                ..
            }
            | ActionAst::Withdraw { .. } => "remove",
            ActionAst::Set { .. } => "set",
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
