//! From the Model to the derived rate: checks the assumptions, builds the
//! graph of forms (lumping rapid equilibria), sums spanning trees, and
//! writes the requested flux with the forms' totals.

use super::trees::{FormGraph, expanded_term_count, tree_sums};
use super::{
    Derivation, Derived, FormTotal, Overall, Progress, Request, Target, VarKind, constants,
    unknown_name,
};
use super::{constants_form, patterns, saturation};
use crate::algebra::poly::{Monomial, Poly, Var, Vars};
use crate::algebra::rational::{RationalFunction, rational_from_f64};
use crate::diagnostics::{Code, Diagnostic, Span};
use crate::model::{BinOp, Expr, Model, Rate, Sym};
use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};
use std::collections::BTreeMap;

/// One step seen from the forms: at most one form on each side.
struct StepView {
    left: Option<usize>,
    right: Option<usize>,
    /// Forward pseudo-first-order rate: constant times the other reactants.
    forward: RationalFunction,
    /// Reverse, for a reversible mass-action step.
    reverse: Option<RationalFunction>,
    /// An explicit law (only on steps without forms).
    law: Option<RationalFunction>,
}

struct Context<'a> {
    model: &'a Model,
    vars: Vars,
    kinds: Vec<VarKind>,
    /// Variable of each param / fixed / species (None for intermediates).
    param_var: Vec<Var>,
    fixed_var: Vec<Var>,
    species_var: Vec<Option<Var>>,
    is_form: Vec<bool>,
}

pub fn derive_with_progress(
    model: &Model,
    request: &Request,
    progress: &mut dyn FnMut(Progress),
) -> Result<Derivation, Diagnostic> {
    let steady = resolve_steady(model, request)?;
    let equilibrium = resolve_equilibrium(model, request)?;
    let mut cx = Context::new(model, &steady);
    let views: Vec<StepView> = (0..model.steps.len())
        .map(|j| cx.view(j))
        .collect::<Result<_, _>>()?;
    for &j in &equilibrium {
        check_fast_step(model, j, &views[j])?;
    }

    // Connected sets of forms (each conserves its total) and rapid-equilibrium lumps.
    let n_species = model.species.len();
    let mut component = UnionFind::new(n_species);
    let mut lump = UnionFind::new(n_species);
    for (j, v) in views.iter().enumerate() {
        if let (Some(a), Some(b)) = (v.left, v.right) {
            component.union(a, b);
            if equilibrium.contains(&j) {
                lump.union(a, b);
            }
        }
    }
    let mut notes = Vec::new();
    let mut groups: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for &f in &steady {
        groups.entry(component.find(f)).or_default().push(f);
    }
    let mut totals: Vec<FormTotal> = Vec::new();
    // Each form as `num / (share_den * Q[component])`; Q is stored once.
    let mut form_conc: BTreeMap<usize, FormConc> = BTreeMap::new();
    let mut qs: Vec<Poly> = Vec::new();
    let mut trees_visited = 0;

    // The work bound for all components, checked before any expansion.
    let mut plans = Vec::new();
    for forms in groups.values() {
        plans.push(plan_component(
            &cx,
            forms,
            &views,
            &equilibrium,
            &mut lump,
            &mut notes,
        )?);
    }
    let estimate: f64 = plans.iter().map(|p| expanded_term_count(&p.graph)).sum();
    if estimate > request.max_terms as f64 {
        return Err(Diagnostic::error(
            Code::ExpressionTooLarge,
            format!(
                "the steady-state expression would need about {} spanning-tree terms, more than the limit of {}",
                format_count(estimate),
                request.max_terms
            ),
        )
        .with_help(format!(
            "raise the limit with --max-terms {} (time and memory grow with it), or lump fast steps with --equilibrium",
            (estimate.ceil() as u64).saturating_add(1)
        )));
    }
    progress(Progress::Start {
        estimated_trees: estimate,
    });

    for (forms, plan) in groups.values().zip(&plans) {
        let (sums, visited) = tree_sums(&plan.graph, cx.vars.len(), &mut |n| {
            progress(Progress::Trees(trees_visited + n))
        });
        trees_visited += visited;
        // Share of each lump: its out-edge scale times its tree sum.
        let weights: Vec<Poly> = sums
            .into_iter()
            .zip(&plan.scale)
            .map(|(t, c)| if c.is_one() { t } else { t.mul(c) })
            .collect();
        let mut q = Poly::zero();
        for w in &weights {
            q.add_assign_poly(w);
        }
        if q.is_zero() {
            let names: Vec<&str> = forms
                .iter()
                .map(|&f| model.species[f].name.as_str())
                .collect();
            return Err(Diagnostic::error(
                Code::NonlinearSteadyState,
                format!("the forms {} have no unique steady state: no form can be reached from all the others", names.join(", ")),
            )
            .with_help("check the direction of irreversible steps among these forms"));
        }
        let total_index = totals.len();
        let total = name_total(model, forms, &totals);
        let tvar = cx.vars.intern(&total.name);
        cx.kinds.push(VarKind::Total(total_index));
        totals.push(total);
        let tpoly = Poly::var(tvar);
        for &f in forms {
            let g = plan.lump_of[&f];
            let share = &plan.share[&f];
            let num = tpoly.mul(&share.num).mul(&weights[g]);
            form_conc.insert(
                f,
                FormConc {
                    num,
                    den: share.den.clone(),
                    component: qs.len(),
                },
            );
        }
        drop(weights);
        qs.push(q);
    }

    // The species whose rate is asked for, with its weights on the slow
    // steps; then net rates only of the steps the requested rate needs.
    let overall = match &request.target {
        Target::Overall => Some(overall_reaction(model, &cx.is_form)?),
        _ => None,
    };
    let read_from: Option<(usize, BigRational)> = match (&request.target, &overall) {
        (Target::Flux(_), _) => None,
        (Target::Species(name), _) => Some((
            species_asked_for(model, name, &cx.is_form)?,
            BigRational::one(),
        )),
        (Target::Overall, Some(o)) => Some(
            o.products
                .first()
                .map(|(i, c)| (*i, BigRational::from_integer(c.clone())))
                .or_else(|| {
                    o.reactants
                        .first()
                        .map(|(i, c)| (*i, -BigRational::from_integer(c.clone())))
                })
                .ok_or_else(|| no_overall(model))?,
        ),
        (Target::Overall, None) => unreachable!("the overall reaction is found above"),
    };
    let weights: Option<Vec<BigRational>> = match read_from {
        None => None,
        Some((i, _)) => Some(slow_step_weights(model, i, &cx.is_form, &equilibrium).ok_or_else(|| {
            Diagnostic::error(
                Code::BadDerivationRequest,
                format!(
                    "the rate of `{}` cannot be read from the slow steps: a rapid-equilibrium step changes it with no intermediate to balance it",
                    model.species[i].name
                ),
            )
            .with_help("leave that step out of `assume equilibrium`, or ask for another species with --species")
        })?),
    };
    let needed: Vec<bool> = match (&request.target, &weights) {
        (Target::Flux(name), _) => model.steps.iter().map(|s| &s.name == name).collect(),
        (_, Some(w)) => w.iter().map(|c| !c.is_zero()).collect(),
        (_, None) => vec![false; model.steps.len()],
    };
    let rates: Vec<Part> = views
        .iter()
        .zip(&needed)
        .map(|(v, need)| {
            if *need {
                step_net_rate(v, &form_conc)
            } else {
                Part::zero()
            }
        })
        .collect();
    let (derived, rate) = match &request.target {
        Target::Flux(name) => {
            let j = model.step_index(name).ok_or_else(|| {
                unknown_name(
                    "step",
                    name,
                    &model
                        .steps
                        .iter()
                        .map(|s| s.name.clone())
                        .collect::<Vec<_>>(),
                )
            })?;
            (Derived::Flux(j), sum_parts(vec![rates[j].clone()], &qs))
        }
        Target::Species(_) | Target::Overall => {
            let (i, nu) = read_from.expect("a species rate has the species it is read from");
            let rate = species_rate(
                weights
                    .as_deref()
                    .expect("weights exist for a species rate"),
                &rates,
                &nu,
                &qs,
            );
            match overall {
                Some(o) => (Derived::Overall(o), rate),
                None => (Derived::Species(i), rate),
            }
        }
    };
    let (rate, fully_cancelled) =
        RationalFunction::cancelled(rate.num, rate.den).ok_or_else(|| {
            Diagnostic::error(
                Code::NonlinearSteadyState,
                "the steady-state denominator vanishes identically",
            )
        })?;
    if !fully_cancelled {
        notes.push(
            "numerator and denominator may share a common factor: their polynomial gcd was too costly to compute, so only constant and monomial factors were cancelled".into(),
        );
    }

    // The forms' own expressions are kept only while they are small: each
    // would hold its own copy of the denominator.
    let small = qs.iter().map(Poly::len).sum::<usize>() <= FORM_EXPRESSION_LIMIT;
    if !small {
        notes.push("the intermediates' expressions are omitted (the denominator is large)".into());
    }
    let forms: Vec<(usize, RationalFunction)> = if small {
        steady
            .iter()
            .filter_map(|f| {
                form_conc.get(f).map(|c| {
                    (
                        *f,
                        RationalFunction::raw(c.num.clone(), c.den.mul(&qs[c.component])),
                    )
                })
            })
            .collect()
    } else {
        Vec::new()
    };
    let mut derivation = Derivation {
        vars: cx.vars,
        kinds: cx.kinds,
        steady,
        equilibrium,
        totals,
        derived,
        rate,
        forms,
        constants: Vec::new(),
        constants_form: None,
        inhibition_patterns: Vec::new(),
        half_saturation: Vec::new(),
        relations: Vec::new(),
        notes,
        trees: trees_visited,
    };
    if let Derived::Overall(_) = derivation.derived {
        constants::name_constants(&mut derivation, model);
        derivation.constants_form = constants_form::build(&derivation, model);
        derivation.inhibition_patterns = patterns::inhibition_patterns(&derivation, model);
        derivation.half_saturation = saturation::half_saturation(&derivation, model);
    }
    Ok(derivation)
}

fn format_count(x: f64) -> String {
    if x < 1e6 {
        format!("{}", x.round())
    } else {
        format!("{x:.2e}")
    }
}

fn resolve_steady(model: &Model, request: &Request) -> Result<Vec<usize>, Diagnostic> {
    let mut out: Vec<usize> = Vec::new();
    match &request.steady {
        Some(names) => {
            let all: Vec<String> = model.species.iter().map(|s| s.name.clone()).collect();
            for n in names {
                match model.lookup(n) {
                    Some(Sym::Species(i)) => out.push(i),
                    Some(_) => {
                        return Err(Diagnostic::error(
                            Code::BadDerivationRequest,
                            format!(
                                "`{n}` is not a dynamic species; only species can be at quasi-steady state"
                            ),
                        ));
                    }
                    None => return Err(unknown_name("species", n, &all)),
                }
            }
        }
        None => out.extend(model.assumptions.steady.iter().map(|(i, _)| *i)),
    }
    out.sort_unstable();
    out.dedup();
    if out.is_empty() {
        return Err(
            Diagnostic::error(Code::BadDerivationRequest, "no intermediates to eliminate")
                .with_help(
                    "name the enzyme forms with `assume steady E, ES` in the file or --steady E,ES",
                ),
        );
    }
    Ok(out)
}

fn resolve_equilibrium(model: &Model, request: &Request) -> Result<Vec<usize>, Diagnostic> {
    let mut out: Vec<usize> = match &request.equilibrium {
        Some(names) => {
            let all: Vec<String> = model.steps.iter().map(|s| s.name.clone()).collect();
            names
                .iter()
                .map(|n| {
                    model
                        .step_index(n)
                        .ok_or_else(|| unknown_name("step", n, &all))
                })
                .collect::<Result<_, _>>()?
        }
        None => model
            .assumptions
            .equilibrium
            .iter()
            .map(|(j, _)| *j)
            .collect(),
    };
    out.sort_unstable();
    out.dedup();
    Ok(out)
}

fn check_fast_step(model: &Model, j: usize, v: &StepView) -> Result<(), Diagnostic> {
    let step = &model.steps[j];
    let problem = match (v.left, v.right, &v.reverse) {
        _ if v.law.is_some() => Some("it has an explicit law, so it has no equilibrium constant"),
        (Some(a), Some(b), Some(_)) if a != b => None,
        (Some(_), Some(_), Some(_)) => Some("the same form is on both sides"),
        (_, _, None) => Some("it is irreversible"),
        _ => Some("it does not turn one intermediate into another"),
    };
    match problem {
        None => Ok(()),
        Some(why) => Err(Diagnostic::error(
            Code::BadDerivationRequest,
            format!("step `{}` cannot be at rapid equilibrium: {why}", step.name),
        )
        .with_label(step.span, "assumed at equilibrium")
        .with_help(
            "rapid equilibrium applies to reversible mass-action steps between two intermediates",
        )),
    }
}

impl<'a> Context<'a> {
    fn new(model: &'a Model, steady: &[usize]) -> Context<'a> {
        let mut vars = Vars::new();
        let mut kinds = Vec::new();
        let mut is_form = vec![false; model.species.len()];
        for &f in steady {
            is_form[f] = true;
        }
        let param_var = model
            .params
            .iter()
            .enumerate()
            .map(|(i, p)| {
                kinds.push(VarKind::Param(i));
                vars.intern(&p.name)
            })
            .collect();
        let fixed_var = model
            .fixed
            .iter()
            .enumerate()
            .map(|(i, p)| {
                kinds.push(VarKind::Fixed(i));
                vars.intern(&p.name)
            })
            .collect();
        let species_var = model
            .species
            .iter()
            .enumerate()
            .map(|(i, s)| {
                (!is_form[i]).then(|| {
                    kinds.push(VarKind::Species(i));
                    vars.intern(&s.name)
                })
            })
            .collect();
        Context {
            model,
            vars,
            kinds,
            param_var,
            fixed_var,
            species_var,
            is_form,
        }
    }

    fn view(&mut self, j: usize) -> Result<StepView, Diagnostic> {
        let step = &self.model.steps[j];
        let left = self.side_form(j, &step.reactants, "left")?;
        let right = self.side_form(j, &step.products, "right")?;
        if let Rate::Law(law) = &step.rate {
            if let Some(f) = law
                .names()
                .into_iter()
                .find(|s| matches!(s, Sym::Species(i) if self.is_form[*i]))
            {
                return Err(Diagnostic::error(
                    Code::NonlinearSteadyState,
                    format!(
                        "step `{}` has an explicit law in the intermediate `{}`: the steady-state equations are not the linear mass-action system the King–Altman method solves",
                        step.name,
                        self.model.name_of(f)
                    ),
                )
                .with_label(step.rate_span, "explicit law")
                .with_help("write the step with mass-action constants (`with k`), or leave the species out of `assume steady`"));
            }
            if left.is_some() || right.is_some() {
                return Err(Diagnostic::error(
                    Code::BadDerivationRequest,
                    format!(
                        "step `{}` changes an intermediate at a rate given by an explicit law",
                        step.name
                    ),
                )
                .with_label(step.rate_span, "explicit law")
                .with_help("write the step with mass-action constants (`with k`)"));
            }
            let law = self.rational(law, step.rate_span)?;
            return Ok(StepView {
                left,
                right,
                forward: RationalFunction::zero(),
                reverse: None,
                law: Some(law),
            });
        }
        if left.is_some() != right.is_some() {
            let f = left.or(right).unwrap_or(0);
            return Err(Diagnostic::error(
                Code::BadDerivationRequest,
                format!(
                    "step `{}` makes or removes the intermediate `{}` without turning it into another one, so the intermediates have no conserved total",
                    step.name, self.model.species[f].name
                ),
            )
            .with_label(step.span, "not conserving the intermediates")
            .with_help("the King–Altman method needs every step to turn one enzyme form into another (or to leave them alone)"));
        }
        let (fwd_k, rev_k) = match &step.rate {
            Rate::MassAction { forward, reverse } => (forward, reverse.as_ref()),
            Rate::Law(_) => unreachable!("handled above"),
        };
        let forward = self
            .rational(fwd_k, step.rate_span)?
            .mul(&self.others(j, &step.reactants)?);
        let reverse = match rev_k {
            Some(k) => Some(
                self.rational(k, step.rate_span)?
                    .mul(&self.others(j, &step.products)?),
            ),
            None => None,
        };
        Ok(StepView {
            left,
            right,
            forward,
            reverse,
            law: None,
        })
    }

    /// The one intermediate on a side, or a diagnostic if there are more.
    fn side_form(
        &self,
        j: usize,
        terms: &[crate::model::Term],
        side: &str,
    ) -> Result<Option<usize>, Diagnostic> {
        let step = &self.model.steps[j];
        let forms: Vec<&crate::model::Term> = terms
            .iter()
            .filter(|t| matches!(t.sym, Sym::Species(i) if self.is_form[i]))
            .collect();
        let count: num_rational::Rational64 = forms.iter().map(|t| t.coefficient).sum();
        if count > num_rational::Rational64::one() {
            let names: Vec<&str> = forms.iter().map(|t| self.model.name_of(t.sym)).collect();
            let what = if forms.len() == 1 {
                format!("the intermediate `{}` enters squared", names[0])
            } else {
                format!(
                    "the intermediates {} meet",
                    names
                        .iter()
                        .map(|n| format!("`{n}`"))
                        .collect::<Vec<_>>()
                        .join(" and ")
                )
            };
            let mut d = Diagnostic::error(
                Code::NonlinearSteadyState,
                format!(
                    "no closed-form steady state: on the {side} of step `{}` {what}, so the steady-state equations are nonlinear in the intermediates",
                    step.name
                ),
            )
            .with_label(step.span, "nonlinear in the intermediates");
            for t in &forms {
                d = d.with_label(t.span, "intermediate");
            }
            return Err(d.with_help(
                "the King–Altman method needs each step to carry at most one intermediate, once, on each side; leave one of them out of `assume steady` or simulate with `run`",
            ));
        }
        Ok(forms.first().and_then(|t| match t.sym {
            Sym::Species(i) => Some(i),
            _ => None,
        }))
    }

    /// Product of the non-intermediate concentrations of a side.
    fn others(
        &self,
        j: usize,
        terms: &[crate::model::Term],
    ) -> Result<RationalFunction, Diagnostic> {
        let mut m = Monomial::one();
        for t in terms {
            let var = match t.sym {
                Sym::Species(i) => match self.species_var[i] {
                    Some(v) => v,
                    None => continue,
                },
                Sym::Fixed(i) => self.fixed_var[i],
                _ => continue,
            };
            let c = t.coefficient;
            if !c.is_integer() || c <= num_rational::Rational64::zero() {
                return Err(Diagnostic::error(
                    Code::BadDerivationRequest,
                    format!("step `{}` has a non-integer coefficient; mass-action orders must be whole numbers here", self.model.steps[j].name),
                )
                .with_label(t.span, "coefficient"));
            }
            let e = c.to_integer().to_u32().unwrap_or(1);
            m = m.mul(&Monomial::from_pairs([(var, e)]));
        }
        Ok(RationalFunction::from_poly(Poly::monomial(m)))
    }

    /// A rate constant as a rational function of params and concentrations.
    fn rational(&self, e: &Expr, span: Span) -> Result<RationalFunction, Diagnostic> {
        let bad = |why: String| {
            Diagnostic::error(Code::BadDerivationRequest, format!("rate expression is not a rational function of params: {why}"))
                .with_label(span, "rate")
                .with_help("derive needs rate constants built from params and numbers with + - * / and whole-number powers")
        };
        Ok(match e {
            Expr::Number(v) => RationalFunction::constant(
                rational_from_f64(*v).ok_or_else(|| bad(format!("{v} is not finite")))?,
            ),
            Expr::Name(s) => {
                let v = match *s {
                    Sym::Param(i) => self.param_var[i],
                    Sym::Fixed(i) => self.fixed_var[i],
                    Sym::Species(i) => match self.species_var[i] {
                        Some(v) => v,
                        None => {
                            return Err(Diagnostic::error(
                                Code::NonlinearSteadyState,
                                format!(
                                    "no closed-form steady state: the rate constant uses the intermediate `{}`, which makes the step nonlinear in the intermediates",
                                    self.model.species[i].name
                                ),
                            )
                            .with_label(span, "rate uses an intermediate"));
                        }
                    },
                    other => {
                        return Err(bad(format!(
                            "`{}` is a total or observable",
                            self.model.name_of(other)
                        )));
                    }
                };
                RationalFunction::from_poly(Poly::var(v))
            }
            Expr::Time => return Err(bad("it depends on time".into())),
            Expr::Call(f, _) => return Err(bad(format!("it calls `{}`", f.name()))),
            Expr::Neg(a) => self.rational(a, span)?.neg(),
            Expr::Binary(op, a, b) => {
                let x = self.rational(a, span)?;
                match op {
                    BinOp::Pow => {
                        let y = self.rational(b, span)?;
                        let exponent = y
                            .num
                            .as_constant()
                            .filter(|c| c.is_integer() && y.den.is_one())
                            .and_then(|c| c.to_integer().to_i64())
                            .filter(|e| e.abs() <= 64)
                            .ok_or_else(
                                || bad("a power that is not a small whole number".into()),
                            )?;
                        x.powi(exponent)
                            .ok_or_else(|| bad("a negative power of zero".into()))?
                    }
                    _ => {
                        let y = self.rational(b, span)?;
                        match op {
                            BinOp::Add => x.add(&y),
                            BinOp::Sub => x.sub(&y),
                            BinOp::Mul => x.mul(&y),
                            _ => x.div(&y).ok_or_else(|| bad("a division by zero".into()))?,
                        }
                    }
                }
            }
        })
    }
}

/// The graph of lumps of one connected set of forms, with each form's share
/// of its lump and each lump's out-edge scale.
struct Plan {
    graph: FormGraph,
    lump_of: BTreeMap<usize, usize>,
    share: BTreeMap<usize, RationalFunction>,
    scale: Vec<Poly>,
}

fn plan_component(
    cx: &Context,
    forms: &[usize],
    views: &[StepView],
    equilibrium: &[usize],
    lump: &mut UnionFind,
    notes: &mut Vec<String>,
) -> Result<Plan, Diagnostic> {
    let model = cx.model;
    // Lumps in order of their first form.
    let mut roots: Vec<usize> = Vec::new();
    let mut lump_of = BTreeMap::new();
    for &f in forms {
        let r = lump.find(f);
        let idx = match roots.iter().position(|&x| x == r) {
            Some(i) => i,
            None => {
                roots.push(r);
                roots.len() - 1
            }
        };
        lump_of.insert(f, idx);
    }
    // Equilibrium shares within each lump (Cha 1968): relative amounts along
    // a spanning tree of the fast steps, then divided by the lump's sum.
    let mut share = BTreeMap::new();
    for g in 0..roots.len() {
        let members: Vec<usize> = forms.iter().copied().filter(|f| lump_of[f] == g).collect();
        let mut rel: BTreeMap<usize, RationalFunction> = BTreeMap::new();
        rel.insert(members[0], RationalFunction::one());
        let mut used = vec![false; views.len()];
        let mut changed = true;
        while changed {
            changed = false;
            for &j in equilibrium {
                let v = &views[j];
                let (Some(a), Some(b)) = (v.left, v.right) else {
                    continue;
                };
                if used[j] || !members.contains(&a) {
                    continue;
                }
                let reverse = v.reverse.as_ref().expect("checked fast step");
                match (rel.get(&a).cloned(), rel.get(&b).cloned()) {
                    (Some(x), None) => {
                        let k = v
                            .forward
                            .div(reverse)
                            .unwrap_or_else(RationalFunction::zero);
                        rel.insert(b, x.mul(&k));
                        used[j] = true;
                        changed = true;
                    }
                    (None, Some(y)) => {
                        let k = reverse
                            .div(&v.forward)
                            .unwrap_or_else(RationalFunction::zero);
                        rel.insert(a, y.mul(&k));
                        used[j] = true;
                        changed = true;
                    }
                    _ => {}
                }
            }
        }
        // Fast steps of this lump that the spanning tree left out: they
        // close cycles.
        let left_out: Vec<usize> = equilibrium
            .iter()
            .copied()
            .filter(|&j| !used[j] && views[j].left.is_some_and(|a| members.contains(&a)))
            .collect();
        let cyclic: Vec<&str> = left_out
            .iter()
            .map(|&j| model.steps[j].name.as_str())
            .collect();
        if !cyclic.is_empty() {
            let (steps, its) = if cyclic.len() == 1 {
                ("step", "its equilibrium constant equals the one")
            } else {
                ("steps", "their equilibrium constants equal the ones")
            };
            notes.push(format!(
                "the rapid equilibria among {} close a cycle; the derivation takes the ratios of these forms from the other equilibria and assumes that, for {steps} {}, {its} the other equilibria imply (detailed balance: the product of the equilibrium constants around the cycle is 1)",
                members.iter().map(|&f| model.species[f].name.as_str()).collect::<Vec<_>>().join(", "),
                cyclic.join(", ")
            ));
            // With the values given, check that assumption (Wegscheider's
            // condition). The ratio does not depend on concentrations (both
            // routes bind the same species), so they are set to 1.
            let value = |v: Var| match cx.kinds[v as usize] {
                VarKind::Param(i) => model.params[i].value,
                VarKind::Fixed(i) => model.fixed[i].value,
                VarKind::Species(_) | VarKind::Total(_) => 1.0,
            };
            for &j in &left_out {
                let v = &views[j];
                let (Some(ra), Some(rb), Some(reverse)) = (
                    v.left.and_then(|a| rel.get(&a)),
                    v.right.and_then(|b| rel.get(&b)),
                    v.reverse.as_ref(),
                ) else {
                    continue;
                };
                let implied = rb.eval(&value) / ra.eval(&value);
                let given = v.forward.eval(&value) / reverse.eval(&value);
                let factor = given / implied;
                if factor.is_finite() && (factor - 1.0).abs() > 1e-6 {
                    notes.push(format!(
                        "detailed balance does not hold with the values given: step {}'s equilibrium constant is {} times what the other equilibria of the cycle imply; the rate law follows the other equilibria, so check the constants (in a true equilibrium cycle their product around the cycle is 1)",
                        model.steps[j].name,
                        if (1e-3..1e4).contains(&factor.abs()) {
                            format!("{factor:.4}")
                        } else {
                            format!("{factor:.3e}")
                        }
                    ));
                }
            }
        }
        let mut sum = RationalFunction::zero();
        for r in rel.values() {
            sum = sum.add(r);
        }
        for (&f, r) in &rel {
            share.insert(f, r.div(&sum).unwrap_or_else(RationalFunction::zero));
        }
    }
    // Lumped edges with rational weights, then scaled to polynomials per source.
    let n = roots.len();
    let mut weights: Vec<BTreeMap<usize, RationalFunction>> = vec![BTreeMap::new(); n];
    for (j, v) in views.iter().enumerate() {
        if equilibrium.contains(&j) {
            continue;
        }
        let (Some(a), Some(b)) = (v.left, v.right) else {
            continue;
        };
        let (Some(&ga), Some(&gb)) = (lump_of.get(&a), lump_of.get(&b)) else {
            continue;
        };
        if ga == gb {
            continue;
        }
        let fw = v.forward.mul(&share[&a]);
        let e = weights[ga].entry(gb).or_insert_with(RationalFunction::zero);
        *e = e.add(&fw);
        if let Some(r) = &v.reverse {
            let rw = r.mul(&share[&b]);
            let e = weights[gb].entry(ga).or_insert_with(RationalFunction::zero);
            *e = e.add(&rw);
        }
    }
    let mut graph = FormGraph::new(n);
    let mut scale = Vec::with_capacity(n);
    for (g, out) in weights.iter().enumerate() {
        let mut c = Poly::one();
        for w in out.values() {
            let gcd = c.gcd(&w.den);
            c = c.mul(&w.den.div_exact(&gcd).unwrap_or_else(|| w.den.clone()));
        }
        for (&h, w) in out {
            let factor = c.div_exact(&w.den).unwrap_or_else(|| c.clone());
            graph.add_edge(g, h, &w.num.mul(&factor));
        }
        scale.push(c);
    }
    Ok(Plan {
        graph,
        lump_of,
        share,
        scale,
    })
}

fn name_total(model: &Model, forms: &[usize], existing: &[FormTotal]) -> FormTotal {
    let value: f64 = forms.iter().map(|&f| model.species[f].initial).sum();
    for (ti, t) in model.totals.iter().enumerate() {
        let mut species: Vec<usize> = t.terms.iter().map(|(i, _)| *i).collect();
        species.sort_unstable();
        let unit = t.terms.iter().all(|(_, c)| c.is_one());
        if unit && species == forms {
            return FormTotal {
                name: t.name.clone(),
                forms: forms.to_vec(),
                declared: Some(ti),
                value: t.value,
            };
        }
    }
    let base = format!("{}_total", model.species[forms[0]].name);
    let mut name = base.clone();
    let mut k = 2;
    while model.lookup(&name).is_some() || existing.iter().any(|t| t.name == name) {
        name = format!("{base}{k}");
        k += 1;
    }
    FormTotal {
        name,
        forms: forms.to_vec(),
        declared: None,
        value,
    }
}

/// Above this many denominator terms the forms' expressions are not kept.
const FORM_EXPRESSION_LIMIT: usize = 20_000;

/// A form's steady-state concentration `num / (den * Q[component])`.
struct FormConc {
    num: Poly,
    den: Poly,
    component: usize,
}

/// A rate `num / (den * Q[component])` (no Q factor for `None`): sums over
/// one component's steps share Q, so it is never copied per step.
#[derive(Clone)]
struct Part {
    num: Poly,
    den: Poly,
    component: Option<usize>,
}

impl Part {
    fn zero() -> Part {
        Part {
            num: Poly::zero(),
            den: Poly::one(),
            component: None,
        }
    }
    /// The sum, without cancelling; `None` when the two do not share the
    /// component's denominator.
    fn add(&self, o: &Part) -> Option<Part> {
        if o.num.is_zero() {
            return Some(self.clone());
        }
        if self.num.is_zero() {
            return Some(o.clone());
        }
        if self.component != o.component {
            return None;
        }
        if self.den == o.den {
            return Some(Part {
                num: self.num.add(&o.num),
                den: self.den.clone(),
                component: self.component,
            });
        }
        Some(Part {
            num: self.num.mul(&o.den).add(&o.num.mul(&self.den)),
            den: self.den.mul(&o.den),
            component: self.component,
        })
    }
    fn into_rational(self, qs: &[Poly]) -> RationalFunction {
        let den = match self.component {
            Some(c) if self.den.is_one() => qs[c].clone(),
            Some(c) => self.den.mul(&qs[c]),
            None => self.den,
        };
        RationalFunction::raw(self.num, den)
    }
}

/// Net rate of a step with intermediates replaced by their steady-state
/// concentrations; nothing is cancelled here (that happens once, at the end).
fn step_net_rate(v: &StepView, conc: &BTreeMap<usize, FormConc>) -> Part {
    if let Some(law) = &v.law {
        return Part {
            num: law.num.clone(),
            den: law.den.clone(),
            component: None,
        };
    }
    let side = |k: &RationalFunction, f: Option<usize>| match f.and_then(|f| conc.get(&f)) {
        Some(x) => Part {
            num: k.num.mul(&x.num),
            den: if k.den.is_one() {
                x.den.clone()
            } else {
                k.den.mul(&x.den)
            },
            component: Some(x.component),
        },
        None => Part {
            num: k.num.clone(),
            den: k.den.clone(),
            component: None,
        },
    };
    let fwd = side(&v.forward, v.left);
    match &v.reverse {
        Some(r) => {
            let mut rev = side(r, v.right);
            rev.num = rev.num.neg();
            // Both sides carry forms of one component (or neither does).
            fwd.add(&rev).unwrap_or(fwd)
        }
        None => fwd,
    }
}

/// Sums rates, sharing each component's denominator where possible.
fn sum_parts(parts: Vec<Part>, qs: &[Poly]) -> RationalFunction {
    let mut groups: Vec<Part> = Vec::new();
    for p in parts {
        if p.num.is_zero() {
            continue;
        }
        match groups.iter_mut().find(|g| g.component == p.component) {
            Some(g) => {
                if let Some(s) = g.add(&p) {
                    *g = s;
                }
            }
            None => groups.push(p),
        }
    }
    let mut acc = RationalFunction::zero();
    for g in groups {
        acc = acc.add_lazy(&g.into_rational(qs));
    }
    acc
}

/// d(species)/dt divided by `nu`, from the steps' net rates weighted by
/// [`slow_step_weights`].
fn species_rate(
    weights: &[BigRational],
    rates: &[Part],
    nu: &BigRational,
    qs: &[Poly],
) -> RationalFunction {
    let mut parts = Vec::new();
    for (w, r) in weights.iter().zip(rates) {
        if !w.is_zero() {
            let c = w / nu;
            parts.push(Part {
                num: r.num.scale(&c),
                den: r.den.clone(),
                component: r.component,
            });
        }
    }
    sum_parts(parts, qs)
}

fn exact(c: crate::model::Coef) -> BigRational {
    BigRational::new(BigInt::from(*c.numer()), BigInt::from(*c.denom()))
}

/// The rate of change of `target` at the steady state as weights on the
/// steps' net rates. A rapid-equilibrium step's mass-action net rate
/// vanishes at equilibrium, but its flux does not: it carries whatever the
/// slow steps feed it, so reading a rate from it gives 0. Adding multiples
/// y_k of the forms' balances (each zero at the steady state),
/// d[target]/dt = Σ_j (ν_target,j + Σ_k y_k ν_kj) v_j, with y chosen so
/// that every fast step's weight is zero: only slow steps remain, whose
/// net rates are the fluxes through the lumped graph. Any such y gives the
/// same rate, since the forms' balances hold. `None` when no y exists (a
/// fast step changes `target` with no form to balance it).
fn slow_step_weights(
    model: &Model,
    target: usize,
    is_form: &[bool],
    equilibrium: &[usize],
) -> Option<Vec<BigRational>> {
    let forms: Vec<usize> = (0..model.species.len()).filter(|&i| is_form[i]).collect();
    let column = |j: usize| -> (BigRational, Vec<BigRational>) {
        let mut own = BigRational::zero();
        let mut by_form = vec![BigRational::zero(); forms.len()];
        for (i, c) in model.net_change(j) {
            if i == target {
                own += exact(c);
            } else if let Ok(k) = forms.binary_search(&i) {
                by_form[k] += exact(c);
            }
        }
        (own, by_form)
    };
    // Rows: one per fast step, Σ_k ν_kf y_k = −ν_target,f.
    let mut rows: Vec<(Vec<BigRational>, BigRational)> = equilibrium
        .iter()
        .map(|&f| {
            let (own, by_form) = column(f);
            (by_form, -own)
        })
        .collect();
    let mut y = vec![BigRational::zero(); forms.len()];
    let mut pivots: Vec<(usize, usize)> = Vec::new();
    let mut r = 0;
    for c in 0..forms.len() {
        let Some(p) = (r..rows.len()).find(|&i| !rows[i].0[c].is_zero()) else {
            continue;
        };
        rows.swap(r, p);
        let inv = rows[r].0[c].recip();
        for x in rows[r].0.iter_mut() {
            *x = &*x * &inv;
        }
        rows[r].1 = &rows[r].1 * &inv;
        let pivot = rows[r].clone();
        for (i, row) in rows.iter_mut().enumerate() {
            if i != r && !row.0[c].is_zero() {
                let f = row.0[c].clone();
                for (x, q) in row.0.iter_mut().zip(&pivot.0) {
                    *x = &*x - &f * q;
                }
                row.1 = &row.1 - &f * &pivot.1;
            }
        }
        pivots.push((r, c));
        r += 1;
    }
    if rows[r..].iter().any(|(_, b)| !b.is_zero()) {
        return None;
    }
    for (row, c) in pivots {
        y[c] = rows[row].1.clone();
    }
    Some(
        (0..model.steps.len())
            .map(|j| {
                if equilibrium.contains(&j) {
                    return BigRational::zero();
                }
                let (own, by_form) = column(j);
                by_form.iter().zip(&y).fold(own, |acc, (n, w)| acc + n * w)
            })
            .collect(),
    )
}

/// The dynamic, non-intermediate species `name` names, for `--species`.
fn species_asked_for(model: &Model, name: &str, is_form: &[bool]) -> Result<usize, Diagnostic> {
    match model.lookup(name) {
        Some(Sym::Species(i)) if is_form[i] => Err(Diagnostic::error(
            Code::BadDerivationRequest,
            format!("`{name}` is an intermediate: at steady state its rate of change is zero"),
        )
        .with_help("choose a substrate or product, or a step with --flux")),
        Some(Sym::Species(i)) => Ok(i),
        Some(_) => Err(Diagnostic::error(
            Code::BadDerivationRequest,
            format!("`{name}` is not a dynamic species"),
        )),
        None => Err(unknown_name(
            "species",
            name,
            &model
                .species
                .iter()
                .map(|s| s.name.clone())
                .collect::<Vec<_>>(),
        )),
    }
}

fn no_overall(model: &Model) -> Diagnostic {
    let _ = model;
    Diagnostic::error(
        Code::NoOverallReaction,
        "the steady-state fluxes change no species other than the intermediates",
    )
    .with_help("there is no overall reaction to give a rate for; use --flux STEP for a step's rate")
}

/// The overall reaction: the net change of the non-intermediate species
/// over the steady-state flux modes (the null space of the intermediates'
/// stoichiometry). Exactly one is required.
fn overall_reaction(model: &Model, is_form: &[bool]) -> Result<Overall, Diagnostic> {
    let n = model.stoichiometry();
    let to_big = |c: num_rational::Rational64| {
        BigRational::new(BigInt::from(*c.numer()), BigInt::from(*c.denom()))
    };
    let steps = model.steps.len();
    let internal: Vec<Vec<BigRational>> = (0..model.species.len())
        .filter(|&i| is_form[i])
        .map(|i| n[i].iter().map(|c| to_big(*c)).collect())
        .collect();
    let basis = null_space(internal, steps);
    let external: Vec<usize> = (0..model.species.len()).filter(|&i| !is_form[i]).collect();
    let image = |b: &[BigRational]| -> Vec<BigRational> {
        external
            .iter()
            .map(|&i| {
                (0..steps)
                    .map(|j| to_big(n[i][j]) * &b[j])
                    .fold(BigRational::zero(), |a, x| a + x)
            })
            .collect()
    };
    let images: Vec<(Vec<BigRational>, &Vec<BigRational>)> = basis
        .iter()
        .map(|b| (image(b), b))
        .filter(|(v, _)| v.iter().any(|x| !x.is_zero()))
        .collect();
    let rank = null_space(
        images.iter().map(|(v, _)| v.clone()).collect(),
        external.len(),
    );
    let dim = external.len() - rank.len();
    if dim == 0 {
        return Err(no_overall(model));
    }
    if dim > 1 {
        // A basis of the overall reactions: keep each image that raises the rank.
        let mut basis: Vec<Vec<BigRational>> = Vec::new();
        let mut list: Vec<String> = Vec::new();
        for (v, _) in &images {
            let mut trial = basis.clone();
            trial.push(v.clone());
            if external.len() - null_space(trial.clone(), external.len()).len() > basis.len() {
                basis = trial;
                list.push(reaction_text(model, &external, v));
            }
        }
        return Err(Diagnostic::error(
            Code::NoOverallReaction,
            format!("the mechanism has {dim} independent overall reactions ({}), so there is no single rate", list.join("; ")),
        )
        .with_help("choose a rate with --species NAME (rate of change of one species) or --flux STEP (net rate of one step)"));
    }
    let (v, b) = &images[0];
    let flip = b
        .iter()
        .fold(BigRational::zero(), |a, x| a + x)
        .is_negative();
    // Scale to coprime integers.
    let lcm = v.iter().fold(BigInt::one(), |a, x| a.lcm(x.denom()));
    let ints: Vec<BigInt> = v
        .iter()
        .map(|x| (x * BigRational::from_integer(lcm.clone())).to_integer())
        .collect();
    let g = ints.iter().fold(BigInt::zero(), |a, x| a.gcd(x));
    let mut overall = Overall::default();
    for (k, x) in ints.iter().enumerate() {
        let x = if flip { -x / &g } else { x / &g };
        if x.is_positive() {
            overall.products.push((external[k], x));
        } else if x.is_negative() {
            overall.reactants.push((external[k], -x));
        }
    }
    Ok(overall)
}

fn reaction_text(model: &Model, external: &[usize], v: &[BigRational]) -> String {
    let side = |pos: bool| {
        let parts: Vec<String> = v
            .iter()
            .enumerate()
            .filter(|(_, x)| {
                if pos {
                    x.is_positive()
                } else {
                    x.is_negative()
                }
            })
            .map(|(k, x)| {
                let c = x.abs();
                let name = &model.species[external[k]].name;
                if c.is_one() {
                    name.clone()
                } else {
                    format!("{c} {name}")
                }
            })
            .collect();
        if parts.is_empty() {
            "0".to_string()
        } else {
            parts.join(" + ")
        }
    };
    format!("{} -> {}", side(false), side(true))
}

/// A basis of the null space of a matrix given by rows (exact).
fn null_space(mut rows: Vec<Vec<BigRational>>, cols: usize) -> Vec<Vec<BigRational>> {
    let mut pivots = Vec::new();
    let mut r = 0;
    for c in 0..cols {
        let Some(p) = (r..rows.len()).find(|&i| !rows[i][c].is_zero()) else {
            continue;
        };
        rows.swap(r, p);
        let inv = rows[r][c].recip();
        for x in rows[r].iter_mut() {
            *x = &*x * &inv;
        }
        for i in 0..rows.len() {
            if i != r && !rows[i][c].is_zero() {
                let f = rows[i][c].clone();
                let pivot_row = rows[r].clone();
                for (x, y) in rows[i].iter_mut().zip(&pivot_row) {
                    *x = &*x - &f * y;
                }
            }
        }
        pivots.push(c);
        r += 1;
        if r == rows.len() {
            break;
        }
    }
    let free: Vec<usize> = (0..cols).filter(|c| !pivots.contains(c)).collect();
    free.iter()
        .map(|&f| {
            let mut v = vec![BigRational::zero(); cols];
            v[f] = BigRational::one();
            for (k, &p) in pivots.iter().enumerate() {
                v[p] = -rows[k][f].clone();
            }
            v
        })
        .collect()
}

struct UnionFind(Vec<usize>);

impl UnionFind {
    fn new(n: usize) -> UnionFind {
        UnionFind((0..n).collect())
    }
    fn find(&mut self, x: usize) -> usize {
        let mut r = x;
        while self.0[r] != r {
            r = self.0[r];
        }
        let mut y = x;
        while self.0[y] != r {
            let next = self.0[y];
            self.0[y] = r;
            y = next;
        }
        r
    }
    fn union(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra != rb {
            let (lo, hi) = if ra < rb { (ra, rb) } else { (rb, ra) };
            self.0[hi] = lo;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn null_space_of_a_two_form_cycle() {
        // E: bind -1, cleave +1; ES: bind +1, cleave -1 (Michaelis–Menten
        // cycle, common practice): one flux mode, both steps forward.
        let one = || BigRational::one();
        let rows = vec![vec![-one(), one()], vec![one(), -one()]];
        let b = null_space(rows, 2);
        assert_eq!(b, vec![vec![one(), one()]]);
    }
}
