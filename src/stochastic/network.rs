//! The count-level network: every step of the model as one reaction per
//! direction, with its stochastic constant, the species it reads and
//! changes, the dependency graph between reactions, and the model's events
//! as count changes.
//!
//! Conversion (Gillespie 1977, J. Phys. Chem. 81:2340, sec. II): a
//! mass-action step with dynamic reactants of multiplicities ν_i (total
//! m = Σ ν_i molecules) and deterministic constant k has the propensity
//! `c · Π C(n_i, ν_i)` with `c = k · Π ν_i! · Ω^(1−m)`, Ω the molecules per
//! concentration unit; so `2 A → …` has `c · n(n−1)/2` with `c = 2k/Ω`.
//! Fixed species are constant concentrations and enter k (as their value
//! to the power of their coefficient), not m. A `law` step fires with
//! propensity `Ω · law(counts / Ω)` while its reactants are present.
//!
//! Invariants: reactions come in step order, the forward direction before
//! the reverse; every change is a whole number; `dependents(j)` lists,
//! without repeats, every reaction whose propensity reads a species that
//! reaction `j` changes.

use super::convert::{MAX_COUNT, count_of, molecules_per_unit};
use super::error::StochasticError;
use crate::diagnostics::{Code, Diagnostic, Span};
use crate::model::{Coef, EventKind, Expr, Model, Rate, Sym, Term, coef_f64};
use num_traits::ToPrimitive;

/// How a reaction's propensity is computed.
#[derive(Debug, Clone, PartialEq)]
pub enum Kind {
    /// `constant · Π ν_i! · Ω^(1−m)` times the falling factorials; the
    /// constant is the model's expression (params, fixed species, totals)
    /// times the fixed species' concentrations to their coefficients.
    MassAction { constant: Expr, fixed: Vec<Term> },
    /// `Ω · law` evaluated at concentrations `counts / Ω`.
    Law { law: Expr },
}

/// One direction of one step.
#[derive(Debug, Clone, PartialEq)]
pub struct Reaction {
    /// The model's step.
    pub step: usize,
    /// The reverse direction of a reversible mass-action step.
    pub reverse: bool,
    /// Dynamic reactant species and their multiplicities.
    pub reactants: Vec<(usize, u32)>,
    /// Net change of each dynamic species when it fires (zeros left out).
    pub change: Vec<(usize, i64)>,
    /// Molecules of dynamic species consumed by one firing (its order).
    pub order: u32,
    pub kind: Kind,
    /// Species whose counts the propensity reads.
    pub reads: Vec<usize>,
    pub span: Span,
}

/// A model event as a count change.
#[derive(Debug, Clone, PartialEq)]
pub struct CountEvent {
    pub time: f64,
    pub species: usize,
    pub kind: EventKind,
    pub count: i64,
}

/// A model ready for stochastic runs.
#[derive(Debug, Clone)]
pub struct Network {
    pub model: Model,
    /// The volume in litres.
    pub litres: f64,
    /// Ω: molecules per concentration unit of the model.
    pub omega: f64,
    /// Start counts of the dynamic species, in model order.
    pub initial: Vec<i64>,
    pub reactions: Vec<Reaction>,
    /// Events in time order (file order at equal times).
    pub events: Vec<CountEvent>,
    /// Whether a rate constant reads a total, whose value an event changes.
    pub constants_read_totals: bool,
    // Flat copies of the reactions' parts for the inner loops (CSR layout:
    // the entries of reaction j are `start[j]..start[j + 1]`).
    react_start: Vec<u32>,
    react_species: Vec<u32>,
    react_nu: Vec<u32>,
    change_start: Vec<u32>,
    change_species: Vec<u32>,
    change_delta: Vec<i64>,
    dep_start: Vec<u32>,
    dep: Vec<u32>,
    is_law: Vec<bool>,
    /// Each reaction's shape for the inner loop, in one place in memory.
    shape: Vec<Shape>,
}

/// How the inner loop computes a propensity: the common mass-action forms
/// (no reactant, or one or two reactant species each taken once) read one
/// entry; anything else takes the general path.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Shape {
    Zero,
    One(u32),
    Two(u32, u32),
    General,
}

/// Builds the count-level network of `model` in `litres`. Warnings (a law
/// used as a propensity) come back beside the network; errors name the
/// statement they concern.
pub fn prepare(
    model: &Model,
    litres: f64,
) -> Result<(Network, Vec<Diagnostic>), Vec<StochasticError>> {
    let omega = molecules_per_unit(model.units.concentration.molar(), litres);
    let mut errors = Vec::new();
    let mut warnings = Vec::new();
    let mut initial = Vec::with_capacity(model.species.len());
    for s in &model.species {
        match count_of(s.initial, omega) {
            Some(n) => initial.push(n),
            None => {
                errors.push(StochasticError::CountOutOfRange {
                    what: format!("the start value of `{}`", s.name),
                    count: s.initial * omega,
                    span: Some(s.span),
                });
                initial.push(0);
            }
        }
    }
    let mut reactions = Vec::new();
    for (j, step) in model.steps.iter().enumerate() {
        for t in step.reactants.iter().chain(&step.products) {
            if let Sym::Species(i) = t.sym
                && !t.coefficient.is_integer()
            {
                errors.push(StochasticError::FractionalCoefficient {
                    step: step.name.clone(),
                    species: model.species[i].name.clone(),
                    coefficient: t.coefficient.to_string(),
                    span: t.span,
                });
            }
        }
        let change: Vec<(usize, i64)> = model
            .net_change(j)
            .into_iter()
            .map(|(i, c)| (i, c.to_integer()))
            .collect();
        let dynamic = |terms: &[Term]| -> Vec<(usize, u32)> {
            terms
                .iter()
                .filter_map(|t| match t.sym {
                    Sym::Species(i) => Some((i, whole(t.coefficient))),
                    _ => None,
                })
                .collect()
        };
        let fixed = |terms: &[Term]| -> Vec<Term> {
            terms
                .iter()
                .filter(|t| matches!(t.sym, Sym::Fixed(_)))
                .cloned()
                .collect()
        };
        match &step.rate {
            Rate::MassAction { forward, reverse } => {
                for (constant, reverse_direction) in
                    std::iter::once((forward, false)).chain(reverse.iter().map(|r| (r, true)))
                {
                    if mentions_time(model, constant) {
                        errors.push(StochasticError::TimeDependent {
                            step: step.name.clone(),
                            span: step.rate_span,
                        });
                    }
                    let side = if reverse_direction {
                        &step.products
                    } else {
                        &step.reactants
                    };
                    let reactants = dynamic(side);
                    let reads = reactants.iter().map(|(i, _)| *i).collect();
                    reactions.push(Reaction {
                        step: j,
                        reverse: reverse_direction,
                        order: reactants.iter().map(|(_, nu)| nu).sum(),
                        reactants,
                        change: if reverse_direction {
                            change.iter().map(|&(i, d)| (i, -d)).collect()
                        } else {
                            change.clone()
                        },
                        kind: Kind::MassAction {
                            constant: constant.clone(),
                            fixed: fixed(side),
                        },
                        reads,
                        span: step.rate_span,
                    });
                }
            }
            Rate::Law(law) => {
                if mentions_time(model, law) {
                    errors.push(StochasticError::TimeDependent {
                        step: step.name.clone(),
                        span: step.rate_span,
                    });
                }
                warnings.push(
                    Diagnostic::warning(
                        Code::LawAsPropensity,
                        format!(
                            "step `{}`: its law is used as a propensity (Ω · law at counts / Ω), an approximation: a rate law written for concentrations has no exact molecule-count form",
                            step.name
                        ),
                    )
                    .with_label(step.rate_span, "used as a propensity")
                    .with_help("write the mechanism as mass-action steps for an exact stochastic run"),
                );
                let reactants = dynamic(&step.reactants);
                let mut reads: Vec<usize> = reactants.iter().map(|(i, _)| *i).collect();
                species_read(model, law, &mut reads);
                reads.sort_unstable();
                reads.dedup();
                reactions.push(Reaction {
                    step: j,
                    reverse: false,
                    order: reactants.iter().map(|(_, nu)| nu).sum(),
                    reactants,
                    change: change.clone(),
                    kind: Kind::Law { law: law.clone() },
                    reads,
                    span: step.rate_span,
                });
            }
        }
    }
    let mut order: Vec<usize> = (0..model.events.len()).collect();
    order.sort_by(|&a, &b| {
        let time = |k: usize| model.events[k].time().unwrap_or(f64::INFINITY);
        time(a).total_cmp(&time(b))
    });
    let mut events = Vec::new();
    for k in order {
        let e = &model.events[k];
        let Some((time, kind, species, amount)) = e.timed_species_change() else {
            errors.push(StochasticError::AssayEvent { span: e.span });
            continue;
        };
        match count_of(amount, omega) {
            Some(count) => events.push(CountEvent {
                time,
                species,
                kind,
                count,
            }),
            None => errors.push(StochasticError::CountOutOfRange {
                what: format!(
                    "the amount of this event on `{}`",
                    model.species[species].name
                ),
                count: amount * omega,
                span: Some(e.span),
            }),
        }
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    let constants_read_totals = reactions.iter().any(|r| match &r.kind {
        Kind::MassAction { constant, .. } => reads_total(model, constant),
        Kind::Law { .. } => false,
    });
    let mut net = Network {
        model: model.clone(),
        litres,
        omega,
        initial,
        reactions,
        events,
        constants_read_totals,
        react_start: Vec::new(),
        react_species: Vec::new(),
        react_nu: Vec::new(),
        change_start: Vec::new(),
        change_species: Vec::new(),
        change_delta: Vec::new(),
        dep_start: Vec::new(),
        dep: Vec::new(),
        is_law: Vec::new(),
        shape: Vec::new(),
    };
    net.flatten();
    // Constants are checked once here, at the start totals, so a bad one
    // is a located error before any run.
    net.constants(&net.start_totals()).map_err(|e| vec![e])?;
    Ok((net, warnings))
}

fn whole(c: Coef) -> u32 {
    c.to_integer().to_u32().unwrap_or(u32::MAX)
}

/// Whether an expression depends on `t`, directly or through observables.
fn mentions_time(model: &Model, e: &Expr) -> bool {
    e.mentions_time()
        || e.names().into_iter().any(|s| match s {
            Sym::Observable(o) => mentions_time(model, &model.observables[o].expr),
            Sym::Species(_) | Sym::Fixed(_) | Sym::Param(_) | Sym::Total(_) => false,
        })
}

fn reads_total(model: &Model, e: &Expr) -> bool {
    e.names().into_iter().any(|s| match s {
        Sym::Total(_) => true,
        Sym::Observable(o) => reads_total(model, &model.observables[o].expr),
        Sym::Species(_) | Sym::Fixed(_) | Sym::Param(_) => false,
    })
}

/// The species an expression reads, through observables and totals.
fn species_read(model: &Model, e: &Expr, out: &mut Vec<usize>) {
    for s in e.names() {
        match s {
            Sym::Species(i) => out.push(i),
            Sym::Observable(o) => species_read(model, &model.observables[o].expr, out),
            Sym::Total(k) => out.extend(model.totals[k].terms.iter().map(|(i, _)| *i)),
            Sym::Fixed(_) | Sym::Param(_) => {}
        }
    }
}

/// `n (n−1) … (n−ν+1)`: ordered ways to pick ν of n molecules; 0 when n < ν.
#[inline]
pub fn falling(n: i64, nu: u32) -> f64 {
    let mut a = 1.0;
    for k in 0..nu as i64 {
        let f = n - k;
        if f <= 0 {
            return 0.0;
        }
        a *= f as f64;
    }
    a
}

impl Network {
    fn flatten(&mut self) {
        let mut readers: Vec<Vec<u32>> = vec![Vec::new(); self.model.species.len()];
        self.react_start.push(0);
        self.change_start.push(0);
        for (j, r) in self.reactions.iter().enumerate() {
            for &(i, nu) in &r.reactants {
                self.react_species.push(i as u32);
                self.react_nu.push(nu);
            }
            self.react_start.push(self.react_species.len() as u32);
            for &(i, d) in &r.change {
                self.change_species.push(i as u32);
                self.change_delta.push(d);
            }
            self.change_start.push(self.change_species.len() as u32);
            for &i in &r.reads {
                readers[i].push(j as u32);
            }
            self.is_law.push(matches!(r.kind, Kind::Law { .. }));
            self.shape.push(match (&r.kind, r.reactants.as_slice()) {
                (Kind::Law { .. }, _) => Shape::General,
                (_, []) => Shape::Zero,
                (_, [(i, 1)]) => Shape::One(*i as u32),
                (_, [(i, 1), (k, 1)]) => Shape::Two(*i as u32, *k as u32),
                _ => Shape::General,
            });
        }
        self.dep_start.push(0);
        for r in &self.reactions {
            let mut d: Vec<u32> = r
                .change
                .iter()
                .flat_map(|&(i, _)| readers[i].iter().copied())
                .collect();
            d.sort_unstable();
            d.dedup();
            self.dep.extend(d);
            self.dep_start.push(self.dep.len() as u32);
        }
    }

    pub fn species_count(&self) -> usize {
        self.model.species.len()
    }

    /// Reactions whose propensity changes when reaction `j` fires.
    #[inline]
    pub fn dependents(&self, j: usize) -> &[u32] {
        &self.dep[self.dep_start[j] as usize..self.dep_start[j + 1] as usize]
    }

    /// Dynamic reactants of reaction `j` as (species, multiplicity).
    #[inline]
    pub fn reactants_of(&self, j: usize) -> (&[u32], &[u32]) {
        let (s, e) = (
            self.react_start[j] as usize,
            self.react_start[j + 1] as usize,
        );
        (&self.react_species[s..e], &self.react_nu[s..e])
    }

    /// Net change of reaction `j` as (species, change).
    #[inline]
    pub fn change_of(&self, j: usize) -> (&[u32], &[i64]) {
        let (s, e) = (
            self.change_start[j] as usize,
            self.change_start[j + 1] as usize,
        );
        (&self.change_species[s..e], &self.change_delta[s..e])
    }

    /// Applies reaction `j` once.
    #[inline]
    pub fn fire(&self, j: usize, counts: &mut [i64]) {
        let (sp, d) = self.change_of(j);
        for (&i, &d) in sp.iter().zip(d) {
            counts[i as usize] += d;
        }
    }

    /// The totals at the start (the model's values).
    pub fn start_totals(&self) -> Vec<f64> {
        self.model.totals.iter().map(|t| t.value).collect()
    }

    /// Totals recomputed from counts (after an event).
    pub fn totals_of(&self, counts: &[i64]) -> Vec<f64> {
        self.model
            .totals
            .iter()
            .map(|t| {
                t.terms
                    .iter()
                    .map(|(i, c)| coef_f64(*c) * counts[*i] as f64 / self.omega)
                    .sum()
            })
            .collect()
    }

    /// The value of a name with species at `counts / Ω` and the given totals.
    pub fn value(&self, sym: Sym, counts: &[i64], totals: &[f64]) -> f64 {
        match sym {
            Sym::Species(i) => counts[i] as f64 / self.omega,
            Sym::Total(k) => totals[k],
            Sym::Observable(o) => self.model.observables[o]
                .expr
                .eval(&|s| self.value(s, counts, totals), 0.0),
            Sym::Fixed(_) | Sym::Param(_) => self.model.initial_value(sym),
        }
    }

    /// The factor before the falling factorials of each reaction (unused,
    /// and 0, for law reactions): `k · Π fixed^ν · Ω^(1−m)`.
    pub fn constants(&self, totals: &[f64]) -> Result<Vec<f64>, StochasticError> {
        let no_counts = vec![0; self.species_count()];
        self.reactions
            .iter()
            .map(|r| match &r.kind {
                Kind::MassAction { constant, fixed } => {
                    let k = constant.eval(&|s| self.value(s, &no_counts, totals), 0.0);
                    if !(k.is_finite() && k >= 0.0) {
                        return Err(StochasticError::BadConstant {
                            step: self.model.steps[r.step].name.clone(),
                            value: k,
                            span: r.span,
                        });
                    }
                    let buffered: f64 = fixed
                        .iter()
                        .map(|t| {
                            crate::model::expr::pow(
                                self.model.initial_value(t.sym),
                                coef_f64(t.coefficient),
                            )
                        })
                        .product();
                    Ok(k * buffered * self.omega.powi(1 - r.order as i32))
                }
                Kind::Law { .. } => Ok(0.0),
            })
            .collect()
    }

    /// The stochastic constant `c` of each mass-action reaction (the
    /// constant of `c · Π C(n_i, ν_i)`), for reports; `None` for laws.
    pub fn stochastic_constants(
        &self,
        totals: &[f64],
    ) -> Result<Vec<Option<f64>>, StochasticError> {
        let base = self.constants(totals)?;
        Ok(self
            .reactions
            .iter()
            .zip(base)
            .map(|(r, c)| match r.kind {
                Kind::MassAction { .. } => Some(
                    c * r
                        .reactants
                        .iter()
                        .map(|&(_, nu)| (1..=nu).map(f64::from).product::<f64>())
                        .product::<f64>(),
                ),
                Kind::Law { .. } => None,
            })
            .collect())
    }

    /// The propensity of reaction `j`. A law's value is returned as it is
    /// (the caller refuses one below zero), or 0 while a reactant is short.
    #[inline(always)]
    pub fn propensity(&self, j: usize, counts: &[i64], constants: &[f64], totals: &[f64]) -> f64 {
        match self.shape[j] {
            Shape::Zero => return constants[j],
            Shape::One(i) => return constants[j] * counts[i as usize] as f64,
            Shape::Two(i, k) => {
                return constants[j] * counts[i as usize] as f64 * counts[k as usize] as f64;
            }
            Shape::General => {}
        }
        let (sp, nu) = self.reactants_of(j);
        if self.is_law[j] {
            if sp
                .iter()
                .zip(nu)
                .any(|(&i, &nu)| counts[i as usize] < nu as i64)
            {
                return 0.0;
            }
            let Kind::Law { law } = &self.reactions[j].kind else {
                unreachable!("is_law marks law reactions")
            };
            return self.omega * law.eval(&|s| self.value(s, counts, totals), 0.0);
        }
        let mut a = constants[j];
        for (&i, &nu) in sp.iter().zip(nu) {
            let n = counts[i as usize];
            a *= if nu == 1 { n as f64 } else { falling(n, nu) };
        }
        a
    }

    /// The error for a law that is negative (or not a number) at `counts`.
    pub fn negative_law(
        &self,
        j: usize,
        value: f64,
        time: f64,
        run: u64,
        counts: &[i64],
    ) -> StochasticError {
        let r = &self.reactions[j];
        StochasticError::NegativeLaw {
            step: self.model.steps[r.step].name.clone(),
            value: value / self.omega,
            time,
            run,
            state: self
                .model
                .species
                .iter()
                .zip(counts)
                .map(|(s, &n)| (s.name.clone(), n))
                .collect(),
            span: r.span,
        }
    }

    /// Whether `count` can be held (0 to 2^53).
    pub fn holds(count: i64) -> bool {
        count >= 0 && (count as f64) <= MAX_COUNT
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn net(text: &str, litres: f64) -> Network {
        let loaded = crate::model::load_str(text, std::path::Path::new("t.mech"));
        let model = loaded.model.expect("the test model lowers");
        prepare(&model, litres).expect("the test model converts").0
    }

    #[test]
    fn constants_follow_the_order_of_each_step() {
        // Ω = 1 uM in 1 fL = 1e-6 · 6.02214076e23 · 1e-15 = 602.214076.
        let n = net(
            "species A = 1 uM, B\nparam k0 = 3 uM/s\nparam k1 = 2 /s\nparam k2 = 5 /uM/s\n\
             step make 0 -> A with k0\nstep go A -> B with k1\nstep pair 2 A -> B with k2\n",
            1e-15,
        );
        let omega = 602.214_076;
        assert!((n.omega - omega).abs() < 1e-9);
        assert_eq!(n.initial, vec![602, 0]);
        let c = n.stochastic_constants(&n.start_totals()).unwrap();
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * b.abs();
        assert!(close(c[0].unwrap(), 3.0 * omega));
        assert!(close(c[1].unwrap(), 2.0));
        // Gillespie 1977, eq. 11 and sec. II: c = 2k/Ω for 2 A -> B.
        assert!(close(c[2].unwrap(), 2.0 * 5.0 / omega));
        let counts = [10, 0];
        let base = n.constants(&n.start_totals()).unwrap();
        let a = n.propensity(2, &counts, &base, &[]);
        assert!(close(a, c[2].unwrap() * 10.0 * 9.0 / 2.0));
        assert_eq!(n.dependents(1), &[1, 2]);
    }

    #[test]
    fn fractional_coefficients_and_time_are_refused_with_spans() {
        let model = crate::model::load_str(
            "species A = 1 uM, B\nparam k = 1 /s\nstep half A -> 1/2 B with k\nstep timed B -> A law k * B * t\n",
            std::path::Path::new("t.mech"),
        )
        .model
        .unwrap();
        let errors = prepare(&model, 1e-15).unwrap_err();
        assert!(matches!(
            errors[0],
            StochasticError::FractionalCoefficient { .. }
        ));
        assert!(matches!(errors[1], StochasticError::TimeDependent { .. }));
        for e in &errors {
            assert!(!e.to_diagnostic().labels.is_empty());
        }
    }
}
