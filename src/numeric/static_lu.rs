//! A sparse LU factorisation for the solver's iteration matrix `I − γJ`,
//! with a fill-reducing ordering chosen once and no pivoting.
//!
//! Why: the iteration matrix of a mass-action network keeps its pattern for
//! a whole run and is refactorised dozens of times; faer's general sparse
//! LU re-runs partial pivoting every time and orders columns by COLAMD,
//! which on these matrices leaves more fill-in than a minimum-degree
//! ordering of the symmetric pattern `A + Aᵀ`. Here the ordering, the
//! elimination tree and the patterns of L and U are computed once; each
//! refactorisation is a left-looking elimination over fixed patterns.
//!
//! Invariants: the pattern of L (unit lower) and of U is that of the
//! Cholesky factor of `P(A + Aᵀ)Pᵀ`, so every update of the elimination
//! lands inside it; a pivot that is not finite or is tiny against its
//! column falls back, for that factorisation, to faer's partially pivoted
//! LU, so the answer never depends on the pivots being safe.

use diffsol::{FaerSparseLU, FaerSparseMat, FaerVec, LaError, LaLinearOp, Matrix, MatrixCommon};
use diffsol_la::LinearSolver as LaLinearSolver;
use std::cell::RefCell;

/// A pivot smaller than this fraction of its column's largest entry (in the
/// matrix as given) sends the factorisation to the pivoting fallback.
const PIVOT_FLOOR: f64 = 1e-10;

/// Above this many entries of L and U per row the factors are dense enough
/// that faer's supernodal LU (dense kernels on blocks) wins, and every
/// factorisation goes to it. Measured on the two generated 1,000-species
/// networks of docs/benchmarks.md: 38 entries per row, this LU 0.16 s
/// against faer's 0.23 s for the whole run; 225 per row, 2.3 s against
/// 0.8 s.
const DENSE_FILL_PER_ROW: usize = 100;

const NONE: usize = usize::MAX;

/// Fixed-pattern LU of `P A Pᵀ` (see the module comment).
#[derive(Default)]
pub struct StaticPivotLu {
    state: Option<Factors>,
    fallback: FaerSparseLU<f64>,
    /// The last factorisation is the fallback's (an unsafe pivot).
    using_fallback: bool,
    /// Every factorisation is the fallback's (dense fill-in).
    delegated: bool,
}

struct Factors {
    /// Storage the solver fills with the matrix at each linearisation.
    a: FaerSparseMat<f64>,
    n: usize,
    /// `perm[new] = old`.
    perm: Vec<usize>,
    /// `inv[old] = new`.
    inv: Vec<usize>,
    /// Strictly lower part of L by column, rows ascending.
    l_ptr: Vec<usize>,
    l_row: Vec<usize>,
    l_val: Vec<f64>,
    /// U by column: rows above the diagonal ascending, then the diagonal.
    u_ptr: Vec<usize>,
    u_row: Vec<usize>,
    u_val: Vec<f64>,
    work: Vec<f64>,
    solve_work: RefCell<Vec<f64>>,
}

impl Factors {
    /// Orders `P(A + Aᵀ)Pᵀ` by approximate minimum degree and computes the
    /// patterns of its Cholesky factor (elimination tree, row subtrees).
    fn new(a: FaerSparseMat<f64>) -> Factors {
        let n = a.nrows();
        let (col_ptr, row_idx) = {
            let m = &a.inner()[0];
            (
                m.symbolic().col_ptr().to_vec(),
                m.symbolic().row_idx().to_vec(),
            )
        };
        // Neighbours in A + Aᵀ, without the diagonal.
        let mut adjacency: Vec<Vec<usize>> = vec![Vec::new(); n];
        for j in 0..n {
            for &i in &row_idx[col_ptr[j]..col_ptr[j + 1]] {
                if i != j {
                    adjacency[i].push(j);
                    adjacency[j].push(i);
                }
            }
        }
        for list in &mut adjacency {
            list.sort_unstable();
            list.dedup();
        }
        let perm = minimum_degree_order(&a);
        let mut inv = vec![0; n];
        for (new, &old) in perm.iter().enumerate() {
            inv[old] = new;
        }
        // Lower neighbours of each permuted row.
        let lower: Vec<Vec<usize>> = (0..n)
            .map(|k| {
                adjacency[perm[k]]
                    .iter()
                    .map(|&old| inv[old])
                    .filter(|&i| i < k)
                    .collect()
            })
            .collect();
        // Elimination tree (path compression through `ancestor`).
        let mut parent = vec![NONE; n];
        let mut ancestor = vec![NONE; n];
        for (k, neighbours) in lower.iter().enumerate() {
            for &i in neighbours {
                let mut j = i;
                while j != NONE && j < k {
                    let next = ancestor[j];
                    ancestor[j] = k;
                    if next == NONE {
                        parent[j] = k;
                    }
                    j = next;
                }
            }
        }
        // Row k of L: the nodes on the tree paths from k's lower neighbours
        // up to k. U's column k has the same rows.
        let mut mark = vec![NONE; n];
        let mut u_ptr = Vec::with_capacity(n + 1);
        let mut u_row = Vec::new();
        let mut l_cols: Vec<Vec<usize>> = vec![Vec::new(); n];
        u_ptr.push(0);
        for k in 0..n {
            mark[k] = k;
            let start = u_row.len();
            for &i in &lower[k] {
                let mut j = i;
                while mark[j] != k {
                    mark[j] = k;
                    u_row.push(j);
                    j = parent[j];
                }
            }
            u_row[start..].sort_unstable();
            for &j in &u_row[start..] {
                l_cols[j].push(k);
            }
            u_row.push(k);
            u_ptr.push(u_row.len());
        }
        assert!(
            u_row.iter().all(|&r| r < n) && l_cols.iter().flatten().all(|&r| r < n),
            "the factors' patterns stay inside the matrix"
        );
        let mut l_ptr = Vec::with_capacity(n + 1);
        let mut l_row = Vec::new();
        l_ptr.push(0);
        for col in &l_cols {
            l_row.extend_from_slice(col);
            l_ptr.push(l_row.len());
        }
        Factors {
            n,
            l_val: vec![0.0; l_row.len()],
            u_val: vec![0.0; u_row.len()],
            perm,
            inv,
            l_ptr,
            l_row,
            u_ptr,
            u_row,
            work: vec![0.0; n],
            solve_work: RefCell::new(vec![0.0; n]),
            a,
        }
    }

    /// Entries of L and U together.
    fn fill(&self) -> usize {
        self.l_row.len() + self.u_row.len()
    }

    /// Left-looking elimination of the matrix now in `self.a`; `false` if a
    /// pivot is unsafe (the factors are then unusable).
    fn factor(&mut self) -> bool {
        let m = &self.a.inner()[0];
        let col_ptr = m.symbolic().col_ptr();
        let row_idx = m.symbolic().row_idx();
        let values = m.val();
        let x = &mut self.work;
        for k in 0..self.n {
            let old = self.perm[k];
            let mut column_scale = 0.0f64;
            for p in col_ptr[old]..col_ptr[old + 1] {
                x[self.inv[row_idx[p]]] = values[p];
                column_scale = column_scale.max(values[p].abs());
            }
            let (u_start, u_end) = (self.u_ptr[k], self.u_ptr[k + 1] - 1);
            for p in u_start..u_end {
                let j = self.u_row[p];
                let xj = x[j];
                if xj != 0.0 {
                    let range = self.l_ptr[j]..self.l_ptr[j + 1];
                    scatter_sub(x, &self.l_row[range.clone()], &self.l_val[range], xj);
                }
                self.u_val[p] = xj;
                x[j] = 0.0;
            }
            let pivot = x[k];
            x[k] = 0.0;
            self.u_val[u_end] = pivot;
            if !pivot.is_finite() || pivot.abs() <= PIVOT_FLOOR * column_scale {
                for q in self.l_ptr[k]..self.l_ptr[k + 1] {
                    x[self.l_row[q]] = 0.0;
                }
                return false;
            }
            for q in self.l_ptr[k]..self.l_ptr[k + 1] {
                let i = self.l_row[q];
                self.l_val[q] = x[i] / pivot;
                x[i] = 0.0;
            }
        }
        true
    }

    /// Solves `A x = b` (or `Aᵀ x = b`) in place.
    fn solve(&self, b: &mut [f64], transpose: bool) {
        let mut y = self.solve_work.borrow_mut();
        let y = y.as_mut_slice();
        for k in 0..self.n {
            y[k] = b[self.perm[k]];
        }
        if !transpose {
            // P A Pᵀ = L U: forward with L, backward with U.
            for j in 0..self.n {
                let yj = y[j];
                if yj != 0.0 {
                    let range = self.l_ptr[j]..self.l_ptr[j + 1];
                    scatter_sub(y, &self.l_row[range.clone()], &self.l_val[range], yj);
                }
            }
            for k in (0..self.n).rev() {
                let diag = self.u_ptr[k + 1] - 1;
                let yk = y[k] / self.u_val[diag];
                y[k] = yk;
                if yk != 0.0 {
                    let range = self.u_ptr[k]..diag;
                    scatter_sub(y, &self.u_row[range.clone()], &self.u_val[range], yk);
                }
            }
        } else {
            // (L U)ᵀ = Uᵀ Lᵀ: forward with Uᵀ, backward with Lᵀ.
            for k in 0..self.n {
                let diag = self.u_ptr[k + 1] - 1;
                let range = self.u_ptr[k]..diag;
                let s = y[k] - gather_dot(y, &self.u_row[range.clone()], &self.u_val[range]);
                y[k] = s / self.u_val[diag];
            }
            for j in (0..self.n).rev() {
                let range = self.l_ptr[j]..self.l_ptr[j + 1];
                y[j] -= gather_dot(y, &self.l_row[range.clone()], &self.l_val[range]);
            }
        }
        for k in 0..self.n {
            b[self.perm[k]] = y[k];
        }
    }
}

/// `y[rows[q]] -= values[q] * factor` for every q. The rows come from the
/// symbolic factorisation, which only produces indices below `y.len()`
/// (checked once in `Factors::new`), so the kernel skips bounds checks.
#[inline]
fn scatter_sub(y: &mut [f64], rows: &[usize], values: &[f64], factor: f64) {
    debug_assert!(rows.iter().all(|&r| r < y.len()));
    for (&r, &v) in rows.iter().zip(values) {
        // SAFETY: every row index is below y.len() (see above).
        unsafe { *y.get_unchecked_mut(r) -= v * factor };
    }
}

/// `Σ values[q] · y[rows[q]]`, under the same guarantee as [`scatter_sub`].
#[inline]
fn gather_dot(y: &[f64], rows: &[usize], values: &[f64]) -> f64 {
    debug_assert!(rows.iter().all(|&r| r < y.len()));
    rows.iter()
        .zip(values)
        // SAFETY: every row index is below y.len() (see scatter_sub).
        .map(|(&r, &v)| v * unsafe { *y.get_unchecked(r) })
        .sum()
}

/// Approximate minimum degree on the pattern of `A + Aᵀ` (faer's AMD);
/// `perm[new] = old`. The natural order if AMD cannot run.
fn minimum_degree_order(a: &FaerSparseMat<f64>) -> Vec<usize> {
    use faer::dyn_stack::{MemBuffer, MemStack};
    use faer::sparse::linalg::amd;
    let symbolic = a.inner()[0].symbolic();
    let n = symbolic.nrows();
    let mut perm = vec![0usize; n];
    let mut perm_inv = vec![0usize; n];
    let ordered = MemBuffer::try_new(amd::order_maybe_unsorted_scratch::<usize>(
        n,
        symbolic.row_idx().len(),
    ))
    .ok()
    .and_then(|mut mem| {
        amd::order_maybe_unsorted(
            &mut perm,
            &mut perm_inv,
            symbolic,
            amd::Control::default(),
            MemStack::new(&mut mem),
        )
        .ok()
    });
    if ordered.is_some() {
        perm
    } else {
        (0..n).collect()
    }
}

impl LaLinearSolver<FaerSparseMat<f64>> for StaticPivotLu {
    fn set_linearisation<
        C: LaLinearOp<T = f64, V = FaerVec<f64>, M = FaerSparseMat<f64>, C = diffsol::FaerContext>,
    >(
        &mut self,
        op: &C,
    ) {
        let state = self
            .state
            .as_mut()
            .expect("set_sparsity before set_linearisation");
        self.using_fallback = self.delegated || {
            op.matrix_inplace(&mut state.a);
            !state.factor()
        };
        if self.using_fallback {
            LaLinearSolver::set_linearisation(&mut self.fallback, op);
        }
    }

    fn solve_in_place(&self, x: &mut FaerVec<f64>) -> Result<(), LaError> {
        if self.using_fallback {
            return self.fallback.solve_in_place(x);
        }
        let Some(state) = self.state.as_ref() else {
            return self.fallback.solve_in_place(x);
        };
        let data: &mut faer::Mat<f64> = diffsol::Vector::inner_mut(x);
        state.solve(data.col_as_slice_mut(0), false);
        Ok(())
    }

    fn solve_transpose_in_place(&self, x: &mut FaerVec<f64>) -> Result<(), LaError> {
        if self.using_fallback {
            return self.fallback.solve_transpose_in_place(x);
        }
        let Some(state) = self.state.as_ref() else {
            return self.fallback.solve_transpose_in_place(x);
        };
        let data: &mut faer::Mat<f64> = diffsol::Vector::inner_mut(x);
        state.solve(data.col_as_slice_mut(0), true);
        Ok(())
    }

    fn set_sparsity<
        C: LaLinearOp<T = f64, V = FaerVec<f64>, M = FaerSparseMat<f64>, C = diffsol::FaerContext>,
    >(
        &mut self,
        op: &C,
    ) {
        let a =
            FaerSparseMat::new_from_sparsity(op.nrows(), op.ncols(), op.sparsity(), *op.context());
        let state = Factors::new(a);
        self.delegated = state.fill() > DENSE_FILL_PER_ROW * state.n.max(1);
        self.state = Some(state);
        self.using_fallback = self.delegated;
        LaLinearSolver::set_sparsity(&mut self.fallback, op);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use diffsol::{FaerContext, Vector};

    /// A fixed sparse matrix handed to the solver as diffsol would.
    struct Fixed(FaerSparseMat<f64>);

    impl LaLinearOp for Fixed {
        type T = f64;
        type V = FaerVec<f64>;
        type M = FaerSparseMat<f64>;
        type C = FaerContext;
        fn nrows(&self) -> usize {
            self.0.nrows()
        }
        fn ncols(&self) -> usize {
            self.0.ncols()
        }
        fn context(&self) -> &FaerContext {
            self.0.context()
        }
        fn matrix_inplace(&self, y: &mut FaerSparseMat<f64>) {
            y.copy_from(&self.0);
        }
        fn sparsity(&self) -> Option<<FaerSparseMat<f64> as Matrix>::Sparsity> {
            self.0.sparsity().map(|s| s.to_owned().expect("a pattern"))
        }
    }

    fn matrix(n: usize, entries: &[(usize, usize, f64)]) -> (Fixed, nalgebra::DMatrix<f64>) {
        let indices = entries.iter().map(|&(i, j, _)| (i, j)).collect();
        let values = entries.iter().map(|&(_, _, v)| v).collect();
        let sparse =
            FaerSparseMat::try_from_triplets(n, n, indices, values, FaerContext::default())
                .expect("a matrix");
        let mut dense = nalgebra::DMatrix::zeros(n, n);
        for &(i, j, v) in entries {
            dense[(i, j)] += v;
        }
        (Fixed(sparse), dense)
    }

    /// Solves with A and Aᵀ and compares with nalgebra's dense LU (a general
    /// reference library), to 1e-12 relative.
    fn check(n: usize, entries: &[(usize, usize, f64)], expect_fallback: bool) {
        let (op, dense) = matrix(n, entries);
        let mut lu = StaticPivotLu::default();
        LaLinearSolver::set_sparsity(&mut lu, &op);
        LaLinearSolver::set_linearisation(&mut lu, &op);
        assert_eq!(lu.using_fallback, expect_fallback);
        let b: Vec<f64> = (0..n).map(|i| 1.0 + (i as f64 * 0.37).sin()).collect();
        for transpose in [false, true] {
            let mut x = FaerVec::from_slice(&b, FaerContext::default());
            if transpose {
                lu.solve_transpose_in_place(&mut x).expect("solves");
            } else {
                lu.solve_in_place(&mut x).expect("solves");
            }
            let reference = if transpose {
                dense.transpose().lu()
            } else {
                dense.clone().lu()
            }
            .solve(&nalgebra::DVector::from_vec(b.clone()))
            .expect("nonsingular");
            let got = x.clone_as_vec();
            let scale = reference.amax();
            for i in 0..n {
                assert!(
                    (got[i] - reference[i]).abs() <= 1e-12 * scale,
                    "x[{i}] = {} vs {} (transpose {transpose})",
                    got[i],
                    reference[i]
                );
            }
        }
    }

    #[test]
    fn solves_an_iteration_matrix_of_a_random_network() {
        // I − γJ of a pseudo-random sparse network: unsymmetric pattern,
        // diagonally dominant by columns like a mass-action Jacobian.
        let n = 60;
        let mut seed: u64 = 0x2545_F491_4F6C_DD1D;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        };
        let mut entries = Vec::new();
        for j in 0..n {
            let mut column = 0.0;
            for _ in 0..3 {
                let i = (next() % n as u64) as usize;
                if i != j {
                    let v = -((next() % 1000) as f64) / 1000.0;
                    column += v.abs();
                    entries.push((i, j, v));
                }
            }
            entries.push((j, j, 1.0 + column));
        }
        check(n, &entries, false);
    }

    #[test]
    fn a_zero_pivot_falls_back_to_partial_pivoting() {
        // [[0, 2], [3, 0]] with its zero diagonal stored: every symmetric
        // ordering meets a zero pivot first, so the pivoting LU must take over.
        let entries = [(0, 0, 0.0), (0, 1, 2.0), (1, 0, 3.0), (1, 1, 0.0)];
        check(2, &entries, true);
    }
}
