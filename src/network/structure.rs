//! The structure of a reaction network in the sense of chemical reaction
//! network theory: complexes, the reaction graph, linkage classes,
//! (weak) reversibility and the deficiency δ = complexes − linkage classes −
//! rank (Feinberg 1987, Chem. Eng. Sci. 42:2229), plus plain facts a modeller
//! checks first: species that are never produced or never consumed, and
//! steps that can never fire from the initial state.
//!
//! Fixed species are left out of complexes, as they are left out of N: a
//! clamped species is a constant folded into the rate, so `E + S_fixed` is
//! the complex `E`. That keeps the deficiency consistent with the rank of N.

use crate::model::{Coef, Model, Rate, Sym, Term};
use std::collections::HashMap;

/// A complex: (species, coefficient) in the order first written; empty = the zero complex.
pub type Complex = Vec<(usize, Coef)>;

#[derive(Debug, Clone, PartialEq)]
pub struct Structure {
    /// In order of first appearance (reactant side before product side).
    pub complexes: Vec<Complex>,
    /// Reaction graph edges (from, to, step); a reversible step gives two.
    /// Steps whose two sides are the same complex give no edge.
    pub edges: Vec<(usize, usize, usize)>,
    /// Complex indices of each step: (reactant side, product side).
    pub step_complexes: Vec<(usize, usize)>,
    /// Connected components of the reaction graph, each sorted, ordered by first complex.
    pub linkage_classes: Vec<Vec<usize>>,
    /// Strongly connected components with no edge leaving them.
    pub terminal_classes: usize,
    pub deficiency: i64,
    /// Every edge has its reverse edge.
    pub reversible: bool,
    /// Every edge lies on a directed cycle.
    pub weakly_reversible: bool,
    /// Every step has mass-action kinetics (the theorems quoted assume it).
    pub mass_action: bool,
    /// Species that no step produces (in either direction a step can run).
    pub never_produced: Vec<usize>,
    /// Species that no step consumes.
    pub never_consumed: Vec<usize>,
    /// Steps that can fire in neither direction from the initial state,
    /// whatever the rate constants.
    pub never_fire: Vec<usize>,
}

impl Structure {
    /// A plain-language reading of the deficiency-zero theorem for this network.
    pub fn deficiency_note(&self) -> String {
        let theorem = "the deficiency-zero theorem (Feinberg 1987)";
        if !self.mass_action {
            return format!(
                "Some steps have explicit rate laws; {theorem} is about mass-action kinetics and does not apply as such."
            );
        }
        match (self.deficiency, self.weakly_reversible) {
            (0, true) => format!(
                "Deficiency zero and weakly reversible: by {theorem}, for every choice of positive rate constants each set of positive states with the same conserved totals holds exactly one steady state; it is positive and locally asymptotically stable, and no sustained oscillation is possible."
            ),
            (0, false) => format!(
                "Deficiency zero but not weakly reversible: by {theorem}, for no choice of rate constants is there a steady state with every species positive, nor a cyclic trajectory through positive states."
            ),
            (d, _) => format!(
                "Deficiency {d}: {theorem} does not apply; this test neither shows nor rules out several steady states or oscillations."
            ),
        }
    }
}

fn complex_of(terms: &[Term]) -> Complex {
    let mut c: Complex = Vec::new();
    for t in terms {
        if let Sym::Species(i) = t.sym {
            match c.iter_mut().find(|(s, _)| *s == i) {
                Some((_, v)) => *v += t.coefficient,
                None => c.push((i, t.coefficient)),
            }
        }
    }
    c.retain(|(_, v)| *v != Coef::default());
    c
}

/// Strongly connected components (iterative Kosaraju); returns the component of each node.
fn strong_components(nodes: usize, edges: &[(usize, usize, usize)]) -> Vec<usize> {
    let mut out_adj = vec![Vec::new(); nodes];
    let mut in_adj = vec![Vec::new(); nodes];
    for &(a, b, _) in edges {
        out_adj[a].push(b);
        in_adj[b].push(a);
    }
    let mut order = Vec::with_capacity(nodes);
    let mut seen = vec![false; nodes];
    for start in 0..nodes {
        if seen[start] {
            continue;
        }
        seen[start] = true;
        let mut stack = vec![(start, 0usize)];
        while let Some((v, k)) = stack.pop() {
            if k < out_adj[v].len() {
                stack.push((v, k + 1));
                let w = out_adj[v][k];
                if !seen[w] {
                    seen[w] = true;
                    stack.push((w, 0));
                }
            } else {
                order.push(v);
            }
        }
    }
    let mut comp = vec![usize::MAX; nodes];
    let mut count = 0;
    for &root in order.iter().rev() {
        if comp[root] != usize::MAX {
            continue;
        }
        comp[root] = count;
        let mut stack = vec![root];
        while let Some(v) = stack.pop() {
            for &w in &in_adj[v] {
                if comp[w] == usize::MAX {
                    comp[w] = count;
                    stack.push(w);
                }
            }
        }
        count += 1;
    }
    comp
}

pub(crate) fn analyze(model: &Model, rank: usize) -> Structure {
    let mut index: HashMap<Complex, usize> = HashMap::new();
    let mut complexes: Vec<Complex> = Vec::new();
    // Complexes are equal whatever order their terms are written in.
    let mut intern = |c: Complex| -> usize {
        let mut key = c.clone();
        key.sort_by_key(|(s, _)| *s);
        *index.entry(key).or_insert_with(|| {
            complexes.push(c);
            complexes.len() - 1
        })
    };
    let mut edges = Vec::new();
    let mut step_complexes = Vec::with_capacity(model.steps.len());
    for (j, step) in model.steps.iter().enumerate() {
        let r = intern(complex_of(&step.reactants));
        let p = intern(complex_of(&step.products));
        step_complexes.push((r, p));
        if r != p {
            edges.push((r, p, j));
            if step.reversible {
                edges.push((p, r, j));
            }
        }
    }
    let nc = complexes.len();

    // Linkage classes: undirected components (union-find).
    let mut parent: Vec<usize> = (0..nc).collect();
    fn root(p: &mut [usize], mut x: usize) -> usize {
        while p[x] != x {
            p[x] = p[p[x]];
            x = p[x];
        }
        x
    }
    for &(a, b, _) in &edges {
        let (ra, rb) = (root(&mut parent, a), root(&mut parent, b));
        if ra != rb {
            parent[ra.max(rb)] = ra.min(rb);
        }
    }
    let mut classes: Vec<Vec<usize>> = Vec::new();
    let mut class_of_root: HashMap<usize, usize> = HashMap::new();
    for c in 0..nc {
        let r = root(&mut parent, c);
        let k = *class_of_root.entry(r).or_insert_with(|| {
            classes.push(Vec::new());
            classes.len() - 1
        });
        classes[k].push(c);
    }

    let comp = strong_components(nc, &edges);
    let weakly_reversible = edges.iter().all(|&(a, b, _)| comp[a] == comp[b]);
    let ncomp = comp.iter().copied().max().map_or(0, |m| m + 1);
    let mut leaves = vec![false; ncomp];
    for &(a, b, _) in &edges {
        if comp[a] != comp[b] {
            leaves[comp[a]] = true;
        }
    }
    let terminal_classes = leaves.iter().filter(|l| !**l).count();
    let mut edge_set: std::collections::HashSet<(usize, usize)> = std::collections::HashSet::new();
    for &(a, b, _) in &edges {
        edge_set.insert((a, b));
    }
    let reversible = edges.iter().all(|&(a, b, _)| edge_set.contains(&(b, a)));
    let deficiency = nc as i64 - classes.len() as i64 - rank as i64;
    let mass_action = model
        .steps
        .iter()
        .all(|s| matches!(s.rate, Rate::MassAction { .. }));

    let n = model.species.len();
    let mut produced = vec![false; n];
    let mut consumed = vec![false; n];
    for (j, step) in model.steps.iter().enumerate() {
        for (i, c) in model.net_change(j) {
            // A reversible step runs both ways, so it makes and uses each species it changes.
            let made_forward = c > Coef::default();
            if made_forward || step.reversible {
                produced[i] = true;
            }
            if !made_forward || step.reversible {
                consumed[i] = true;
            }
        }
    }
    let never_produced = (0..n).filter(|i| !produced[*i]).collect();
    let never_consumed = (0..n).filter(|i| !consumed[*i]).collect();

    Structure {
        complexes,
        edges,
        step_complexes,
        linkage_classes: classes,
        terminal_classes,
        deficiency,
        reversible,
        weakly_reversible,
        mass_action,
        never_produced,
        never_consumed,
        never_fire: never_fire(model),
    }
}

/// Steps that can never fire: propagate which species can become present,
/// starting from positive initial values, positive fixed species and
/// species that an event adds or sets positive. A direction of a step can
/// fire once every species on its input side can be present.
fn never_fire(model: &Model) -> Vec<usize> {
    let n = model.species.len();
    let nf = model.fixed.len();
    // Index species then fixed species in one array.
    let key = |s: Sym| match s {
        Sym::Species(i) => Some(i),
        Sym::Fixed(i) => Some(n + i),
        _ => None,
    };
    let mut present = vec![false; n + nf];
    for (i, s) in model.species.iter().enumerate() {
        present[i] = s.initial > 0.0;
    }
    for (i, f) in model.fixed.iter().enumerate() {
        present[n + i] = f.value > 0.0;
    }
    for e in &model.events {
        for i in e.species_raised() {
            if i < n {
                present[i] = true;
            }
        }
    }
    // Directions: 2j forward (reactants -> products), 2j+1 backward.
    let ndir = 2 * model.steps.len();
    let mut missing = vec![0usize; ndir];
    let mut users: Vec<Vec<usize>> = vec![Vec::new(); n + nf];
    let sides = |d: usize| {
        let s = &model.steps[d / 2];
        if d.is_multiple_of(2) {
            (&s.reactants, &s.products)
        } else {
            (&s.products, &s.reactants)
        }
    };
    let mut queue = Vec::new();
    for (d, missing_inputs) in missing.iter_mut().enumerate() {
        if d % 2 == 1 && !model.steps[d / 2].reversible {
            *missing_inputs = usize::MAX;
            continue;
        }
        let (input, _) = sides(d);
        let mut needed: Vec<usize> = input
            .iter()
            .filter_map(|t| key(t.sym))
            .filter(|&k| !present[k])
            .collect();
        needed.sort_unstable();
        needed.dedup();
        *missing_inputs = needed.len();
        for k in needed {
            users[k].push(d);
        }
        if *missing_inputs == 0 {
            queue.push(d);
        }
    }
    let mut fires = vec![false; ndir];
    while let Some(d) = queue.pop() {
        if fires[d] {
            continue;
        }
        fires[d] = true;
        let (_, output) = sides(d);
        for t in output.iter() {
            if let Some(k) = key(t.sym)
                && !present[k]
            {
                present[k] = true;
                for &u in &users[k] {
                    missing[u] -= 1;
                    if missing[u] == 0 {
                        queue.push(u);
                    }
                }
            }
        }
    }
    (0..model.steps.len())
        .filter(|j| !fires[2 * j] && !fires[2 * j + 1])
        .collect()
}
