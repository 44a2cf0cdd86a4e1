//! Simplification and symbolic differentiation of IR expressions.
//!
//! Why: emitted code and the compiled analytic Jacobian need derivatives that
//! are exact (not finite differences) and small enough to read and to run.
//!
//! Invariants:
//! - `simplify` never changes the value of an expression where the original
//!   is defined (it may remove a NaN such as `x/x` at `x = 0`, or `0 * x` at
//!   an infinite `x`); it is deterministic: terms and factors keep their
//!   first-seen order, so the same input always prints the same way.
//! - `derivative` returns a simplified expression; names other than `wrt`
//!   are independent symbols (callers inline observables and dependent
//!   species first), and `t` is independent of every symbol.
//! - `abs`, `min` and `max` get the derivative of the branch taken; at a tie
//!   (`a = b`, or `abs` at 0) the mean of the two one-sided derivatives, so a
//!   Jacobian never holds a NaN where the function itself is finite.

use crate::model::expr::{BinOp, Expr, Func};
use crate::model::ir::Sym;

/// Simplifies an expression: folds constants, applies the 0 and 1
/// identities, flattens sums and products, collects like terms (`x - x`,
/// `2*x + x`) and like factors (`x * x^n`, `x / x`), and folds powers of
/// powers with integer outer exponents.
pub fn simplify(e: &Expr) -> Expr {
    match e {
        Expr::Number(_) | Expr::Name(_) | Expr::Time => e.clone(),
        Expr::Neg(_) | Expr::Binary(BinOp::Add | BinOp::Sub, _, _) => {
            let mut sum = Sum::default();
            collect_sum(e, 1.0, &mut sum);
            sum.build()
        }
        Expr::Binary(BinOp::Mul | BinOp::Div, _, _) => {
            let mut p = Product::one();
            collect_product(e, false, &mut p);
            p.build()
        }
        Expr::Binary(BinOp::Pow, a, b) => power(simplify(a), simplify(b)),
        Expr::Call(Func::Pow, args) if args.len() == 2 => {
            power(simplify(&args[0]), simplify(&args[1]))
        }
        Expr::Call(f, args) => {
            let args: Vec<Expr> = args.iter().map(simplify).collect();
            let nums: Option<Vec<f64>> = args.iter().map(number).collect();
            if let Some(nums) = nums {
                let v = f.apply(&nums);
                if v.is_finite() && nums.len() == f.arity() {
                    return Expr::Number(v);
                }
            }
            Expr::Call(*f, args)
        }
    }
}

/// The derivative of `e` with respect to the symbol `wrt`, simplified.
pub fn derivative(e: &Expr, wrt: Sym) -> Expr {
    match diff(e, wrt) {
        Some(d) => simplify(&d),
        None => Expr::Number(0.0),
    }
}

/// Whether an expression mentions a symbol.
pub fn mentions(e: &Expr, wrt: Sym) -> bool {
    match e {
        Expr::Name(s) => *s == wrt,
        Expr::Number(_) | Expr::Time => false,
        Expr::Neg(a) => mentions(a, wrt),
        Expr::Binary(_, a, b) => mentions(a, wrt) || mentions(b, wrt),
        Expr::Call(_, args) => args.iter().any(|a| mentions(a, wrt)),
    }
}

/// Whether an expression is the number zero.
pub fn is_zero(e: &Expr) -> bool {
    matches!(e, Expr::Number(v) if *v == 0.0)
}

fn number(e: &Expr) -> Option<f64> {
    match e {
        Expr::Number(v) => Some(*v),
        _ => None,
    }
}

fn is_integer(v: f64) -> bool {
    v.is_finite() && v == v.trunc()
}

fn neg(e: Expr) -> Expr {
    Expr::Neg(Box::new(e))
}

fn mul(a: Expr, b: Expr) -> Expr {
    Expr::bin(BinOp::Mul, a, b)
}

fn div(a: Expr, b: Expr) -> Expr {
    Expr::bin(BinOp::Div, a, b)
}

fn num(v: f64) -> Expr {
    Expr::Number(v)
}

// ---------------------------------------------------------------------------
// Sums: a constant plus coefficient × monomial, in first-seen order.

#[derive(Default)]
struct Sum {
    /// `None` is the slot of the constant term; it sits where a constant
    /// first appeared.
    terms: Vec<(Option<Expr>, f64)>,
}

impl Sum {
    fn add_constant(&mut self, v: f64) {
        match self.terms.iter_mut().find(|(k, _)| k.is_none()) {
            Some((_, c)) => *c += v,
            None => self.terms.push((None, v)),
        }
    }
    fn add_term(&mut self, key: Expr, coef: f64) {
        match self
            .terms
            .iter_mut()
            .find(|(k, _)| k.as_ref() == Some(&key))
        {
            Some((_, c)) => *c += coef,
            None => self.terms.push((Some(key), coef)),
        }
    }
    fn build(self) -> Expr {
        let mut out: Option<Expr> = None;
        for (key, coef) in self.terms {
            if coef == 0.0 {
                continue;
            }
            let magnitude = match key {
                None => num(coef.abs()),
                Some(k) if coef.abs() == 1.0 => k,
                Some(k) => scale(coef.abs(), k),
            };
            out = Some(match out {
                None if coef < 0.0 => match magnitude {
                    Expr::Number(v) => num(-v),
                    m => neg(m),
                },
                None => magnitude,
                Some(acc) if coef < 0.0 => Expr::bin(BinOp::Sub, acc, magnitude),
                Some(acc) => Expr::bin(BinOp::Add, acc, magnitude),
            });
        }
        out.unwrap_or(num(0.0))
    }
}

/// `coef * key` where `key` is a monomial with coefficient 1.
fn scale(coef: f64, key: Expr) -> Expr {
    let mut p = Product::one();
    p.coef = coef;
    collect_product(&key, false, &mut p);
    p.build()
}

fn collect_sum(e: &Expr, sign: f64, sum: &mut Sum) {
    match e {
        Expr::Binary(BinOp::Add, a, b) => {
            collect_sum(a, sign, sum);
            collect_sum(b, sign, sum);
        }
        Expr::Binary(BinOp::Sub, a, b) => {
            collect_sum(a, sign, sum);
            collect_sum(b, -sign, sum);
        }
        Expr::Neg(a) => collect_sum(a, -sign, sum),
        leaf => {
            let s = simplify(leaf);
            match s {
                Expr::Number(v) => sum.add_constant(sign * v),
                Expr::Neg(_) | Expr::Binary(BinOp::Add | BinOp::Sub, _, _) => {
                    collect_simplified_sum(&s, sign, sum)
                }
                other => {
                    let (coef, key) = split_coefficient(other);
                    sum.add_term(key, sign * coef);
                }
            }
        }
    }
}

/// Like `collect_sum` but for an already simplified expression (no re-simplifying).
fn collect_simplified_sum(e: &Expr, sign: f64, sum: &mut Sum) {
    match e {
        Expr::Binary(BinOp::Add, a, b) => {
            collect_simplified_sum(a, sign, sum);
            collect_simplified_sum(b, sign, sum);
        }
        Expr::Binary(BinOp::Sub, a, b) => {
            collect_simplified_sum(a, sign, sum);
            collect_simplified_sum(b, -sign, sum);
        }
        Expr::Neg(a) => collect_simplified_sum(a, -sign, sum),
        Expr::Number(v) => sum.add_constant(sign * v),
        other => {
            let (coef, key) = split_coefficient(other.clone());
            sum.add_term(key, sign * coef);
        }
    }
}

/// Splits a simplified term into its numeric coefficient and the monomial.
fn split_coefficient(e: Expr) -> (f64, Expr) {
    match e {
        Expr::Binary(BinOp::Mul | BinOp::Div, _, _) => {
            let mut p = Product::one();
            collect_product(&e, true, &mut p);
            let coef = p.coef;
            p.coef = 1.0;
            (coef, p.build())
        }
        other => (1.0, other),
    }
}

// ---------------------------------------------------------------------------
// Products: a coefficient times base^exponent factors, in first-seen order.

struct Product {
    coef: f64,
    factors: Vec<(Expr, Expr)>,
}

impl Product {
    fn one() -> Product {
        Product {
            coef: 1.0,
            factors: Vec::new(),
        }
    }

    fn add_factor(&mut self, base: Expr, exponent: Expr) {
        if let Some(slot) = self.factors.iter_mut().find(|(b, _)| *b == base) {
            let sum = match (number(&slot.1), number(&exponent)) {
                (Some(x), Some(y)) => num(x + y),
                _ => simplify(&Expr::bin(BinOp::Add, slot.1.clone(), exponent)),
            };
            slot.1 = sum;
        } else {
            self.factors.push((base, exponent));
        }
    }

    fn build(self) -> Expr {
        if self.coef == 0.0 {
            return num(0.0);
        }
        let mut numer: Vec<Expr> = Vec::new();
        let mut denom: Vec<Expr> = Vec::new();
        for (base, exponent) in self.factors {
            match number(&exponent) {
                Some(0.0) => {}
                Some(v) if v < 0.0 => denom.push(raise(base, num(-v))),
                _ => match exponent {
                    Expr::Neg(inner) => denom.push(raise(base, *inner)),
                    exponent => numer.push(raise(base, exponent)),
                },
            }
        }
        let negative = self.coef < 0.0;
        let mut coef = self.coef.abs();
        // Keep exact small integer divisors as divisions (`x/3`, not `0.333…*x`).
        let recip = 1.0 / coef;
        if coef < 1.0 && is_integer(recip) && recip <= 1e6 && coef * recip == 1.0 {
            denom.insert(0, num(recip));
            coef = 1.0;
        }
        let mut top: Option<Expr> = if coef == 1.0 { None } else { Some(num(coef)) };
        for f in numer {
            top = Some(match top {
                None => f,
                Some(acc) => mul(acc, f),
            });
        }
        let mut bottom: Option<Expr> = None;
        for f in denom {
            bottom = Some(match bottom {
                None => f,
                Some(acc) => mul(acc, f),
            });
        }
        let body = match (top, bottom) {
            (Some(t), None) => t,
            (None, None) => num(1.0),
            (Some(t), Some(b)) => div(t, b),
            (None, Some(b)) => div(num(1.0), b),
        };
        if negative {
            match body {
                Expr::Number(v) => num(-v),
                b => neg(b),
            }
        } else {
            body
        }
    }
}

/// `base^exponent` with the trivial exponents removed (no further folding).
fn raise(base: Expr, exponent: Expr) -> Expr {
    match number(&exponent) {
        Some(1.0) => base,
        _ => Expr::pow(base, exponent),
    }
}

/// Collects the factors of `e` into `p`; `simplified` says whether the
/// leaves are already simplified. `Div` denominators enter with negated
/// exponents.
fn collect_product(e: &Expr, simplified: bool, p: &mut Product) {
    collect_factor(e, 1.0, simplified, p)
}

fn collect_factor(e: &Expr, sign: f64, simplified: bool, p: &mut Product) {
    match e {
        Expr::Binary(BinOp::Mul, a, b) => {
            collect_factor(a, sign, simplified, p);
            collect_factor(b, sign, simplified, p);
        }
        Expr::Binary(BinOp::Div, a, b) => {
            collect_factor(a, sign, simplified, p);
            collect_factor(b, -sign, simplified, p);
        }
        leaf => {
            let s = if simplified {
                leaf.clone()
            } else {
                simplify(leaf)
            };
            match s {
                Expr::Number(v) if sign < 0.0 && v == 0.0 => p.add_factor(num(0.0), num(-1.0)),
                Expr::Number(v) => {
                    if sign > 0.0 {
                        p.coef *= v
                    } else {
                        p.coef /= v
                    }
                }
                Expr::Neg(inner) => {
                    p.coef = -p.coef;
                    collect_factor(&inner, sign, true, p);
                }
                Expr::Binary(BinOp::Mul | BinOp::Div, _, _) => collect_factor(&s, sign, true, p),
                Expr::Binary(BinOp::Pow, base, exponent) => {
                    let exponent = match number(&exponent) {
                        Some(v) => num(sign * v),
                        None if sign < 0.0 => simplify(&neg(*exponent)),
                        None => *exponent,
                    };
                    p.add_factor(*base, exponent);
                }
                other => p.add_factor(other, num(sign)),
            }
        }
    }
}

/// `base^exponent` for simplified parts.
fn power(base: Expr, exponent: Expr) -> Expr {
    match (number(&base), number(&exponent)) {
        (Some(b), Some(x)) => {
            let v = crate::model::expr::pow(b, x);
            if v.is_finite() {
                return num(v);
            }
        }
        (_, Some(0.0)) => return num(1.0),
        (_, Some(1.0)) => return base,
        (Some(1.0), _) => return num(1.0),
        _ => {}
    }
    if let (Expr::Binary(BinOp::Pow, inner, m), Some(n)) = (&base, number(&exponent))
        && let Some(m) = number(m)
        && is_integer(n)
    {
        return power((**inner).clone(), num(m * n));
    }
    // A product raised to an integer: distribute, so factors can collect.
    if let Some(n) = number(&exponent)
        && is_integer(n)
        && matches!(base, Expr::Binary(BinOp::Mul | BinOp::Div, _, _))
    {
        let mut inner = Product::one();
        collect_product(&base, true, &mut inner);
        let mut p = Product::one();
        p.coef = crate::model::expr::pow(inner.coef, n);
        for (b, x) in inner.factors {
            let x = match number(&x) {
                Some(v) => num(v * n),
                None => simplify(&mul(x, num(n))),
            };
            p.add_factor(b, x);
        }
        if p.coef.is_finite() {
            return p.build();
        }
    }
    Expr::pow(base, exponent)
}

// ---------------------------------------------------------------------------
// Differentiation. `None` means the derivative is identically zero.

fn diff(e: &Expr, wrt: Sym) -> Option<Expr> {
    match e {
        Expr::Number(_) | Expr::Time => None,
        Expr::Name(s) => (*s == wrt).then(|| num(1.0)),
        Expr::Neg(a) => diff(a, wrt).map(neg),
        Expr::Binary(op, a, b) => {
            let (da, db) = (diff(a, wrt), diff(b, wrt));
            if da.is_none() && db.is_none() {
                return None;
            }
            let (a, b) = (&**a, &**b);
            Some(match op {
                BinOp::Add => match (da, db) {
                    (Some(x), Some(y)) => Expr::add(x, y),
                    (Some(x), None) | (None, Some(x)) => x,
                    (None, None) => unreachable_zero(),
                },
                BinOp::Sub => match (da, db) {
                    (Some(x), Some(y)) => Expr::sub(x, y),
                    (Some(x), None) => x,
                    (None, Some(y)) => neg(y),
                    (None, None) => unreachable_zero(),
                },
                BinOp::Mul => {
                    let left = da.map(|d| mul(d, b.clone()));
                    let right = db.map(|d| mul(a.clone(), d));
                    add_opt(left, right)
                }
                BinOp::Div => {
                    // (a/b)' = a'/b - a b' / b^2
                    let left = da.map(|d| div(d, b.clone()));
                    let right =
                        db.map(|d| neg(div(mul(a.clone(), d), Expr::pow(b.clone(), num(2.0)))));
                    add_opt(left, right)
                }
                BinOp::Pow => diff_pow(a, b, da, db),
            })
        }
        Expr::Call(f, args) => diff_call(*f, args, wrt),
    }
}

fn unreachable_zero() -> Expr {
    num(0.0)
}

fn add_opt(a: Option<Expr>, b: Option<Expr>) -> Expr {
    match (a, b) {
        (Some(x), Some(y)) => Expr::add(x, y),
        (Some(x), None) | (None, Some(x)) => x,
        (None, None) => num(0.0),
    }
}

fn diff_pow(a: &Expr, b: &Expr, da: Option<Expr>, db: Option<Expr>) -> Expr {
    match db {
        // (a^n)' = n a^(n-1) a'
        None => {
            let da = da.unwrap_or(num(0.0));
            let lowered = match number(b) {
                Some(n) => num(n - 1.0),
                None => Expr::sub(b.clone(), num(1.0)),
            };
            mul(mul(b.clone(), Expr::pow(a.clone(), lowered)), da)
        }
        // (a^b)' = a^b (b' ln a + b a'/a)
        Some(db) => {
            let log_part = mul(db, Expr::Call(Func::Ln, vec![a.clone()]));
            let base_part = da.map(|da| div(mul(b.clone(), da), a.clone()));
            mul(
                Expr::pow(a.clone(), b.clone()),
                add_opt(Some(log_part), base_part),
            )
        }
    }
}

/// `sgn(z)` as an expression without a NaN at zero: `z / max(|z|, tiny)` is
/// exactly ±1 for |z| ≥ tiny and 0 at z = 0.
fn sign_of(z: Expr) -> Expr {
    div(
        z.clone(),
        Expr::Call(
            Func::Max,
            vec![Expr::Call(Func::Abs, vec![z]), num(f64::MIN_POSITIVE)],
        ),
    )
}

fn diff_call(f: Func, args: &[Expr], wrt: Sym) -> Option<Expr> {
    let a = args.first()?;
    let da = diff(a, wrt);
    match f {
        Func::Pow => {
            let b = args.get(1)?;
            let db = diff(b, wrt);
            if da.is_none() && db.is_none() {
                return None;
            }
            Some(diff_pow(a, b, da, db))
        }
        Func::Min | Func::Max => {
            let b = args.get(1)?;
            let db = diff(b, wrt);
            if da.is_none() && db.is_none() {
                return None;
            }
            // min(a,b) = (a+b)/2 - |a-b|/2, max(a,b) = (a+b)/2 + |a-b|/2,
            // so the derivative is (a'+b')/2 ∓ (a'-b') sgn(a-b)/2.
            let mean = div(add_opt(da.clone(), db.clone()), num(2.0));
            let spread = match (da, db) {
                (Some(x), Some(y)) => Expr::sub(x, y),
                (Some(x), None) => x,
                (None, Some(y)) => neg(y),
                (None, None) => num(0.0),
            };
            let half_jump = div(
                mul(spread, sign_of(Expr::sub(a.clone(), b.clone()))),
                num(2.0),
            );
            Some(if f == Func::Min {
                Expr::sub(mean, half_jump)
            } else {
                Expr::add(mean, half_jump)
            })
        }
        _ => {
            let da = da?;
            let outer = match f {
                Func::Exp => Expr::Call(Func::Exp, vec![a.clone()]),
                Func::Ln => div(num(1.0), a.clone()),
                Func::Log10 => div(num(1.0), mul(a.clone(), num(std::f64::consts::LN_10))),
                Func::Sqrt => div(
                    num(1.0),
                    mul(num(2.0), Expr::Call(Func::Sqrt, vec![a.clone()])),
                ),
                Func::Abs => sign_of(a.clone()),
                Func::Pow | Func::Min | Func::Max => return None,
            };
            Some(mul(outer, da))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const X: Sym = Sym::Species(0);
    const Y: Sym = Sym::Species(1);
    const K: Sym = Sym::Param(0);

    fn x() -> Expr {
        Expr::Name(X)
    }
    fn y() -> Expr {
        Expr::Name(Y)
    }
    fn k() -> Expr {
        Expr::Name(K)
    }
    fn call(f: Func, args: Vec<Expr>) -> Expr {
        Expr::Call(f, args)
    }
    fn ev(e: &Expr, xv: f64, yv: f64, kv: f64) -> f64 {
        e.eval(
            &|s| match s {
                X => xv,
                Y => yv,
                _ => kv,
            },
            0.7,
        )
    }

    /// Central difference with step h·max(1,|x|); error O(h²) (common practice).
    fn central(e: &Expr, xv: f64, yv: f64, kv: f64) -> f64 {
        let h = 1e-5 * xv.abs().max(1.0);
        (ev(e, xv + h, yv, kv) - ev(e, xv - h, yv, kv)) / (2.0 * h)
    }

    fn sample_exprs() -> Vec<Expr> {
        let two = || num(2.0);
        vec![
            // Michaelis–Menten v = k x / (y + x)
            div(mul(k(), x()), Expr::add(y(), x())),
            Expr::pow(x(), num(3.0)),
            Expr::pow(x(), num(-1.5)),
            Expr::pow(x(), y()),
            Expr::pow(y(), x()),
            Expr::pow(x(), x()),
            call(Func::Pow, vec![x(), num(0.5)]),
            call(Func::Exp, vec![mul(k(), x())]),
            call(Func::Ln, vec![Expr::add(x(), y())]),
            call(Func::Log10, vec![mul(x(), x())]),
            call(Func::Sqrt, vec![Expr::add(mul(x(), x()), two())]),
            call(Func::Abs, vec![Expr::sub(x(), num(3.0))]),
            call(Func::Min, vec![x(), y()]),
            call(Func::Max, vec![mul(two(), x()), y()]),
            neg(div(
                x(),
                Expr::pow(Expr::add(num(1.0), div(x(), k())), num(2.0)),
            )),
            // Hill: x^n / (K^n + x^n) with n = y
            div(
                Expr::pow(x(), y()),
                Expr::add(Expr::pow(k(), y()), Expr::pow(x(), y())),
            ),
            mul(Expr::Time, x()),
            Expr::sub(mul(x(), x()), mul(x(), x())),
        ]
    }

    #[test]
    fn derivatives_match_central_differences() {
        let points = [
            (0.8, 1.7, 2.5),
            (2.3, 0.4, 0.9),
            (4.1, 3.3, 1.2),
            (1.1, 5.0, 0.3),
        ];
        for e in sample_exprs() {
            let d = derivative(&e, X);
            for &(xv, yv, kv) in &points {
                let exact = ev(&d, xv, yv, kv);
                let approx = central(&e, xv, yv, kv);
                let scale = approx.abs().max(1e-6);
                assert!(
                    (exact - approx).abs() <= 1e-6 * scale.max(1.0),
                    "d/dx {e:?} at x={xv}: symbolic {exact}, central difference {approx}; derivative {d:?}"
                );
            }
        }
    }

    #[test]
    fn textbook_derivatives() {
        // d/dS [Vmax S / (Km + S)] = Vmax Km / (Km + S)^2 (Michaelis–Menten
        // slope; quotient rule, any calculus text).
        let mm = div(mul(k(), x()), Expr::add(y(), x()));
        let d = derivative(&mm, X);
        for (s, km, vmax) in [(0.5f64, 2.0f64, 3.0f64), (10.0, 0.1, 7.0)] {
            let want = vmax * km / (km + s).powi(2);
            assert!((ev(&d, s, km, vmax) - want).abs() < 1e-12 * want.abs().max(1.0));
        }
        // d/dx x^x = x^x (ln x + 1) (logarithmic differentiation).
        let d = derivative(&Expr::pow(x(), x()), X);
        let xv: f64 = 1.7;
        assert!((ev(&d, xv, 0.0, 0.0) - xv.powf(xv) * (xv.ln() + 1.0)).abs() < 1e-12);
        // d/dx log10(x) = 1 / (x ln 10).
        let d = derivative(&call(Func::Log10, vec![x()]), X);
        assert!((ev(&d, 3.0, 0.0, 0.0) - 1.0 / (3.0 * 10f64.ln())).abs() < 1e-15);
        // Mass action k x^2 y: d/dx = 2 k x y exactly, as an expression.
        let d = derivative(&mul(mul(k(), Expr::pow(x(), num(2.0))), y()), X);
        assert_eq!(d, mul(mul(mul(num(2.0), k()), x()), y()));
    }

    #[test]
    fn kinks_have_finite_derivatives_at_ties() {
        let d = derivative(&call(Func::Abs, vec![x()]), X);
        assert_eq!(ev(&d, 0.0, 0.0, 0.0), 0.0);
        assert_eq!(ev(&d, -2.0, 0.0, 0.0), -1.0);
        let d = derivative(&call(Func::Min, vec![x(), y()]), X);
        assert_eq!(ev(&d, 1.0, 1.0, 0.0), 0.5);
        assert_eq!(ev(&d, 0.5, 1.0, 0.0), 1.0);
        assert_eq!(ev(&d, 1.5, 1.0, 0.0), 0.0);
    }

    #[test]
    fn simplify_identities() {
        assert_eq!(simplify(&Expr::sub(x(), x())), num(0.0));
        assert_eq!(
            simplify(&Expr::add(mul(num(2.0), x()), x())),
            mul(num(3.0), x())
        );
        assert_eq!(
            simplify(&mul(x(), Expr::pow(x(), num(2.0)))),
            Expr::pow(x(), num(3.0))
        );
        assert_eq!(simplify(&div(x(), x())), num(1.0));
        assert_eq!(simplify(&mul(num(0.0), x())), num(0.0));
        assert_eq!(simplify(&Expr::add(num(0.0), mul(num(1.0), x()))), x());
        assert_eq!(simplify(&Expr::pow(x(), num(1.0))), x());
        assert_eq!(simplify(&Expr::pow(x(), num(0.0))), num(1.0));
        assert_eq!(simplify(&Expr::add(num(2.0), num(3.0))), num(5.0));
        assert_eq!(simplify(&neg(neg(x()))), x());
        assert_eq!(simplify(&div(x(), num(3.0))), div(x(), num(3.0)));
        assert_eq!(
            simplify(&Expr::pow(Expr::pow(x(), num(2.0)), num(3.0))),
            Expr::pow(x(), num(6.0))
        );
        assert_eq!(simplify(&Expr::sub(num(0.0), x())), neg(x()));
        // Division by a literal zero stays visible instead of folding to an infinity.
        assert_eq!(simplify(&div(x(), num(0.0))), div(x(), num(0.0)));
    }

    #[test]
    fn simplify_keeps_values_and_is_idempotent() {
        let points = [(0.8, 1.7, 2.5), (2.3, 0.4, 0.9)];
        for e in sample_exprs() {
            let s = simplify(&e);
            assert_eq!(simplify(&s), s, "not idempotent on {e:?}");
            for &(xv, yv, kv) in &points {
                let (a, b) = (ev(&e, xv, yv, kv), ev(&s, xv, yv, kv));
                assert!(
                    (a - b).abs() <= 1e-12 * a.abs().max(1.0),
                    "{e:?} → {s:?}: {a} vs {b}"
                );
            }
        }
    }
}
