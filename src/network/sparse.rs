//! Exact sparse integer linear algebra for stoichiometric matrices.
//!
//! Why integers: conservation laws must be exact (a law that is "almost"
//! conserved is wrong), so every operation here is integer-preserving
//! (fraction-free) elimination: a row update is `p·r − a·q` followed by
//! division by the row's content, which keeps entries small without ever
//! forming fractions. Why generic: almost every stoichiometric entry is
//! ±1 or ±2, so the work runs first in checked `i64` and is repeated in
//! `BigInt` only if an intermediate value would overflow.
//!
//! Invariants: rows are sorted by column, hold no zero entries, and a row's
//! tag always satisfies `tag · A = row` for the original matrix `A`.

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{Signed, ToPrimitive, Zero};
use std::fmt::Debug;

/// A sparse row: (column, value) sorted by column, no zeros.
pub type Row<T> = Vec<(u32, T)>;

/// The integer operations elimination needs; `None` means overflow.
pub trait Int: Clone + PartialEq + Debug {
    fn from_i64(v: i64) -> Self;
    fn from_big(v: &BigInt) -> Option<Self>;
    fn to_big(&self) -> BigInt;
    fn is_zero(&self) -> bool;
    fn is_negative(&self) -> bool;
    fn neg(&self) -> Option<Self>;
    fn mul(&self, other: &Self) -> Option<Self>;
    fn add(&self, other: &Self) -> Option<Self>;
    /// Non-negative greatest common divisor.
    fn gcd(&self, other: &Self) -> Self;
    fn div_exact(&self, other: &Self) -> Self;
    /// Size used to prefer small pivots (saturating).
    fn magnitude(&self) -> u64;
    fn is_unit(&self) -> bool {
        self.magnitude() == 1
    }
}

impl Int for i64 {
    fn from_i64(v: i64) -> Self {
        v
    }
    fn from_big(v: &BigInt) -> Option<Self> {
        v.to_i64()
    }
    fn to_big(&self) -> BigInt {
        BigInt::from(*self)
    }
    fn is_zero(&self) -> bool {
        *self == 0
    }
    fn is_negative(&self) -> bool {
        *self < 0
    }
    fn neg(&self) -> Option<Self> {
        self.checked_neg()
    }
    fn mul(&self, other: &Self) -> Option<Self> {
        self.checked_mul(*other)
    }
    fn add(&self, other: &Self) -> Option<Self> {
        self.checked_add(*other)
    }
    fn gcd(&self, other: &Self) -> Self {
        // i64::MIN never reaches here: values are bounded by the checked ops.
        Integer::gcd(self, other)
    }
    fn div_exact(&self, other: &Self) -> Self {
        self / other
    }
    fn magnitude(&self) -> u64 {
        self.unsigned_abs()
    }
}

impl Int for BigInt {
    fn from_i64(v: i64) -> Self {
        BigInt::from(v)
    }
    fn from_big(v: &BigInt) -> Option<Self> {
        Some(v.clone())
    }
    fn to_big(&self) -> BigInt {
        self.clone()
    }
    fn is_zero(&self) -> bool {
        Zero::is_zero(self)
    }
    fn is_negative(&self) -> bool {
        Signed::is_negative(self)
    }
    fn neg(&self) -> Option<Self> {
        Some(-self)
    }
    fn mul(&self, other: &Self) -> Option<Self> {
        Some(self * other)
    }
    fn add(&self, other: &Self) -> Option<Self> {
        Some(self + other)
    }
    fn gcd(&self, other: &Self) -> Self {
        Integer::gcd(self, other)
    }
    fn div_exact(&self, other: &Self) -> Self {
        self / other
    }
    fn magnitude(&self) -> u64 {
        self.abs().to_u64().unwrap_or(u64::MAX)
    }
}

/// `ca·a + cb·b`, zeros dropped.
pub fn combine<T: Int>(a: &Row<T>, ca: &T, b: &Row<T>, cb: &T) -> Option<Row<T>> {
    let mut out = Vec::with_capacity(a.len() + b.len());
    let (mut i, mut j) = (0, 0);
    while i < a.len() || j < b.len() {
        let take_a = j >= b.len() || (i < a.len() && a[i].0 < b[j].0);
        let take_b = i >= a.len() || (j < b.len() && b[j].0 < a[i].0);
        if take_a {
            out.push((a[i].0, a[i].1.mul(ca)?));
            i += 1;
        } else if take_b {
            out.push((b[j].0, b[j].1.mul(cb)?));
            j += 1;
        } else {
            let v = a[i].1.mul(ca)?.add(&b[j].1.mul(cb)?)?;
            if !v.is_zero() {
                out.push((a[i].0, v));
            }
            i += 1;
            j += 1;
        }
    }
    Some(out)
}

/// The value at a column, if present.
pub fn get<T>(row: &Row<T>, col: u32) -> Option<&T> {
    row.binary_search_by_key(&col, |(c, _)| *c)
        .ok()
        .map(|k| &row[k].1)
}

/// Divides every entry of the rows by their joint content (gcd).
pub fn divide_content<T: Int>(rows: &mut [&mut Row<T>]) {
    let mut g: Option<T> = None;
    for row in rows.iter() {
        for (_, v) in row.iter() {
            g = Some(match g {
                None => v.gcd(v),
                Some(g) => g.gcd(v),
            });
            if g.as_ref().is_some_and(Int::is_unit) {
                return;
            }
        }
    }
    if let Some(g) = g
        && !g.is_zero()
        && !g.is_unit()
    {
        for row in rows.iter_mut() {
            for (_, v) in row.iter_mut() {
                *v = v.div_exact(&g);
            }
        }
    }
}

/// Makes the first entry positive (a deterministic sign).
pub fn normalize_sign<T: Int>(row: &mut Row<T>) -> Option<()> {
    if row.first().is_some_and(|(_, v)| v.is_negative()) {
        for (_, v) in row.iter_mut() {
            *v = v.neg()?;
        }
    }
    Some(())
}

/// The result of eliminating the rows of a matrix `A` (rows × cols).
#[derive(Debug, Clone)]
pub struct Elimination<T> {
    /// Pivots in the order taken: (row, column). Their rows are linearly
    /// independent and span the row space, so `rank = pivots.len()`.
    pub pivots: Vec<(usize, usize)>,
    /// A basis of the left null space { y : yᵀA = 0 }: integer vectors over
    /// the rows, content 1, first entry positive. Each belongs to one row
    /// that is not a pivot (`null_rows`), and only that vector uses it.
    pub null_vectors: Vec<Row<T>>,
    pub null_rows: Vec<usize>,
}

/// Fraction-free sparse elimination with a minimum-degree pivot choice:
/// take the column with the fewest live entries (a step touching one
/// species costs nothing), and in it the shortest row with the smallest
/// value. Returns `None` on overflow of `T`.
pub fn eliminate<T: Int>(mut rows: Vec<Row<T>>, ncols: usize) -> Option<Elimination<T>> {
    let n = rows.len();
    let mut tags: Vec<Row<T>> = (0..n).map(|i| vec![(i as u32, T::from_i64(1))]).collect();
    let mut active = vec![true; n];
    let mut col_count = vec![0u32; ncols];
    // Rows that may hold each column; stale entries are filtered on use.
    let mut col_rows: Vec<Vec<u32>> = vec![Vec::new(); ncols];
    for (i, r) in rows.iter().enumerate() {
        for (c, _) in r {
            col_count[*c as usize] += 1;
            col_rows[*c as usize].push(i as u32);
        }
    }
    let mut pivots = Vec::new();
    let mut null_rows = Vec::new();
    let mut scan_from = 0usize;
    loop {
        // Columns before `scan_from` are empty for good (counts only fall
        // to zero when no live row holds the column, and fill only enters
        // columns some live row already holds).
        while scan_from < ncols && col_count[scan_from] == 0 {
            scan_from += 1;
        }
        if scan_from >= ncols {
            break;
        }
        let mut best = (scan_from, col_count[scan_from]);
        if best.1 > 1 {
            for (c, &k) in col_count.iter().enumerate().skip(scan_from + 1) {
                if k > 0 && k < best.1 {
                    best = (c, k);
                    if k == 1 {
                        break;
                    }
                }
            }
        }
        let col = best.0;
        let c32 = col as u32;
        let mut holders: Vec<u32> = col_rows[col]
            .iter()
            .copied()
            .filter(|&i| active[i as usize] && get(&rows[i as usize], c32).is_some())
            .collect();
        holders.sort_unstable();
        holders.dedup();
        col_rows[col] = holders.clone();
        let &pivot_row = holders
            .iter()
            .min_by_key(|&&i| {
                let r = &rows[i as usize];
                (
                    r.len(),
                    get(r, c32).map(Int::magnitude).unwrap_or(u64::MAX),
                    i,
                )
            })
            .expect("a column with a positive count has a live row");
        let p = pivot_row as usize;
        active[p] = false;
        for (c, _) in &rows[p] {
            col_count[*c as usize] -= 1;
        }
        pivots.push((p, col));
        let pivot_value = get(&rows[p], c32).cloned().expect("pivot entry present");
        for &i in holders.iter().filter(|&&i| i != pivot_row) {
            let i = i as usize;
            let a = get(&rows[i], c32).cloned().expect("holder has the column");
            let g = pivot_value.gcd(&a);
            let mp = pivot_value.div_exact(&g);
            let ma = a.div_exact(&g).neg()?;
            let mut new_row = combine(&rows[i], &mp, &rows[p], &ma)?;
            let mut new_tag = combine(&tags[i], &mp, &tags[p], &ma)?;
            divide_content(&mut [&mut new_row, &mut new_tag]);
            for (c, _) in &rows[i] {
                col_count[*c as usize] -= 1;
            }
            for (c, _) in &new_row {
                col_count[*c as usize] += 1;
                if get(&rows[i], *c).is_none() {
                    col_rows[*c as usize].push(i as u32);
                }
            }
            rows[i] = new_row;
            tags[i] = new_tag;
            if rows[i].is_empty() {
                active[i] = false;
                null_rows.push(i);
            }
        }
    }
    for (i, live) in active.iter().enumerate() {
        if *live {
            null_rows.push(i);
        }
    }
    null_rows.sort_unstable();
    let mut null_vectors = Vec::with_capacity(null_rows.len());
    for &i in &null_rows {
        let mut v = std::mem::take(&mut tags[i]);
        divide_content(&mut [&mut v]);
        normalize_sign(&mut v)?;
        null_vectors.push(v);
    }
    Some(Elimination {
        pivots,
        null_vectors,
        null_rows,
    })
}

/// Eliminates in `i64`, repeating in `BigInt` if a value would overflow.
pub fn eliminate_exact(rows: &[Row<BigInt>], ncols: usize) -> Elimination<BigInt> {
    let small: Option<Vec<Row<i64>>> = rows
        .iter()
        .map(|r| {
            r.iter()
                .map(|(c, v)| i64::from_big(v).map(|v| (*c, v)))
                .collect()
        })
        .collect();
    if let Some(small) = small
        && let Some(e) = eliminate(small, ncols)
    {
        let big = |r: Vec<(u32, i64)>| r.into_iter().map(|(c, v)| (c, BigInt::from(v))).collect();
        return Elimination {
            pivots: e.pivots,
            null_vectors: e.null_vectors.into_iter().map(big).collect(),
            null_rows: e.null_rows,
        };
    }
    eliminate(rows.to_vec(), ncols).expect("BigInt arithmetic does not overflow")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(v: &[(u32, i64)]) -> Row<i64> {
        v.to_vec()
    }

    fn apply(y: &Row<i64>, rows: &[Row<i64>], ncols: usize) -> Vec<i64> {
        let mut out = vec![0; ncols];
        for (i, c) in y {
            for (j, v) in &rows[*i as usize] {
                out[*j as usize] += c * v;
            }
        }
        out
    }

    #[test]
    fn michaelis_menten_has_rank_two_and_two_laws() {
        // Rows S, P, E, ES; columns bind (E + S -> ES), release (ES -> E + S), cleave (ES -> E + P).
        let rows = vec![
            row(&[(0, -1), (1, 1)]),
            row(&[(2, 1)]),
            row(&[(0, -1), (1, 1), (2, 1)]),
            row(&[(0, 1), (1, -1), (2, -1)]),
        ];
        let e = eliminate(rows.clone(), 3).unwrap();
        assert_eq!(e.pivots.len(), 2);
        assert_eq!(e.null_vectors.len(), 2);
        for y in &e.null_vectors {
            assert_eq!(apply(y, &rows, 3), vec![0, 0, 0]);
        }
    }

    #[test]
    fn overflow_falls_back_to_big_integers() {
        let big = 1i64 << 40;
        let rows: Vec<Row<BigInt>> = vec![
            vec![(0, BigInt::from(big)), (1, BigInt::from(1))],
            vec![(0, BigInt::from(big + 1)), (1, BigInt::from(big))],
            vec![(0, BigInt::from(3)), (1, BigInt::from(big - 7))],
        ];
        let e = eliminate_exact(&rows, 2);
        assert_eq!(e.pivots.len(), 2);
        assert_eq!(e.null_vectors.len(), 1);
        let y = &e.null_vectors[0];
        for col in 0..2u32 {
            let s: BigInt = y
                .iter()
                .map(|(i, c)| c * get(&rows[*i as usize], col).cloned().unwrap_or_default())
                .sum();
            assert!(Zero::is_zero(&s));
        }
    }
}
