//! Name resolution: expressions of the syntax tree become IR expressions
//! whose names are [`Sym`]s, with the kinds a context allows.
//!
//! Invariants: an unknown name is reported once, with a suggestion within
//! a bounded number of comparisons; nothing unresolved enters the IR.

use super::*;
use crate::diagnostics::{Code, Diagnostic, did_you_mean};
use crate::model::expr::{BinOp, Expr, Func};
use crate::model::ir::*;
use crate::model::units::{ConcUnit, TimeUnit};
use crate::syntax::{AstBinOp, AstExpr, Ident};

impl Lowerer<'_> {
    pub(super) fn lookup(&self, name: &str) -> Option<Decl> {
        self.names.get(name).map(|(d, _)| *d)
    }

    pub(super) fn unknown_name(&mut self, ident: &Ident, what: &str) {
        let hint = if self.suggestion_budget >= self.names.len() {
            self.suggestion_budget -= self.names.len();
            // A name whose length differs by more than the distance limit
            // of `did_you_mean` cannot be suggested: skip it cheaply.
            let len = ident.name.chars().count();
            let limit = (len / 3).max(1);
            did_you_mean(
                &ident.name,
                self.names
                    .keys()
                    .map(String::as_str)
                    .filter(|c| c.chars().count().abs_diff(len) <= limit),
            )
            .map(str::to_string)
        } else {
            None
        };
        let mut d = Diagnostic::error(Code::UnknownName, format!("unknown name `{}`", ident.name))
            .with_label(ident.span, format!("not declared as {what}"));
        d = match hint {
            Some(h) => d.with_help(format!("did you mean `{h}`?")),
            None if ConcUnit::parse(&ident.name).is_some() || TimeUnit::parse(&ident.name).is_some() => {
                d.with_help(format!("units appear only right after a number (e.g. `2 /{}`), never inside expressions", ident.name))
            }
            None => d.with_help(format!("declare it, e.g. `param {} = ...` or `species {}`", ident.name, ident.name)),
        };
        self.error(d);
    }

    /// Resolves an expression. `allowed` filters which kinds may appear.
    pub(super) fn resolve(
        &mut self,
        e: &AstExpr,
        allowed: &dyn Fn(Sym) -> bool,
        context: &str,
    ) -> Option<Expr> {
        Some(match e {
            AstExpr::Number(text, span) => Expr::Number(self.number(text, *span)?),
            AstExpr::Paren(inner, _) => self.resolve(inner, allowed, context)?,
            AstExpr::Neg(inner, _) => Expr::Neg(Box::new(self.resolve(inner, allowed, context)?)),
            AstExpr::Binary(op, a, b, _) => {
                let a = self.resolve(a, allowed, context);
                let b = self.resolve(b, allowed, context);
                let op = match op {
                    AstBinOp::Add => BinOp::Add,
                    AstBinOp::Sub => BinOp::Sub,
                    AstBinOp::Mul => BinOp::Mul,
                    AstBinOp::Div => BinOp::Div,
                    AstBinOp::Pow => BinOp::Pow,
                };
                Expr::bin(op, a?, b?)
            }
            AstExpr::Call(name, args, span) => {
                let resolved: Vec<Option<Expr>> = args
                    .iter()
                    .map(|a| self.resolve(a, allowed, context))
                    .collect();
                let Some(func) = Func::from_name(&name.name) else {
                    let all = ["exp", "ln", "log10", "sqrt", "abs", "min", "max", "pow"];
                    let hint = did_you_mean(&name.name, all)
                        .map(|c| format!("did you mean `{c}`? "))
                        .unwrap_or_default();
                    self.error(
                        Diagnostic::error(
                            Code::UnknownFunction,
                            format!("unknown function `{}`", name.name),
                        )
                        .with_label(name.span, "not a function")
                        .with_help(format!("{hint}the functions are {}", all.join(", "))),
                    );
                    return None;
                };
                if args.len() != func.arity() {
                    self.error(
                        Diagnostic::error(
                            Code::WrongArity,
                            format!(
                                "`{}` takes {} argument(s), not {}",
                                func.name(),
                                func.arity(),
                                args.len()
                            ),
                        )
                        .with_label(*span, "here")
                        .with_help(format!(
                            "write `{}({})`",
                            func.name(),
                            if func.arity() == 1 { "x" } else { "x, y" }
                        )),
                    );
                    return None;
                }
                Expr::Call(func, resolved.into_iter().collect::<Option<Vec<_>>>()?)
            }
            AstExpr::Name(ident) => match ident.name.as_str() {
                "t" => Expr::Time,
                "pi" => Expr::Number(std::f64::consts::PI),
                name => match self.lookup(name) {
                    Some(Decl::Sym(sym)) if allowed(sym) => {
                        self.used.insert(sym);
                        Expr::Name(sym)
                    }
                    Some(Decl::Sym(sym)) => {
                        self.error(
                            Diagnostic::error(
                                Code::WrongKind,
                                format!(
                                    "`{name}` is {} and cannot appear in {context}",
                                    kind_word(sym)
                                ),
                            )
                            .with_label(ident.span, "not allowed here")
                            .with_help(context_help(context)),
                        );
                        return None;
                    }
                    Some(Decl::Step(_)) => {
                        self.error(Diagnostic::error(Code::WrongKind, format!("`{name}` is a step, not a value")).with_label(ident.span, "a step name").with_help("expressions use species, fixed species, params, totals and observables"));
                        return None;
                    }
                    None => {
                        self.unknown_name(ident, "anything");
                        return None;
                    }
                },
            },
        })
    }
}
