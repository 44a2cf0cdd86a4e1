//! Observables: their expressions and the cycles between them.
//!
//! Invariants: an observable uses only names declared before lowering of
//! expressions; no observable depends on itself through others.

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::ir::*;
use crate::syntax::{AstExpr, Ident};

impl Lowerer<'_> {
    /// An `observe` statement (`item`): its name and expression.
    pub(super) fn lower_observable(&mut self, item: &Item, name: &Ident, expr: &AstExpr) {
        let Some(Decl::Sym(Sym::Observable(i))) = self.lookup(&name.name) else {
            return;
        };
        if self.model.observables[i].span != item.span {
            return;
        }
        if let Some(e) = self.resolve(expr, &|_| true, "an observable") {
            let what = format!("observable `{}`", name.name);
            self.report_mismatched_sum(&e, &what, item.span);
            self.model.observables[i].expr = e;
        }
    }

    pub(super) fn check_observable_cycles(&mut self) {
        let n = self.model.observables.len();
        for start in 0..n {
            // Follow observable references; a path back to `start` is a cycle.
            let mut seen = vec![false; n];
            let mut todo = vec![start];
            while let Some(k) = todo.pop() {
                for s in self.model.observables[k].expr.names() {
                    if let Sym::Observable(j) = s {
                        if j == start {
                            let o = &self.model.observables[start];
                            let d = Diagnostic::error(
                                Code::ParamCycle,
                                format!("observable `{}` depends on itself", o.name),
                            )
                            .with_label(o.span, "part of a cycle")
                            .with_help(
                                "an observable may use other observables, but not in a circle",
                            );
                            self.error(d);
                            return;
                        }
                        if !seen[j] {
                            seen[j] = true;
                            todo.push(j);
                        }
                    }
                }
            }
        }
    }
}
