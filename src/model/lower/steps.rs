//! Steps: sides, coefficients and rates of `step` statements.
//!
//! Invariants: terms name dynamic or fixed species only; coefficients are
//! exact positive rationals whose sums fit in 64 bits; a mass-action step
//! has a reverse constant exactly when it is reversible.

use super::*;
use crate::diagnostics::{Code, Diagnostic, Span};
use crate::model::expr::Expr;
use crate::model::ir::*;
use crate::model::units::Dim;
use crate::syntax::{Ident, RateAst, Side, StepTerm};
use num_traits::{CheckedAdd, CheckedDiv, CheckedSub, One, Signed, ToPrimitive, Zero};

/// The parts of a `step` statement that lowering reads.
pub(super) struct StepParts<'a> {
    pub name: &'a Ident,
    pub lhs: &'a Side,
    pub reversible: &'a bool,
    pub arrow_span: &'a Span,
    pub rhs: &'a Side,
    pub rate: &'a RateAst,
    pub rate_span: &'a Span,
    pub description: &'a Option<String>,
}

impl Lowerer<'_> {
    pub(super) fn lower_terms(&mut self, side: &Side) -> Vec<Term> {
        let mut terms: Vec<Term> = Vec::new();
        for t in &side.terms {
            let Some(sym) = self.participant(&t.name, "a step's species") else {
                continue;
            };
            let Some(c) = self.coefficient(t) else {
                continue;
            };
            self.used.insert(sym);
            match terms.iter_mut().find(|x| x.sym == sym) {
                Some(x) => match x.coefficient.checked_add(&c) {
                    Some(sum) => x.coefficient = sum,
                    None => self.error(coefficient_overflow(
                        t.span,
                        "the coefficients of this species on one side",
                    )),
                },
                None => terms.push(Term {
                    sym,
                    coefficient: c,
                    span: t.span,
                }),
            }
        }
        terms
    }

    pub(super) fn participant(&mut self, ident: &Ident, what: &str) -> Option<Sym> {
        match self.lookup(&ident.name) {
            Some(Decl::Sym(s @ (Sym::Species(_) | Sym::Fixed(_)))) => Some(s),
            Some(Decl::Sym(s)) => {
                self.error(
                    Diagnostic::error(
                        Code::WrongKind,
                        format!("`{}` is {}, not a species", ident.name, kind_word(s)),
                    )
                    .with_label(ident.span, format!("used as {what}"))
                    .with_help("only `species` and `fixed` names take part in steps"),
                );
                None
            }
            Some(Decl::Step(_)) => {
                self.error(
                    Diagnostic::error(
                        Code::WrongKind,
                        format!("`{}` is a step, not a species", ident.name),
                    )
                    .with_label(ident.span, "a step name")
                    .with_help("only `species` and `fixed` names take part in steps"),
                );
                None
            }
            None => {
                self.unknown_name(ident, "a species");
                None
            }
        }
    }

    pub(super) fn coefficient(&mut self, t: &StepTerm) -> Option<Coef> {
        let Some((text, span)) = &t.coefficient else {
            return Some(Coef::one());
        };
        let bad = |msg: String| {
            Diagnostic::error(Code::BadCoefficient, msg).with_label(*span, "this coefficient").with_help("coefficients are positive whole numbers, decimals or fractions such as `2`, `0.5`, `1/2`, at most 18 digits")
        };
        let parsed = parse_coefficient(text);
        match parsed {
            Some(c) if c.is_positive() => Some(c),
            Some(_) => {
                self.error(bad(format!("coefficient `{text}` must be positive")));
                None
            }
            None => {
                self.error(bad(format!(
                    "coefficient `{text}` is not a number this tool can hold exactly"
                )));
                None
            }
        }
    }

    /// A `step` statement (`item`), taken apart by the driver.
    pub(super) fn lower_step(&mut self, item: &Item, step: StepParts) {
        let StepParts {
            name,
            lhs,
            reversible,
            arrow_span,
            rhs,
            rate,
            rate_span,
            description,
        } = step;
        let Some(Decl::Step(idx)) = self.lookup(&name.name) else {
            return;
        };
        if self.model.steps[idx].span != item.span {
            return; // a duplicate name, already reported
        }
        let errors_before = self.diags.iter().filter(|d| d.is_error()).count();
        let reactants = self.lower_terms(lhs);
        let products = self.lower_terms(rhs);
        // Later stages add and subtract coefficients exactly in 64 bits:
        // refuse a step whose side orders or net changes would overflow.
        if let Some(what) = coefficient_sums_overflow(&reactants, &products) {
            self.error(coefficient_overflow(item.span, what));
            return;
        }
        let rate = match rate {
            RateAst::Law(e) => {
                let resolved = self.resolve(e, &|s| !matches!(s, Sym::Observable(_)), "a rate law");
                Rate::Law(resolved.unwrap_or(Expr::Number(0.0)))
            }
            RateAst::MassAction(constants) => {
                let resolved: Vec<Option<Expr>> = constants
                    .iter()
                    .map(|c| {
                        self.resolve(
                            c,
                            &|s| matches!(s, Sym::Param(_) | Sym::Fixed(_) | Sym::Total(_)),
                            "a rate constant",
                        )
                    })
                    .collect();
                match (*reversible, constants.len()) {
                    (true, 1) => self.error(
                        Diagnostic::error(
                            Code::MissingReverseConstant,
                            format!(
                                "reversible step `{}` has no reverse rate constant",
                                name.name
                            ),
                        )
                        .with_label(*arrow_span, "reversible")
                        .with_label(*rate_span, "only a forward constant")
                        .with_help("write `with KF, KR`, or use `->` for an irreversible step"),
                    ),
                    (false, 2) => self.error(
                        Diagnostic::error(
                            Code::ExtraReverseConstant,
                            format!("irreversible step `{}` has two rate constants", name.name),
                        )
                        .with_label(*arrow_span, "irreversible")
                        .with_label(constants[1].span(), "a reverse constant")
                        .with_help("use `<=>` for a reversible step, or drop the second constant"),
                    ),
                    (_, n) if n > 2 => self.error(
                        Diagnostic::error(
                            Code::ExtraReverseConstant,
                            format!("step `{}` has {n} rate constants", name.name),
                        )
                        .with_label(constants[2].span(), "one too many")
                        .with_help("a step takes one constant (`->`) or two (`<=>`)"),
                    ),
                    _ => {}
                }
                let forward = resolved
                    .first()
                    .cloned()
                    .flatten()
                    .unwrap_or(Expr::Number(0.0));
                let reverse = if *reversible {
                    resolved
                        .get(1)
                        .cloned()
                        .flatten()
                        .or(Some(Expr::Number(0.0)))
                } else {
                    None
                };
                // Dimension check per direction.
                let units = self.model.units;
                let directions = [(0usize, &reactants, "forward"), (1, &products, "reverse")];
                for (k, side, dir) in directions {
                    let Some(Some(expr)) = resolved.get(k) else {
                        continue;
                    };
                    if k == 1 && !*reversible {
                        continue;
                    }
                    let order = Model::order(side);
                    if !order.is_integer() {
                        continue;
                    }
                    let Some(order) = order.to_integer().to_i32() else {
                        continue;
                    };
                    let want = Dim::mass_action_constant(order);
                    if let Some(have) = self.infer_dim(expr)
                        && have != want
                        && !(have == Dim::NONE && matches!(expr, Expr::Number(_)))
                    {
                        let mut d = Diagnostic::error(
                            Code::DimensionMismatch,
                            format!("the {dir} constant of step `{}` has dimension {}, but a step of order {order} needs {}", name.name, have.display_in(units), want.display_in(units)),
                        )
                        .with_label(constants[k].span(), format!("{dir} constant: {}", have.display_in(units)));
                        if let Expr::Name(Sym::Param(p)) = expr {
                            let span = self.model.params[*p].span;
                            d = d.with_label(span, "declared here");
                        }
                        let side_span = if k == 0 { lhs.span } else { rhs.span };
                        d = d.with_label(side_span, format!("order {order} ({dir})"));
                        let per = match 1 - order {
                            0 => "inverse time".to_string(),
                            1 => "concentration per time".to_string(),
                            p => format!("concentration^{p} per time"),
                        };
                        self.error(d.with_help(format!(
                            "a mass-action constant for order {order} is in {per}, e.g. `{}`",
                            want.display_in(units)
                        )));
                    }
                }
                for (k, constant) in [(0, Some(&forward)), (1, reverse.as_ref())] {
                    let Some(constant) = constant else { continue };
                    let v = constant.eval(&|s| self.model.initial_value(s), 0.0);
                    // A param whose value is not finite was reported with
                    // the param; an expression written here was not.
                    if !v.is_finite() && !matches!(constant, Expr::Name(_)) {
                        let dir = if k == 0 { "forward" } else { "reverse" };
                        self.error(
                            Diagnostic::error(
                                Code::BadParamValue,
                                format!("the {dir} constant of step `{}` evaluates to {v}", name.name),
                            )
                            .with_label(constants[k].span(), "not a finite number")
                            .with_help("check for division by zero, overflow or a root or logarithm of a negative number"),
                        );
                    }
                    if v < 0.0 && v.is_finite() {
                        let dir = if k == 0 { "forward" } else { "reverse" };
                        let mut d = Diagnostic::error(
                            Code::NegativeRateConstant,
                            format!("the {dir} constant of step `{}` is {v}; a rate constant cannot be negative", name.name),
                        )
                        .with_label(constants[k].span(), format!("{dir} constant: {v}"));
                        if let Expr::Name(Sym::Param(p)) = constant {
                            d = d.with_label(self.model.params[*p].span, "declared here");
                        }
                        self.error(d.with_help("mass action makes the rate proportional to its constant: a negative one would drive concentrations below zero; write the step the other way round if that is the direction meant"));
                    }
                }
                Rate::MassAction { forward, reverse }
            }
        };
        let law_mismatch = match &rate {
            Rate::Law(e) => self.report_mismatched_sum(
                e,
                &format!("the law of step `{}`", name.name),
                *rate_span,
            ),
            Rate::MassAction { .. } => false,
        };
        // A law whose names failed to resolve has no dimension worth a
        // warning: the error says what is wrong.
        let step_failed = self.diags.iter().filter(|d| d.is_error()).count() > errors_before;
        if let Rate::Law(e) = &rate
            && !law_mismatch
            && !step_failed
        {
            match self.infer_dim(e) {
                Some(d) if d == Dim::RATE => {}
                Some(d) => self.diags.push(
                    Diagnostic::warning(Code::LawDimensionMismatch, format!("the law of step `{}` has dimension {}, not concentration per time", name.name, d.display_in(self.model.units)))
                        .with_label(*rate_span, "this law")
                        .with_help(format!("a rate is in {}", Dim::RATE.display_in(self.model.units))),
                ),
                None => self.diags.push(
                    Diagnostic::warning(Code::LawDimensionUnknown, format!("the dimension of the law of step `{}` cannot be inferred", name.name))
                        .with_label(*rate_span, "this law")
                        .with_help("give its params units (e.g. `param Vmax = 3 uM/s`) so the law can be checked"),
                ),
            }
        }
        let step = &mut self.model.steps[idx];
        step.reactants = reactants;
        step.products = products;
        step.reversible = *reversible;
        step.rate = rate;
        step.description = description.clone();
        step.rate_span = *rate_span;
    }
}

pub(super) fn coefficient_overflow(span: Span, what: &str) -> Diagnostic {
    Diagnostic::error(Code::BadCoefficient, format!("{what} add up to more than this tool can hold exactly"))
        .with_label(span, "coefficients too large")
        .with_help("use smaller coefficients (numerators and denominators of a few digits); scale a step's coefficients down by their common factor")
}

/// Which sum of a step's coefficients (side orders, net change of a
/// species) does not fit in 64-bit rationals, if any.
pub(super) fn coefficient_sums_overflow(
    reactants: &[Term],
    products: &[Term],
) -> Option<&'static str> {
    let sum = |terms: &[Term]| {
        terms
            .iter()
            .try_fold(Coef::zero(), |a, t| a.checked_add(&t.coefficient))
    };
    if sum(reactants).is_none() || sum(products).is_none() {
        return Some("the coefficients of one side of this step");
    }
    for r in reactants {
        if let Some(p) = products.iter().find(|p| p.sym == r.sym)
            && p.coefficient.checked_sub(&r.coefficient).is_none()
        {
            return Some("the net change of a species in this step");
        }
    }
    None
}

/// Parses `2`, `0.5`, `1/2` exactly; None on overflow or malformed text.
pub(crate) fn parse_coefficient(text: &str) -> Option<Coef> {
    let (num, den) = match text.split_once('/') {
        Some((a, b)) => (a, Some(b)),
        None => (text, None),
    };
    let mut value = match num.split_once('.') {
        Some((int, frac)) => {
            let digits = format!("{int}{frac}");
            let n: i64 = digits.parse().ok()?;
            let d = 10i64.checked_pow(frac.len() as u32)?;
            Coef::new(n, d)
        }
        None => Coef::from_integer(num.parse().ok()?),
    };
    if let Some(d) = den {
        let d: i64 = d.parse().ok()?;
        if d == 0 {
            return Some(Coef::zero());
        }
        value = value.checked_div(&Coef::from_integer(d))?;
    }
    Some(value)
}
