//! Named kinetic constants read off the coefficient form.
//!
//! With the rate written `E_t * N / D` and N, D collected by concentrations,
//! the constants practitioners fit are ratios of coefficients (Cleland
//! 1963): with the products and modifiers absent and the substrates'
//! saturating monomial `m*`, `kcat = n(m*) / d(m*)`; the Michaelis constant
//! of substrate X is `d(m*/X) / d(m*)`; for two substrates the first one's
//! inhibition constant is `d(1) / d(A)`; the reverse direction likewise; a
//! dead-end modifier I has a competitive (slope) constant `d(1) / d(I)` and
//! an uncompetitive (intercept) constant `d(m*) / d(m* I)`; `Keq` is the
//! ratio of the numerator's two coefficients. Each is kept exact and in
//! lowest terms, so it prints in rate constants.
//!
//! Invariant: a constant is named only when the terms that define it are
//! present; otherwise a note says why it is missing.

use super::{Constant, Derivation, Derived, Relation};
use crate::algebra::poly::{Monomial, Poly, Var};
use crate::algebra::rational::RationalFunction;
use crate::model::Model;
use std::collections::BTreeMap;

/// Fills in the derivation's constants, relations and notes.
pub fn name_constants(d: &mut Derivation, model: &Model) {
    let Derived::Overall(overall) = &d.derived else {
        return;
    };
    let overall = overall.clone();
    if d.totals.len() != 1 {
        d.notes.push("kinetic constants are named only for a mechanism with one enzyme (one total of intermediates)".into());
        return;
    }
    let Some(tvar) = d.vars.get(&d.totals[0].name) else {
        return;
    };
    let t_mono = Monomial::var(tvar);
    let Some(num) = d
        .rate
        .num
        .div_monomial(&t_mono)
        .filter(|n| n.degree_in(tvar) == 0 && d.rate.den.degree_in(tvar) == 0)
    else {
        d.notes.push(format!(
            "the rate is not proportional to {}, so no kinetic constants are named (is there a step that bypasses the enzyme?)",
            d.totals[0].name
        ));
        return;
    };
    let den = d.rate.den.clone();
    let var_of = |i: usize| d.vars.get(&model.species[i].name);
    let first_step = |i: usize| {
        model
            .steps
            .iter()
            .position(|s| {
                s.reactants
                    .iter()
                    .chain(&s.products)
                    .any(|t| t.sym == crate::model::Sym::Species(i))
            })
            .unwrap_or(usize::MAX)
    };
    let last_step = |i: usize| {
        model
            .steps
            .iter()
            .rposition(|s| {
                s.reactants
                    .iter()
                    .chain(&s.products)
                    .any(|t| t.sym == crate::model::Sym::Species(i))
            })
            .unwrap_or(0)
    };
    let mut substrates: Vec<(Var, String, usize)> = overall
        .reactants
        .iter()
        .filter_map(|(i, _)| {
            var_of(*i).map(|v| (v, model.species[*i].name.clone(), first_step(*i)))
        })
        .collect();
    substrates.sort_by_key(|s| s.2);
    // Reverse direction: the product released last binds free enzyme first.
    let mut products: Vec<(Var, String, usize)> = overall
        .products
        .iter()
        .filter_map(|(i, _)| {
            var_of(*i).map(|v| {
                (
                    v,
                    model.species[*i].name.clone(),
                    usize::MAX - last_step(*i),
                )
            })
        })
        .collect();
    products.sort_by_key(|s| s.2);
    let in_reaction: Vec<Var> = substrates.iter().chain(&products).map(|s| s.0).collect();
    let mut modifiers: Vec<Var> = num
        .vars()
        .union(&den.vars())
        .copied()
        .filter(|v| d.is_concentration(*v) && !in_reaction.contains(v))
        .collect();
    modifiers.sort_unstable();
    let conc = |v: Var| d.is_concentration(v);

    let mut constants: Vec<Constant> = Vec::new();
    let mut relations: Vec<Relation> = Vec::new();
    let mut notes: Vec<String> = Vec::new();
    let ratio = |a: &Poly, b: &Poly| RationalFunction::new(a.clone(), b.clone());

    let mut directions = Vec::new();
    for (forward, side, other) in [
        (true, &substrates, &products),
        (false, &products, &substrates),
    ] {
        let absent: Vec<Var> = other
            .iter()
            .map(|s| s.0)
            .chain(modifiers.iter().copied())
            .collect();
        let zero = |v: Var| absent.contains(&v);
        let n = num.set_zero(&zero);
        let n = if forward { n } else { n.neg() };
        let nc = n.collect(&conc);
        let dc = den.set_zero(&zero).collect(&conc);
        let dir = Direction::read(&nc, &dc, side);
        let (kcat_name, label) = if forward {
            ("kcat", "forward")
        } else {
            ("kcat_r", "reverse")
        };
        let side_names = side
            .iter()
            .map(|s| s.1.as_str())
            .collect::<Vec<_>>()
            .join(", ");
        match &dir {
            None if forward || !nc.is_empty() => match saturating_limit(&nc, &dc) {
                // A law of higher degree (two sites, squared terms of a
                // random steady state): the limit at saturation is still a
                // turnover number, but no Michaelis constant goes with it.
                Some(k) => constants.push(Constant {
                    name: kcat_name.into(),
                    value: k,
                    meaning: format!(
                        "{label} turnover number: the limit of the {label} rate per unit of {} as {side_names} grow without bound (the law is of higher degree: half-saturation and Hill number below, no Michaelis constant)",
                        d.totals[0].name
                    ),
                }),
                None => notes.push(format!(
                    "no {label} turnover number: the {label} rate has no finite limit, or one that depends on the ratio of {side_names}, as they grow without bound"
                )),
            },
            None => {}
            Some(dir) => {
                let inhibiting: Vec<&str> = side
                    .iter()
                    .filter(|(v, _, _)| {
                        dir.den.keys().map(|m| m.exponent(*v)).max() > Some(dir.top.exponent(*v))
                    })
                    .map(|s| s.1.as_str())
                    .collect();
                let meaning = if inhibiting.is_empty() {
                    format!("{label} turnover number: maximal {label} rate per unit of {}", d.totals[0].name)
                } else {
                    format!(
                        "{label} turnover number of the saturating term, per unit of {}; the rate never reaches it, since {} inhibits at high concentration",
                        d.totals[0].name,
                        inhibiting.join(", ")
                    )
                };
                if let Some(k) = ratio(&dir.n, &dir.d(&dir.top)) {
                    constants.push(Constant {
                        name: kcat_name.into(),
                        value: k,
                        meaning,
                    });
                }
                for (v, name, _) in side.iter() {
                    if dir.top.exponent(*v) != 1 {
                        continue;
                    }
                    let below = dir.top.div(&Monomial::var(*v)).unwrap_or_default();
                    if let Some(k) = dir.get(&below).and_then(|b| ratio(b, &dir.d(&dir.top))) {
                        constants.push(Constant {
                            name: format!("Km_{name}"),
                            value: k,
                            meaning: format!("Michaelis constant of {name} (others saturating)"),
                        });
                    }
                    let above = dir.top.mul(&Monomial::var(*v));
                    if let Some(k) = dir.get(&above).and_then(|a| ratio(&dir.d(&dir.top), a)) {
                        constants.push(Constant {
                            name: format!("Ksi_{name}"),
                            value: k,
                            meaning: format!("substrate-inhibition constant of {name}"),
                        });
                    } else {
                        // Dead-end binding of the substrate to a free form
                        // (ping-pong: Ka·B·(1 + B/Ksi) in the denominator,
                        // Segel 1975): Ksi from the B and B² terms.
                        let single = Monomial::var(*v);
                        let square = single.mul(&Monomial::var(*v));
                        // Only where B² stands alone: a steady-state random
                        // mechanism has B² with other species too, and its
                        // squared terms are no inhibition constant.
                        let only_alone = dir.den.iter().all(|(m, p)| {
                            p.is_zero() || m.exponent(*v) < 2 || *m == square
                        });
                        if let (true, Some(b), Some(b2)) =
                            (only_alone, dir.get(&single), dir.get(&square))
                            && let Some(k) = ratio(b, b2)
                        {
                            constants.push(Constant {
                                name: format!("Ksi_{name}"),
                                value: k,
                                meaning: format!(
                                    "substrate-inhibition constant of {name} (dead-end binding, from its first- and second-power terms)"
                                ),
                            });
                        }
                    }
                }
                let sequential = dir.get(&Monomial::one()).is_some();
                if side.len() >= 2 && dir.top.degree() == side.len() as u32 && sequential {
                    // Every species but the last to bind: d(m)/d(m·X) with m
                    // the product of those bound before it (Cleland's Kia,
                    // Kib, ... of sequential mechanisms).
                    let mut before = Monomial::one();
                    for (k, (x, name, _)) in side[..side.len() - 1].iter().enumerate() {
                        let with_x = before.mul(&Monomial::var(*x));
                        if let (Some(d_before), Some(d_with)) = (dir.get(&before), dir.get(&with_x))
                            && let Some(value) = ratio(d_before, d_with) {
                                let meaning = if k == 0 {
                                    format!("inhibition (dissociation) constant of {name}, the first to bind, from the constant term")
                                } else {
                                    let order = ["second", "third", "fourth"]
                                        .get(k - 1)
                                        .copied()
                                        .unwrap_or("next");
                                    format!("inhibition (dissociation) constant of {name}, the {order} to bind, from the terms without and with it")
                                };
                                constants.push(Constant {
                                    name: format!("Ki_{name}"),
                                    value,
                                    meaning,
                                });
                            }
                        before = with_x;
                    }
                } else if side.len() == 2 && dir.top.degree() == 2 {
                    // No constant term: a ping-pong (double-displacement)
                    // pattern. The first to bind meets the other side's
                    // species x that leaves the same enzyme form in the
                    // terms x and a·x of the full denominator, whose ratio
                    // is a's dissociation constant (Cleland's Kia, Kiq).
                    let (a, name) = (side[0].0, &side[0].1);
                    let full = den.collect(&conc);
                    let get = |m: &Monomial| full.get(m).filter(|p| !p.is_zero());
                    let found = other.iter().find_map(|(x, _, _)| {
                        let dx = get(&Monomial::var(*x))?;
                        let dax = get(&Monomial::var(*x).mul(&Monomial::var(a)))?;
                        ratio(dx, dax)
                    });
                    if let Some(k) = found {
                        constants.push(Constant {
                            name: format!("Ki_{name}"),
                            value: k,
                            meaning: format!("inhibition (dissociation) constant of {name}, the first to bind, from the cross term with a species of the other side (ping-pong)"),
                        });
                    }
                }
            }
        }
        directions.push(dir);
    }

    // Keq and the Haldane relation.
    if let (Some(f), Some(r)) = (&directions[0], &directions[1])
        && let Some(keq) = ratio(&f.n, &r.n)
    {
        constants.push(Constant {
            name: "Keq".into(),
            value: keq.clone(),
            meaning: "equilibrium constant of the overall reaction (products over substrates)"
                .into(),
        });
        let find = |name: &str| {
            constants
                .iter()
                .find(|c| c.name == name)
                .map(|c| c.value.clone())
        };
        // K_S of the relation: Km of a single substrate; for several,
        // the Ki of each but the last to bind times the last one's Km
        // (Ki_A*Km_B, Ki_A*Ki_B*Km_C).
        let k_side = |side: &[(Var, String, usize)]| -> Option<(String, RationalFunction)> {
            let ((_, last, _), rest) = side.split_last()?;
            let mut names = Vec::new();
            let mut value = RationalFunction::one();
            for (_, x, _) in rest {
                names.push(format!("Ki_{x}"));
                value = value.mul(&find(&format!("Ki_{x}"))?);
            }
            names.push(format!("Km_{last}"));
            value = value.mul(&find(&format!("Km_{last}"))?);
            Some((names.join("*"), value))
        };
        // Ping-pong: no constant term, so no Ki_A·Km_B product; the
        // relation over the four Michaelis constants holds instead
        // (common practice, the ping-pong bi bi Haldane relation).
        let ping_pong = substrates.len() == 2
            && products.len() == 2
            && den
                .collect(&conc)
                .get(&Monomial::one())
                .is_none_or(Poly::is_zero);
        let km_product = |side: &[(Var, String, usize)]| -> Option<(String, RationalFunction)> {
            let [(_, a, _), (_, b, _)] = side else {
                return None;
            };
            let v = find(&format!("Km_{a}"))?.mul(&find(&format!("Km_{b}"))?);
            Some((format!("Km_{a}*Km_{b}"), v))
        };
        if ping_pong {
            if let (Some((ks, ks_v)), Some((kp, kp_v)), Some(kf), Some(kr)) = (
                km_product(&substrates),
                km_product(&products),
                find("kcat"),
                find("kcat_r"),
            ) {
                let ratio_v = kf.div(&kr);
                let rhs = ratio_v
                    .as_ref()
                    .map(|q| q.mul(q).mul(&kp_v))
                    .and_then(|top| top.div(&ks_v));
                let holds = rhs.is_some_and(|r| r.equals(&keq));
                relations.push(Relation {
                    name: "Haldane".into(),
                    lhs: "Keq".into(),
                    rhs: format!("(kcat/kcat_r)^2*{kp}/({ks})"),
                    holds,
                });
            }
        } else if let (Some((ks, ks_v)), Some((kp, kp_v)), Some(kf), Some(kr)) = (
            k_side(&substrates),
            k_side(&products),
            find("kcat"),
            find("kcat_r"),
        ) {
            let rhs = kf.mul(&kp_v).div(&kr.mul(&ks_v));
            let holds = rhs.is_some_and(|r| r.equals(&keq));
            relations.push(Relation {
                name: "Haldane".into(),
                lhs: "Keq".into(),
                rhs: format!("kcat*{kp}/(kcat_r*{ks})"),
                holds,
            });
        }
    }

    // Product inhibition constants (Cleland 1963): a species X of the other
    // side that multiplies a direction's saturating term (A·B·P of an
    // ordered bi bi, A·P of a uni bi) has Ki_X = d(top) / d(top·X), the
    // constant of its inhibition with that direction's substrates
    // saturating (Kip, Kib). Where Ki_X is already named for another term,
    // or both directions are uni (iso uni uni), the constant is an iso
    // inhibition constant Kii_X (Kiip, Kiiq): X binds a form the free
    // enzyme isomerizes to.
    let uni_uni = substrates.len() == 1 && products.len() == 1;
    let full = den
        .set_zero(&|v: Var| modifiers.contains(&v))
        .collect(&conc);
    let full_get = |m: &Monomial| full.get(m).filter(|p| !p.is_zero());
    for (dir, other) in [(&directions[0], &products), (&directions[1], &substrates)] {
        let Some(dir) = dir else { continue };
        for (x, name, _) in other.iter() {
            let with_x = dir.top.mul(&Monomial::var(*x));
            let (Some(top), Some(top_x)) = (full_get(&dir.top), full_get(&with_x)) else {
                continue;
            };
            let Some(value) = ratio(top, top_x) else {
                continue;
            };
            let ki = format!("Ki_{name}");
            let existing = constants.iter().find(|c| c.name == ki);
            if existing.is_some_and(|c| c.value.equals(&value)) {
                continue;
            }
            let (constant_name, meaning) = if uni_uni || existing.is_some() {
                (
                    format!("Kii_{name}"),
                    format!(
                        "iso inhibition constant of {name}: from the other direction's saturating term with and without {name} (it binds a form the free enzyme isomerizes to)"
                    ),
                )
            } else {
                (
                    ki,
                    format!(
                        "product inhibition constant of {name}: from the other direction's saturating term with and without {name} (the other direction's substrates saturating)"
                    ),
                )
            };
            if constants.iter().all(|c| c.name != constant_name) {
                constants.push(Constant {
                    name: constant_name,
                    value,
                    meaning,
                });
            }
        }
    }

    // Dead-end modifiers (inhibitors): slope and intercept constants.
    if let Some(f) = &directions[0] {
        for &i in &modifiers {
            let name = d.vars.name(i).to_string();
            let absent: Vec<Var> = products
                .iter()
                .map(|s| s.0)
                .chain(modifiers.iter().copied().filter(|&m| m != i))
                .collect();
            let zero = |v: Var| absent.contains(&v);
            let dc = den.set_zero(&zero).collect(&conc);
            let nc = num.set_zero(&zero).collect(&conc);
            let get = |m: &Monomial| dc.get(m).filter(|p| !p.is_zero());
            let mut named = false;
            if let (Some(d1), Some(di)) = (get(&Monomial::one()), get(&Monomial::var(i)))
                && let Some(k) = ratio(d1, di)
            {
                constants.push(Constant {
                    name: format!("Ki_{name}"),
                    value: k,
                    meaning: format!("competitive (slope) inhibition constant of {name}"),
                });
                named = true;
            }
            let top_i = f.top.mul(&Monomial::var(i));
            if let (Some(dt), Some(dti)) = (get(&f.top), get(&top_i))
                && let Some(k) = ratio(dt, dti)
            {
                constants.push(Constant {
                    name: format!("Kii_{name}"),
                    value: k,
                    meaning: format!("uncompetitive (intercept) inhibition constant of {name}"),
                });
                named = true;
            }
            if !named {
                // A dead-end inhibitor that binds one form other than the
                // free enzyme or the form of the top term (I on EA of an
                // ordered bi bi: Kb·A·(1 + I/Ki), Segel 1975): every term
                // it multiplies does so by the same I/Ki.
                let mut ratios = dc
                    .iter()
                    .filter(|(m, p)| !p.is_zero() && m.exponent(i) == 0)
                    .filter_map(|(m, p)| {
                        get(&m.mul(&Monomial::var(i))).and_then(|pi| ratio(p, pi))
                    });
                if let Some(first) = ratios.next()
                    && ratios.all(|r| r.equals(&first))
                {
                    constants.push(Constant {
                        name: format!("Ki_{name}"),
                        value: first,
                        meaning: format!(
                            "dissociation constant of {name} from the enzyme form it binds (every term it multiplies gains the factor {name}/Ki_{name})"
                        ),
                    });
                    named = true;
                }
            }
            if nc.keys().any(|m| m.exponent(i) > 0) {
                notes.push(format!("{name} also appears in the numerator (partial inhibition or activation); its constants describe the denominator only"));
            } else if !named {
                notes.push(format!(
                    "{name} enters the rate in a way that has no standard inhibition constant"
                ));
            }
        }
    }
    d.constants = constants;
    d.relations = relations;
    d.notes.extend(notes);
}

/// The limit of `N / D` as every concentration grows by one factor: the
/// ratio of their highest-degree parts, where that ratio holds no
/// concentration.
fn saturating_limit(
    nc: &BTreeMap<Monomial, Poly>,
    dc: &BTreeMap<Monomial, Poly>,
) -> Option<RationalFunction> {
    let top = |map: &BTreeMap<Monomial, Poly>| -> Vec<(Monomial, Poly)> {
        let live: Vec<(&Monomial, &Poly)> = map.iter().filter(|(_, p)| !p.is_zero()).collect();
        let degree = live.iter().map(|(m, _)| m.degree()).max().unwrap_or(0);
        live.into_iter()
            .filter(|(m, _)| m.degree() == degree)
            .map(|(m, p)| (m.clone(), p.clone()))
            .collect()
    };
    let (n, d) = (top(nc), top(dc));
    if n.is_empty() || n.len() != d.len() || n[0].0.degree() != d[0].0.degree() {
        return None;
    }
    let (first_m, first_n) = &n[0];
    let first_d = d.iter().find(|(m, _)| m == first_m)?.1.clone();
    let k = RationalFunction::new(first_n.clone(), first_d)?;
    let all_same = n.iter().all(|(m, pn)| {
        d.iter()
            .find(|(md, _)| md == m)
            .is_some_and(|(_, pd)| RationalFunction::raw(pn.clone(), pd.clone()).equals(&k))
    });
    all_same.then_some(k)
}

/// One direction's coefficient form: the numerator's single saturating
/// monomial `top` with its coefficient `n`, and the denominator's
/// coefficients by concentration monomial.
struct Direction {
    top: Monomial,
    n: Poly,
    den: BTreeMap<Monomial, Poly>,
}

impl Direction {
    fn read(
        nc: &BTreeMap<Monomial, Poly>,
        dc: &BTreeMap<Monomial, Poly>,
        side: &[(Var, String, usize)],
    ) -> Option<Direction> {
        let mut it = nc.iter().filter(|(_, p)| !p.is_zero());
        let (top, n) = it.next()?;
        if it.next().is_some() || top.is_one() {
            return None;
        }
        // The numerator's monomial must be made of this direction's species.
        if !top
            .pairs()
            .iter()
            .all(|(v, _)| side.iter().any(|s| s.0 == *v))
        {
            return None;
        }
        if !dc.contains_key(top) {
            return None;
        }
        Some(Direction {
            top: top.clone(),
            n: n.clone(),
            den: dc.clone(),
        })
    }
    fn get(&self, m: &Monomial) -> Option<&Poly> {
        self.den.get(m).filter(|p| !p.is_zero())
    }
    fn d(&self, m: &Monomial) -> Poly {
        self.den.get(m).cloned().unwrap_or_default()
    }
}
