//! Conservation laws and the reduced system.
//!
//! From an integer basis of the left null space, the laws reported are, in
//! order: the user's `total`s, then non-negative extreme rays (moieties),
//! then integer basis vectors where the non-negative ones do not span,
//! each taken only if it is independent of those already taken. One
//! dependent species per law follows from a reduced row echelon form of the
//! laws with preferred pivots (the species a user total adjusts, then species
//! with no written start value), which also gives the link matrix
//! `L` with `N = L·N_R` (Reder 1988, J. Theor. Biol. 135:175).

use super::moieties::{BlockRays, extreme_rays};
use super::sparse::{Row, combine, divide_content, eliminate_exact, get, normalize_sign};
use super::{ConservationLaw, DependentSpecies, LawSource, NonNegativeBasis, Reduced};
use crate::diagnostics::{Code, Diagnostic, Span};
use crate::model::{Coef, Expr, Model, Sym, Total};
use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};
use std::collections::HashMap;

/// Stoichiometry as integer columns: each step's net change scaled by the
/// lcm of its denominators (which leaves the left null space and the rank
/// unchanged).
pub(crate) fn integer_columns(model: &Model) -> Vec<Vec<(usize, BigInt)>> {
    (0..model.steps.len())
        .map(|j| {
            let change = model.net_change(j);
            let lcm = denominator_lcm(change.iter().map(|(_, c)| c));
            change
                .into_iter()
                .map(|(i, c)| (i, scaled(&c, &lcm)))
                .collect()
        })
        .collect()
}

/// The lcm of the denominators, in big integers (fractions the user wrote
/// may have large, coprime denominators).
fn denominator_lcm<'a>(coefs: impl Iterator<Item = &'a Coef>) -> BigInt {
    coefs.fold(BigInt::one(), |l, c| l.lcm(&BigInt::from(*c.denom())))
}

/// `c · lcm` as an integer (`lcm` is a multiple of `c`'s denominator).
fn scaled(c: &Coef, lcm: &BigInt) -> BigInt {
    BigInt::from(*c.numer()) * (lcm / BigInt::from(*c.denom()))
}

/// Everything the law search finds, before naming.
pub(crate) struct Found {
    pub rank: usize,
    pub reduced: Reduced,
    pub redundant_totals: Vec<usize>,
    pub nonnegative: NonNegativeBasis,
}

/// Integer vector of a user total (content 1) and the factor `s` with
/// `vector = s · terms`.
fn total_vector(total: &Total) -> (Row<BigInt>, BigRational) {
    let lcm = denominator_lcm(total.terms.iter().map(|(_, c)| c));
    let mut v: Row<BigInt> = total
        .terms
        .iter()
        .map(|(i, c)| (*i as u32, scaled(c, &lcm)))
        .collect();
    v.sort_by_key(|e| e.0);
    v.retain(|e| !Zero::is_zero(&e.1));
    let g = v.iter().fold(BigInt::zero(), |g, (_, x)| g.gcd(x));
    let g = if Zero::is_zero(&g) { BigInt::one() } else { g };
    for (_, x) in v.iter_mut() {
        *x /= &g;
    }
    (v, BigRational::new(lcm, g))
}

/// Row echelon form used to test independence: pivot = leading column.
#[derive(Default)]
struct Echelon {
    rows: Vec<Row<BigInt>>,
    by_pivot: HashMap<u32, usize>,
}

impl Echelon {
    /// Adds `v` if it is independent of the rows so far; returns whether it was.
    fn insert(&mut self, v: &Row<BigInt>) -> bool {
        let mut v = v.clone();
        let mut k = 0;
        while k < v.len() {
            let col = v[k].0;
            if let Some(&r) = self.by_pivot.get(&col) {
                let row = &self.rows[r];
                let p = row[0].1.clone();
                let a = v[k].1.clone();
                let g = p.gcd(&a);
                v = combine(&v, &(&p / &g), row, &(-(&a / &g))).expect("BigInt");
                divide_content(&mut [&mut v]);
                // Entries before `col` are unchanged: every row's entries lie at or after its pivot.
                k = v.partition_point(|e| e.0 <= col);
            } else {
                k += 1;
            }
        }
        if v.is_empty() {
            return false;
        }
        self.by_pivot.insert(v[0].0, self.rows.len());
        self.rows.push(v);
        true
    }
}

fn dot_is_zero(y: &Row<BigInt>, columns: &[Vec<(usize, BigInt)>]) -> Option<usize> {
    for (j, col) in columns.iter().enumerate() {
        let s: BigInt = col
            .iter()
            .filter_map(|(i, c)| get(y, *i as u32).map(|v| v * c))
            .sum();
        if !Zero::is_zero(&s) {
            return Some(j);
        }
    }
    None
}

/// Splits basis vectors into groups whose supports are disjoint.
fn blocks(basis: &[Row<BigInt>], nspecies: usize) -> Vec<(Vec<usize>, Vec<usize>)> {
    let mut parent: Vec<usize> = (0..basis.len()).collect();
    fn find(p: &mut [usize], x: usize) -> usize {
        let mut r = x;
        while p[r] != r {
            r = p[r];
        }
        let mut x = x;
        while p[x] != r {
            let n = p[x];
            p[x] = r;
            x = n;
        }
        r
    }
    let mut owner: Vec<Option<usize>> = vec![None; nspecies];
    for (b, v) in basis.iter().enumerate() {
        for (s, _) in v {
            match owner[*s as usize] {
                None => owner[*s as usize] = Some(b),
                Some(o) => {
                    let (ra, rb) = (find(&mut parent, o), find(&mut parent, b));
                    if ra != rb {
                        parent[ra] = rb;
                    }
                }
            }
        }
    }
    let mut groups: HashMap<usize, (Vec<usize>, Vec<usize>)> = HashMap::new();
    for b in 0..basis.len() {
        let r = find(&mut parent, b);
        groups.entry(r).or_default().1.push(b);
    }
    for (s, o) in owner.iter().enumerate() {
        if let Some(o) = o {
            let r = find(&mut parent, *o);
            groups.entry(r).or_default().0.push(s);
        }
    }
    let mut out: Vec<(Vec<usize>, Vec<usize>)> = groups.into_values().collect();
    out.sort_by_key(|g| g.0.first().copied());
    out
}

/// Finds the laws, names them, and builds the reduced system.
pub(crate) fn find(model: &Model) -> Result<Found, Diagnostic> {
    let n = model.species.len();
    let columns = integer_columns(model);
    // Rows of N (species) as sparse integer rows over steps.
    let mut rows: Vec<Row<BigInt>> = vec![Vec::new(); n];
    for (j, col) in columns.iter().enumerate() {
        for (i, c) in col {
            rows[*i].push((j as u32, c.clone()));
        }
    }
    let elim = eliminate_exact(&rows, columns.len());
    let rank = elim.pivots.len();
    let k = elim.null_vectors.len();

    let mut echelon = Echelon::default();
    let mut chosen: Vec<(Row<BigInt>, LawSource)> = Vec::new();
    let mut redundant_totals = Vec::new();
    for (t, total) in model.totals.iter().enumerate() {
        let (v, _) = total_vector(total);
        if v.is_empty() {
            return Err(Diagnostic::error(
                Code::TotalEmpty,
                format!("total `{}` has no species", total.name),
            )
            .with_label(total.span, "this total"));
        }
        if let Some(j) = dot_is_zero(&v, &columns) {
            let step = &model.steps[j];
            return Err(Diagnostic::error(
                Code::TotalNotConserved,
                format!(
                    "total `{}` is not conserved: step `{}` changes it",
                    total.name, step.name
                ),
            )
            .with_label(total.span, "this total")
            .with_label(step.span, "changes the total"));
        }
        if echelon.insert(&v) {
            chosen.push((v, LawSource::User(t)));
        } else {
            redundant_totals.push(t);
        }
    }

    // Moieties, block by block.
    let mut nonneg_rays: Vec<Row<BigInt>> = Vec::new();
    let mut abandoned_blocks = 0usize;
    for (species, members) in blocks(&elim.null_vectors, n) {
        // A one-dimensional block is a line: its only possible ray is the
        // basis vector itself, when all its coefficients share one sign.
        if let [only] = members[..] {
            let v = &elim.null_vectors[only];
            if v.iter().all(|(_, c)| c.is_positive()) {
                nonneg_rays.push(v.clone());
            } else if v.iter().all(|(_, c)| c.is_negative()) {
                nonneg_rays.push(v.iter().map(|(i, c)| (*i, -c)).collect());
            }
            continue;
        }
        let basis: Vec<&Row<BigInt>> = members.iter().map(|b| &elim.null_vectors[*b]).collect();
        match extreme_rays(&species, &basis) {
            BlockRays::Rays(r) => nonneg_rays.extend(r),
            BlockRays::TooLarge => abandoned_blocks += 1,
        }
    }
    nonneg_rays.sort_by(|a, b| {
        a.len()
            .cmp(&b.len())
            .then_with(|| a.iter().map(|e| e.0).cmp(b.iter().map(|e| e.0)))
    });
    for ray in &nonneg_rays {
        if chosen.len() == k {
            break;
        }
        if echelon.insert(ray) {
            chosen.push((ray.clone(), LawSource::NonNegative));
        }
    }
    for v in &elim.null_vectors {
        if chosen.len() == k {
            break;
        }
        if echelon.insert(v) {
            chosen.push((v.clone(), LawSource::Integer));
        }
    }
    debug_assert_eq!(chosen.len(), k);
    let all_nonneg = chosen
        .iter()
        .all(|(v, _)| v.iter().all(|(_, c)| !c.is_negative()));
    let nonnegative = if abandoned_blocks > 0 {
        NonNegativeBasis::GaveUp {
            blocks: abandoned_blocks,
        }
    } else if k == 0 {
        NonNegativeBasis::NoLaws
    } else if all_nonneg {
        NonNegativeBasis::Spans
    } else if nonneg_rays.is_empty() {
        NonNegativeBasis::NoneExist
    } else {
        NonNegativeBasis::Partial
    };

    let reduced = build_reduced(model, chosen, &columns)?;
    Ok(Found {
        rank,
        reduced,
        redundant_totals,
        nonnegative,
    })
}

/// A readable name for an automatic law that clashes with no other name:
/// `X_total` after the first species with coefficient 1 whose name is still
/// free (then any species), else `conserved_N` for laws with mixed signs.
fn law_name(model: &Model, v: &Row<BigInt>, used: &mut Vec<String>, counter: &mut usize) -> String {
    let taken = |name: &str, used: &Vec<String>| {
        model.lookup(name).is_some() || used.iter().any(|u| u == name)
    };
    let semi_positive = v.iter().all(|(_, c)| c.is_positive());
    let base = if semi_positive {
        let candidates = v
            .iter()
            .filter(|(_, c)| c.is_one())
            .chain(v.iter().filter(|(_, c)| !c.is_one()));
        let names: Vec<String> = candidates
            .map(|(i, _)| format!("{}_total", model.species[*i as usize].name))
            .collect();
        match names.iter().find(|n| !taken(n, used)) {
            Some(free) => free.clone(),
            None => names[0].clone(),
        }
    } else {
        *counter += 1;
        format!("conserved_{counter}")
    };
    let mut name = base.clone();
    let mut suffix = 2;
    while taken(&name, used) {
        name = format!("{base}_{suffix}");
        suffix += 1;
    }
    used.push(name.clone());
    name
}

fn big_to_coef(v: &BigInt) -> Option<Coef> {
    v.to_i64().map(Coef::from_integer)
}

fn rational_f64(r: &BigRational) -> f64 {
    r.to_f64().unwrap_or(f64::NAN)
}

/// `Σ c·sym` as an expression, exact integers kept as integers and other
/// coefficients written as `(p·x)/q`.
pub(crate) fn linear_expr(terms: &[(Sym, BigRational)]) -> Expr {
    let one = |sym: Sym, c: &BigRational| -> Expr {
        let c = c.abs();
        let numer = c.numer().to_f64().unwrap_or(f64::NAN);
        let base = if c.numer().is_one() {
            Expr::Name(sym)
        } else {
            Expr::mul(Expr::Number(numer), Expr::Name(sym))
        };
        if c.denom().is_one() {
            base
        } else {
            Expr::bin(
                crate::model::BinOp::Div,
                base,
                Expr::Number(c.denom().to_f64().unwrap_or(f64::NAN)),
            )
        }
    };
    let mut acc: Option<Expr> = None;
    for (sym, c) in terms.iter().filter(|(_, c)| !c.is_zero()) {
        let t = one(*sym, c);
        acc = Some(match acc {
            None if c.is_negative() => Expr::Neg(Box::new(t)),
            None => t,
            Some(a) if c.is_negative() => Expr::sub(a, t),
            Some(a) => Expr::add(a, t),
        });
    }
    acc.unwrap_or(Expr::Number(0.0))
}

fn build_reduced(
    model: &Model,
    chosen: Vec<(Row<BigInt>, LawSource)>,
    columns: &[Vec<(usize, BigInt)>],
) -> Result<Reduced, Diagnostic> {
    let n = model.species.len();
    let mut out_model = model.clone();
    let mut used = Vec::new();
    let mut counter = 0;
    let mut laws = Vec::with_capacity(chosen.len());
    // law value as a multiple of its Total: value_l = scale_l · Total(total_l)
    let mut law_total: Vec<(usize, BigRational)> = Vec::with_capacity(chosen.len());
    for (v, source) in &chosen {
        let mut v = v.clone();
        match source {
            LawSource::User(t) => {
                let total = &model.totals[*t];
                let (vv, scale) = total_vector(total);
                laws.push(ConservationLaw {
                    name: total.name.clone(),
                    coefficients: vv.iter().map(|(i, c)| (*i as usize, c.clone())).collect(),
                    value: total.value * rational_f64(&scale),
                    user_total: Some(*t),
                });
                law_total.push((*t, scale));
            }
            _ => {
                normalize_sign(&mut v).expect("BigInt");
                let name = law_name(model, &v, &mut used, &mut counter);
                let value: f64 = v
                    .iter()
                    .map(|(i, c)| {
                        c.to_f64().unwrap_or(f64::NAN) * model.species[*i as usize].initial
                    })
                    .sum();
                let Some(terms) = v
                    .iter()
                    .map(|(i, c)| big_to_coef(c).map(|c| (*i as usize, c)))
                    .collect::<Option<Vec<_>>>()
                else {
                    return Err(Diagnostic::error(
                        Code::InputTooLarge,
                        format!(
                            "conservation law `{name}` has a coefficient too large to represent"
                        ),
                    ));
                };
                let span = terms
                    .first()
                    .map(|(i, _)| model.species[*i].span)
                    .unwrap_or_else(Span::default);
                out_model.totals.push(Total {
                    name: name.clone(),
                    terms,
                    value,
                    value_given: false,
                    span,
                });
                law_total.push((out_model.totals.len() - 1, BigRational::one()));
                laws.push(ConservationLaw {
                    name,
                    coefficients: v.iter().map(|(i, c)| (*i as usize, c.clone())).collect(),
                    value,
                    user_total: None,
                });
            }
        }
    }

    // Reduced row echelon form of the laws with preferred pivots. Each row:
    // Σ row·x = Σ tag_l · value_l.
    struct RrefRow {
        pivot: u32,
        row: Row<BigInt>,
        tag: Row<BigInt>,
    }
    let mut rref: Vec<RrefRow> = Vec::new();
    let mut is_dependent = vec![false; n];
    for (l, law) in laws.iter().enumerate() {
        let mut row: Row<BigInt> = law
            .coefficients
            .iter()
            .map(|(i, c)| (*i as u32, c.clone()))
            .collect();
        let mut tag: Row<BigInt> = vec![(l as u32, BigInt::one())];
        for r in &rref {
            if let Some(a) = get(&row, r.pivot).cloned() {
                let p = get(&r.row, r.pivot).cloned().expect("pivot present");
                let g = p.gcd(&a);
                let (mp, ma) = (&p / &g, -(&a / &g));
                row = combine(&row, &mp, &r.row, &ma).expect("BigInt");
                tag = combine(&tag, &mp, &r.tag, &ma).expect("BigInt");
                divide_content(&mut [&mut row, &mut tag]);
            }
        }
        let preferred = match law.user_total {
            Some(t) => model
                .total_adjusted_species(t)
                .filter(|s| get(&row, *s as u32).is_some()),
            None => None,
        };
        let pivot = preferred
            .map(|s| s as u32)
            .or_else(|| {
                row.iter()
                    .find(|(i, _)| !model.species[*i as usize].initial_given)
                    .map(|e| e.0)
            })
            .or_else(|| row.first().map(|e| e.0))
            .expect("chosen laws are independent, so the reduced row is not zero");
        if get(&row, pivot).is_some_and(|v| v.is_negative()) {
            row.iter_mut().for_each(|e| e.1 = -&e.1);
            tag.iter_mut().for_each(|e| e.1 = -&e.1);
        }
        let p = get(&row, pivot).cloned().expect("pivot present");
        for r in rref.iter_mut() {
            if let Some(a) = get(&r.row, pivot).cloned() {
                let g = p.gcd(&a);
                let (mp, ma) = (&p / &g, -(&a / &g));
                r.row = combine(&r.row, &mp, &row, &ma).expect("BigInt");
                r.tag = combine(&r.tag, &mp, &tag, &ma).expect("BigInt");
                divide_content(&mut [&mut r.row, &mut r.tag]);
                if get(&r.row, r.pivot).is_some_and(|v| v.is_negative()) {
                    r.row.iter_mut().for_each(|e| e.1 = -&e.1);
                    r.tag.iter_mut().for_each(|e| e.1 = -&e.1);
                }
            }
        }
        is_dependent[pivot as usize] = true;
        rref.push(RrefRow { pivot, row, tag });
    }

    let independent: Vec<usize> = (0..n).filter(|i| !is_dependent[*i]).collect();
    let mut position = vec![usize::MAX; n];
    for (p, i) in independent.iter().enumerate() {
        position[*i] = p;
    }
    let mut link: Vec<Vec<(usize, BigRational)>> = vec![Vec::new(); n];
    for &i in &independent {
        link[i] = vec![(position[i], BigRational::one())];
    }
    let mut dependent = Vec::with_capacity(rref.len());
    for (l, r) in rref.iter().enumerate() {
        let d = r.pivot as usize;
        let p = get(&r.row, r.pivot).cloned().expect("pivot present");
        let mut terms: Vec<(Sym, BigRational)> = Vec::new();
        for (law, m) in &r.tag {
            let (t, scale) = &law_total[*law as usize];
            terms.push((
                Sym::Total(*t),
                BigRational::new(m.clone(), p.clone()) * scale,
            ));
        }
        for (i, a) in r.row.iter().filter(|(i, _)| *i != r.pivot) {
            let c = -BigRational::new(a.clone(), p.clone());
            link[d].push((position[*i as usize], c.clone()));
            terms.push((Sym::Species(*i as usize), c));
        }
        link[d].sort_by_key(|e| e.0);
        dependent.push(DependentSpecies {
            species: d,
            total: law_total[l].0,
            formula: linear_expr(&terms),
        });
    }
    dependent.sort_by_key(|d| d.species);

    let reduced_stoichiometry: Vec<Vec<(usize, Coef)>> = {
        let mut rows: Vec<Vec<(usize, Coef)>> = vec![Vec::new(); independent.len()];
        for j in 0..model.steps.len() {
            for (i, c) in model.net_change(j) {
                if position[i] != usize::MAX {
                    rows[position[i]].push((j, c));
                }
            }
        }
        rows
    };
    let _ = columns;
    Ok(Reduced {
        model: out_model,
        laws,
        independent,
        dependent,
        link_matrix: link,
        reduced_stoichiometry,
    })
}
