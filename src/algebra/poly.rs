//! Exact multivariate polynomials with rational coefficients.
//!
//! Why: rate-law derivation must reproduce published formulas symbolically,
//! so sums over spanning trees, cancellations and collected coefficient
//! forms are computed exactly (num-bigint / num-rational), never in floats.
//!
//! Invariants: a [`Monomial`] lists its variables in increasing order with
//! positive exponents; a [`Poly`] never stores a zero coefficient. Variables
//! are plain indices; [`Vars`] maps them to names for parsing and printing.

use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};
use std::cmp::Ordering;
use std::collections::{BTreeMap, BTreeSet, HashMap};

/// A variable: an index into a [`Vars`] table.
pub type Var = u32;

/// A product of variables with positive integer exponents, sorted by variable.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Default)]
pub struct Monomial(Vec<(Var, u32)>);

impl Monomial {
    pub fn one() -> Monomial {
        Monomial(Vec::new())
    }
    pub fn var(v: Var) -> Monomial {
        Monomial(vec![(v, 1)])
    }
    /// Builds a monomial from (variable, exponent) pairs in any order.
    pub fn from_pairs(pairs: impl IntoIterator<Item = (Var, u32)>) -> Monomial {
        let mut m = Monomial::one();
        for (v, e) in pairs {
            m = m.mul(&Monomial(if e == 0 { vec![] } else { vec![(v, e)] }));
        }
        m
    }
    pub fn is_one(&self) -> bool {
        self.0.is_empty()
    }
    /// From pairs already sorted by variable, with positive exponents.
    pub(crate) fn from_sorted(pairs: Vec<(Var, u32)>) -> Monomial {
        debug_assert!(pairs.windows(2).all(|w| w[0].0 < w[1].0) && pairs.iter().all(|p| p.1 > 0));
        Monomial(pairs)
    }
    pub fn pairs(&self) -> &[(Var, u32)] {
        &self.0
    }
    pub fn degree(&self) -> u32 {
        self.0.iter().map(|(_, e)| e).sum()
    }
    pub fn exponent(&self, v: Var) -> u32 {
        self.0
            .iter()
            .find(|(w, _)| *w == v)
            .map(|(_, e)| *e)
            .unwrap_or(0)
    }
    pub fn mul(&self, other: &Monomial) -> Monomial {
        let (a, b) = (&self.0, &other.0);
        let mut out = Vec::with_capacity(a.len() + b.len());
        let (mut i, mut j) = (0, 0);
        while i < a.len() && j < b.len() {
            match a[i].0.cmp(&b[j].0) {
                Ordering::Less => {
                    out.push(a[i]);
                    i += 1;
                }
                Ordering::Greater => {
                    out.push(b[j]);
                    j += 1;
                }
                Ordering::Equal => {
                    out.push((a[i].0, a[i].1 + b[j].1));
                    i += 1;
                    j += 1;
                }
            }
        }
        out.extend_from_slice(&a[i..]);
        out.extend_from_slice(&b[j..]);
        Monomial(out)
    }
    /// `self / other` when `other` divides `self`.
    pub fn div(&self, other: &Monomial) -> Option<Monomial> {
        let mut out = Vec::with_capacity(self.0.len());
        let mut j = 0;
        for &(v, e) in &self.0 {
            let mut e = e;
            if j < other.0.len() && other.0[j].0 < v {
                return None;
            }
            if j < other.0.len() && other.0[j].0 == v {
                if other.0[j].1 > e {
                    return None;
                }
                e -= other.0[j].1;
                j += 1;
            }
            if e > 0 {
                out.push((v, e));
            }
        }
        if j < other.0.len() {
            return None;
        }
        Some(Monomial(out))
    }
    pub fn gcd(&self, other: &Monomial) -> Monomial {
        Monomial(
            self.0
                .iter()
                .filter_map(|&(v, e)| {
                    let f = other.exponent(v);
                    (f > 0).then(|| (v, e.min(f)))
                })
                .collect(),
        )
    }
    /// The part of the monomial in the variables `keep` selects, and the rest.
    pub fn split(&self, keep: &dyn Fn(Var) -> bool) -> (Monomial, Monomial) {
        let (a, b): (Vec<_>, Vec<_>) = self.0.iter().partition(|(v, _)| keep(*v));
        (Monomial(a), Monomial(b))
    }
    /// Graded lexicographic order (a monomial order, used for division).
    pub fn grlex_cmp(&self, other: &Monomial) -> Ordering {
        self.degree().cmp(&other.degree()).then_with(|| {
            // Lexicographic on exponent vectors with variable 0 most significant.
            let (a, b) = (&self.0, &other.0);
            let (mut i, mut j) = (0, 0);
            loop {
                match (a.get(i), b.get(j)) {
                    (None, None) => return Ordering::Equal,
                    (Some(_), None) => return Ordering::Greater,
                    (None, Some(_)) => return Ordering::Less,
                    (Some(&(va, ea)), Some(&(vb, eb))) => {
                        if va < vb {
                            return Ordering::Greater;
                        }
                        if vb < va {
                            return Ordering::Less;
                        }
                        if ea != eb {
                            return ea.cmp(&eb);
                        }
                        i += 1;
                        j += 1;
                    }
                }
            }
        })
    }
    pub fn eval(&self, value: &dyn Fn(Var) -> f64) -> f64 {
        self.0
            .iter()
            .map(|&(v, e)| value(v).powi(e as i32))
            .product()
    }
}

/// A multivariate polynomial with exact rational coefficients.
#[derive(Clone, PartialEq, Eq, Debug, Default)]
pub struct Poly {
    terms: BTreeMap<Monomial, BigRational>,
}

impl Poly {
    pub fn zero() -> Poly {
        Poly::default()
    }
    pub fn one() -> Poly {
        Poly::constant(BigRational::one())
    }
    pub fn constant(c: BigRational) -> Poly {
        let mut p = Poly::zero();
        if !c.is_zero() {
            p.terms.insert(Monomial::one(), c);
        }
        p
    }
    pub fn integer(n: i64) -> Poly {
        Poly::constant(BigRational::from_integer(BigInt::from(n)))
    }
    pub fn var(v: Var) -> Poly {
        Poly::term(BigRational::one(), Monomial::var(v))
    }
    pub fn term(c: BigRational, m: Monomial) -> Poly {
        let mut p = Poly::zero();
        if !c.is_zero() {
            p.terms.insert(m, c);
        }
        p
    }
    pub fn monomial(m: Monomial) -> Poly {
        Poly::term(BigRational::one(), m)
    }
    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }
    pub fn is_one(&self) -> bool {
        self.terms.len() == 1 && self.terms.get(&Monomial::one()).is_some_and(|c| c.is_one())
    }
    /// The value if the polynomial is a constant.
    pub fn as_constant(&self) -> Option<BigRational> {
        match self.terms.len() {
            0 => Some(BigRational::zero()),
            1 => self.terms.get(&Monomial::one()).cloned(),
            _ => None,
        }
    }
    pub fn len(&self) -> usize {
        self.terms.len()
    }
    /// Machine words held by all coefficients (numerators and denominators).
    fn coefficient_words(&self) -> u64 {
        self.terms
            .values()
            .map(|c| (c.numer().bits() + c.denom().bits()).div_ceil(64))
            .sum()
    }
    pub fn is_empty(&self) -> bool {
        self.terms.is_empty()
    }
    pub fn terms(&self) -> impl Iterator<Item = (&Monomial, &BigRational)> {
        self.terms.iter()
    }
    pub fn coefficient(&self, m: &Monomial) -> BigRational {
        self.terms.get(m).cloned().unwrap_or_else(BigRational::zero)
    }

    /// Adds `c * m` in place.
    pub fn add_term(&mut self, c: BigRational, m: Monomial) {
        if c.is_zero() {
            return;
        }
        match self.terms.entry(m) {
            std::collections::btree_map::Entry::Vacant(e) => {
                e.insert(c);
            }
            std::collections::btree_map::Entry::Occupied(mut e) => {
                *e.get_mut() += c;
                if e.get().is_zero() {
                    e.remove();
                }
            }
        }
    }
    pub fn add_assign_poly(&mut self, other: &Poly) {
        for (m, c) in &other.terms {
            self.add_term(c.clone(), m.clone());
        }
    }
    /// Adds `factor * other` in place.
    pub fn add_mul_assign(&mut self, other: &Poly, factor: &Poly) {
        for (m1, c1) in &other.terms {
            for (m2, c2) in &factor.terms {
                self.add_term(c1 * c2, m1.mul(m2));
            }
        }
    }
    pub fn add(&self, other: &Poly) -> Poly {
        let mut p = self.clone();
        p.add_assign_poly(other);
        p
    }
    pub fn sub(&self, other: &Poly) -> Poly {
        self.add(&other.neg())
    }
    pub fn neg(&self) -> Poly {
        Poly {
            terms: self.terms.iter().map(|(m, c)| (m.clone(), -c)).collect(),
        }
    }
    pub fn mul(&self, other: &Poly) -> Poly {
        // One side a single term: the products stay distinct, so no merging.
        if let Some((m, c)) = other.single_term().or_else(|| self.single_term()) {
            let rest = if other.terms.len() == 1 { self } else { other };
            let one = c.is_one();
            return Poly {
                terms: rest
                    .terms
                    .iter()
                    .map(|(n, d)| (n.mul(m), if one { d.clone() } else { d * c }))
                    .collect(),
            };
        }
        let mut p = Poly::zero();
        p.add_mul_assign(self, other);
        p
    }
    fn single_term(&self) -> Option<(&Monomial, &BigRational)> {
        if self.terms.len() == 1 {
            self.terms.iter().next()
        } else {
            None
        }
    }
    pub fn scale(&self, c: &BigRational) -> Poly {
        if c.is_zero() {
            return Poly::zero();
        }
        Poly {
            terms: self.terms.iter().map(|(m, d)| (m.clone(), d * c)).collect(),
        }
    }
    pub fn mul_monomial(&self, m: &Monomial) -> Poly {
        Poly {
            terms: self
                .terms
                .iter()
                .map(|(n, c)| (n.mul(m), c.clone()))
                .collect(),
        }
    }
    pub fn pow(&self, e: u32) -> Poly {
        let mut acc = Poly::one();
        for _ in 0..e {
            acc = acc.mul(self);
        }
        acc
    }

    /// Every variable that occurs.
    pub fn vars(&self) -> BTreeSet<Var> {
        self.terms
            .keys()
            .flat_map(|m| m.0.iter().map(|(v, _)| *v))
            .collect()
    }
    pub fn degree_in(&self, v: Var) -> u32 {
        self.terms.keys().map(|m| m.exponent(v)).max().unwrap_or(0)
    }
    pub fn total_degree(&self) -> u32 {
        self.terms.keys().map(Monomial::degree).max().unwrap_or(0)
    }
    /// The coefficient of `v^k`, as a polynomial in the other variables.
    pub fn coeff_of_power(&self, v: Var, k: u32) -> Poly {
        let mut p = Poly::zero();
        for (m, c) in &self.terms {
            if m.exponent(v) == k {
                let rest = Monomial(m.0.iter().copied().filter(|(w, _)| *w != v).collect());
                p.terms.insert(rest, c.clone());
            }
        }
        p
    }
    /// Sets the variables `zero` selects to 0.
    pub fn set_zero(&self, zero: &dyn Fn(Var) -> bool) -> Poly {
        Poly {
            terms: self
                .terms
                .iter()
                .filter(|(m, _)| !m.0.iter().any(|(v, _)| zero(*v)))
                .map(|(m, c)| (m.clone(), c.clone()))
                .collect(),
        }
    }
    /// Replaces variable `v` by the polynomial `by`.
    pub fn substitute(&self, v: Var, by: &Poly) -> Poly {
        let mut out = Poly::zero();
        let mut powers: Vec<Poly> = vec![Poly::one()];
        for (m, c) in &self.terms {
            let e = m.exponent(v) as usize;
            while powers.len() <= e {
                let next = powers[powers.len() - 1].mul(by);
                powers.push(next);
            }
            let rest = Monomial(m.0.iter().copied().filter(|(w, _)| *w != v).collect());
            out.add_mul_assign(&Poly::term(c.clone(), rest), &powers[e]);
        }
        out
    }
    pub fn eval(&self, value: &dyn Fn(Var) -> f64) -> f64 {
        self.terms
            .iter()
            .map(|(m, c)| c.to_f64().unwrap_or(f64::NAN) * m.eval(value))
            .sum()
    }

    /// Groups terms by their monomial in the variables `keep` selects:
    /// (monomial in those variables, coefficient polynomial in the others).
    pub fn collect(&self, keep: &dyn Fn(Var) -> bool) -> BTreeMap<Monomial, Poly> {
        let mut out: BTreeMap<Monomial, Poly> = BTreeMap::new();
        for (m, c) in &self.terms {
            let (k, rest) = m.split(keep);
            out.entry(k).or_default().add_term(c.clone(), rest);
        }
        out
    }

    /// The greatest monomial dividing every term (1 for zero).
    pub fn monomial_content(&self) -> Monomial {
        let mut it = self.terms.keys();
        let Some(first) = it.next() else {
            return Monomial::one();
        };
        it.fold(first.clone(), |g, m| g.gcd(m))
    }
    /// `self / m`; every term must be divisible.
    pub fn div_monomial(&self, m: &Monomial) -> Option<Poly> {
        let mut terms = BTreeMap::new();
        for (n, c) in &self.terms {
            terms.insert(n.div(m)?, c.clone());
        }
        Some(Poly { terms })
    }
    /// The positive rational `c` such that `self / c` has coprime integer
    /// coefficients (1 for zero).
    pub fn content(&self) -> BigRational {
        let mut num = BigInt::zero();
        let mut den = BigInt::one();
        for c in self.terms.values() {
            num = num.gcd(c.numer());
            den = den.lcm(c.denom());
        }
        if num.is_zero() {
            BigRational::one()
        } else {
            BigRational::new(num, den)
        }
    }
    /// Leading term in graded lexicographic order.
    pub fn leading(&self) -> Option<(&Monomial, &BigRational)> {
        self.terms.iter().max_by(|a, b| a.0.grlex_cmp(b.0))
    }
    /// Scales to coprime integer coefficients with a positive leading coefficient.
    pub fn normalized(&self) -> Poly {
        let Some((_, lc)) = self.leading() else {
            return Poly::zero();
        };
        let mut c = self.content();
        if lc.is_negative() {
            c = -c;
        }
        self.scale(&c.recip())
    }

    /// Exact division: `Some(q)` with `self = q * d`, or `None`.
    pub fn div_exact(&self, d: &Poly) -> Option<Poly> {
        if d.is_zero() {
            return None;
        }
        if self.is_zero() {
            return Some(Poly::zero());
        }
        let (dm, dc) = d.leading().map(|(m, c)| (m.clone(), c.clone()))?;
        if d.len() == 1 {
            return self.div_monomial(&dm).map(|q| q.scale(&dc.recip()));
        }
        let mut rem = self.clone();
        let mut q = Poly::zero();
        while let Some((rm, rc)) = rem.leading().map(|(m, c)| (m.clone(), c.clone())) {
            let m = rm.div(&dm)?;
            let c = rc / &dc;
            let t = Poly::term(c.clone(), m.clone());
            rem = rem.sub(&d.mul(&t));
            q.add_term(c, m);
        }
        Some(q)
    }

    /// Greatest common divisor (normalized: coprime integer coefficients,
    /// positive leading coefficient). `gcd(0, 0) = 0`.
    pub fn gcd(&self, other: &Poly) -> Poly {
        let mut unlimited = GcdBudget::unlimited();
        self.gcd_within(other, &mut unlimited)
            .expect("an unlimited budget is never exhausted")
    }

    /// [`Poly::gcd`] that gives up (`None`) once the pseudo-remainder
    /// sequence has spent `budget`: on some small inputs its intermediate
    /// polynomials swell far beyond both inputs and the answer.
    pub fn gcd_within(&self, other: &Poly, budget: &mut GcdBudget) -> Option<Poly> {
        if self.is_zero() {
            return Some(other.normalized());
        }
        if other.is_zero() {
            return Some(self.normalized());
        }
        let mono = self.monomial_content().gcd(&other.monomial_content());
        budget.spend((self.len() + other.len()) as u64)?;
        // The recursion takes a gcd of contents at every variable, so without
        // this cheap proof of coprimality its calls multiply with the number
        // of variables even when every content is 1.
        if self.coprime_up_to_monomials(other) {
            return Some(Poly::monomial(mono).normalized());
        }
        let a = self
            .div_monomial(&self.monomial_content())
            .unwrap_or_else(|| self.clone());
        let b = other
            .div_monomial(&other.monomial_content())
            .unwrap_or_else(|| other.clone());
        Some(
            gcd_monomial_free(&a.normalized(), &b.normalized(), budget)?
                .mul_monomial(&mono)
                .normalized(),
        )
    }

    /// A fast test that `gcd(self, other)` has no factor beyond a
    /// constant and a monomial: for each shared variable the images of both
    /// polynomials at a random point of the other variables (modulo a prime)
    /// have a constant gcd. An image gcd is never of lower degree than the
    /// true one while the leading coefficients survive, so `true` is a proof;
    /// `false` means "maybe", and the caller computes the full gcd.
    pub fn coprime_up_to_monomials(&self, other: &Poly) -> bool {
        let (Some(a), Some(b)) = (ImageTable::new(self), ImageTable::new(other)) else {
            return false;
        };
        for x in 0..a.by_var.len().min(b.by_var.len()) {
            if a.by_var[x].is_empty() || b.by_var[x].is_empty() {
                continue;
            }
            let (Some(ia), Some(ib)) = (a.univariate(x), b.univariate(x)) else {
                return false;
            };
            if modp::gcd_degree(ia, ib) > 0 {
                return false;
            }
        }
        true
    }

    /// Parses a polynomial (a rational expression whose denominator must be
    /// constant); see [`super::rational::RationalFunction::parse`].
    pub fn parse(text: &str, vars: &mut Vars) -> Result<Poly, String> {
        let r = super::rational::RationalFunction::parse(text, vars)?;
        let d = r
            .den
            .as_constant()
            .ok_or_else(|| format!("`{text}` is not a polynomial"))?;
        Ok(r.num.scale(&d.recip()))
    }
}

mod gcd;
pub use gcd::GcdBudget;
use gcd::*;

/// The names of the variables, in index order.
#[derive(Clone, Debug, Default)]
pub struct Vars {
    names: Vec<String>,
    index: HashMap<String, Var>,
}

impl Vars {
    pub fn new() -> Vars {
        Vars::default()
    }
    /// The variable named `name`, created if new.
    pub fn intern(&mut self, name: &str) -> Var {
        if let Some(&v) = self.index.get(name) {
            return v;
        }
        let v = self.names.len() as Var;
        self.names.push(name.to_string());
        self.index.insert(name.to_string(), v);
        v
    }
    pub fn get(&self, name: &str) -> Option<Var> {
        self.index.get(name).copied()
    }
    pub fn name(&self, v: Var) -> &str {
        self.names
            .get(v as usize)
            .map(String::as_str)
            .unwrap_or("?")
    }
    pub fn len(&self) -> usize {
        self.names.len()
    }
    pub fn is_empty(&self) -> bool {
        self.names.is_empty()
    }
}

/// Target syntax for printing.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Syntax {
    /// The mechanism language: `+ - * / ^`, names, numbers.
    Mech,
    /// LaTeX math.
    Latex,
    /// Plain text for people: `·` for products.
    Plain,
}

/// How a variable prints: its name, and in LaTeX whether it is a
/// concentration (written in brackets).
pub struct Printer<'a> {
    pub vars: &'a Vars,
    pub syntax: Syntax,
    pub is_concentration: &'a dyn Fn(Var) -> bool,
}

impl Printer<'_> {
    pub fn var(&self, v: Var) -> String {
        let name = self.vars.name(v);
        match self.syntax {
            Syntax::Mech | Syntax::Plain => name.to_string(),
            Syntax::Latex => {
                let body = super::print::latex_name(name);
                if (self.is_concentration)(v) {
                    format!("[{body}]")
                } else {
                    body
                }
            }
        }
    }
    fn times(&self) -> &'static str {
        match self.syntax {
            Syntax::Mech => "*",
            Syntax::Plain => "·",
            Syntax::Latex => " ",
        }
    }
    pub fn monomial(&self, m: &Monomial) -> String {
        let parts: Vec<String> = m
            .pairs()
            .iter()
            .map(|&(v, e)| {
                let base = self.var(v);
                match (e, self.syntax) {
                    (1, _) => base,
                    (e, Syntax::Latex) => format!("{base}^{{{e}}}"),
                    (e, _) => format!("{base}^{e}"),
                }
            })
            .collect();
        parts.join(self.times())
    }
    /// A non-negative rational number.
    fn number(&self, c: &BigRational) -> String {
        if c.is_integer() {
            return c.numer().to_string();
        }
        match self.syntax {
            Syntax::Latex => format!("\\frac{{{}}}{{{}}}", c.numer(), c.denom()),
            _ => format!("{}/{}", c.numer(), c.denom()),
        }
    }
    /// A polynomial as a sum, terms ordered by degree then variable order.
    pub fn poly(&self, p: &Poly) -> String {
        if p.is_zero() {
            return "0".into();
        }
        let mut terms: Vec<(&Monomial, &BigRational)> = p.terms().collect();
        terms.sort_by(|a, b| a.0.grlex_cmp(b.0).reverse().then_with(|| a.0.cmp(b.0)));
        terms.sort_by_key(|t| t.0.degree());
        let mut out = String::new();
        for (i, (m, c)) in terms.iter().enumerate() {
            let neg = c.is_negative();
            let mag = c.abs();
            if i == 0 {
                if neg {
                    out.push('-');
                }
            } else {
                out.push_str(if neg { " - " } else { " + " });
            }
            let body = if m.is_one() {
                self.number(&mag)
            } else if mag.is_one() {
                self.monomial(m)
            } else {
                format!("{}{}{}", self.number(&mag), self.times(), self.monomial(m))
            };
            out.push_str(&body);
        }
        out
    }
    /// A polynomial with its numeric and monomial content pulled out:
    /// `2*k1*(k2 + k3)`.
    pub fn factored(&self, p: &Poly) -> String {
        if p.len() <= 1 {
            return self.poly(p);
        }
        let mono = p.monomial_content();
        let lead_negative = p.leading().is_some_and(|(_, c)| c.is_negative());
        let mut c = p.content();
        if lead_negative {
            c = -c;
        }
        let rest = p
            .div_monomial(&mono)
            .unwrap_or_else(|| p.clone())
            .scale(&c.recip());
        let mut factors: Vec<String> = Vec::new();
        if !c.abs().is_one() {
            factors.push(self.number(&c.abs()));
        }
        if !mono.is_one() {
            factors.push(self.monomial(&mono));
        }
        let rest_text = self.poly(&rest);
        let sign = if c.is_negative() { "-" } else { "" };
        if factors.is_empty() {
            return format!("{sign}{rest_text}");
        }
        let paren = if self.syntax == Syntax::Latex {
            format!("\\left({rest_text}\\right)")
        } else {
            format!("({rest_text})")
        };
        factors.push(paren);
        format!("{sign}{}", factors.join(self.times()))
    }
    /// A product factor: parenthesized when it is a sum.
    pub fn factor(&self, p: &Poly) -> String {
        let text = self.factored(p);
        let is_product = p.len() <= 1 && !p.terms().next().is_some_and(|(_, c)| c.is_negative());
        if is_product
            || (p.len() > 1 && p.monomial_content() != Monomial::one() && !text.starts_with('-'))
        {
            text
        } else if self.syntax == Syntax::Latex {
            format!("\\left({text}\\right)")
        } else {
            format!("({text})")
        }
    }
    /// A polynomial collected by the variables `by` selects, as
    /// `coefficient*monomial` terms with factored coefficients.
    pub fn collected(&self, p: &Poly, by: &dyn Fn(Var) -> bool) -> String {
        let groups = p.collect(by);
        if groups.is_empty() {
            return "0".into();
        }
        let mut keys: Vec<&Monomial> = groups.keys().collect();
        keys.sort_by(|a, b| a.degree().cmp(&b.degree()).then_with(|| b.grlex_cmp(a)));
        let mut out = String::new();
        for (i, m) in keys.iter().enumerate() {
            let coef = &groups[*m];
            // A coefficient whose factored form leads with a minus sign
            // prints as a subtraction.
            let negative = coef.leading().is_some_and(|(_, c)| c.is_negative());
            let coef = if negative { coef.neg() } else { coef.clone() };
            if i > 0 {
                out.push_str(if negative { " - " } else { " + " });
            } else if negative {
                out.push('-');
            }
            let c = if coef.len() > 1 && !m.is_one() {
                self.factor(&coef)
            } else {
                self.factored(&coef)
            };
            if m.is_one() {
                out.push_str(&c);
            } else if coef.is_one() {
                out.push_str(&self.monomial(m));
            } else {
                out.push_str(&format!("{c}{}{}", self.times(), self.monomial(m)));
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(text: &str, vars: &mut Vars) -> Poly {
        Poly::parse(text, vars).unwrap()
    }

    #[test]
    fn expansion_and_cancellation() {
        let mut v = Vars::new();
        // (x + y)^2 - (x - y)^2 = 4xy (common practice: binomial expansion)
        let a = p("(x + y)^2 - (x - y)^2", &mut v);
        assert_eq!(a, p("4*x*y", &mut v));
        assert!(p("x - x", &mut v).is_zero());
    }

    #[test]
    fn exact_division_and_gcd() {
        let mut v = Vars::new();
        let f = p("(k4 + k5)*(k2 + k7*S)", &mut v);
        let g = p("(k4 + k5)*(k1 + S)*k3", &mut v);
        assert_eq!(f.gcd(&g), p("k4 + k5", &mut v));
        assert_eq!(
            f.div_exact(&p("k4 + k5", &mut v)),
            Some(p("k2 + k7*S", &mut v))
        );
        assert_eq!(f.div_exact(&p("k1 + S", &mut v)), None);
        // x^2 - y^2 and x^2 + 2xy + y^2 share x + y (common practice)
        let a = p("x^2 - y^2", &mut v);
        let b = p("x^2 + 2*x*y + y^2", &mut v);
        assert_eq!(a.gcd(&b), p("x + y", &mut v));
        assert_eq!(
            p("3*x*y^2", &mut v).gcd(&p("6*x^2*y", &mut v)),
            p("x*y", &mut v)
        );
        assert!(p("x + 1", &mut v).gcd(&p("y + 1", &mut v)).is_one());
        // A budget too small for the sequence gives up instead of running on;
        // an ample one finds the same gcd as the unlimited version.
        assert_eq!(a.gcd_within(&b, &mut GcdBudget::new(3)), None);
        assert_eq!(
            a.gcd_within(&b, &mut GcdBudget::new(1_000)),
            Some(p("x + y", &mut v))
        );
        // The modular test proves coprimality and never claims it falsely.
        assert!(p("x*y + 1", &mut v).coprime_up_to_monomials(&p("x + y", &mut v)));
        assert!(p("x^2*y + x*y^2", &mut v).coprime_up_to_monomials(&p("x*y*z", &mut v)));
        assert!(!f.coprime_up_to_monomials(&g));
        assert!(!a.coprime_up_to_monomials(&b));
    }

    #[test]
    fn collection_and_printing() {
        let mut v = Vars::new();
        let k1 = v.intern("k1");
        let _ = (k1, v.intern("k2"), v.intern("k3"));
        let s = v.intern("S");
        let poly = p("k1*k2 + k1*k3 + k2*S + 2*k3*S^2", &mut v);
        let conc = |x: Var| x == s;
        let pr = Printer {
            vars: &v,
            syntax: Syntax::Mech,
            is_concentration: &conc,
        };
        assert_eq!(
            pr.collected(&poly, &|x| x == s),
            "k1*(k2 + k3) + k2*S + 2*k3*S^2"
        );
        let tex = Printer {
            vars: &v,
            syntax: Syntax::Latex,
            is_concentration: &conc,
        };
        assert_eq!(
            tex.monomial(&Monomial::from_pairs([(k1, 1), (s, 2)])),
            "\\mathrm{k1} [S]^{2}"
        );
    }
}
