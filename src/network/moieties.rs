//! Non-negative conservation laws (conserved moieties): the extreme rays of
//! the cone { y ≥ 0 : yᵀN = 0 }, by the double-description method
//! (Fukuda & Prodon 1996; for moieties, Schuster & Höfer 1991, J. Chem. Soc.
//! Faraday Trans. 87:2561).
//!
//! It works inside the left null space, not over all species: the block's
//! integer basis is brought to reduced row echelon form, whose pivot
//! species make y ≥ 0 on the pivots the same as non-negative coordinates,
//! so the basis rows are the extreme rays of that first cone. Then each
//! other species' constraint y_i ≥ 0 is imposed in turn: rows with y_i ≥ 0
//! stay, and every positive combination of a row with y_i > 0 and one with
//! y_i < 0 that passes the combinatorial adjacency test (no other row is
//! zero wherever both are, on the constraints imposed so far) is added.
//! Starting from k basis rows instead of one row per species keeps the work
//! small when a block has many species but few laws.
//!
//! Why per block: the left null space splits into subspaces on disjoint sets
//! of species, and the cone is their product, so its extreme rays are the
//! union of the blocks' rays. A block whose intermediate rows exceed a
//! budget is given up (the caller falls back to an integer basis and says
//! so), so the method never runs away.

use super::sparse::{Int, Row, divide_content};
use num_bigint::BigInt;

/// Outcome for one block of species.
pub enum BlockRays {
    /// Every extreme ray (integer vectors over species, content 1).
    Rays(Vec<Row<BigInt>>),
    /// The work budget ran out (or a value left 128-bit integers).
    TooLarge,
}

/// Largest number of intermediate rows kept for one block.
const MAX_ROWS: usize = 4000;
/// Largest number of support-inclusion checks for one block.
const MAX_CHECKS: u64 = 200_000_000;

fn gcd_all(v: &[i128]) -> i128 {
    v.iter()
        .fold(0i128, |g, x| num_integer::Integer::gcd(&g, x))
}

fn support(y: &[i128], words: usize) -> Vec<u64> {
    let mut s = vec![0u64; words];
    for (p, v) in y.iter().enumerate() {
        if *v != 0 {
            s[p / 64] |= 1 << (p % 64);
        }
    }
    s
}

/// `ca·x + cb·y`, or `None` on overflow.
fn combine(x: &[i128], ca: i128, y: &[i128], cb: i128) -> Option<Vec<i128>> {
    x.iter()
        .zip(y)
        .map(|(p, q)| p.checked_mul(ca)?.checked_add(q.checked_mul(cb)?))
        .collect()
}

/// Reduced row echelon form of integer rows (fraction-free, content 1,
/// pivots positive); returns the rows and their pivot positions.
fn rref(mut rows: Vec<Vec<i128>>) -> Option<(Vec<Vec<i128>>, Vec<usize>)> {
    let m = rows.first().map_or(0, Vec::len);
    let mut pivots = Vec::new();
    let mut r = 0;
    for col in 0..m {
        let Some(p) = (r..rows.len())
            .filter(|&i| rows[i][col] != 0)
            .min_by_key(|&i| rows[i][col].unsigned_abs())
        else {
            continue;
        };
        rows.swap(r, p);
        if rows[r][col] < 0 {
            rows[r].iter_mut().for_each(|v| *v = -*v);
        }
        for i in 0..rows.len() {
            if i != r && rows[i][col] != 0 {
                let (pv, a) = (rows[r][col], rows[i][col]);
                let g = num_integer::Integer::gcd(&pv, &a);
                let mut new = combine(&rows[i], pv / g, &rows[r], -(a / g))?;
                let c = gcd_all(&new);
                if c > 1 {
                    new.iter_mut().for_each(|v| *v /= c);
                }
                rows[i] = new;
            }
        }
        pivots.push(col);
        r += 1;
        if r == rows.len() {
            break;
        }
    }
    rows.truncate(r);
    Some((rows, pivots))
}

/// The extreme rays of the cone { y ≥ 0 : y in the span of `basis` }, where
/// `basis` holds linearly independent integer vectors supported on
/// `species` (sorted), and that span is the block's part of the left null space.
pub fn extreme_rays(species: &[usize], basis: &[&Row<BigInt>]) -> BlockRays {
    let m = species.len();
    let words = m.div_ceil(64).max(1);
    let mut dense = Vec::with_capacity(basis.len());
    for v in basis {
        let mut y = vec![0i128; m];
        for (s, c) in v.iter() {
            let (Ok(p), Some(c)) = (species.binary_search(&(*s as usize)), i64::from_big(c)) else {
                return BlockRays::TooLarge;
            };
            y[p] = c as i128;
        }
        dense.push(y);
    }
    let Some((rows, pivots)) = rref(dense) else {
        return BlockRays::TooLarge;
    };
    let mut processed = vec![0u64; words];
    for p in &pivots {
        processed[p / 64] |= 1 << (p % 64);
    }
    let mut rays: Vec<(Vec<i128>, Vec<u64>)> = rows
        .into_iter()
        .map(|y| {
            let s = support(&y, words);
            (y, s)
        })
        .collect();
    let mut remaining: Vec<usize> = (0..m).filter(|p| !pivots.contains(p)).collect();
    let mut checks: u64 = 0;
    while !remaining.is_empty() {
        // Impose next the constraint that creates the fewest pairs.
        let (k, _) = remaining
            .iter()
            .enumerate()
            .map(|(k, &i)| {
                let pos = rays.iter().filter(|r| r.0[i] > 0).count();
                let neg = rays.iter().filter(|r| r.0[i] < 0).count();
                (k, pos * neg)
            })
            .min_by_key(|(_, cost)| *cost)
            .expect("remaining is not empty");
        let i = remaining.swap_remove(k);
        let pos: Vec<usize> = (0..rays.len()).filter(|&r| rays[r].0[i] > 0).collect();
        let neg: Vec<usize> = (0..rays.len()).filter(|&r| rays[r].0[i] < 0).collect();
        let mut added: Vec<(Vec<i128>, Vec<u64>)> = Vec::new();
        for &a in &pos {
            for &b in &neg {
                let union: Vec<u64> = rays[a]
                    .1
                    .iter()
                    .zip(&rays[b].1)
                    .zip(&processed)
                    .map(|((x, y), p)| (x | y) & p)
                    .collect();
                checks += rays.len() as u64;
                if checks > MAX_CHECKS {
                    return BlockRays::TooLarge;
                }
                let adjacent = rays.iter().enumerate().all(|(r, (_, s))| {
                    r == a
                        || r == b
                        || s.iter()
                            .zip(&union)
                            .zip(&processed)
                            .any(|((s, u), p)| s & p & !u != 0)
                });
                if !adjacent {
                    continue;
                }
                let Some(mut y) = combine(&rays[a].0, -rays[b].0[i], &rays[b].0, rays[a].0[i])
                else {
                    return BlockRays::TooLarge;
                };
                let g = gcd_all(&y);
                if g > 1 {
                    y.iter_mut().for_each(|v| *v /= g);
                }
                let s = support(&y, words);
                added.push((y, s));
                if added.len() + rays.len() > MAX_ROWS {
                    return BlockRays::TooLarge;
                }
            }
        }
        rays.retain(|r| r.0[i] >= 0);
        rays.extend(added);
        processed[i / 64] |= 1 << (i % 64);
    }
    let mut out: Vec<Row<BigInt>> = rays
        .into_iter()
        .map(|(y, _)| {
            let mut v: Row<BigInt> = y
                .iter()
                .enumerate()
                .filter(|(_, v)| **v != 0)
                .map(|(p, v)| (species[p] as u32, BigInt::from(*v)))
                .collect();
            divide_content(&mut [&mut v]);
            v
        })
        .collect();
    out.sort_by(|a, b| {
        a.len()
            .cmp(&b.len())
            .then_with(|| a.iter().map(|e| e.0).cmp(b.iter().map(|e| e.0)))
    });
    out.dedup();
    BlockRays::Rays(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rays(species: &[usize], basis: &[&[(u32, i64)]]) -> Vec<Vec<(u32, i64)>> {
        let basis: Vec<Row<BigInt>> = basis
            .iter()
            .map(|v| v.iter().map(|(s, c)| (*s, BigInt::from(*c))).collect())
            .collect();
        let refs: Vec<&Row<BigInt>> = basis.iter().collect();
        let BlockRays::Rays(r) = extreme_rays(species, &refs) else {
            panic!("small block")
        };
        r.iter()
            .map(|v| {
                v.iter()
                    .map(|(s, c)| (*s, i64::from_big(c).unwrap()))
                    .collect()
            })
            .collect()
    }

    #[test]
    fn michaelis_menten_moieties_are_enzyme_and_substrate() {
        // Species S=0, P=1, E=2, ES=3; the null space of E + S <=> ES -> E + P
        // given by a mixed basis E + ES and S + P − E. Textbook result (common
        // practice in enzyme kinetics): the moieties are E + ES and S + ES + P.
        let r = rays(
            &[0, 1, 2, 3],
            &[&[(2, 1), (3, 1)], &[(0, 1), (1, 1), (2, -1)]],
        );
        assert_eq!(r, vec![vec![(2, 1), (3, 1)], vec![(0, 1), (1, 1), (3, 1)]]);
    }

    #[test]
    fn a_line_with_mixed_signs_has_no_ray() {
        // A + B -> 0 conserves only A − B.
        assert!(rays(&[0, 1], &[&[(0, 1), (1, -1)]]).is_empty());
    }

    #[test]
    fn a_cone_with_more_rays_than_dimensions_lists_them_all() {
        // A + B <=> C + D (A=0..D=3): the 3-dimensional null space has the four
        // rays A+C, A+D, B+C, B+D (each pairs one reactant with one product;
        // solved by hand).
        let r = rays(
            &[0, 1, 2, 3],
            &[&[(0, 1), (1, -1)], &[(0, 1), (2, 1)], &[(2, 1), (3, -1)]],
        );
        assert_eq!(
            r,
            vec![
                vec![(0, 1), (2, 1)],
                vec![(0, 1), (3, 1)],
                vec![(1, 1), (2, 1)],
                vec![(1, 1), (3, 1)]
            ]
        );
    }
}
