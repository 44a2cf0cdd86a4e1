//! Sums over directed spanning trees (the King–Altman / matrix-tree method).
//!
//! For a graph of enzyme forms with pseudo-first-order edge weights, the
//! steady-state share of form `r` is proportional to the sum, over every
//! spanning tree whose edges all point towards `r`, of the product of the
//! tree's edge weights (King & Altman 1956; the directed matrix-tree
//! theorem). Each edge weight is a polynomial; its terms are enumerated as
//! parallel single-term edges, so every enumerated tree contributes one
//! monomial and memory holds only the result and one path of choices.
//!
//! Invariant: the work done is bounded in advance by the matrix-tree count
//! of expanded terms ([`expanded_term_count`]); callers refuse to start when
//! that count exceeds the user's limit.

use crate::algebra::poly::{Monomial, Poly, Var};
use num_rational::BigRational;
use num_traits::One;

/// One term of an edge weight: target form, monomial as (variable,
/// exponent) pairs, coefficient.
type ExpandedEdge = (usize, Vec<(Var, u32)>, BigRational);

/// A graph of (lumped) forms; `out[u]` lists edges `u → v` with a polynomial weight.
#[derive(Clone, Debug, Default)]
pub struct FormGraph {
    pub out: Vec<Vec<(usize, Poly)>>,
}

impl FormGraph {
    pub fn new(n: usize) -> FormGraph {
        FormGraph {
            out: vec![Vec::new(); n],
        }
    }
    pub fn len(&self) -> usize {
        self.out.len()
    }
    pub fn is_empty(&self) -> bool {
        self.out.is_empty()
    }
    /// Adds `weight` to the edge `u → v` (parallel steps add up).
    pub fn add_edge(&mut self, u: usize, v: usize, weight: &Poly) {
        if u == v || weight.is_zero() {
            return;
        }
        match self.out[u].iter_mut().find(|(w, _)| *w == v) {
            Some((_, p)) => p.add_assign_poly(weight),
            None => self.out[u].push((v, weight.clone())),
        }
        self.out[u].retain(|(_, p)| !p.is_zero());
    }
}

/// The number of single-term trees the enumeration visits for all roots:
/// the directed matrix-tree theorem with each edge weighted by its number of
/// terms (a float: it may be astronomically large).
pub fn expanded_term_count(g: &FormGraph) -> f64 {
    let n = g.len();
    if n <= 1 {
        return 1.0;
    }
    let mut lap = nalgebra::DMatrix::<f64>::zeros(n, n);
    for (u, edges) in g.out.iter().enumerate() {
        for (v, w) in edges {
            let c = w.len() as f64;
            lap[(u, u)] += c;
            lap[(u, *v)] -= c;
        }
    }
    (0..n)
        .map(|r| {
            let keep: Vec<usize> = (0..n).filter(|&i| i != r).collect();
            let minor = lap.select_rows(&keep).select_columns(&keep);
            minor.determinant().abs()
        })
        .sum()
}

/// Tree sums for every root, and the number of single-term trees visited.
/// `progress` is called now and then with the running count.
pub fn tree_sums(g: &FormGraph, nvars: usize, progress: &mut dyn FnMut(u64)) -> (Vec<Poly>, u64) {
    let n = g.len();
    // Expanded edges: (target, monomial exponents as pairs, coefficient).
    let expanded: Vec<Vec<ExpandedEdge>> = g
        .out
        .iter()
        .map(|edges| {
            edges
                .iter()
                .flat_map(|(v, p)| {
                    p.terms()
                        .map(move |(m, c)| (*v, m.pairs().to_vec(), c.clone()))
                })
                .collect()
        })
        .collect();
    let mut visited: u64 = 0;
    let mut sums = Vec::with_capacity(n);
    for root in 0..n {
        let order = order_towards(root, &expanded);
        let mut state = Enumeration {
            edges: &expanded,
            parent: vec![usize::MAX; n],
            exponents: vec![0; nvars],
            coef: BigRational::one(),
            order: &order,
            root,
            sum: Poly::zero(),
            visited: &mut visited,
            progress,
        };
        if order.len() + 1 == n {
            state.descend(0);
        }
        sums.push(state.sum);
    }
    (sums, visited)
}

/// Non-root nodes that can reach `root`, nearest first (so each node has an
/// edge to an earlier one and dead ends in the search are rare).
fn order_towards(root: usize, edges: &[Vec<ExpandedEdge>]) -> Vec<usize> {
    let n = edges.len();
    let mut dist = vec![usize::MAX; n];
    dist[root] = 0;
    let mut queue = std::collections::VecDeque::from([root]);
    let mut order = Vec::new();
    while let Some(v) = queue.pop_front() {
        for u in 0..n {
            if dist[u] == usize::MAX && edges[u].iter().any(|(w, _, _)| *w == v) {
                dist[u] = dist[v] + 1;
                order.push(u);
                queue.push_back(u);
            }
        }
    }
    order
}

struct Enumeration<'a> {
    edges: &'a [Vec<ExpandedEdge>],
    parent: Vec<usize>,
    exponents: Vec<u32>,
    coef: BigRational,
    order: &'a [usize],
    root: usize,
    sum: Poly,
    visited: &'a mut u64,
    progress: &'a mut dyn FnMut(u64),
}

impl Enumeration<'_> {
    fn descend(&mut self, depth: usize) {
        if depth == self.order.len() {
            let m = Monomial::from_sorted(
                self.exponents
                    .iter()
                    .enumerate()
                    .filter(|(_, e)| **e > 0)
                    .map(|(v, e)| (v as Var, *e))
                    .collect(),
            );
            self.sum.add_term(self.coef.clone(), m);
            *self.visited += 1;
            if (*self.visited).is_multiple_of(1 << 16) {
                (self.progress)(*self.visited);
            }
            return;
        }
        let u = self.order[depth];
        for (v, pairs, c) in &self.edges[u] {
            if self.closes_cycle(u, *v) {
                continue;
            }
            self.parent[u] = *v;
            for &(x, e) in pairs {
                self.exponents[x as usize] += e;
            }
            let saved = if c.is_one() {
                None
            } else {
                let next = &self.coef * c;
                Some(std::mem::replace(&mut self.coef, next))
            };
            self.descend(depth + 1);
            if let Some(s) = saved {
                self.coef = s;
            }
            for &(x, e) in pairs {
                self.exponents[x as usize] -= e;
            }
            self.parent[u] = usize::MAX;
        }
    }

    /// Whether choosing `u → v` closes a cycle among the chosen edges.
    fn closes_cycle(&self, u: usize, v: usize) -> bool {
        let mut w = v;
        loop {
            if w == u {
                return true;
            }
            if w == self.root || self.parent[w] == usize::MAX {
                return false;
            }
            w = self.parent[w];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::algebra::poly::Vars;

    #[test]
    fn three_node_cycle_has_the_king_altman_patterns() {
        // A reversible ring of n forms has n spanning in-trees per root
        // (King & Altman 1956; for a ring, drop one of the n edges of the
        // cycle and point the rest towards the root).
        let mut v = Vars::new();
        let names = ["a", "b", "c", "d", "e", "f"];
        let w: Vec<Poly> = names.iter().map(|n| Poly::var(v.intern(n))).collect();
        let mut g = FormGraph::new(3);
        g.add_edge(0, 1, &w[0]);
        g.add_edge(1, 0, &w[1]);
        g.add_edge(1, 2, &w[2]);
        g.add_edge(2, 1, &w[3]);
        g.add_edge(2, 0, &w[4]);
        g.add_edge(0, 2, &w[5]);
        let (sums, visited) = tree_sums(&g, v.len(), &mut |_| {});
        assert_eq!(visited, 9);
        assert_eq!(expanded_term_count(&g).round() as u64, 9);
        // Trees into node 0: {1→0, 2→0}, {1→0, 2→1}, {1→2, 2→0}.
        let expected = Poly::parse("b*e + b*d + c*e", &mut v).unwrap();
        assert_eq!(sums[0], expected);
    }
}
