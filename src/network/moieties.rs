//! Non-negative conservation laws (conserved moieties): the extreme rays of
//! the cone { y ≥ 0 : yᵀN = 0 }, by the double-description method in the
//! form used for metabolic networks (Schuster & Höfer 1991, J. Chem. Soc.
//! Faraday Trans. 87:2561): start from the unit vectors of the species and
//! impose one step's constraint at a time, keeping the rows that already
//! satisfy it and adding every positive combination of a positive and a
//! negative row that passes the combinatorial adjacency test (no other row's
//! support lies inside the union of the pair's supports).
//!
//! Why per block: the left null space splits into subspaces on disjoint sets
//! of species, and the cone is their product, so its extreme rays are the
//! union of the blocks' rays. Small blocks keep the method cheap; a block
//! whose intermediate rows exceed a budget is given up (the caller falls
//! back to an integer basis and says so), so the method never runs away.

use super::sparse::{Int, Row, divide_content};
use num_bigint::BigInt;

/// Outcome for one block of species.
pub enum BlockRays {
    /// Every extreme ray (integer vectors over species, content 1).
    Rays(Vec<Row<BigInt>>),
    /// The work budget ran out.
    TooLarge,
}

/// Largest number of intermediate rows kept for one block.
const MAX_ROWS: usize = 4000;
/// Largest number of support-inclusion checks for one block.
const MAX_CHECKS: u64 = 200_000_000;

struct Tableau {
    /// Remaining constraint values (one per step of the block, dense).
    constraint: Vec<i128>,
    /// The vector over the block's species (dense, non-negative).
    y: Vec<i128>,
    support: Vec<u64>,
}

/// The extreme rays of { y ≥ 0 on `species`, zero elsewhere : yᵀN = 0 },
/// where `columns[j]` lists (species, coefficient) of step j (integers).
pub fn extreme_rays(species: &[usize], columns: &[Vec<(usize, BigInt)>]) -> BlockRays {
    let m = species.len();
    let position = |s: usize| species.binary_search(&s).ok();
    // Only the steps that touch the block constrain it.
    let mut block_cols: Vec<Vec<(usize, i128)>> = Vec::new();
    for col in columns {
        let mut entries = Vec::new();
        for (s, v) in col {
            if let Some(p) = position(*s) {
                let Some(v) = i64::from_big(v) else {
                    return BlockRays::TooLarge;
                };
                entries.push((p, v as i128));
            }
        }
        if !entries.is_empty() {
            block_cols.push(entries);
        }
    }
    let ncon = block_cols.len();
    let words = m.div_ceil(64).max(1);
    let mut rows: Vec<Tableau> = (0..m)
        .map(|i| {
            let mut constraint = vec![0i128; ncon];
            for (j, col) in block_cols.iter().enumerate() {
                for (p, v) in col {
                    if *p == i {
                        constraint[j] = *v;
                    }
                }
            }
            let mut y = vec![0i128; m];
            y[i] = 1;
            let mut support = vec![0u64; words];
            support[i / 64] |= 1 << (i % 64);
            Tableau {
                constraint,
                y,
                support,
            }
        })
        .collect();
    let mut done = vec![false; ncon];
    let mut checks: u64 = 0;
    for _ in 0..ncon {
        // Impose next the constraint that creates the fewest pairs.
        let Some(j) = (0..ncon).filter(|&j| !done[j]).min_by_key(|&j| {
            let pos = rows.iter().filter(|r| r.constraint[j] > 0).count();
            let neg = rows.iter().filter(|r| r.constraint[j] < 0).count();
            (pos * neg, pos + neg)
        }) else {
            break;
        };
        done[j] = true;
        let pos: Vec<usize> = (0..rows.len())
            .filter(|&r| rows[r].constraint[j] > 0)
            .collect();
        let neg: Vec<usize> = (0..rows.len())
            .filter(|&r| rows[r].constraint[j] < 0)
            .collect();
        let mut next: Vec<Tableau> = Vec::new();
        for &a in &pos {
            for &b in &neg {
                let union: Vec<u64> = rows[a]
                    .support
                    .iter()
                    .zip(&rows[b].support)
                    .map(|(x, y)| x | y)
                    .collect();
                checks += rows.len() as u64;
                if checks > MAX_CHECKS {
                    return BlockRays::TooLarge;
                }
                let adjacent = rows.iter().enumerate().all(|(r, row)| {
                    r == a || r == b || row.support.iter().zip(&union).any(|(s, u)| s & !u != 0)
                });
                if !adjacent {
                    continue;
                }
                let ca = -rows[b].constraint[j];
                let cb = rows[a].constraint[j];
                let lin = |x: &[i128], y: &[i128]| -> Option<Vec<i128>> {
                    x.iter()
                        .zip(y)
                        .map(|(p, q)| p.checked_mul(ca)?.checked_add(q.checked_mul(cb)?))
                        .collect()
                };
                let (Some(mut constraint), Some(mut y)) = (
                    lin(&rows[a].constraint, &rows[b].constraint),
                    lin(&rows[a].y, &rows[b].y),
                ) else {
                    return BlockRays::TooLarge;
                };
                let g = y
                    .iter()
                    .chain(constraint.iter())
                    .fold(0i128, |g, v| num_integer::Integer::gcd(&g, v));
                if g > 1 {
                    y.iter_mut()
                        .chain(constraint.iter_mut())
                        .for_each(|v| *v /= g);
                }
                next.push(Tableau {
                    constraint,
                    y,
                    support: union,
                });
                if next.len() + rows.len() > MAX_ROWS {
                    return BlockRays::TooLarge;
                }
            }
        }
        let mut kept: Vec<Tableau> = rows.into_iter().filter(|r| r.constraint[j] == 0).collect();
        kept.extend(next);
        rows = kept;
    }
    let mut rays: Vec<Row<BigInt>> = rows
        .into_iter()
        .map(|r| {
            let mut v: Row<BigInt> =
                r.y.iter()
                    .enumerate()
                    .filter(|(_, v)| **v != 0)
                    .map(|(p, v)| (species[p] as u32, BigInt::from(*v)))
                    .collect();
            divide_content(&mut [&mut v]);
            v
        })
        .collect();
    rays.sort_by(|a, b| {
        a.len()
            .cmp(&b.len())
            .then_with(|| a.iter().map(|e| e.0).cmp(b.iter().map(|e| e.0)))
    });
    rays.dedup();
    BlockRays::Rays(rays)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cols(v: &[&[(usize, i64)]]) -> Vec<Vec<(usize, BigInt)>> {
        v.iter()
            .map(|c| c.iter().map(|(s, x)| (*s, BigInt::from(*x))).collect())
            .collect()
    }

    #[test]
    fn michaelis_menten_moieties_are_enzyme_and_substrate() {
        // Species S=0, P=1, E=2, ES=3. Textbook result (common practice in
        // enzyme kinetics): E + ES and S + ES + P are conserved.
        let c = cols(&[&[(0, -1), (2, -1), (3, 1)], &[(3, -1), (2, 1), (1, 1)]]);
        let BlockRays::Rays(rays) = extreme_rays(&[0, 1, 2, 3], &c) else {
            panic!("small block")
        };
        let as_pairs: Vec<Vec<(u32, i64)>> = rays
            .iter()
            .map(|r| {
                r.iter()
                    .map(|(s, v)| (*s, i64::from_big(v).unwrap()))
                    .collect()
            })
            .collect();
        assert_eq!(
            as_pairs,
            vec![vec![(2, 1), (3, 1)], vec![(0, 1), (1, 1), (3, 1)]]
        );
    }

    #[test]
    fn dimerisation_conserves_monomer_plus_twice_dimer() {
        // 2 M <=> D (M=0, D=1): M + 2 D is conserved (mass balance, common practice).
        let c = cols(&[&[(0, -2), (1, 1)]]);
        let BlockRays::Rays(rays) = extreme_rays(&[0, 1], &c) else {
            panic!()
        };
        assert_eq!(rays, vec![vec![(0, BigInt::from(1)), (1, BigInt::from(2))]]);
    }

    #[test]
    fn a_cone_with_more_rays_than_dimensions_lists_them_all() {
        // A + B <=> C + D (A=0..D=3): rays A+C, A+D, B+C, B+D span a
        // 3-dimensional space (Schuster & Höfer 1991 discuss such cases).
        let c = cols(&[&[(0, -1), (1, -1), (2, 1), (3, 1)]]);
        let BlockRays::Rays(rays) = extreme_rays(&[0, 1, 2, 3], &c) else {
            panic!()
        };
        assert_eq!(rays.len(), 4);
    }
}
