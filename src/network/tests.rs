//! Unit tests on hand-built models. Reference values name their source.
#![allow(clippy::needless_range_loop)] // matrix entries read clearest as n[i][j]

use super::*;
use crate::model::{Param, ParamDef, Rate, Species, Step, Term, Total};
use num_bigint::BigInt;
use num_rational::BigRational;

/// Parses `2 M + D` into terms over `model`'s species (created on first use).
fn side(model: &mut Model, text: &str) -> Vec<Term> {
    let mut terms = Vec::new();
    for part in text
        .split('+')
        .map(str::trim)
        .filter(|p| !p.is_empty() && *p != "0")
    {
        let (coef, name) = match part.split_once(' ') {
            Some((c, n)) => (c.parse::<i64>().expect("coefficient"), n.trim()),
            None => (1, part),
        };
        let i = match model.species.iter().position(|s| s.name == name) {
            Some(i) => i,
            None => {
                model.species.push(Species {
                    name: name.to_string(),
                    initial: 0.0,
                    initial_given: false,
                    description: None,
                    span: Default::default(),
                });
                model.species.len() - 1
            }
        };
        terms.push(Term {
            sym: Sym::Species(i),
            coefficient: Coef::from_integer(coef),
            span: Default::default(),
        });
    }
    terms
}

/// A mass-action model from steps written `A + B -> C` or `A <=> 2 B`.
fn network(steps: &[&str]) -> Model {
    let mut m = Model::default();
    m.params.push(Param {
        name: "k".into(),
        definition: ParamDef::Value(1.0),
        value: 1.0,
        dim: None,
        description: None,
        span: Default::default(),
    });
    m.param_order = vec![0];
    for (j, text) in steps.iter().enumerate() {
        let (reversible, (l, r)) = match text.split_once("<=>") {
            Some(p) => (true, p),
            None => (false, text.split_once("->").expect("arrow")),
        };
        let reactants = side(&mut m, l);
        let products = side(&mut m, r);
        let k = Expr::Name(Sym::Param(0));
        m.steps.push(Step {
            name: format!("r{}", j + 1),
            reactants,
            products,
            reversible,
            rate: Rate::MassAction {
                forward: k.clone(),
                reverse: reversible.then_some(k),
            },
            description: None,
            span: Default::default(),
            rate_span: Default::default(),
        });
    }
    m
}

fn set_initial(m: &mut Model, name: &str, v: f64) {
    let i = m.species.iter().position(|s| s.name == name).unwrap();
    m.species[i].initial = v;
    m.species[i].initial_given = true;
}

fn law_strings(m: &Model, r: &Reduced) -> Vec<String> {
    r.laws
        .iter()
        .map(|l| {
            l.coefficients
                .iter()
                .map(|(i, c)| {
                    if *c == BigInt::from(1) {
                        m.species[*i].name.clone()
                    } else {
                        format!("{c} {}", m.species[*i].name)
                    }
                })
                .collect::<Vec<_>>()
                .join(" + ")
        })
        .collect()
}

/// Checks yᵀN = 0 for every law and N = L·N_R exactly.
fn check_invariants(m: &Model, a: &Analysis) {
    let n = m.stoichiometry();
    for law in &a.reduced.laws {
        for j in 0..m.steps.len() {
            let s: BigRational = law
                .coefficients
                .iter()
                .map(|(i, c)| {
                    BigRational::from_integer(c.clone())
                        * BigRational::new((*n[*i][j].numer()).into(), (*n[*i][j].denom()).into())
                })
                .sum();
            assert_eq!(
                s,
                BigRational::from_integer(0.into()),
                "law {} not conserved by step {j}",
                law.name
            );
        }
    }
    assert_eq!(a.reduced.laws.len(), m.species.len() - a.rank);
    let r = &a.reduced;
    for i in 0..m.species.len() {
        for j in 0..m.steps.len() {
            let mut s = BigRational::from_integer(0.into());
            for (p, l) in &r.link_matrix[i] {
                if let Some((_, c)) = r.reduced_stoichiometry[*p].iter().find(|(k, _)| *k == j) {
                    s += l * BigRational::new((*c.numer()).into(), (*c.denom()).into());
                }
            }
            let expect = BigRational::new((*n[i][j].numer()).into(), (*n[i][j].denom()).into());
            assert_eq!(s, expect, "N = L·N_R fails at ({i}, {j})");
        }
    }
}

#[test]
fn michaelis_menten_rank_laws_and_reduction() {
    // Textbook result (common practice in enzyme kinetics, e.g. any
    // enzyme-kinetics text): E + S <=> ES -> E + P has rank 2 and the laws
    // E + ES and S + ES + P.
    let mut m = network(&["E + S <=> ES", "ES -> E + P"]);
    set_initial(&mut m, "E", 0.05);
    set_initial(&mut m, "S", 20.0);
    let a = analyze(&m).unwrap();
    assert_eq!(a.rank, 2);
    assert_eq!(law_strings(&m, &a.reduced), vec!["E + ES", "S + ES + P"]);
    assert_eq!(a.reduced.laws[0].name, "E_total");
    assert_eq!(a.reduced.laws[1].name, "S_total");
    assert!((a.reduced.laws[0].value - 0.05).abs() < 1e-15);
    assert!((a.reduced.laws[1].value - 20.0).abs() < 1e-15);
    assert_eq!(a.nonnegative, NonNegativeBasis::Spans);
    check_invariants(&m, &a);
    // Species order: E, S, ES, P. ES and P have no start value, so they are dependent.
    assert_eq!(a.reduced.independent, vec![0, 1]);
    // The full state rebuilt from (E, S) satisfies both laws.
    let y = a.reduced.full_state(&[0.03, 15.0]);
    assert!((y[0] + y[2] - 0.05).abs() < 1e-14);
    assert!((y[1] + y[2] + y[3] - 20.0).abs() < 1e-12);
    assert_eq!(a.reduced.rhs_exprs().len(), 2);
    // Complexes E+S, ES, E+P; one linkage class; δ = 3 − 1 − 2 = 0; not
    // weakly reversible (standard CRNT example, common practice).
    assert_eq!(a.structure.complexes.len(), 3);
    assert_eq!(a.structure.linkage_classes.len(), 1);
    assert_eq!(a.structure.deficiency, 0);
    assert!(!a.structure.weakly_reversible);
}

#[test]
fn reduced_right_hand_side_agrees_with_the_full_one() {
    let mut m = network(&["E + S <=> ES", "ES -> E + P"]);
    set_initial(&mut m, "E", 0.05);
    set_initial(&mut m, "S", 20.0);
    let r = reduce(&m).unwrap();
    let x = [0.02, 12.0];
    let y = r.full_state(&x);
    let full = r.model.rhs_exprs();
    for (k, e) in r.rhs_exprs().iter().enumerate() {
        let i = r.independent[k];
        let reduced_value = e.eval(
            &|s| match s {
                Sym::Species(j) => y[j],
                other => r.model.initial_value(other),
            },
            0.0,
        );
        let full_value = r.model.eval_at(&full[i], &y, 0.0);
        assert!((reduced_value - full_value).abs() < 1e-12);
    }
}

#[test]
fn dimerisation_conserves_monomer_plus_twice_dimer() {
    // 2 M <=> D: M + 2 D is conserved (mass balance; common practice).
    let mut m = network(&["2 M <=> D"]);
    set_initial(&mut m, "M", 3.0);
    let a = analyze(&m).unwrap();
    assert_eq!(a.rank, 1);
    assert_eq!(law_strings(&m, &a.reduced), vec!["M + 2 D"]);
    assert_eq!(a.reduced.laws[0].name, "M_total");
    check_invariants(&m, &a);
    // D has no start value, so it is dependent: D = (M_total − M) / 2.
    let y = a.reduced.full_state(&[1.0]);
    assert!((y[1] - 1.0).abs() < 1e-15);
}

#[test]
fn user_total_is_kept_with_its_name_and_preferred_dependent() {
    let mut m = network(&["E + S <=> ES", "ES -> E + P"]);
    set_initial(&mut m, "E", 0.05);
    set_initial(&mut m, "S", 20.0);
    // total E_t = E + ES
    m.totals.push(Total {
        name: "E_t".into(),
        terms: vec![(0, Coef::from_integer(1)), (2, Coef::from_integer(1))],
        value: 0.05,
        value_given: false,
        span: Default::default(),
    });
    let a = analyze(&m).unwrap();
    assert_eq!(a.reduced.laws[0].name, "E_t");
    assert_eq!(a.reduced.laws[0].user_total, Some(0));
    assert_eq!(a.reduced.laws[1].name, "S_total");
    assert_eq!(a.reduced.model.totals.len(), 2);
    // The species the lowering adjusts for E_t (ES, no start value) is its dependent.
    let es = a.reduced.dependent.iter().find(|d| d.total == 0).unwrap();
    assert_eq!(es.species, 2);
    check_invariants(&m, &a);
}

#[test]
fn a_user_total_that_is_not_conserved_is_an_error() {
    let mut m = network(&["E + S <=> ES", "ES -> E + P"]);
    m.totals.push(Total {
        name: "bad".into(),
        terms: vec![(0, Coef::from_integer(1))],
        value: 0.0,
        value_given: false,
        span: Default::default(),
    });
    let e = analyze(&m).unwrap_err();
    assert_eq!(e.code, crate::diagnostics::Code::TotalNotConserved);
    assert!(e.message.contains("r1"));
}

#[test]
fn feinberg_1987_deficiency_zero_weakly_reversible_example() {
    // Feinberg 1987 (Chem. Eng. Sci. 42:2229), the worked example with
    // complexes A, 2B, A+C, D, B+E (from memory): A <=> 2B, A + C <=> D,
    // D -> B + E, B + E -> A + C. Five complexes, two linkage classes,
    // rank 3, deficiency 0, weakly reversible.
    let m = network(&["A <=> 2 B", "A + C <=> D", "D -> B + E", "B + E -> A + C"]);
    let a = analyze(&m).unwrap();
    assert_eq!(a.structure.complexes.len(), 5);
    assert_eq!(a.structure.linkage_classes.len(), 2);
    assert_eq!(a.rank, 3);
    assert_eq!(a.structure.deficiency, 0);
    assert!(a.structure.weakly_reversible);
    assert!(!a.structure.reversible);
    check_invariants(&m, &a);
}

#[test]
fn edelstein_network_has_deficiency_one() {
    // The Edelstein network A <=> 2A, A + B <=> C <=> B, discussed by
    // Feinberg 1987 (Chem. Eng. Sci. 42:2229) as a deficiency-one network
    // with multiple steady states (from memory): 5 complexes, 2 linkage
    // classes, rank 2, δ = 1.
    let m = network(&["A <=> 2 A", "A + B <=> C", "C <=> B"]);
    let a = analyze(&m).unwrap();
    assert_eq!(a.structure.complexes.len(), 5);
    assert_eq!(a.structure.linkage_classes.len(), 2);
    assert_eq!(a.rank, 2);
    assert_eq!(a.structure.deficiency, 1);
    assert!(a.structure.reversible);
    check_invariants(&m, &a);
}

#[test]
fn mixed_sign_laws_complete_the_basis() {
    // A -> B, C -> A + D, B -> D: y_B = y_A, y_C = y_A + y_D, y_D = y_B, so
    // the one law is A + B + 2 C + D (solved by hand).
    let m = network(&["A -> B", "C -> A + D", "B -> D"]);
    let a = analyze(&m).unwrap();
    assert_eq!(law_strings(&m, &a.reduced), vec!["A + B + 2 C + D"]);
    check_invariants(&m, &a);

    // A + B -> 0 conserves only A − B: no non-negative law exists.
    let m = network(&["A + B -> 0"]);
    let a = analyze(&m).unwrap();
    assert_eq!(law_strings(&m, &a.reduced), vec!["A + -1 B"]);
    assert_eq!(a.reduced.laws[0].name, "conserved_1");
    assert_eq!(a.nonnegative, NonNegativeBasis::NoneExist);
    check_invariants(&m, &a);

    // Adding C <=> D gives the moiety C + D, which does not span A − B.
    let m = network(&["A + B -> 0", "C <=> D"]);
    let a = analyze(&m).unwrap();
    assert_eq!(law_strings(&m, &a.reduced), vec!["C + D", "A + -1 B"]);
    assert_eq!(a.nonnegative, NonNegativeBasis::Partial);
    check_invariants(&m, &a);
}

#[test]
fn never_fire_and_never_produced() {
    // X has no start value and nothing makes it, so X -> Y never fires.
    let mut m = network(&["A -> B", "X -> Y", "B + Y -> Z"]);
    set_initial(&mut m, "A", 1.0);
    let a = analyze(&m).unwrap();
    let names = |v: &[usize]| {
        v.iter()
            .map(|i| m.species[*i].name.clone())
            .collect::<Vec<_>>()
    };
    assert_eq!(a.structure.never_fire, vec![1, 2]);
    assert_eq!(names(&a.structure.never_produced), vec!["A", "X"]);
    assert_eq!(names(&a.structure.never_consumed), vec!["Z"]);
}

#[test]
fn rational_coefficients_are_exact() {
    // 1/2 O2 + H2 -> H2O: H2O is produced, laws O: O2·2 + H2O, H: 2 H2 + 2 H2O → H2 + H2O.
    let mut m = network(&["H2 + O2 -> H2O"]);
    m.steps[0].reactants[1].coefficient = Coef::new(1, 2);
    let a = analyze(&m).unwrap();
    assert_eq!(a.rank, 1);
    assert_eq!(law_strings(&m, &a.reduced), vec!["H2 + H2O", "2 O2 + H2O"]);
    check_invariants(&m, &a);
}

#[test]
fn a_long_closed_cycle_has_one_moiety_over_every_species() {
    // A0 -> A1 -> ... -> A399 -> A0 conserves the sum of all species
    // (mass balance of a closed cycle; common practice).
    let texts: Vec<String> = (0..400)
        .map(|i| format!("A{i} -> A{}", (i + 1) % 400))
        .collect();
    let refs: Vec<&str> = texts.iter().map(String::as_str).collect();
    let m = network(&refs);
    let a = analyze(&m).unwrap();
    assert_eq!(a.rank, 399);
    assert_eq!(a.reduced.laws.len(), 1);
    assert_eq!(a.reduced.laws[0].coefficients.len(), 400);
    assert!(
        a.reduced.laws[0]
            .coefficients
            .iter()
            .all(|(_, c)| *c == BigInt::from(1))
    );
    assert_eq!(a.nonnegative, NonNegativeBasis::Spans);
    check_invariants(&m, &a);
}

/// splitmix64, so the random networks are the same on every run.
fn next(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

#[test]
fn reduced_system_reproduces_the_full_one_on_random_networks() {
    // For 200 seeded networks: the rebuilt full state keeps every law at its
    // value, and d/dt of each independent species from the reduced
    // right-hand side equals the full right-hand side there.
    for seed in 0..200u64 {
        let mut state = seed;
        let nspecies = 2 + next(&mut state) % 7;
        let nsteps = 1 + next(&mut state) % 8;
        let mut steps = Vec::new();
        for _ in 0..nsteps {
            let mut sides = Vec::new();
            for _ in 0..2 {
                let terms: Vec<String> = (0..next(&mut state) % 3)
                    .map(|_| {
                        let c = 1 + next(&mut state) % 2;
                        let s = next(&mut state) % nspecies;
                        if c == 1 {
                            format!("X{s}")
                        } else {
                            format!("{c} X{s}")
                        }
                    })
                    .collect();
                sides.push(if terms.is_empty() {
                    "0".to_string()
                } else {
                    terms.join(" + ")
                });
            }
            let arrow = if next(&mut state).is_multiple_of(2) {
                "->"
            } else {
                "<=>"
            };
            steps.push(format!("{} {arrow} {}", sides[0], sides[1]));
        }
        let refs: Vec<&str> = steps.iter().map(String::as_str).collect();
        let mut m = network(&refs);
        for i in 0..m.species.len() {
            m.species[i].initial = 0.5 + i as f64;
            m.species[i].initial_given = true;
        }
        let a = analyze(&m).unwrap();
        check_invariants(&m, &a);
        let r = &a.reduced;
        let x: Vec<f64> = r
            .independent
            .iter()
            .map(|i| 0.3 + 0.7 * *i as f64)
            .collect();
        let y = r.full_state(&x);
        for law in &r.laws {
            let v: f64 = law
                .coefficients
                .iter()
                .map(|(i, c)| c.to_string().parse::<f64>().unwrap() * y[*i])
                .sum();
            assert!(
                (v - law.value).abs() < 1e-9 * law.value.abs().max(1.0),
                "seed {seed}: law {} broken",
                law.name
            );
        }
        let full = r.model.rhs_exprs();
        for (k, e) in r.rhs_exprs().iter().enumerate() {
            let reduced_value = e.eval(
                &|s| match s {
                    Sym::Species(j) => y[j],
                    other => r.model.initial_value(other),
                },
                0.0,
            );
            let full_value = r.model.eval_at(&full[r.independent[k]], &y, 0.0);
            assert!(
                (reduced_value - full_value).abs() < 1e-9 * full_value.abs().max(1.0),
                "seed {seed}: {reduced_value} vs {full_value}"
            );
        }
    }
}

#[test]
fn large_coprime_denominators_do_not_overflow() {
    // 1/9999999967 A + 1/9999999943 B -> C (two primes near 1e10): the
    // column scaled to integers has entries near 1e20, beyond i64.
    let mut m = network(&["A + B -> C"]);
    m.steps[0].reactants[0].coefficient = Coef::new(1, 9_999_999_967);
    m.steps[0].reactants[1].coefficient = Coef::new(1, 9_999_999_943);
    let a = analyze(&m).unwrap();
    assert_eq!(a.rank, 1);
    assert_eq!(a.reduced.laws.len(), 2);
    check_invariants(&m, &a);
}
