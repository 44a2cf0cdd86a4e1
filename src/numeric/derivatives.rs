//! Partial derivatives with respect to constants, compiled like the
//! Jacobian: ∂f/∂c of the right-hand side, and ∂out/∂x, ∂out/∂c of the
//! outputs (every species, then every observable).
//!
//! Why: forward sensitivities solve S' = J·S + (∂f/∂c)·(dc/dp), and report
//! ∂out/∂p = (∂out/∂x)·S + (∂out/∂c)·(dc/dp); the constants `c` are params,
//! fixed species and totals, so a sensitivity to a param, to a fixed species
//! diluted by additions, or through a total that events recompute, all use
//! the same compiled partials.
//!
//! Invariants: every entry is the exact symbolic derivative (derived params
//! expanded first, so a base param's influence through them is kept);
//! evaluation never allocates.

use super::program::{Program, ProgramBuilder, Reg};
use super::system::{CompileError, StateLayout, expand, leaf_of, slots_of};
use crate::algebra::calculus::{derivative, simplify};
use crate::model::{Expr, Model, ParamDef, Sym, coef_f64};
use std::collections::BTreeMap;

/// The compiled partials for a chosen list of constants (the columns).
#[derive(Debug, Clone)]
pub struct CompiledDerivatives {
    pub columns: Vec<Sym>,
    pub nstates: usize,
    pub noutputs: usize,
    rhs_program: Program,
    /// (state row, column, register, coefficient): ∂f_row/∂c_col += coef·reg.
    rhs_terms: Vec<(u32, u32, Reg, f64)>,
    out_program: Program,
    /// (output, state slot, register): ∂out/∂x_slot.
    out_state: Vec<(u32, u32, Reg)>,
    /// (output, column, register): ∂out/∂c_col.
    out_constant: Vec<(u32, u32, Reg)>,
}

/// Scratch registers of a [`CompiledDerivatives`].
#[derive(Debug, Clone)]
pub struct DerivativeWorkspace {
    rhs_regs: Vec<f64>,
    out_regs: Vec<f64>,
}

/// Derived params written out (they are constants of their own slot in the
/// compiled system, but their value moves with the params they use).
pub fn without_derived_params(model: &Model, e: &Expr, depth: usize) -> Expr {
    if depth > 64 {
        return e.clone();
    }
    e.substitute(&|s| match s {
        Sym::Param(i) => match &model.params[i].definition {
            ParamDef::Expr(d) => Some(without_derived_params(model, d, depth + 1)),
            ParamDef::Value(_) => None,
        },
        _ => None,
    })
}

fn nonzero(e: Expr) -> Option<Expr> {
    let d = simplify(&e);
    match d {
        Expr::Number(0.0) => None,
        other => Some(other),
    }
}

impl CompiledDerivatives {
    pub fn compile(
        model: &Model,
        layout: &StateLayout,
        columns: &[Sym],
    ) -> Result<CompiledDerivatives, CompileError> {
        let slot_of = slots_of(model, layout)?;
        let dependent: BTreeMap<usize, Expr> = layout.dependent.iter().cloned().collect();
        let resolve = |s: Sym| leaf_of(model, &slot_of, s);
        let full = |e: &Expr| -> Result<Expr, CompileError> {
            Ok(without_derived_params(
                model,
                &expand(model, &dependent, e, 0)?,
                0,
            ))
        };

        let mut rb = ProgramBuilder::new(&resolve);
        let mut rhs_terms = Vec::new();
        for j in 0..model.steps.len() {
            let changes: Vec<(u32, f64)> = model
                .net_change(j)
                .into_iter()
                .filter_map(|(sp, c)| slot_of[sp].map(|slot| (slot, coef_f64(c))))
                .collect();
            if changes.is_empty() {
                continue;
            }
            let flux = full(&model.step_rate(j))?;
            for (col, &sym) in columns.iter().enumerate() {
                let Some(d) = nonzero(derivative(&flux, sym)) else {
                    continue;
                };
                let reg = rb.lower(&d)?;
                for &(row, c) in &changes {
                    rhs_terms.push((row, col as u32, reg, c));
                }
            }
        }

        let mut ob = ProgramBuilder::new(&resolve);
        let mut out_state = Vec::new();
        let mut out_constant = Vec::new();
        let outputs: Vec<Expr> = (0..model.species.len())
            .map(|i| Expr::Name(Sym::Species(i)))
            .chain(model.observables.iter().map(|o| o.expr.clone()))
            .collect();
        for (o, e) in outputs.iter().enumerate() {
            let e = full(e)?;
            for sym in e.names() {
                let Sym::Species(sp) = sym else { continue };
                let Some(slot) = slot_of[sp] else { continue };
                if let Some(d) = nonzero(derivative(&e, sym)) {
                    out_state.push((o as u32, slot, ob.lower(&d)?));
                }
            }
            for (col, &sym) in columns.iter().enumerate() {
                if let Some(d) = nonzero(derivative(&e, sym)) {
                    out_constant.push((o as u32, col as u32, ob.lower(&d)?));
                }
            }
        }
        out_state.sort_by_key(|&(o, s, _)| (o, s));
        out_state.dedup_by_key(|&mut (o, s, _)| (o, s));
        Ok(CompiledDerivatives {
            columns: columns.to_vec(),
            nstates: layout.state_species.len(),
            noutputs: outputs.len(),
            rhs_program: rb.finish(),
            rhs_terms,
            out_program: ob.finish(),
            out_state,
            out_constant,
        })
    }

    pub fn workspace(&self, constants: &[f64]) -> DerivativeWorkspace {
        let mut w = DerivativeWorkspace {
            rhs_regs: vec![0.0; self.rhs_program.register_count()],
            out_regs: vec![0.0; self.out_program.register_count()],
        };
        self.set_constants(&mut w, constants);
        w
    }

    pub fn set_constants(&self, w: &mut DerivativeWorkspace, constants: &[f64]) {
        self.rhs_program.run_prelude(&mut w.rhs_regs, constants);
        self.out_program.run_prelude(&mut w.out_regs, constants);
    }

    /// `out = (∂f/∂c)·w` for a weight per column (`out` has one entry per
    /// state slot).
    pub fn rhs_mul(
        &self,
        ws: &mut DerivativeWorkspace,
        y: &[f64],
        t: f64,
        weights: &[f64],
        out: &mut [f64],
    ) {
        self.rhs_program.run_body(&mut ws.rhs_regs, y, t);
        out.iter_mut().for_each(|o| *o = 0.0);
        for &(row, col, reg, c) in &self.rhs_terms {
            out[row as usize] += c * ws.rhs_regs[reg as usize] * weights[col as usize];
        }
    }

    /// The outputs' partials at `y`, `t`: calls `state(output, slot, value)`
    /// for each non-zero ∂out/∂x and `constant(output, column, value)` for
    /// each non-zero ∂out/∂c.
    pub fn output_partials(
        &self,
        ws: &mut DerivativeWorkspace,
        y: &[f64],
        t: f64,
        state: &mut dyn FnMut(usize, usize, f64),
        constant: &mut dyn FnMut(usize, usize, f64),
    ) {
        self.out_program.run_body(&mut ws.out_regs, y, t);
        for &(o, s, reg) in &self.out_state {
            state(o as usize, s as usize, ws.out_regs[reg as usize]);
        }
        for &(o, c, reg) in &self.out_constant {
            constant(o as usize, c as usize, ws.out_regs[reg as usize]);
        }
    }
}
