//! From the Model to the derived rate: checks the assumptions, builds the
//! graph of forms (lumping rapid equilibria), sums spanning trees, and
//! writes the requested flux with the forms' totals.

use super::lumping::*;
use super::overall::*;
use super::trees::{expanded_term_count, tree_sums};
use super::{
    Derivation, Derived, FormTotal, Progress, Request, Target, VarKind, constants, unknown_name,
};
use super::{constants_form, patterns, saturation};
use crate::algebra::poly::{Monomial, Poly, Var, Vars};
use crate::algebra::rational::{RationalFunction, rational_from_f64};
use crate::diagnostics::{Code, Diagnostic, Span};
use crate::model::{BinOp, Expr, Model, Rate, Sym};
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};
use std::collections::BTreeMap;

/// One step seen from the forms: at most one form on each side.
pub(super) struct StepView {
    pub(super) left: Option<usize>,
    pub(super) right: Option<usize>,
    /// Forward pseudo-first-order rate: constant times the other reactants.
    pub(super) forward: RationalFunction,
    /// Reverse, for a reversible mass-action step.
    pub(super) reverse: Option<RationalFunction>,
    /// An explicit law (only on steps without forms).
    pub(super) law: Option<RationalFunction>,
}

pub(super) struct Context<'a> {
    pub(super) model: &'a Model,
    pub(super) vars: Vars,
    pub(super) kinds: Vec<VarKind>,
    /// Variable of each param / fixed / species (None for intermediates).
    pub(super) param_var: Vec<Var>,
    pub(super) fixed_var: Vec<Var>,
    pub(super) species_var: Vec<Option<Var>>,
    pub(super) is_form: Vec<bool>,
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

pub(super) fn format_count(x: f64) -> String {
    if x < 1e6 {
        format!("{}", x.round())
    } else {
        format!("{x:.2e}")
    }
}

pub(super) fn resolve_steady(model: &Model, request: &Request) -> Result<Vec<usize>, Diagnostic> {
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

pub(super) fn resolve_equilibrium(
    model: &Model,
    request: &Request,
) -> Result<Vec<usize>, Diagnostic> {
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

pub(super) fn check_fast_step(model: &Model, j: usize, v: &StepView) -> Result<(), Diagnostic> {
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
    pub(super) fn new(model: &'a Model, steady: &[usize]) -> Context<'a> {
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

    pub(super) fn view(&mut self, j: usize) -> Result<StepView, Diagnostic> {
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
    pub(super) fn side_form(
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
    pub(super) fn others(
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
    pub(super) fn rational(&self, e: &Expr, span: Span) -> Result<RationalFunction, Diagnostic> {
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

/// Above this many denominator terms the forms' expressions are not kept.
pub(super) const FORM_EXPRESSION_LIMIT: usize = 20_000;

/// A form's steady-state concentration `num / (den * Q[component])`.
pub(super) struct FormConc {
    pub(super) num: Poly,
    pub(super) den: Poly,
    pub(super) component: usize,
}

/// A rate `num / (den * Q[component])` (no Q factor for `None`): sums over
/// one component's steps share Q, so it is never copied per step.
#[derive(Clone)]
pub(super) struct Part {
    pub(super) num: Poly,
    pub(super) den: Poly,
    pub(super) component: Option<usize>,
}

impl Part {
    pub(super) fn zero() -> Part {
        Part {
            num: Poly::zero(),
            den: Poly::one(),
            component: None,
        }
    }
    /// The sum, without cancelling; `None` when the two do not share the
    /// component's denominator.
    pub(super) fn add(&self, o: &Part) -> Option<Part> {
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
    pub(super) fn into_rational(self, qs: &[Poly]) -> RationalFunction {
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
pub(super) fn step_net_rate(v: &StepView, conc: &BTreeMap<usize, FormConc>) -> Part {
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
pub(super) fn sum_parts(parts: Vec<Part>, qs: &[Poly]) -> RationalFunction {
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
