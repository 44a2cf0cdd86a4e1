//! The changes of individual items, given the pairing: additions,
//! removals, renames and, for paired items, which aspects differ.

use super::pairing::all_syms;
use super::sameness::{Context, Key, Side};
use super::{Change, ChangeKind, Detail, ItemKind, Shown};
use crate::algebra::print::{Syntax, plain_literal, print_expr};
use crate::model::{Action, Dim, Event, EventKind, Expr, Model, ParamDef, Rate, Sym, Term, Timing};

/// Every change between the two models.
pub fn changes(ctx: &Context) -> Vec<Change> {
    let mut out = Vec::new();
    named_changes(ctx, &mut out);
    step_changes(ctx, &mut out);
    event_changes(ctx, &mut out);
    assumption_changes(ctx, &mut out);
    condition_changes(ctx, &mut out);
    out
}

fn item_kind(sym: Sym) -> ItemKind {
    match sym {
        Sym::Species(_) => ItemKind::Species,
        Sym::Fixed(_) => ItemKind::Fixed,
        Sym::Param(_) => ItemKind::Param,
        Sym::Total(_) => ItemKind::Total,
        Sym::Observable(_) => ItemKind::Observable,
    }
}

/// A number for people: 12 significant digits, so that a value converted
/// between units (0.44999999999999996) shows as written (0.45). The JSON
/// output keeps the full value.
pub fn number(v: f64) -> String {
    if !v.is_finite() {
        return plain_literal(v);
    }
    let rounded: f64 = format!("{v:.11e}").parse().unwrap_or(v);
    plain_literal(rounded)
}

/// A value with its unit, in the model's default units.
fn quantity(model: &Model, value: f64, dim: Option<Dim>) -> Shown {
    let unit = dim
        .filter(|d| *d != Dim::NONE)
        .map(|d| d.display_in(model.units));
    Shown::Quantity { value, unit }
}

/// A quantity as mechanism text: `20 uM`, `2 /uM/s`, `3`.
pub fn quantity_text(model: &Model, value: f64, dim: Option<Dim>) -> String {
    match dim.filter(|d| *d != Dim::NONE) {
        Some(d) => format!("{} {}", number(value), d.display_in(model.units)),
        None => number(value),
    }
}

pub fn expr_text(model: &Model, e: &Expr) -> String {
    print_expr(e, &|s| model.name_of(s).to_string(), Syntax::Mech)
}

fn side_text(model: &Model, terms: &[Term]) -> String {
    if terms.is_empty() {
        return "0".into();
    }
    terms
        .iter()
        .map(|t| {
            let name = model.name_of(t.sym);
            if t.coefficient == num_traits::One::one() {
                name.to_string()
            } else {
                format!("{} {name}", t.coefficient)
            }
        })
        .collect::<Vec<_>>()
        .join(" + ")
}

fn rate_text(model: &Model, rate: &Rate) -> String {
    match rate {
        Rate::MassAction {
            forward,
            reverse: None,
        } => format!("with {}", expr_text(model, forward)),
        Rate::MassAction {
            forward,
            reverse: Some(r),
        } => format!(
            "with {}, {}",
            expr_text(model, forward),
            expr_text(model, r)
        ),
        Rate::Law(e) => format!("law {}", expr_text(model, e)),
    }
}

fn reaction_text(model: &Model, step: usize) -> String {
    let s = &model.steps[step];
    let arrow = if s.reversible { "<=>" } else { "->" };
    format!(
        "{} {arrow} {}",
        side_text(model, &s.reactants),
        side_text(model, &s.products)
    )
}

pub fn step_text(model: &Model, step: usize) -> String {
    let s = &model.steps[step];
    format!(
        "step {} {} {}",
        s.name,
        reaction_text(model, step),
        rate_text(model, &s.rate)
    )
}

fn param_dim(ctx: &Context, side: Side, i: usize) -> Option<Dim> {
    ctx.dims(side).params[i]
}

/// A named item as one line of mechanism text.
fn item_text(ctx: &Context, side: Side, sym: Sym) -> String {
    let m = ctx.model(side);
    let conc = Some(Dim::CONC);
    match sym {
        Sym::Species(i) => format!(
            "species {} = {}",
            m.species[i].name,
            quantity_text(m, m.species[i].initial, conc)
        ),
        Sym::Fixed(i) => format!(
            "fixed {} = {}",
            m.fixed[i].name,
            quantity_text(m, m.fixed[i].value, conc)
        ),
        Sym::Param(i) => {
            let p = &m.params[i];
            match &p.definition {
                ParamDef::Value(v) => format!(
                    "param {} = {}",
                    p.name,
                    quantity_text(m, *v, param_dim(ctx, side, i))
                ),
                ParamDef::Expr(e) => format!("param {} = {}", p.name, expr_text(m, e)),
            }
        }
        Sym::Total(i) => {
            let t = &m.totals[i];
            let terms = t
                .terms
                .iter()
                .map(|(s, c)| {
                    if *c == num_traits::One::one() {
                        m.species[*s].name.clone()
                    } else {
                        format!("{c} {}", m.species[*s].name)
                    }
                })
                .collect::<Vec<_>>()
                .join(" + ");
            if t.value_given {
                format!(
                    "total {} = {terms} = {}",
                    t.name,
                    quantity_text(m, t.value, conc)
                )
            } else {
                format!("total {} = {terms}", t.name)
            }
        }
        Sym::Observable(i) => format!(
            "observe {} = {}",
            m.observables[i].name,
            expr_text(m, &m.observables[i].expr)
        ),
    }
}

fn kind_word(sym: Sym) -> &'static str {
    match sym {
        Sym::Species(_) => "species",
        Sym::Fixed(_) => "fixed",
        Sym::Param(_) => "param",
        Sym::Total(_) => "total",
        Sym::Observable(_) => "observe",
    }
}

fn named_changes(ctx: &Context, out: &mut Vec<Change>) {
    let (old, new) = (ctx.old, ctx.new);
    for sym in all_syms(old) {
        match ctx.pairing.named.get(&sym) {
            None => out.push(Change {
                item: item_kind(sym),
                kind: ChangeKind::Removed,
                old_name: Some(old.name_of(sym).to_string()),
                new_name: None,
                old_text: Some(item_text(ctx, Side::Old, sym)),
                new_text: None,
                details: vec![],
            }),
            Some(&paired) => {
                let (on, nn) = (old.name_of(sym), new.name_of(paired));
                let details = named_details(ctx, sym, paired);
                let base = |kind| Change {
                    item: item_kind(sym),
                    kind,
                    old_name: Some(on.to_string()),
                    new_name: Some(nn.to_string()),
                    old_text: Some(item_text(ctx, Side::Old, sym)),
                    new_text: Some(item_text(ctx, Side::New, paired)),
                    details: vec![],
                };
                if on != nn {
                    out.push(base(ChangeKind::Renamed));
                }
                if !details.is_empty() {
                    out.push(Change {
                        details,
                        ..base(ChangeKind::Changed)
                    });
                }
            }
        }
    }
    for sym in all_syms(new) {
        if !ctx.pairing.named_back.contains_key(&sym) {
            out.push(Change {
                item: item_kind(sym),
                kind: ChangeKind::Added,
                old_name: None,
                new_name: Some(new.name_of(sym).to_string()),
                old_text: None,
                new_text: Some(item_text(ctx, Side::New, sym)),
                details: vec![],
            });
        }
    }
}

/// What differs between two paired named items.
fn named_details(ctx: &Context, a: Sym, b: Sym) -> Vec<Detail> {
    let (old, new) = (ctx.old, ctx.new);
    let conc = Some(Dim::CONC);
    let mut d = Vec::new();
    let value_of = |m: &Model, s: Sym| match s {
        Sym::Species(i) => Some(m.species[i].initial),
        Sym::Fixed(i) => Some(m.fixed[i].value),
        _ => None,
    };
    match (a, b) {
        (Sym::Species(i), Sym::Species(k)) => {
            if !ctx.same_value(old.species[i].initial, new.species[k].initial, conc) {
                d.push(Detail {
                    aspect: "initial",
                    old: quantity(old, old.species[i].initial, conc),
                    new: quantity(new, new.species[k].initial, conc),
                });
            }
        }
        (Sym::Fixed(i), Sym::Fixed(k)) => {
            if !ctx.same_value(old.fixed[i].value, new.fixed[k].value, conc) {
                d.push(Detail {
                    aspect: "value",
                    old: quantity(old, old.fixed[i].value, conc),
                    new: quantity(new, new.fixed[k].value, conc),
                });
            }
        }
        (Sym::Param(i), Sym::Param(k)) => {
            let (p, q) = (&old.params[i], &new.params[k]);
            let (dp, dq) = (param_dim(ctx, Side::Old, i), param_dim(ctx, Side::New, k));
            match (&p.definition, &q.definition) {
                (ParamDef::Value(x), ParamDef::Value(y)) => {
                    if !ctx.same_value(*x, *y, dp.or(dq)) {
                        d.push(Detail {
                            aspect: "value",
                            old: quantity(old, *x, dp),
                            new: quantity(new, *y, dq),
                        });
                    }
                    if let (Some(x), Some(y)) = (dp, dq)
                        && x != y
                    {
                        d.push(Detail {
                            aspect: "dimension",
                            old: Shown::Text(x.to_string()),
                            new: Shown::Text(y.to_string()),
                        });
                    }
                }
                _ => {
                    if !ctx.same_param_definition(i, k) {
                        let text = |m: &Model, def: &ParamDef, dim| match def {
                            ParamDef::Value(v) => quantity_text(m, *v, dim),
                            ParamDef::Expr(e) => expr_text(m, e),
                        };
                        d.push(Detail {
                            aspect: "definition",
                            old: Shown::Text(text(old, &p.definition, dp)),
                            new: Shown::Text(text(new, &q.definition, dq)),
                        });
                    }
                    // A derived value can change through its parts; say so here too.
                    if !ctx.same_value(p.value, q.value, dp.or(dq)) {
                        d.push(Detail {
                            aspect: "evaluated",
                            old: quantity(old, p.value, dp),
                            new: quantity(new, q.value, dq),
                        });
                    }
                }
            }
        }
        (Sym::Total(i), Sym::Total(k)) => {
            let (t, u) = (&old.totals[i], &new.totals[k]);
            let terms = |side: Side,
                         tt: &crate::model::Total|
             -> std::collections::BTreeMap<Key, crate::model::Coef> {
                tt.terms
                    .iter()
                    .map(|(s, c)| (ctx.key(side, Sym::Species(*s)), *c))
                    .collect()
            };
            if terms(Side::Old, t) != terms(Side::New, u) {
                let text = |m: &Model, tt: &crate::model::Total| {
                    tt.terms
                        .iter()
                        .map(|(s, c)| {
                            if *c == num_traits::One::one() {
                                m.species[*s].name.clone()
                            } else {
                                format!("{c} {}", m.species[*s].name)
                            }
                        })
                        .collect::<Vec<_>>()
                        .join(" + ")
                };
                d.push(Detail {
                    aspect: "terms",
                    old: Shown::Text(text(old, t)),
                    new: Shown::Text(text(new, u)),
                });
            }
            if (t.value_given || u.value_given)
                && (t.value_given != u.value_given || !ctx.same_value(t.value, u.value, conc))
            {
                let shown = |m: &Model, tt: &crate::model::Total| {
                    if tt.value_given {
                        quantity(m, tt.value, conc)
                    } else {
                        Shown::Absent
                    }
                };
                d.push(Detail {
                    aspect: "value",
                    old: shown(old, t),
                    new: shown(new, u),
                });
            }
        }
        (Sym::Observable(i), Sym::Observable(k)) => {
            if !ctx.same_observable(i, k) {
                d.push(Detail {
                    aspect: "expression",
                    old: Shown::Text(expr_text(old, &old.observables[i].expr)),
                    new: Shown::Text(expr_text(new, &new.observables[k].expr)),
                });
            }
        }
        _ => {
            // The name now stands for another kind of item (a species that
            // became fixed, a param that became a species, ...).
            d.push(Detail {
                aspect: "kind",
                old: Shown::Text(kind_word(a).into()),
                new: Shown::Text(kind_word(b).into()),
            });
            if let (Some(x), Some(y)) = (value_of(old, a), value_of(new, b))
                && !ctx.same_value(x, y, conc)
            {
                d.push(Detail {
                    aspect: "value",
                    old: quantity(old, x, conc),
                    new: quantity(new, y, conc),
                });
            }
        }
    }
    d
}

fn step_changes(ctx: &Context, out: &mut Vec<Change>) {
    let (old, new) = (ctx.old, ctx.new);
    for j in 0..old.steps.len() {
        match ctx.pairing.steps.get(&j) {
            None => out.push(Change {
                item: ItemKind::Step,
                kind: ChangeKind::Removed,
                old_name: Some(old.steps[j].name.clone()),
                new_name: None,
                old_text: Some(step_text(old, j)),
                new_text: None,
                details: vec![],
            }),
            Some(&k) => {
                let (on, nn) = (&old.steps[j].name, &new.steps[k].name);
                let base = |kind| Change {
                    item: ItemKind::Step,
                    kind,
                    old_name: Some(on.clone()),
                    new_name: Some(nn.clone()),
                    old_text: Some(step_text(old, j)),
                    new_text: Some(step_text(new, k)),
                    details: vec![],
                };
                if on != nn {
                    out.push(base(ChangeKind::Renamed));
                }
                let details = step_details(ctx, j, k);
                if !details.is_empty() {
                    out.push(Change {
                        details,
                        ..base(ChangeKind::Changed)
                    });
                }
            }
        }
    }
    for k in 0..new.steps.len() {
        if !ctx.pairing.steps_back.contains_key(&k) {
            out.push(Change {
                item: ItemKind::Step,
                kind: ChangeKind::Added,
                old_name: None,
                new_name: Some(new.steps[k].name.clone()),
                old_text: None,
                new_text: Some(step_text(new, k)),
                details: vec![],
            });
        }
    }
}

fn step_details(ctx: &Context, j: usize, k: usize) -> Vec<Detail> {
    let (old, new) = (ctx.old, ctx.new);
    let (a, b) = (&old.steps[j], &new.steps[k]);
    let mut d = Vec::new();
    let reactants_same =
        ctx.side_keys(Side::Old, &a.reactants) == ctx.side_keys(Side::New, &b.reactants);
    let products_same =
        ctx.side_keys(Side::Old, &a.products) == ctx.side_keys(Side::New, &b.products);
    let swapped = ctx.side_keys(Side::Old, &a.reactants) == ctx.side_keys(Side::New, &b.products)
        && ctx.side_keys(Side::Old, &a.products) == ctx.side_keys(Side::New, &b.reactants);
    if !reactants_same
        && !products_same
        && swapped
        && a.reversible == b.reversible
        && ctx.opposite_rate(j, k)
    {
        // Same dynamics; only the direction in which the net rate counts changed.
        d.push(Detail {
            aspect: "direction",
            old: Shown::Text(reaction_text(old, j)),
            new: Shown::Text(reaction_text(new, k)),
        });
        return d;
    }
    if !reactants_same {
        d.push(Detail {
            aspect: "reactants",
            old: Shown::Text(side_text(old, &a.reactants)),
            new: Shown::Text(side_text(new, &b.reactants)),
        });
    }
    if !products_same {
        d.push(Detail {
            aspect: "products",
            old: Shown::Text(side_text(old, &a.products)),
            new: Shown::Text(side_text(new, &b.products)),
        });
    }
    if a.reversible != b.reversible {
        d.push(Detail {
            aspect: "reversible",
            old: Shown::Flag(a.reversible),
            new: Shown::Flag(b.reversible),
        });
    }
    // With the same sides the net rates compare directly. With other sides a
    // mass-action rate differs by construction, so compare the constants.
    let rate_same = if reactants_same && products_same {
        ctx.same_rate(j, k)
    } else {
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
                let dims = |side: Side, e: &Expr| ctx.expr_dim(side, e);
                ctx.same_expr(fa, fb, (dims(Side::Old, fa), dims(Side::New, fb)))
                    && match (ra, rb) {
                        (Some(x), Some(y)) => {
                            ctx.same_expr(x, y, (dims(Side::Old, x), dims(Side::New, y)))
                        }
                        (None, None) => true,
                        _ => false,
                    }
            }
            _ => ctx.same_rate(j, k),
        }
    };
    if !rate_same {
        d.push(Detail {
            aspect: "rate",
            old: Shown::Text(rate_text(old, &a.rate)),
            new: Shown::Text(rate_text(new, &b.rate)),
        });
    }
    d
}

fn event_kind_word(k: EventKind) -> &'static str {
    match k {
        EventKind::Add => "add",
        EventKind::Remove => "remove",
        EventKind::Set => "set",
    }
}

pub fn event_text(model: &Model, e: &Event) -> String {
    let conc = Some(Dim::CONC);
    let action = match &e.action {
        Action::Species {
            kind,
            species,
            amount,
        } => {
            let name = &model.species[*species].name;
            let amount = quantity_text(model, *amount, conc);
            match kind {
                EventKind::Set => format!("set {name} = {amount}"),
                k => format!("{} {amount} {name}", event_kind_word(*k)),
            }
        }
        Action::Stock { volume, contents } => format!(
            "add {} {} of {}",
            number(*volume),
            model.volume_symbol(),
            contents
                .iter()
                .map(|(sym, c)| format!(
                    "{} {}",
                    quantity_text(model, *c, conc),
                    model.name_of(*sym)
                ))
                .collect::<Vec<_>>()
                .join(", ")
        ),
        Action::Withdraw { volume } => {
            format!("remove {} {}", number(*volume), model.volume_symbol())
        }
    };
    match &e.timing {
        Timing::At(t) => format!("{action} at {}", quantity_text(model, *t, Some(Dim::TIME))),
        Timing::When(trigger) => format!("when {}: {action}", trigger.text),
    }
}

/// A stock's contents as mechanism text (`1000 uM S, 5 uM I`).
fn stock_text(model: &Model, e: &Event) -> String {
    match &e.action {
        Action::Stock { contents, .. } => contents
            .iter()
            .map(|(sym, c)| {
                format!(
                    "{} {}",
                    quantity_text(model, *c, Some(Dim::CONC)),
                    model.name_of(*sym)
                )
            })
            .collect::<Vec<_>>()
            .join(", "),
        Action::Species { .. } | Action::Withdraw { .. } => String::new(),
    }
}

/// What pairs two events across versions: the same action on the same
/// names, at a time or on a condition; and what may differ in a pair.
struct EventView {
    kind: &'static str,
    targets: Vec<Key>,
    /// The amount (concentration) or, for volume changes, the volume (L).
    amount: f64,
    amount_dim: Option<Dim>,
    stock: Vec<f64>,
    time: Option<f64>,
    trigger: Option<String>,
}

fn event_view(ctx: &Context, side: Side, e: &Event) -> EventView {
    let (kind, targets, amount, amount_dim, stock) = match &e.action {
        Action::Species {
            kind,
            species,
            amount,
        } => (
            event_kind_word(*kind),
            vec![ctx.key(side, Sym::Species(*species))],
            *amount,
            Some(Dim::CONC),
            vec![],
        ),
        Action::Stock { volume, contents } => (
            "add stock",
            contents.iter().map(|(s, _)| ctx.key(side, *s)).collect(),
            *volume,
            None,
            contents.iter().map(|(_, c)| *c).collect(),
        ),
        Action::Withdraw { volume } => ("withdraw", vec![], *volume, None, vec![]),
    };
    EventView {
        kind,
        targets,
        amount,
        amount_dim,
        stock,
        time: e.time(),
        trigger: match &e.timing {
            Timing::When(t) => Some(t.text.split_whitespace().collect::<Vec<_>>().join(" ")),
            Timing::At(_) => None,
        },
    }
}

fn event_changes(ctx: &Context, out: &mut Vec<Change>) {
    let (old, new) = (ctx.old, ctx.new);
    let time = Some(Dim::TIME);
    let old_views: Vec<EventView> = old
        .events
        .iter()
        .map(|e| event_view(ctx, Side::Old, e))
        .collect();
    let new_views: Vec<EventView> = new
        .events
        .iter()
        .map(|e| event_view(ctx, Side::New, e))
        .collect();
    let same_time = |a: &EventView, b: &EventView| match (a.time, b.time) {
        (Some(x), Some(y)) => ctx.same_value(x, y, time),
        (None, None) => true,
        _ => false,
    };
    let same_amount = |a: &EventView, b: &EventView| {
        ctx.same_value(a.amount, b.amount, a.amount_dim)
            && a.stock.len() == b.stock.len()
            && a.stock
                .iter()
                .zip(&b.stock)
                .all(|(x, y)| ctx.same_value(*x, *y, Some(Dim::CONC)))
    };
    let mut old_left: Vec<usize> = (0..old.events.len()).collect();
    let mut new_left: Vec<usize> = (0..new.events.len()).collect();
    // Identical events first, then the same event at another amount, then at another time.
    type Fits<'f> = &'f dyn Fn(&EventView, &EventView) -> bool;
    let passes: [Fits; 3] = [
        &|a, b| same_amount(a, b) && same_time(a, b),
        &|a, b| same_time(a, b),
        &|a, b| same_amount(a, b),
    ];
    let amount_shown = |m: &Model, v: &EventView| match v.amount_dim {
        Some(d) => quantity(m, v.amount, Some(d)),
        None => Shown::Text(format!("{} {}", number(v.amount), m.volume_symbol())),
    };
    let mut pairs: Vec<(usize, usize)> = Vec::new();
    for (pass, fits) in passes.iter().enumerate() {
        let mut i = 0;
        while i < old_left.len() {
            let a = &old_views[old_left[i]];
            let found = new_left.iter().position(|&k| {
                let b = &new_views[k];
                a.kind == b.kind && a.targets == b.targets && a.trigger == b.trigger && fits(a, b)
            });
            match found {
                Some(p) => {
                    let k = new_left.remove(p);
                    let (ea, eb) = (&old.events[old_left[i]], &new.events[k]);
                    let b = &new_views[k];
                    pairs.push((old_left[i], k));
                    old_left.remove(i);
                    if pass > 0 {
                        let mut details = Vec::new();
                        if !ctx.same_value(a.amount, b.amount, a.amount_dim) {
                            details.push(Detail {
                                aspect: "amount",
                                old: amount_shown(old, a),
                                new: amount_shown(new, b),
                            });
                        }
                        if !same_amount(a, b) && ctx.same_value(a.amount, b.amount, a.amount_dim) {
                            details.push(Detail {
                                aspect: "stock",
                                old: Shown::Text(stock_text(old, ea)),
                                new: Shown::Text(stock_text(new, eb)),
                            });
                        }
                        if let (Some(x), Some(y)) = (a.time, b.time)
                            && !ctx.same_value(x, y, time)
                        {
                            details.push(Detail {
                                aspect: "time",
                                old: quantity(old, x, time),
                                new: quantity(new, y, time),
                            });
                        }
                        out.push(Change {
                            item: ItemKind::Event,
                            kind: ChangeKind::Changed,
                            old_name: Some(event_text(old, ea)),
                            new_name: Some(event_text(new, eb)),
                            old_text: Some(event_text(old, ea)),
                            new_text: Some(event_text(new, eb)),
                            details,
                        });
                    }
                }
                None => i += 1,
            }
        }
    }
    // Events on one species at one time apply in file order, so swapping
    // two of them (withdraw everything, then add 10) changes the meaning.
    pairs.sort_unstable();
    for (x, &(a1, b1)) in pairs.iter().enumerate() {
        for &(a2, b2) in &pairs[x + 1..] {
            let (e1, e2) = (&old.events[a1], &old.events[a2]);
            let (v1, v2) = (&old_views[a1], &old_views[a2]);
            let overlap = v1.targets.iter().any(|t| v2.targets.contains(t))
                || v1.amount_dim.is_none()
                || v2.amount_dim.is_none();
            let same_moment = v1.time.is_some()
                && v1.time == v2.time
                && overlap
                && same_time(&new_views[b1], &new_views[b2]);
            if same_moment && b2 < b1 {
                let order = |m: &Model, first: &Event, second: &Event| {
                    format!("{}, then {}", event_text(m, first), event_text(m, second))
                };
                out.push(Change {
                    item: ItemKind::Event,
                    kind: ChangeKind::Changed,
                    old_name: Some(event_text(old, e1)),
                    new_name: Some(event_text(new, &new.events[b1])),
                    old_text: Some(event_text(old, e1)),
                    new_text: Some(event_text(new, &new.events[b1])),
                    details: vec![Detail {
                        aspect: "order",
                        old: super::Shown::Text(order(old, e1, e2)),
                        new: super::Shown::Text(order(new, &new.events[b2], &new.events[b1])),
                    }],
                });
            }
        }
    }
    for i in old_left {
        let t = event_text(old, &old.events[i]);
        out.push(Change {
            item: ItemKind::Event,
            kind: ChangeKind::Removed,
            old_name: Some(t.clone()),
            new_name: None,
            old_text: Some(t),
            new_text: None,
            details: vec![],
        });
    }
    for k in new_left {
        let t = event_text(new, &new.events[k]);
        out.push(Change {
            item: ItemKind::Event,
            kind: ChangeKind::Added,
            old_name: None,
            new_name: Some(t.clone()),
            old_text: None,
            new_text: Some(t),
            details: vec![],
        });
    }
}

fn assumption_changes(ctx: &Context, out: &mut Vec<Change>) {
    let (old, new) = (ctx.old, ctx.new);
    let mut details = Vec::new();
    let steady = |side: Side, m: &Model| -> std::collections::BTreeSet<Key> {
        m.assumptions
            .steady
            .iter()
            .map(|(i, _)| ctx.key(side, Sym::Species(*i)))
            .collect()
    };
    if steady(Side::Old, old) != steady(Side::New, new) {
        let names = |m: &Model| {
            Shown::Names(
                m.assumptions
                    .steady
                    .iter()
                    .map(|(i, _)| m.species[*i].name.clone())
                    .collect(),
            )
        };
        details.push(Detail {
            aspect: "steady",
            old: names(old),
            new: names(new),
        });
    }
    // Steps are identified through the step pairing.
    let eq_old: std::collections::BTreeSet<Option<usize>> = old
        .assumptions
        .equilibrium
        .iter()
        .map(|(j, _)| ctx.pairing.steps.get(j).copied())
        .collect();
    let eq_new: std::collections::BTreeSet<Option<usize>> = new
        .assumptions
        .equilibrium
        .iter()
        .map(|(k, _)| Some(*k))
        .collect();
    if eq_old != eq_new || eq_old.contains(&None) {
        let names = |m: &Model| {
            Shown::Names(
                m.assumptions
                    .equilibrium
                    .iter()
                    .map(|(j, _)| m.steps[*j].name.clone())
                    .collect(),
            )
        };
        details.push(Detail {
            aspect: "equilibrium",
            old: names(old),
            new: names(new),
        });
    }
    if !details.is_empty() {
        let text = |m: &Model| {
            let mut parts = Vec::new();
            if !m.assumptions.steady.is_empty() {
                parts.push(format!(
                    "assume steady {}",
                    m.assumptions
                        .steady
                        .iter()
                        .map(|(i, _)| m.species[*i].name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ));
            }
            if !m.assumptions.equilibrium.is_empty() {
                parts.push(format!(
                    "assume equilibrium {}",
                    m.assumptions
                        .equilibrium
                        .iter()
                        .map(|(j, _)| m.steps[*j].name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ));
            }
            if parts.is_empty() {
                None
            } else {
                Some(parts.join("; "))
            }
        };
        out.push(Change {
            item: ItemKind::Assumption,
            kind: ChangeKind::Changed,
            old_name: Some("assume".into()),
            new_name: Some("assume".into()),
            old_text: text(old),
            new_text: text(new),
            details,
        });
    }
}

/// The mixture's volume (compared in litres) and the assay temperature.
fn condition_changes(ctx: &Context, out: &mut Vec<Change>) {
    let (old, new) = (ctx.old, ctx.new);
    // (what, old value, new value, old unit, new unit): read once, below.
    #[allow(clippy::type_complexity)]
    let conditions: [(&str, Option<f64>, Option<f64>, &str, &str); 2] = [
        (
            "volume",
            old.volume_litres(),
            new.volume_litres(),
            old.volume_symbol(),
            new.volume_symbol(),
        ),
        ("temperature", old.temperature, new.temperature, "K", "K"),
    ];
    for (aspect, a, b, unit_a, unit_b) in conditions {
        let same = match (a, b) {
            (Some(x), Some(y)) => ctx.same_value(x, y, None),
            (None, None) => true,
            _ => false,
        };
        if same {
            continue;
        }
        let shown = |m: &Model, v: Option<f64>, unit: &str| {
            let v = v.map(|v| {
                if aspect == "volume" {
                    v / m.volume_unit.as_ref().map(|u| u.1).unwrap_or(1.0)
                } else {
                    v
                }
            });
            match v {
                Some(v) => format!("{aspect} {} {unit}", number(v)),
                None => format!("no {aspect}"),
            }
        };
        let (ta, tb) = (shown(old, a, unit_a), shown(new, b, unit_b));
        out.push(Change {
            item: ItemKind::Condition,
            kind: match (a, b) {
                (None, Some(_)) => ChangeKind::Added,
                (Some(_), None) => ChangeKind::Removed,
                _ => ChangeKind::Changed,
            },
            old_name: Some(aspect.to_string()),
            new_name: Some(aspect.to_string()),
            old_text: Some(ta.clone()),
            new_text: Some(tb.clone()),
            details: vec![Detail {
                aspect,
                old: Shown::Text(ta),
                new: Shown::Text(tb),
            }],
        });
    }
}
