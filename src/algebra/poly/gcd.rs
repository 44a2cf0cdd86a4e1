//! Polynomial gcds: modular images for a fast coprimality proof, the
//! recursive content and pseudo-remainder gcd, and the work budget that
//! bounds them (so a derivation's outcome does not depend on the machine).
//!
//! Invariant: every gcd runs within its budget; past it the caller cancels
//! only constant and monomial factors and says so.

use super::*;

/// Each term's value (mod p) at a fixed pseudo-random point, and for each
/// variable the terms that contain it, so univariate images in every
/// variable cost one pass over the terms in all.
pub(super) struct ImageTable {
    pub(super) point: Vec<u64>,
    pub(super) values: Vec<u64>,
    pub(super) total: u64,
    /// For each variable: (term index, exponent) of the terms containing it.
    pub(super) by_var: Vec<Vec<(usize, u32)>>,
}

impl ImageTable {
    pub(super) fn new(poly: &Poly) -> Option<ImageTable> {
        let size = poly
            .terms
            .keys()
            .filter_map(|m| m.pairs().last())
            .map(|(v, _)| *v as usize + 1)
            .max()
            .unwrap_or(0);
        let point: Vec<u64> = (0..size).map(|v| modp::random(v as u64 + 1)).collect();
        let mut values = Vec::with_capacity(poly.len());
        let mut by_var: Vec<Vec<(usize, u32)>> = vec![Vec::new(); size];
        let mut total = 0;
        for (t, (m, c)) in poly.terms().enumerate() {
            let mut v = modp::from_rational(c)?;
            for &(w, e) in m.pairs() {
                v = modp::mul(
                    v,
                    if e == 1 {
                        point[w as usize]
                    } else {
                        modp::pow(point[w as usize], e as u64)
                    },
                );
                by_var[w as usize].push((t, e));
            }
            total = modp::add(total, v);
            values.push(v);
        }
        Some(ImageTable {
            point,
            values,
            total,
            by_var,
        })
    }

    /// Coefficients of the image in `x` (the other variables at the point),
    /// after dividing out the lowest power of `x`; `None` if the leading or
    /// trailing coefficient vanishes.
    pub(super) fn univariate(&self, x: usize) -> Option<Vec<u64>> {
        let with_x = &self.by_var[x];
        let hi = with_x.iter().map(|(_, e)| *e).max()?;
        let all_have_x = with_x.len() == self.values.len();
        let lo = if all_have_x {
            with_x.iter().map(|(_, e)| *e).min()?
        } else {
            0
        };
        let inv_x = modp::inv(self.point[x]);
        let mut inv_pow = vec![1u64; hi as usize + 1];
        for k in 1..inv_pow.len() {
            inv_pow[k] = modp::mul(inv_pow[k - 1], inv_x);
        }
        let mut coef = vec![0u64; (hi - lo + 1) as usize];
        // Terms without x sit in the constant bucket: all values minus those with x.
        let mut rest = self.total;
        for &(t, e) in with_x {
            let v = self.values[t];
            rest = modp::sub(rest, v);
            let k = (e - lo) as usize;
            coef[k] = modp::add(coef[k], modp::mul(v, inv_pow[e as usize]));
        }
        if !all_have_x {
            coef[0] = modp::add(coef[0], rest);
        }
        (coef[0] != 0 && *coef.last()? != 0).then_some(coef)
    }
}

/// Arithmetic modulo the prime 2^61 - 1, for the coprimality test.
pub(super) mod modp {
    use num_bigint::BigInt;
    use num_rational::BigRational;
    use num_traits::ToPrimitive;

    pub const P: u64 = (1 << 61) - 1;

    pub fn add(a: u64, b: u64) -> u64 {
        (a + b) % P
    }
    pub fn sub(a: u64, b: u64) -> u64 {
        (a + P - b) % P
    }
    pub fn mul(a: u64, b: u64) -> u64 {
        // Mersenne reduction: 2^61 = 1 (mod P).
        let t = a as u128 * b as u128;
        let r = (t as u64 & P) + (t >> 61) as u64;
        let r = (r & P) + (r >> 61);
        if r >= P { r - P } else { r }
    }
    pub fn pow(mut a: u64, mut e: u64) -> u64 {
        let mut r = 1;
        while e > 0 {
            if e & 1 == 1 {
                r = mul(r, a);
            }
            a = mul(a, a);
            e >>= 1;
        }
        r
    }
    pub fn inv(a: u64) -> u64 {
        pow(a, P - 2)
    }
    pub(super) fn from_int(n: &BigInt) -> u64 {
        if let Some(small) = n.to_i64() {
            return (small.rem_euclid(P as i64)) as u64;
        }
        let p = BigInt::from(P);
        let r = ((n % &p) + &p) % &p;
        r.to_u64().unwrap_or(0)
    }
    pub fn from_rational(c: &BigRational) -> Option<u64> {
        let n = from_int(c.numer());
        if num_traits::One::is_one(c.denom()) {
            return Some(n);
        }
        let d = from_int(c.denom());
        (d != 0).then(|| mul(n, inv(d)))
    }
    /// A fixed pseudo-random residue per seed (splitmix64).
    pub fn random(seed: u64) -> u64 {
        let mut z = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15);
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        (z ^ (z >> 31)) % P
    }
    pub(super) fn trim(a: &mut Vec<u64>) {
        while a.last() == Some(&0) {
            a.pop();
        }
    }
    /// Degree of the gcd of two univariate polynomials (coefficients from
    /// the constant term up).
    pub fn gcd_degree(mut a: Vec<u64>, mut b: Vec<u64>) -> usize {
        trim(&mut a);
        trim(&mut b);
        while !b.is_empty() {
            // a mod b
            let lb = inv(*b.last().unwrap_or(&1));
            while a.len() >= b.len() && !a.is_empty() {
                let f = mul(*a.last().unwrap_or(&0), lb);
                let shift = a.len() - b.len();
                for (i, &bi) in b.iter().enumerate() {
                    a[i + shift] = sub(a[i + shift], mul(f, bi));
                }
                trim(&mut a);
            }
            std::mem::swap(&mut a, &mut b);
        }
        a.len().saturating_sub(1)
    }
}

/// Work allowed to one gcd, counted in term products (a product of an
/// m-term and an n-term polynomial costs m·n) plus the size in machine
/// words of every coefficient produced, so both term swell and
/// coefficient swell use it up.
pub struct GcdBudget {
    left: u64,
}

impl GcdBudget {
    pub fn new(work: u64) -> GcdBudget {
        GcdBudget { left: work }
    }
    pub fn unlimited() -> GcdBudget {
        GcdBudget { left: u64::MAX }
    }
    pub(super) fn spend(&mut self, work: u64) -> Option<()> {
        self.left = self.left.checked_sub(work)?;
        Some(())
    }
}

/// GCD of two polynomials given with no common monomial factor extracted:
/// content in the first shared variable, then a primitive pseudo-remainder
/// sequence in that variable.
pub(super) fn gcd_monomial_free(a: &Poly, b: &Poly, budget: &mut GcdBudget) -> Option<Poly> {
    if a.is_zero() {
        return Some(b.normalized());
    }
    if b.is_zero() {
        return Some(a.normalized());
    }
    if a.as_constant().is_some() || b.as_constant().is_some() {
        return Some(Poly::one());
    }
    let va = a.vars();
    let vb = b.vars();
    let Some(&x) = va.iter().chain(vb.iter()).min() else {
        return Some(Poly::one());
    };
    if !va.contains(&x) {
        return gcd_monomial_free(a, &content_in(b, x, budget)?, budget);
    }
    if !vb.contains(&x) {
        return gcd_monomial_free(&content_in(a, x, budget)?, b, budget);
    }
    let ca = content_in(a, x, budget)?;
    let cb = content_in(b, x, budget)?;
    budget.spend((a.len() * ca.len() + b.len() * cb.len()) as u64)?;
    let pa = a.div_exact(&ca).unwrap_or_else(|| a.clone());
    let pb = b.div_exact(&cb).unwrap_or_else(|| b.clone());
    let g_content = gcd_monomial_free(&ca, &cb, budget)?;
    let (mut p, mut q) = if pa.degree_in(x) >= pb.degree_in(x) {
        (pa, pb)
    } else {
        (pb, pa)
    };
    loop {
        let r = pseudo_remainder(&p, &q, x, budget)?;
        if r.is_zero() {
            break;
        }
        if r.degree_in(x) == 0 {
            q = Poly::one();
            break;
        }
        let rc = content_in(&r, x, budget)?;
        budget.spend((r.len() * rc.len()) as u64)?;
        p = q;
        q = r.div_exact(&rc).unwrap_or(r).normalized();
    }
    budget.spend((q.len() * g_content.len()) as u64)?;
    Some(q.mul(&g_content).normalized())
}

/// GCD of the coefficients of `p` as a polynomial in `x`.
pub(super) fn content_in(p: &Poly, x: Var, budget: &mut GcdBudget) -> Option<Poly> {
    let mut g = Poly::zero();
    for k in 0..=p.degree_in(x) {
        let c = p.coeff_of_power(x, k);
        if c.is_zero() {
            continue;
        }
        g = if g.is_zero() {
            c.normalized()
        } else {
            c.gcd_within(&g, budget)?
        };
        if g.as_constant().is_some() {
            return Some(Poly::one());
        }
    }
    Some(if g.is_zero() { Poly::one() } else { g })
}

pub(super) fn pseudo_remainder(a: &Poly, b: &Poly, x: Var, budget: &mut GcdBudget) -> Option<Poly> {
    let db = b.degree_in(x);
    let lcb = b.coeff_of_power(x, db);
    let mut r = a.clone();
    while !r.is_zero() && r.degree_in(x) >= db {
        let dr = r.degree_in(x);
        let lcr = r.coeff_of_power(x, dr);
        budget.spend((r.len() * lcb.len() + b.len() * lcr.len()) as u64)?;
        let shift = Poly::monomial(Monomial::from_pairs([(x, dr - db)]));
        let next = r.mul(&lcb).sub(&b.mul(&lcr).mul(&shift));
        budget.spend(next.coefficient_words())?;
        r = next;
    }
    Some(r)
}
