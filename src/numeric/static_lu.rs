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
//! Where the factors fill in (a network with no small separators leaves a
//! block of several hundred rows nearly full at the end of the ordering),
//! the trailing block is factorised as a dense matrix: the sparse columns
//! are eliminated first, their Schur complement on the trailing rows is
//! gathered into a dense matrix, and faer's dense LU with partial pivoting
//! (blocked kernels) factorises it. The sparse scatter loops would do the
//! same arithmetic several times slower.
//!
//! Invariants: the pattern of L (unit lower) and of U is that of the
//! Cholesky factor of `P(A + Aᵀ)Pᵀ`, so every update of the elimination
//! lands inside it; a sparse pivot that is not finite or is tiny against its
//! column falls back, for that factorisation, to faer's partially pivoted
//! LU, so the answer never depends on the pivots being safe. The dense
//! trailing block pivots by rows itself; a zero or non-finite pivot there
//! (a singular matrix) also sends the factorisation to the fallback.

use diffsol::{FaerSparseLU, FaerSparseMat, FaerVec, LaError, LaLinearOp, Matrix, MatrixCommon};
use diffsol_la::LinearSolver as LaLinearSolver;
use std::cell::RefCell;

/// A pivot smaller than this fraction of its column's largest entry (in the
/// matrix as given) sends the factorisation to the pivoting fallback.
const PIVOT_FLOOR: f64 = 1e-10;

/// The trailing block of the ordering becomes dense when at least this
/// fraction of its strictly lower triangle is filled in L ... Measured on
/// the random 1,000-species network of docs/benchmarks.md (block of 472
/// rows at 0.9): 0.4 gives a block of 731 rows and 0.51 s per run, 0.8
/// 503 rows and 0.30 s, 0.9 0.27 s, 1.0 (only the completely full block,
/// 444 rows) 0.32 s, and no dense block 1.39 s.
const DENSE_TAIL_DENSITY: f64 = 0.9;

/// ... and it has at least this many rows (below that the sparse loops are
/// as fast as the dense kernels' set-up).
const DENSE_TAIL_MIN_ROWS: usize = 32;

const NONE: usize = usize::MAX;

/// Fixed-pattern LU of `P A Pᵀ` (see the module comment).
#[derive(Default)]
pub struct StaticPivotLu {
    state: Option<Factors>,
    fallback: FaerSparseLU<f64>,
    /// The last factorisation is the fallback's (an unsafe pivot).
    using_fallback: bool,
}

struct Factors {
    /// Storage the solver fills with the matrix at each linearisation.
    a: FaerSparseMat<f64>,
    n: usize,
    /// `perm[new] = old`.
    perm: Vec<usize>,
    /// `inv[old] = new`.
    inv: Vec<usize>,
    /// Rows and columns from here on form the dense trailing block.
    split: usize,
    /// Strictly lower part of L by column, rows ascending, for the columns
    /// before `split` (rows may lie in the trailing block).
    l_ptr: Vec<usize>,
    l_row: Vec<usize>,
    l_val: Vec<f64>,
    /// U by column: rows above the diagonal ascending, then the diagonal;
    /// for the columns from `split` on, only the rows before `split`.
    u_ptr: Vec<usize>,
    u_row: Vec<usize>,
    u_val: Vec<f64>,
    /// The trailing block's LU in place (unit L below the diagonal) and
    /// its row permutation.
    tail: faer::Mat<f64>,
    tail_perm: Vec<usize>,
    tail_perm_inv: Vec<usize>,
    tail_scratch: RefCell<faer::dyn_stack::MemBuffer>,
    work: Vec<f64>,
    solve_work: RefCell<Vec<f64>>,
    /// The columns of a batched right-hand side, contiguous.
    batch_work: RefCell<Vec<f64>>,
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
        let l_counts: Vec<usize> = l_cols.iter().map(Vec::len).collect();
        let split = dense_tail_start(&l_counts);
        // The trailing block keeps no sparse pattern: U's columns there keep
        // only their rows before `split`, and L's columns there go.
        let mut kept_u_ptr = Vec::with_capacity(n + 1);
        let mut kept_u_row = Vec::with_capacity(u_row.len());
        kept_u_ptr.push(0);
        for k in 0..n {
            let column = &u_row[u_ptr[k]..u_ptr[k + 1]];
            if k < split {
                kept_u_row.extend_from_slice(column);
            } else {
                kept_u_row.extend(column.iter().copied().filter(|&j| j < split));
            }
            kept_u_ptr.push(kept_u_row.len());
        }
        let mut l_ptr = Vec::with_capacity(split + 1);
        let mut l_row = Vec::new();
        l_ptr.push(0);
        for col in &l_cols[..split] {
            l_row.extend_from_slice(col);
            l_ptr.push(l_row.len());
        }
        let tail_rows = n - split;
        let tail_scratch = faer::dyn_stack::MemBuffer::new(
            faer::linalg::lu::partial_pivoting::factor::lu_in_place_scratch::<usize, f64>(
                tail_rows,
                tail_rows,
                faer::Par::Seq,
                Default::default(),
            )
            .or(
                faer::linalg::lu::partial_pivoting::solve::solve_in_place_scratch::<usize, f64>(
                    tail_rows,
                    1,
                    faer::Par::Seq,
                ),
            ),
        );
        Factors {
            n,
            split,
            l_val: vec![0.0; l_row.len()],
            u_val: vec![0.0; kept_u_row.len()],
            perm,
            inv,
            l_ptr,
            l_row,
            u_ptr: kept_u_ptr,
            u_row: kept_u_row,
            tail: faer::Mat::zeros(tail_rows, tail_rows),
            tail_perm: vec![0; tail_rows],
            tail_perm_inv: vec![0; tail_rows],
            tail_scratch: RefCell::new(tail_scratch),
            work: vec![0.0; n],
            solve_work: RefCell::new(vec![0.0; n]),
            batch_work: RefCell::new(Vec::new()),
            a,
        }
    }

    /// Entries of L and U together (the trailing block counted whole).
    #[cfg(test)]
    fn fill(&self) -> usize {
        self.l_row.len() + self.u_row.len() + self.tail.nrows() * self.tail.ncols()
    }

    /// Left-looking elimination of the matrix now in `self.a`; `false` if a
    /// pivot is unsafe (the factors are then unusable).
    fn factor(&mut self) -> bool {
        let m = &self.a.inner()[0];
        let col_ptr = m.symbolic().col_ptr();
        let row_idx = m.symbolic().row_idx();
        let values = m.val();
        let split = self.split;
        let x = &mut self.work;
        for k in 0..self.n {
            let old = self.perm[k];
            let mut column_scale = 0.0f64;
            for p in col_ptr[old]..col_ptr[old + 1] {
                x[self.inv[row_idx[p]]] = values[p];
                column_scale = column_scale.max(values[p].abs());
            }
            let (u_start, u_end) = if k < split {
                (self.u_ptr[k], self.u_ptr[k + 1] - 1)
            } else {
                (self.u_ptr[k], self.u_ptr[k + 1])
            };
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
            if k >= split {
                // What is left is column k of the Schur complement.
                let tail_column = self.tail.col_as_slice_mut(k - split);
                tail_column.copy_from_slice(&x[split..]);
                x[split..].fill(0.0);
                continue;
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
        if split == self.n {
            return true;
        }
        faer::linalg::lu::partial_pivoting::factor::lu_in_place(
            self.tail.as_mut(),
            &mut self.tail_perm,
            &mut self.tail_perm_inv,
            faer::Par::Seq,
            faer::dyn_stack::MemStack::new(&mut self.tail_scratch.borrow_mut()),
            Default::default(),
        );
        (0..self.tail.nrows()).all(|i| {
            let pivot = self.tail[(i, i)];
            pivot.is_finite() && pivot != 0.0
        })
    }

    /// Solves `A x = b` (or `Aᵀ x = b`) in place.
    fn solve(&self, b: &mut [f64], transpose: bool) {
        self.solve_columns(b, 1, transpose);
    }

    /// Solves every column of `data` (a batched right-hand side: the
    /// forward sensitivities bring one column per parameter).
    fn solve_batch(&self, data: &mut faer::Mat<f64>, transpose: bool) {
        let (rows, columns) = (data.nrows(), data.ncols());
        if columns == 1 {
            self.solve(data.col_as_slice_mut(0), transpose);
            return;
        }
        if !transpose {
            self.solve_interleaved(data);
            return;
        }
        let mut gathered = self.batch_work.borrow_mut();
        gathered.clear();
        for c in 0..columns {
            gathered.extend_from_slice(data.col_as_slice_mut(c));
        }
        self.solve_columns(&mut gathered, columns, transpose);
        for c in 0..columns {
            data.col_as_slice_mut(c)
                .copy_from_slice(&gathered[c * rows..(c + 1) * rows]);
        }
    }

    /// Solves for `columns` right-hand sides at once (`b` column-major,
    /// `n × columns`): the sparse parts column by column, the dense
    /// trailing block for all columns in one blocked solve (the forward
    /// sensitivities bring one column per parameter).
    fn solve_columns(&self, b: &mut [f64], columns: usize, transpose: bool) {
        let n = self.n;
        let mut work = self.solve_work.borrow_mut();
        if work.len() < n * columns {
            work.resize(n * columns, 0.0);
        }
        let work = &mut work[..n * columns];
        for c in 0..columns {
            let (y, bc) = (&mut work[c * n..(c + 1) * n], &b[c * n..(c + 1) * n]);
            for k in 0..n {
                y[k] = bc[self.perm[k]];
            }
            self.before_tail(y, transpose);
        }
        self.solve_tail(work, columns, transpose);
        for c in 0..columns {
            let (y, bc) = (&mut work[c * n..(c + 1) * n], &mut b[c * n..(c + 1) * n]);
            self.after_tail(y, transpose);
            for k in 0..n {
                bc[self.perm[k]] = y[k];
            }
        }
    }

    /// The non-transposed solve of every column of `data` with the columns
    /// interleaved (row r of column c at `r·columns + c`): each entry of L
    /// and U is read once and updates all columns, and the dense trailing
    /// block is a row-major block of right-hand sides for one blocked solve.
    fn solve_interleaved(&self, data: &mut faer::Mat<f64>) {
        use faer::linalg::lu::partial_pivoting::solve;
        let (n, columns, split) = (self.n, data.ncols(), self.split);
        let mut work = self.batch_work.borrow_mut();
        work.clear();
        work.resize(n * columns, 0.0);
        for c in 0..columns {
            let column = data.col_as_slice_mut(c);
            for r in 0..n {
                work[r * columns + c] = column[self.perm[r]];
            }
        }
        // Forward with L's sparse columns (rows below j).
        for j in 0..split {
            let (head, below) = work.split_at_mut((j + 1) * columns);
            let yj = &head[j * columns..];
            if yj.iter().all(|v| *v == 0.0) {
                continue;
            }
            for q in self.l_ptr[j]..self.l_ptr[j + 1] {
                let (i, v) = (self.l_row[q], self.l_val[q]);
                let yi = &mut below[(i - j - 1) * columns..(i - j) * columns];
                for (a, b) in yi.iter_mut().zip(yj) {
                    *a -= v * b;
                }
            }
        }
        let rows = n - split;
        if rows > 0 {
            let permutation =
                faer::perm::PermRef::new_checked(&self.tail_perm, &self.tail_perm_inv, rows);
            // faer's blocked solve is fastest on column-major right-hand sides.
            let mut tail_columns = self.solve_work.borrow_mut();
            tail_columns.clear();
            tail_columns.resize(rows * columns, 0.0);
            for r in 0..rows {
                for c in 0..columns {
                    tail_columns[c * rows + r] = work[(split + r) * columns + c];
                }
            }
            let rhs = faer::MatMut::from_column_major_slice_mut(&mut tail_columns, rows, columns);
            let mut scratch = self.tail_scratch.borrow_mut();
            let needed = solve::solve_in_place_scratch::<usize, f64>(rows, columns, faer::Par::Seq);
            if scratch.len() < needed.unaligned_bytes_required() {
                *scratch = faer::dyn_stack::MemBuffer::new(needed);
            }
            let stack = faer::dyn_stack::MemStack::new(&mut scratch);
            let lu = self.tail.as_ref();
            solve::solve_in_place_with_conj::<usize, f64>(
                lu,
                lu,
                permutation,
                faer::Conj::No,
                rhs,
                faer::Par::Seq,
                stack,
            );
            for r in 0..rows {
                for c in 0..columns {
                    work[(split + r) * columns + c] = tail_columns[c * rows + r];
                }
            }
        }
        // Backward with U: every entry of column k lies in a row above k.
        for k in (0..n).rev() {
            let (above, rest) = work.split_at_mut(k * columns);
            let yk = &mut rest[..columns];
            let end = if k < split {
                let diag = self.u_ptr[k + 1] - 1;
                let d = self.u_val[diag];
                yk.iter_mut().for_each(|v| *v /= d);
                diag
            } else {
                self.u_ptr[k + 1]
            };
            if yk.iter().all(|v| *v == 0.0) {
                continue;
            }
            for q in self.u_ptr[k]..end {
                let (r, v) = (self.u_row[q], self.u_val[q]);
                let yr = &mut above[r * columns..(r + 1) * columns];
                for (a, b) in yr.iter_mut().zip(yk.iter()) {
                    *a -= v * b;
                }
            }
        }
        for c in 0..columns {
            let column = data.col_as_slice_mut(c);
            for r in 0..n {
                column[self.perm[r]] = work[r * columns + c];
            }
        }
    }

    /// The sparse eliminations before the trailing block: P A Pᵀ = L U, so
    /// forward with L; for the transpose (L U)ᵀ = Uᵀ Lᵀ, forward with Uᵀ.
    fn before_tail(&self, y: &mut [f64], transpose: bool) {
        let split = self.split;
        if !transpose {
            for j in 0..split {
                let yj = y[j];
                if yj != 0.0 {
                    let range = self.l_ptr[j]..self.l_ptr[j + 1];
                    scatter_sub(y, &self.l_row[range.clone()], &self.l_val[range], yj);
                }
            }
        } else {
            for k in 0..split {
                let diag = self.u_ptr[k + 1] - 1;
                let range = self.u_ptr[k]..diag;
                let s = y[k] - gather_dot(y, &self.u_row[range.clone()], &self.u_val[range]);
                y[k] = s / self.u_val[diag];
            }
            for k in split..self.n {
                let range = self.u_ptr[k]..self.u_ptr[k + 1];
                y[k] -= gather_dot(y, &self.u_row[range.clone()], &self.u_val[range]);
            }
        }
    }

    /// The sparse eliminations after the trailing block: backward with U;
    /// for the transpose, backward with Lᵀ.
    fn after_tail(&self, y: &mut [f64], transpose: bool) {
        let split = self.split;
        if !transpose {
            for k in (split..self.n).rev() {
                let yk = y[k];
                if yk != 0.0 {
                    let range = self.u_ptr[k]..self.u_ptr[k + 1];
                    scatter_sub(y, &self.u_row[range.clone()], &self.u_val[range], yk);
                }
            }
            for k in (0..split).rev() {
                let diag = self.u_ptr[k + 1] - 1;
                let yk = y[k] / self.u_val[diag];
                y[k] = yk;
                if yk != 0.0 {
                    let range = self.u_ptr[k]..diag;
                    scatter_sub(y, &self.u_row[range.clone()], &self.u_val[range], yk);
                }
            }
        } else {
            for j in (0..split).rev() {
                let range = self.l_ptr[j]..self.l_ptr[j + 1];
                y[j] -= gather_dot(y, &self.l_row[range.clone()], &self.l_val[range]);
            }
        }
    }

    /// Solves with the dense trailing block's LU (or its transpose), rows
    /// `split..n` of each of the `columns` columns of `work`.
    fn solve_tail(&self, work: &mut [f64], columns: usize, transpose: bool) {
        use faer::linalg::lu::partial_pivoting::solve;
        let (n, split) = (self.n, self.split);
        let rows = n - split;
        if rows == 0 {
            return;
        }
        let permutation =
            faer::perm::PermRef::new_checked(&self.tail_perm, &self.tail_perm_inv, rows);
        let rhs = faer::MatMut::from_column_major_slice_with_stride_mut(
            &mut work[split..],
            rows,
            columns,
            n,
        );
        let mut scratch = self.tail_scratch.borrow_mut();
        let needed = solve::solve_in_place_scratch::<usize, f64>(rows, columns, faer::Par::Seq);
        if scratch.len() < needed.unaligned_bytes_required() {
            *scratch = faer::dyn_stack::MemBuffer::new(needed);
        }
        let stack = faer::dyn_stack::MemStack::new(&mut scratch);
        let lu = self.tail.as_ref();
        let solve_with = if transpose {
            solve::solve_transpose_in_place_with_conj::<usize, f64>
        } else {
            solve::solve_in_place_with_conj::<usize, f64>
        };
        solve_with(
            lu,
            lu,
            permutation,
            faer::Conj::No,
            rhs,
            faer::Par::Seq,
            stack,
        );
    }
}

/// Where the dense trailing block starts: the first position from which
/// the rest of L's strictly lower triangle is at least
/// [`DENSE_TAIL_DENSITY`] full, over at least [`DENSE_TAIL_MIN_ROWS`]
/// rows; `l_counts.len()` (no dense block) if there is none.
fn dense_tail_start(l_counts: &[usize]) -> usize {
    let n = l_counts.len();
    let mut entries = 0usize;
    let mut start = n;
    for s in (0..n).rev() {
        // Every row of L's column s lies after s, inside the block from s.
        entries += l_counts[s];
        let rows = n - s;
        let slots = rows * (rows - 1) / 2;
        if rows >= DENSE_TAIL_MIN_ROWS && entries as f64 >= DENSE_TAIL_DENSITY * slots as f64 {
            start = s;
        }
    }
    start
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
        op.matrix_inplace(&mut state.a);
        self.using_fallback = !state.factor();
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
        // A batched right-hand side (the forward sensitivities, one column
        // per parameter) is solved column by column with the same factors.
        state.solve_batch(diffsol::Vector::inner_mut(x), false);
        Ok(())
    }

    fn solve_transpose_in_place(&self, x: &mut FaerVec<f64>) -> Result<(), LaError> {
        if self.using_fallback {
            return self.fallback.solve_transpose_in_place(x);
        }
        let Some(state) = self.state.as_ref() else {
            return self.fallback.solve_transpose_in_place(x);
        };
        // A batched right-hand side (the forward sensitivities, one column
        // per parameter) is solved column by column with the same factors.
        state.solve_batch(diffsol::Vector::inner_mut(x), true);
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
        self.state = Some(Factors::new(a));
        self.using_fallback = false;
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

    /// I − γJ of a pseudo-random sparse network with `per_column`
    /// off-diagonal entries per column: unsymmetric pattern, diagonally
    /// dominant by columns like a mass-action Jacobian.
    fn random_network_matrix(n: usize, per_column: usize) -> Vec<(usize, usize, f64)> {
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
            for _ in 0..per_column {
                let i = (next() % n as u64) as usize;
                if i != j {
                    let v = -((next() % 1000) as f64) / 1000.0;
                    column += v.abs();
                    entries.push((i, j, v));
                }
            }
            entries.push((j, j, 1.0 + column));
        }
        entries
    }

    fn split_of(n: usize, entries: &[(usize, usize, f64)]) -> (usize, usize) {
        let (op, _) = matrix(n, entries);
        let mut lu = StaticPivotLu::default();
        LaLinearSolver::set_sparsity(&mut lu, &op);
        let state = lu.state.as_ref().expect("a pattern");
        (state.split, state.fill())
    }

    #[test]
    fn solves_an_iteration_matrix_of_a_random_network() {
        let entries = random_network_matrix(60, 3);
        assert_eq!(split_of(60, &entries).0, 60, "sparse throughout");
        check(60, &entries, false);
    }

    #[test]
    fn factors_a_filled_in_tail_as_a_dense_block() {
        // Six partners per column at random: no small separators, so the
        // end of the minimum-degree order fills in.
        let n = 300;
        let entries = random_network_matrix(n, 6);
        let (split, fill) = split_of(n, &entries);
        assert!(
            split < n - DENSE_TAIL_MIN_ROWS,
            "dense block from {split} (fill {fill})"
        );
        assert!(split > 0, "the sparse head is kept");
        check(n, &entries, false);
    }

    #[test]
    fn a_singular_dense_tail_falls_back_to_the_pivoting_lu() {
        // The filled-in matrix above with the values of the last column in
        // the elimination order set to zero (its pattern kept): singular,
        // and it shows only in the dense block, whose pivoting LU meets a
        // zero column. The fallback then reports the singular matrix
        // instead of the dense solve returning infinities.
        let n = 300;
        let mut entries = random_network_matrix(n, 6);
        let (op, _) = matrix(n, &entries);
        let mut lu = StaticPivotLu::default();
        LaLinearSolver::set_sparsity(&mut lu, &op);
        let state = lu.state.as_ref().expect("a pattern");
        assert!(state.split < n);
        let last = state.perm[n - 1];
        for entry in entries.iter_mut().filter(|e| e.1 == last) {
            entry.2 = 0.0;
        }
        let (op, _) = matrix(n, &entries);
        LaLinearSolver::set_linearisation(&mut lu, &op);
        assert!(
            lu.using_fallback,
            "a singular block is not solved by the dense LU"
        );
    }

    #[test]
    fn a_zero_pivot_falls_back_to_partial_pivoting() {
        // [[0, 2], [3, 0]] with its zero diagonal stored: every symmetric
        // ordering meets a zero pivot first, so the pivoting LU must take over.
        let entries = [(0, 0, 0.0), (0, 1, 2.0), (1, 0, 3.0), (1, 1, 0.0)];
        check(2, &entries, true);
    }

    #[test]
    fn a_batched_right_hand_side_is_solved_in_every_column() {
        // Forward sensitivities hand the solver one column per parameter
        // (a batched vector against an unbatched matrix); each column must
        // match nalgebra's dense LU, with and without a dense tail.
        for (n, per_column) in [(60, 3), (300, 6)] {
            let entries = random_network_matrix(n, per_column);
            let (op, dense) = matrix(n, &entries);
            let mut lu = StaticPivotLu::default();
            LaLinearSolver::set_sparsity(&mut lu, &op);
            LaLinearSolver::set_linearisation(&mut lu, &op);
            assert!(!lu.using_fallback);
            let columns = 3;
            let b: Vec<f64> = (0..n * columns)
                .map(|i| 1.0 + (i as f64 * 0.37).sin())
                .collect();
            for transpose in [false, true] {
                let mut x = FaerVec::from_slice(&b, FaerContext::with_nbatch(columns));
                if transpose {
                    lu.solve_transpose_in_place(&mut x).expect("solves");
                } else {
                    lu.solve_in_place(&mut x).expect("solves");
                }
                let got = x.clone_as_vec();
                let factors = if transpose {
                    dense.transpose().lu()
                } else {
                    dense.clone().lu()
                };
                for c in 0..columns {
                    let reference = factors
                        .solve(&nalgebra::DVector::from_column_slice(
                            &b[c * n..(c + 1) * n],
                        ))
                        .expect("nonsingular");
                    let scale = reference.amax();
                    for i in 0..n {
                        assert!(
                            (got[c * n + i] - reference[i]).abs() <= 1e-12 * scale,
                            "n {n}, column {c}, x[{i}] = {} vs {} (transpose {transpose})",
                            got[c * n + i],
                            reference[i]
                        );
                    }
                }
            }
        }
    }
}
