//! Pairing the items of the old model with those of the new one: first by
//! name, then renames.
//!
//! A rename is an item that disappeared and one that appeared with the same
//! content. Content refers to other names (a step to its species, a derived
//! param to other params), so renames are found together, to a fixed point:
//! each round pairs the leftover items whose content is the same under the
//! pairs found so far. When several leftover items have the same content
//! (three species that all start at 0), structural evidence decides: a paired
//! step whose sides differ only in one leftover name on each side, or two
//! expressions that differ only in one leftover name, votes for that pair;
//! a pair is taken when each is the other's clear favourite. Items that stay
//! ambiguous are reported as removed and added rather than guessed.

use super::sameness::{Context, Key, Side};
use crate::model::{Expr, Model, Rate, Sym};
use std::collections::{BTreeMap, HashMap};

/// Items paired across the two models.
#[derive(Debug, Clone, Default)]
pub struct Pairing {
    /// Named items (species, fixed species, params, totals, observables): old → new.
    pub named: BTreeMap<Sym, Sym>,
    /// The same pairs, new → old.
    pub named_back: BTreeMap<Sym, Sym>,
    /// Steps: old index → new index.
    pub steps: BTreeMap<usize, usize>,
    pub steps_back: BTreeMap<usize, usize>,
}

impl Pairing {
    fn pair_named(&mut self, old: Sym, new: Sym) {
        self.named.insert(old, new);
        self.named_back.insert(new, old);
    }
    fn pair_steps(&mut self, old: usize, new: usize) {
        self.steps.insert(old, new);
        self.steps_back.insert(new, old);
    }
}

/// Every named item of a model.
pub fn all_syms(model: &Model) -> Vec<Sym> {
    let mut v = Vec::new();
    v.extend((0..model.species.len()).map(Sym::Species));
    v.extend((0..model.fixed.len()).map(Sym::Fixed));
    v.extend((0..model.params.len()).map(Sym::Param));
    v.extend((0..model.totals.len()).map(Sym::Total));
    v.extend((0..model.observables.len()).map(Sym::Observable));
    v
}

/// Pairs by name, then finds renames; returns the context with its pairing.
pub fn pair(mut ctx: Context<'_>) -> Context<'_> {
    let roles = (roles_of(ctx.old), roles_of(ctx.new));
    for sym in all_syms(ctx.old) {
        if let Some(new) = ctx.new.lookup(ctx.old.name_of(sym)) {
            ctx.pairing.pair_named(sym, new);
        }
    }
    for (j, step) in ctx.old.steps.iter().enumerate() {
        if let Some(k) = ctx.new.step_index(&step.name) {
            ctx.pairing.pair_steps(j, k);
        }
    }
    loop {
        let mut progress = pair_named_renames(&mut ctx, &roles);
        progress |= pair_step_renames(&mut ctx);
        if !progress {
            break;
        }
    }
    ctx
}

/// How a species or fixed species takes part in the steps, whatever the
/// names: (0 reactant, 1 product, 2 only in a law; coefficient; reversible)
/// per step, sorted. A renamed species keeps its roles; a species removed
/// with its steps and an unrelated one added with others do not share them.
type Role = (u8, crate::model::Coef, bool);

fn roles_of(model: &Model) -> HashMap<Sym, Vec<Role>> {
    let mut roles: HashMap<Sym, Vec<Role>> = HashMap::new();
    for step in &model.steps {
        let mut on_sides = Vec::new();
        for (place, terms) in [(0u8, &step.reactants), (1, &step.products)] {
            for t in terms.iter() {
                roles
                    .entry(t.sym)
                    .or_default()
                    .push((place, t.coefficient, step.reversible));
                on_sides.push(t.sym);
            }
        }
        if let Rate::Law(e) = &step.rate {
            for sym in e.names() {
                if matches!(sym, Sym::Species(_) | Sym::Fixed(_)) && !on_sides.contains(&sym) {
                    roles.entry(sym).or_default().push((
                        2,
                        crate::model::Coef::default(),
                        step.reversible,
                    ));
                }
            }
        }
    }
    roles.values_mut().for_each(|v| v.sort());
    roles
}

type Roles = (HashMap<Sym, Vec<Role>>, HashMap<Sym, Vec<Role>>);

fn same_content(ctx: &Context, roles: &Roles, old: Sym, new: Sym) -> bool {
    let dim = Some(crate::model::Dim::CONC);
    if matches!(old, Sym::Species(_) | Sym::Fixed(_)) && roles.0.get(&old) != roles.1.get(&new) {
        return false;
    }
    match (old, new) {
        (Sym::Species(a), Sym::Species(b)) => {
            ctx.same_value(ctx.old.species[a].initial, ctx.new.species[b].initial, dim)
        }
        (Sym::Fixed(a), Sym::Fixed(b)) => {
            ctx.same_value(ctx.old.fixed[a].value, ctx.new.fixed[b].value, dim)
        }
        (Sym::Param(a), Sym::Param(b)) => ctx.same_param_definition(a, b),
        (Sym::Total(a), Sym::Total(b)) => ctx.same_total(a, b),
        (Sym::Observable(a), Sym::Observable(b)) => ctx.same_observable(a, b),
        _ => false,
    }
}

fn same_kind(a: Sym, b: Sym) -> bool {
    std::mem::discriminant(&a) == std::mem::discriminant(&b)
}

fn pair_named_renames(ctx: &mut Context, roles: &Roles) -> bool {
    let old_left: Vec<Sym> = all_syms(ctx.old)
        .into_iter()
        .filter(|s| !ctx.pairing.named.contains_key(s))
        .collect();
    let new_left: Vec<Sym> = all_syms(ctx.new)
        .into_iter()
        .filter(|s| !ctx.pairing.named_back.contains_key(s))
        .collect();
    if old_left.is_empty() || new_left.is_empty() {
        return false;
    }
    let mut candidates: BTreeMap<Sym, Vec<Sym>> = BTreeMap::new();
    let mut candidates_back: BTreeMap<Sym, Vec<Sym>> = BTreeMap::new();
    for &a in &old_left {
        for &b in new_left.iter().filter(|b| same_kind(a, **b)) {
            if same_content(ctx, roles, a, b) {
                candidates.entry(a).or_default().push(b);
                candidates_back.entry(b).or_default().push(a);
            }
        }
    }
    if candidates.is_empty() {
        return false;
    }
    let votes = collect_votes(ctx);
    let vote = |a: Sym, b: Sym| votes.get(&(a, b)).copied().unwrap_or(0);
    let mut accepted = Vec::new();
    for (&a, bs) in &candidates {
        for &b in bs {
            let back = &candidates_back[&b];
            let unique = bs.len() == 1 && back.len() == 1;
            let v = vote(a, b);
            let favourite = v > 0
                && bs.iter().all(|&o| o == b || vote(a, o) < v)
                && back.iter().all(|&o| o == a || vote(o, b) < v);
            if unique || favourite {
                accepted.push((a, b));
            }
        }
    }
    let progress = !accepted.is_empty();
    for (a, b) in accepted {
        ctx.pairing.pair_named(a, b);
    }
    progress
}

fn pair_step_renames(ctx: &mut Context) -> bool {
    // Same content needs the same sides under the pairing, so leftover new
    // steps are looked up by their sides instead of compared one by one.
    type Sides = (
        bool,
        BTreeMap<Key, crate::model::Coef>,
        BTreeMap<Key, crate::model::Coef>,
    );
    let sides = |ctx: &Context, side: Side, j: usize| -> Sides {
        let s = &ctx.model(side).steps[j];
        (
            s.reversible,
            ctx.side_keys(side, &s.reactants),
            ctx.side_keys(side, &s.products),
        )
    };
    let mut by_sides: HashMap<Sides, Vec<usize>> = HashMap::new();
    for k in (0..ctx.new.steps.len()).filter(|k| !ctx.pairing.steps_back.contains_key(k)) {
        by_sides
            .entry(sides(ctx, Side::New, k))
            .or_default()
            .push(k);
    }
    let mut progress = false;
    for j in 0..ctx.old.steps.len() {
        if ctx.pairing.steps.contains_key(&j) {
            continue;
        }
        let Some(list) = by_sides.get_mut(&sides(ctx, Side::Old, j)) else {
            continue;
        };
        if let Some(pos) = list.iter().position(|&k| ctx.same_rate(j, k)) {
            let k = list.remove(pos);
            ctx.pairing.pair_steps(j, k);
            progress = true;
        }
    }
    progress
}

/// Evidence for pairing leftover names: (old, new) → votes.
fn collect_votes(ctx: &Context) -> HashMap<(Sym, Sym), u32> {
    let mut votes: HashMap<(Sym, Sym), u32> = HashMap::new();
    let mut add = |a: Sym, b: Sym, w: u32| *votes.entry((a, b)).or_default() += w;
    let left_old = |s: Sym| matches!(ctx.key(Side::Old, s), Key::OldOnly(_));
    let left_new = |s: Sym| matches!(ctx.key(Side::New, s), Key::NewOnly(_));

    // Step sides that differ only in one leftover name on each side.
    let side_votes = |j: usize, k: usize, weight: u32, add: &mut dyn FnMut(Sym, Sym, u32)| {
        let (a, b) = (&ctx.old.steps[j], &ctx.new.steps[k]);
        for (sa, sb) in [(&a.reactants, &b.reactants), (&a.products, &b.products)] {
            let lo: Vec<_> = sa.iter().filter(|t| left_old(t.sym)).collect();
            let ln: Vec<_> = sb.iter().filter(|t| left_new(t.sym)).collect();
            if lo.len() != 1 || ln.len() != 1 || lo[0].coefficient != ln[0].coefficient {
                continue;
            }
            let rest_o: Vec<_> = sa.iter().filter(|t| !left_old(t.sym)).cloned().collect();
            let rest_n: Vec<_> = sb.iter().filter(|t| !left_new(t.sym)).cloned().collect();
            if ctx.side_keys(Side::Old, &rest_o) == ctx.side_keys(Side::New, &rest_n) {
                add(lo[0].sym, ln[0].sym, weight);
            }
        }
    };
    for (&j, &k) in &ctx.pairing.steps {
        side_votes(j, k, 2, &mut add);
        let (a, b) = (&ctx.old.steps[j], &ctx.new.steps[k]);
        match (&a.rate, &b.rate) {
            (
                Rate::MassAction {
                    forward: fa,
                    reverse: ra,
                },
                Rate::MassAction {
                    forward: fb,
                    reverse: rb,
                },
            ) => {
                align(ctx, fa, fb, &mut add);
                if let (Some(ra), Some(rb)) = (ra, rb) {
                    align(ctx, ra, rb, &mut add);
                }
            }
            (Rate::Law(la), Rate::Law(lb)) => align(ctx, la, lb, &mut add),
            _ => {}
        }
    }
    let unpaired_old: Vec<usize> = (0..ctx.old.steps.len())
        .filter(|j| !ctx.pairing.steps.contains_key(j))
        .collect();
    let unpaired_new: Vec<usize> = (0..ctx.new.steps.len())
        .filter(|k| !ctx.pairing.steps_back.contains_key(k))
        .collect();
    // Bounded so a wholesale rewrite of a large network stays quadratic in a small number.
    if unpaired_old.len() * unpaired_new.len() <= 250_000 {
        for &j in &unpaired_old {
            for &k in &unpaired_new {
                let (a, b) = (&ctx.old.steps[j], &ctx.new.steps[k]);
                if a.reversible == b.reversible
                    && a.reactants.len() == b.reactants.len()
                    && a.products.len() == b.products.len()
                {
                    side_votes(j, k, 1, &mut add);
                }
            }
        }
    }
    for (&a, &b) in &ctx.pairing.named {
        match (a, b) {
            (Sym::Param(i), Sym::Param(k)) => {
                if let (crate::model::ParamDef::Expr(x), crate::model::ParamDef::Expr(y)) =
                    (&ctx.old.params[i].definition, &ctx.new.params[k].definition)
                {
                    align(ctx, x, y, &mut add);
                }
            }
            (Sym::Observable(i), Sym::Observable(k)) => align(
                ctx,
                &ctx.old.observables[i].expr,
                &ctx.new.observables[k].expr,
                &mut add,
            ),
            (Sym::Total(i), Sym::Total(k)) => {
                let (x, y) = (&ctx.old.totals[i].terms, &ctx.new.totals[k].terms);
                let lo: Vec<_> = x
                    .iter()
                    .filter(|(s, _)| left_old(Sym::Species(*s)))
                    .collect();
                let ln: Vec<_> = y
                    .iter()
                    .filter(|(s, _)| left_new(Sym::Species(*s)))
                    .collect();
                if lo.len() == 1 && ln.len() == 1 && lo[0].1 == ln[0].1 {
                    add(Sym::Species(lo[0].0), Sym::Species(ln[0].0), 1);
                }
            }
            _ => {}
        }
    }
    votes
}

/// Walks two expressions in parallel; where they have the same shape and
/// differ in a leftover name on each side, votes for pairing those names.
fn align(ctx: &Context, a: &Expr, b: &Expr, add: &mut dyn FnMut(Sym, Sym, u32)) {
    match (a, b) {
        (Expr::Name(x), Expr::Name(y))
            if matches!(ctx.key(Side::Old, *x), Key::OldOnly(_))
                && matches!(ctx.key(Side::New, *y), Key::NewOnly(_))
                && same_kind(*x, *y) =>
        {
            add(*x, *y, 1);
        }
        (Expr::Neg(x), Expr::Neg(y)) => align(ctx, x, y, add),
        (Expr::Binary(o1, x1, y1), Expr::Binary(o2, x2, y2)) if o1 == o2 => {
            align(ctx, x1, x2, add);
            align(ctx, y1, y2, add);
        }
        (Expr::Call(f1, a1), Expr::Call(f2, a2)) if f1 == f2 && a1.len() == a2.len() => {
            for (x, y) in a1.iter().zip(a2) {
                align(ctx, x, y, add);
            }
        }
        _ => {}
    }
}
