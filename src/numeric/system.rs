//! A model compiled for numerical work: the right-hand side, its analytic
//! Jacobian (symbolic derivatives of every flux, simplified, then compiled),
//! and the outputs (every species and every observable).
//!
//! The right-hand side is `dy/dt = N · r(y, t)`: `r` the fluxes (one per
//! step; with the dependent species of a reduced system substituted), `N` the
//! stoichiometry restricted to the state species. The Jacobian is
//! `J = N · ∂r/∂y`, assembled from the non-zero partial derivatives into a
//! fixed sparsity pattern (entries in column-major order), so the same
//! compiled object serves dense and sparse solvers.

use super::program::{Leaf, LowerError, Program, ProgramBuilder, Reg};
use crate::algebra::calculus::{derivative, simplify};
use crate::model::{Expr, Model, Sym, coef_f64};
use std::collections::BTreeMap;

/// Which species the solver integrates, and how the others follow.
#[derive(Debug, Clone, PartialEq)]
pub struct StateLayout {
    /// The model species index of each state slot, in slot order.
    pub state_species: Vec<usize>,
    /// Species not in the state, each with its value as an expression over
    /// state species and constants (e.g. `E = E_t - ES`).
    pub dependent: Vec<(usize, Expr)>,
}

impl StateLayout {
    /// Every species is a state.
    pub fn full(model: &Model) -> StateLayout {
        StateLayout {
            state_species: (0..model.species.len()).collect(),
            dependent: Vec::new(),
        }
    }
}

/// Why a model could not be compiled.
#[derive(Debug, Clone, PartialEq)]
pub struct CompileError(pub String);

impl From<LowerError> for CompileError {
    fn from(e: LowerError) -> Self {
        CompileError(e.0)
    }
}

/// The compiled model. Cheap to evaluate; holds no per-call allocations
/// (callers pass a [`Workspace`]).
#[derive(Debug, Clone)]
pub struct CompiledSystem {
    pub nstates: usize,
    /// Model species of each state slot.
    pub state_species: Vec<usize>,
    nspecies: usize,
    nobservables: usize,
    rhs_program: Program,
    /// (state row, flux register, coefficient): `out[row] += coef * reg`.
    rhs_terms: Vec<(u32, Reg, f64)>,
    jac_program: Program,
    /// Structural non-zeros of J, sorted by (column, row).
    jac_rows: Vec<u32>,
    jac_cols: Vec<u32>,
    /// (entry, partial-derivative register, coefficient).
    jac_terms: Vec<(u32, Reg, f64)>,
    output_program: Program,
    /// Registers of every species (model order), then every observable.
    output_regs: Vec<Reg>,
}

/// Per-thread scratch registers for a [`CompiledSystem`], with the constants
/// the preludes were run for.
#[derive(Debug, Clone)]
pub struct Workspace {
    rhs_regs: Vec<f64>,
    jac_regs: Vec<f64>,
    out_regs: Vec<f64>,
}

/// The constants of a model in slot order: params, fixed species, totals.
pub fn constants_of(model: &Model) -> Vec<f64> {
    let mut c: Vec<f64> = model.params.iter().map(|p| p.value).collect();
    c.extend(model.fixed.iter().map(|f| f.value));
    c.extend(model.totals.iter().map(|t| t.value));
    c
}

pub(crate) fn constant_slot(model: &Model, sym: Sym) -> Option<u32> {
    let (np, nf) = (model.params.len(), model.fixed.len());
    match sym {
        Sym::Param(i) => Some(i as u32),
        Sym::Fixed(i) => Some((np + i) as u32),
        Sym::Total(i) => Some((np + nf + i) as u32),
        _ => None,
    }
}

/// Replaces observables by their expressions and dependent species by their
/// formulas, so the result mentions only state species and constants.
pub(super) fn expand(
    model: &Model,
    dependent: &BTreeMap<usize, Expr>,
    e: &Expr,
    depth: usize,
) -> Result<Expr, CompileError> {
    if depth > 64 {
        return Err(CompileError(
            "observables or dependent species refer to each other in a cycle".into(),
        ));
    }
    let failure = std::cell::RefCell::new(None);
    let recurse = |inner: &Expr| match expand(model, dependent, inner, depth + 1) {
        Ok(x) => Some(x),
        Err(err) => {
            *failure.borrow_mut() = Some(err);
            None
        }
    };
    let out = e.substitute(&|s| match s {
        Sym::Observable(i) => model.observables.get(i).and_then(|o| recurse(&o.expr)),
        Sym::Species(i) => dependent.get(&i).and_then(&recurse),
        _ => None,
    });
    match failure.into_inner() {
        Some(err) => Err(err),
        None => Ok(out),
    }
}

/// The state slot of each model species (None: dependent or not integrated).
pub(super) fn slots_of(
    model: &Model,
    layout: &StateLayout,
) -> Result<Vec<Option<u32>>, CompileError> {
    let mut slot_of = vec![None; model.species.len()];
    for (slot, &sp) in layout.state_species.iter().enumerate() {
        if sp >= model.species.len() {
            return Err(CompileError(format!(
                "state slot {slot} names species {sp}, which does not exist"
            )));
        }
        slot_of[sp] = Some(slot as u32);
    }
    Ok(slot_of)
}

/// What a name becomes in a compiled program: a state slot, a constant
/// slot, or (for anything not integrated) a number inlined.
pub(super) fn leaf_of(model: &Model, slot_of: &[Option<u32>], s: Sym) -> Leaf {
    match s {
        Sym::Species(i) => match slot_of.get(i).copied().flatten() {
            Some(slot) => Leaf::State(slot),
            // Expansion has replaced dependents; anything left is not integrated.
            None => Leaf::Inline(Expr::Number(
                model.species.get(i).map(|s| s.initial).unwrap_or(f64::NAN),
            )),
        },
        other => match constant_slot(model, other) {
            Some(k) => Leaf::Constant(k),
            None => Leaf::Inline(Expr::Number(f64::NAN)),
        },
    }
}

impl CompiledSystem {
    /// Compiles the whole model (every species is a state).
    pub fn full(model: &Model) -> Result<CompiledSystem, CompileError> {
        Self::compile(model, &StateLayout::full(model))
    }

    /// Compiles a model with the given state layout.
    pub fn compile(model: &Model, layout: &StateLayout) -> Result<CompiledSystem, CompileError> {
        let nstates = layout.state_species.len();
        let slot_of = slots_of(model, layout)?;
        let dependent: BTreeMap<usize, Expr> = layout.dependent.iter().cloned().collect();
        let resolve = |s: Sym| leaf_of(model, &slot_of, s);

        // Fluxes with dependents and observables expanded.
        let mut fluxes = Vec::with_capacity(model.steps.len());
        for j in 0..model.steps.len() {
            fluxes.push(expand(model, &dependent, &model.step_rate(j), 0)?);
        }

        // Right-hand side.
        let mut rb = ProgramBuilder::new(&resolve);
        let mut rhs_terms = Vec::new();
        for (j, flux) in fluxes.iter().enumerate() {
            let changes: Vec<(u32, f64)> = model
                .net_change(j)
                .into_iter()
                .filter_map(|(sp, c)| slot_of[sp].map(|slot| (slot, coef_f64(c))))
                .collect();
            if changes.is_empty() {
                continue;
            }
            let reg = rb.lower(flux)?;
            for (slot, c) in changes {
                rhs_terms.push((slot, reg, c));
            }
        }
        rhs_terms.sort_by_key(|&(row, _, _)| row);
        let rhs_program = rb.finish();

        // Jacobian: J[row][col] = sum_j N[row][j] * d r_j / d y_col.
        let mut jb = ProgramBuilder::new(&resolve);
        let mut entries: BTreeMap<(u32, u32), Vec<(Reg, f64)>> = BTreeMap::new();
        for (j, flux) in fluxes.iter().enumerate() {
            let changes: Vec<(u32, f64)> = model
                .net_change(j)
                .into_iter()
                .filter_map(|(sp, c)| slot_of[sp].map(|slot| (slot, coef_f64(c))))
                .collect();
            if changes.is_empty() {
                continue;
            }
            for sym in flux.names() {
                let Sym::Species(sp) = sym else { continue };
                let Some(col) = slot_of[sp] else { continue };
                let d = simplify(&derivative(flux, sym));
                if matches!(d, Expr::Number(v) if v == 0.0) {
                    continue;
                }
                let reg = jb.lower(&d)?;
                for &(row, c) in &changes {
                    entries.entry((col, row)).or_default().push((reg, c));
                }
            }
        }
        let jac_program = jb.finish();
        let mut jac_rows = Vec::with_capacity(entries.len());
        let mut jac_cols = Vec::with_capacity(entries.len());
        let mut jac_terms = Vec::new();
        for (e, ((col, row), terms)) in entries.into_iter().enumerate() {
            jac_rows.push(row);
            jac_cols.push(col);
            for (reg, c) in terms {
                jac_terms.push((e as u32, reg, c));
            }
        }

        // Outputs: every species, then every observable.
        let mut ob = ProgramBuilder::new(&resolve);
        let mut output_regs = Vec::with_capacity(model.species.len() + model.observables.len());
        for i in 0..model.species.len() {
            let e = expand(model, &dependent, &Expr::Name(Sym::Species(i)), 0)?;
            output_regs.push(ob.lower(&e)?);
        }
        for o in &model.observables {
            let e = expand(model, &dependent, &o.expr, 0)?;
            output_regs.push(ob.lower(&e)?);
        }
        let output_program = ob.finish();

        Ok(CompiledSystem {
            nstates,
            state_species: layout.state_species.clone(),
            nspecies: model.species.len(),
            nobservables: model.observables.len(),
            rhs_program,
            rhs_terms,
            jac_program,
            jac_rows,
            jac_cols,
            jac_terms,
            output_program,
            output_regs,
        })
    }

    /// A workspace with the preludes run for `constants` (see [`constants_of`]).
    pub fn workspace(&self, constants: &[f64]) -> Workspace {
        let mut w = Workspace {
            rhs_regs: vec![0.0; self.rhs_program.register_count()],
            jac_regs: vec![0.0; self.jac_program.register_count()],
            out_regs: vec![0.0; self.output_program.register_count()],
        };
        self.set_constants(&mut w, constants);
        w
    }

    /// Re-runs the preludes after the constants changed (scans, fits).
    pub fn set_constants(&self, w: &mut Workspace, constants: &[f64]) {
        self.rhs_program.run_prelude(&mut w.rhs_regs, constants);
        self.jac_program.run_prelude(&mut w.jac_regs, constants);
        self.output_program.run_prelude(&mut w.out_regs, constants);
    }

    /// dy/dt at state `y` and time `t`.
    #[inline]
    pub fn rhs(&self, w: &mut Workspace, y: &[f64], t: f64, out: &mut [f64]) {
        self.rhs_program.run_body(&mut w.rhs_regs, y, t);
        out.iter_mut().for_each(|o| *o = 0.0);
        let regs = &w.rhs_regs;
        for &(row, reg, c) in &self.rhs_terms {
            out[row as usize] += c * regs[reg as usize];
        }
    }

    /// Number of structural non-zeros of the Jacobian.
    pub fn jacobian_nnz(&self) -> usize {
        self.jac_rows.len()
    }

    /// (row, column) of each structural non-zero, sorted by column then row.
    pub fn jacobian_pattern(&self) -> impl Iterator<Item = (usize, usize)> + '_ {
        self.jac_rows
            .iter()
            .zip(&self.jac_cols)
            .map(|(&r, &c)| (r as usize, c as usize))
    }

    /// The Jacobian's non-zero values (in pattern order) at `y`, `t`.
    #[inline]
    pub fn jacobian_values(&self, w: &mut Workspace, y: &[f64], t: f64, values: &mut [f64]) {
        self.jac_program.run_body(&mut w.jac_regs, y, t);
        values.iter_mut().for_each(|v| *v = 0.0);
        let regs = &w.jac_regs;
        for &(e, reg, c) in &self.jac_terms {
            values[e as usize] += c * regs[reg as usize];
        }
    }

    /// `out = J · v` from values computed by [`Self::jacobian_values`].
    #[inline]
    pub fn jacobian_mul(&self, values: &[f64], v: &[f64], out: &mut [f64]) {
        out.iter_mut().for_each(|o| *o = 0.0);
        for ((&r, &c), &x) in self.jac_rows.iter().zip(&self.jac_cols).zip(values) {
            out[r as usize] += x * v[c as usize];
        }
    }

    /// The Jacobian as a dense row-major matrix (`n × n`).
    pub fn dense_jacobian(&self, w: &mut Workspace, y: &[f64], t: f64) -> Vec<Vec<f64>> {
        let mut values = vec![0.0; self.jacobian_nnz()];
        self.jacobian_values(w, y, t, &mut values);
        let mut m = vec![vec![0.0; self.nstates]; self.nstates];
        for ((r, c), v) in self.jacobian_pattern().zip(values) {
            m[r][c] += v;
        }
        m
    }

    /// Every species (model order) then every observable, at `y`, `t`.
    pub fn outputs(&self, w: &mut Workspace, y: &[f64], t: f64, out: &mut Vec<f64>) {
        self.output_program.run_body(&mut w.out_regs, y, t);
        out.clear();
        out.extend(self.output_regs.iter().map(|&r| w.out_regs[r as usize]));
    }

    pub fn species_count(&self) -> usize {
        self.nspecies
    }
    pub fn observable_count(&self) -> usize {
        self.nobservables
    }

    /// The state vector (slot order) taken from full species values.
    pub fn state_from_species(&self, species: &[f64]) -> Vec<f64> {
        self.state_species.iter().map(|&i| species[i]).collect()
    }
}
