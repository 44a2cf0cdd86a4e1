//! Params: resolution in dependency order, cycles and values.
//!
//! Invariants: `param_order` lists each param after every param its
//! expression uses; each param's value is evaluated once, finite.

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::expr::Expr;
use crate::model::ir::*;
use crate::syntax::ParamValue;

impl Lowerer<'_> {
    pub(super) fn resolve_params(&mut self) {
        let n = self.model.params.len();
        let mut exprs: Vec<Option<Expr>> = vec![None; n];
        let sources = std::mem::take(&mut self.param_sources);
        for (i, (value, units)) in sources.iter().enumerate() {
            match value {
                ParamValue::Quantity(q) => {
                    self.check_quantity_ambiguity(q);
                    if let Some((v, dim)) = self.quantity(q, *units) {
                        // A unitless number is taken in the default units; its
                        // dimension stays unknown.
                        self.model.params[i].definition = ParamDef::Value(v);
                        self.model.params[i].value = v;
                        self.model.params[i].dim = dim;
                    }
                }
                ParamValue::AtTemperature {
                    value,
                    reference,
                    law,
                } => self.temperature_param(i, value, reference, law, *units),
                ParamValue::Expr(e) => {
                    if let Some(word) = self.word_in_place_of_a_number(e) {
                        self.report_word_for_a_number(word);
                        continue;
                    }
                    exprs[i] = self.resolve(e, &|s| matches!(s, Sym::Param(_)), "a param's value");
                    // A param is a constant: the time has no place in it
                    // (a run would freeze it at t = 0, emitted code would
                    // let it vary).
                    if exprs[i].as_ref().is_some_and(Expr::mentions_time) {
                        exprs[i] = None;
                        let span = self.model.params[i].span;
                        let name = self.model.params[i].name.clone();
                        self.error(
                            Diagnostic::error(
                                Code::WrongKind,
                                format!("param `{name}` uses the time `t`; a param is a constant"),
                            )
                            .with_label(span, "uses t")
                            .with_help("write a time-dependent quantity as an `observe` statement, or put the expression in the step's `law`"),
                        );
                    }
                }
            }
        }
        self.param_sources = sources;
        // Topological order (depth-first), reporting cycles once.
        let deps: Vec<Vec<usize>> = exprs
            .iter()
            .map(|e| {
                e.as_ref()
                    .map(|e| {
                        e.names()
                            .into_iter()
                            .filter_map(|s| if let Sym::Param(j) = s { Some(j) } else { None })
                            .collect()
                    })
                    .unwrap_or_default()
            })
            .collect();
        let mut state = vec![0u8; n]; // 0 new, 1 on stack, 2 done
        let mut order = Vec::with_capacity(n);
        let mut reported = false;
        for start in 0..n {
            if state[start] != 0 {
                continue;
            }
            let mut stack: Vec<(usize, usize)> = vec![(start, 0)];
            state[start] = 1;
            while let Some(&mut (node, ref mut next)) = stack.last_mut() {
                if *next < deps[node].len() {
                    let d = deps[node][*next];
                    *next += 1;
                    match state[d] {
                        0 => {
                            state[d] = 1;
                            stack.push((d, 0));
                        }
                        1 if !reported => {
                            reported = true;
                            let from = stack.iter().position(|(x, _)| *x == d).unwrap_or(0);
                            let cycle: Vec<usize> = stack[from..].iter().map(|(x, _)| *x).collect();
                            let names: Vec<&str> = cycle
                                .iter()
                                .chain([&d])
                                .map(|&k| self.model.params[k].name.as_str())
                                .collect();
                            let mut diag = Diagnostic::error(
                                Code::ParamCycle,
                                format!("params are defined in a cycle: {}", names.join(" → ")),
                            );
                            for &k in &cycle {
                                diag = diag.with_label(
                                    self.model.params[k].span,
                                    format!("`{}` depends on the next", self.model.params[k].name),
                                );
                            }
                            self.error(
                                diag.with_help(
                                    "give one of them a number instead of an expression",
                                ),
                            );
                        }
                        _ => {}
                    }
                } else {
                    state[node] = 2;
                    order.push(node);
                    stack.pop();
                }
            }
        }
        self.model.param_order = order;
        if reported {
            return;
        }
        for &i in &self.model.param_order.clone() {
            if let Some(e) = exprs[i].take() {
                let v = e.eval(&|s| self.model.initial_value(s), 0.0);
                let what = format!("param `{}`", self.model.params[i].name);
                self.report_mismatched_sum(&e, &what, self.model.params[i].span);
                let dim = self.infer_dim(&e);
                if !v.is_finite() {
                    self.error(
                        Diagnostic::error(
                            Code::BadParamValue,
                            format!("param `{}` evaluates to {v}", self.model.params[i].name),
                        )
                        .with_label(self.model.params[i].span, "not a finite number")
                        .with_help("check for division by zero or overflow"),
                    );
                }
                let p = &mut self.model.params[i];
                p.value = v;
                p.dim = dim;
                p.definition = ParamDef::Expr(e);
            }
        }
    }
}
