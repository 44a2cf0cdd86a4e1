//! Rational functions: a quotient of two exact polynomials kept in lowest
//! terms, and a small parser for rational expressions written in the
//! mechanism language's syntax (`+ - * / ^`, names, decimal numbers).
//!
//! Invariants: the denominator is never zero; after [`RationalFunction::new`]
//! the numerator and denominator share no common factor (full polynomial
//! gcd when both are small and it stays within a work budget, else content
//! and monomial factors only, which [`RationalFunction::cancelled`] reports), and the
//! denominator has coprime integer coefficients with a positive leading one.

use super::poly::{GcdBudget, Poly, Vars};
use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::Zero;

/// Above this many terms (numerator times denominator) the full gcd is
/// skipped: the pseudo-remainder sequence can grow faster than it saves.
const GCD_TERM_LIMIT: usize = 40_000;

/// Work one full gcd may spend (see [`GcdBudget`]) before cancellation
/// falls back to content and monomial factors. Fuzzed mechanisms of four
/// enzyme forms drove the pseudo-remainder sequence past a minute; this
/// bound keeps any one gcd to a fraction of a second in a release build.
const GCD_WORK_LIMIT: u64 = 2_000_000;

#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RationalFunction {
    pub num: Poly,
    pub den: Poly,
}

impl RationalFunction {
    /// `num / den` in lowest terms; `None` if `den` is zero.
    pub fn new(num: Poly, den: Poly) -> Option<RationalFunction> {
        RationalFunction::cancelled(num, den).map(|(r, _)| r)
    }

    /// [`RationalFunction::new`], also telling whether every common factor
    /// was cancelled (`false` when the gcd was too large or too costly to
    /// compute, and only content and monomial factors were divided out).
    pub fn cancelled(num: Poly, den: Poly) -> Option<(RationalFunction, bool)> {
        if den.is_zero() {
            return None;
        }
        if num.is_zero() {
            return Some((RationalFunction::zero(), true));
        }
        let monomial_gcd = || Poly::monomial(num.monomial_content().gcd(&den.monomial_content()));
        let (g, complete) = if num.coprime_up_to_monomials(&den) {
            (monomial_gcd(), true)
        } else if num.len().saturating_mul(den.len()) <= GCD_TERM_LIMIT {
            match num.gcd_within(&den, &mut GcdBudget::new(GCD_WORK_LIMIT)) {
                Some(g) => (g, true),
                None => (monomial_gcd(), false),
            }
        } else {
            (monomial_gcd(), false)
        };
        let (mut num, mut den) = if g.is_one() {
            (num, den)
        } else {
            match (num.div_exact(&g), den.div_exact(&g)) {
                (Some(n), Some(d)) => (n, d),
                _ => (num, den),
            }
        };
        // Move the denominator's numeric content into the numerator.
        let lead_negative = den.leading().is_some_and(|(_, c)| c < &BigRational::zero());
        let mut c = den.content();
        if lead_negative {
            c = -c;
        }
        let inv = c.recip();
        den = den.scale(&inv);
        num = num.scale(&inv);
        Some((RationalFunction { num, den }, complete))
    }
    /// `num / den` exactly as given, without cancelling: for sums whose
    /// terms share a denominator and are cancelled once, at the end.
    pub fn raw(num: Poly, den: Poly) -> RationalFunction {
        RationalFunction { num, den }
    }
    /// Sum without cancelling; equal denominators are kept as they are.
    pub fn add_lazy(&self, o: &RationalFunction) -> RationalFunction {
        if o.num.is_zero() {
            return self.clone();
        }
        if self.num.is_zero() {
            return o.clone();
        }
        if self.den == o.den {
            return RationalFunction::raw(self.num.add(&o.num), self.den.clone());
        }
        RationalFunction::raw(
            self.num.mul(&o.den).add(&o.num.mul(&self.den)),
            self.den.mul(&o.den),
        )
    }
    pub fn zero() -> RationalFunction {
        RationalFunction {
            num: Poly::zero(),
            den: Poly::one(),
        }
    }
    pub fn one() -> RationalFunction {
        RationalFunction {
            num: Poly::one(),
            den: Poly::one(),
        }
    }
    pub fn from_poly(p: Poly) -> RationalFunction {
        RationalFunction {
            num: p,
            den: Poly::one(),
        }
    }
    pub fn constant(c: BigRational) -> RationalFunction {
        RationalFunction::from_poly(Poly::constant(c))
    }
    pub fn is_zero(&self) -> bool {
        self.num.is_zero()
    }
    pub fn add(&self, o: &RationalFunction) -> RationalFunction {
        if self.den == o.den {
            return RationalFunction::new(self.num.add(&o.num), self.den.clone())
                .unwrap_or_else(Self::zero);
        }
        let num = self.num.mul(&o.den).add(&o.num.mul(&self.den));
        RationalFunction::new(num, self.den.mul(&o.den)).unwrap_or_else(Self::zero)
    }
    pub fn neg(&self) -> RationalFunction {
        RationalFunction {
            num: self.num.neg(),
            den: self.den.clone(),
        }
    }
    pub fn sub(&self, o: &RationalFunction) -> RationalFunction {
        self.add(&o.neg())
    }
    pub fn mul(&self, o: &RationalFunction) -> RationalFunction {
        RationalFunction::new(self.num.mul(&o.num), self.den.mul(&o.den)).unwrap_or_else(Self::zero)
    }
    /// `None` when dividing by zero.
    pub fn div(&self, o: &RationalFunction) -> Option<RationalFunction> {
        if o.is_zero() {
            return None;
        }
        RationalFunction::new(self.num.mul(&o.den), self.den.mul(&o.num))
    }
    /// Integer power; `None` for a negative power of zero.
    pub fn powi(&self, e: i64) -> Option<RationalFunction> {
        let base = if e < 0 {
            RationalFunction::one().div(self)?
        } else {
            self.clone()
        };
        let n = e.unsigned_abs().min(u32::MAX as u64) as u32;
        Some(RationalFunction {
            num: base.num.pow(n),
            den: base.den.pow(n),
        })
    }
    /// Whether two rational functions are equal (cross-multiplied).
    pub fn equals(&self, o: &RationalFunction) -> bool {
        self.num.mul(&o.den) == o.num.mul(&self.den)
    }
    pub fn eval(&self, value: &dyn Fn(super::poly::Var) -> f64) -> f64 {
        self.num.eval(value) / self.den.eval(value)
    }

    /// Parses a rational expression: numbers (decimal, exact), names
    /// (interned in `vars`), `+ - * /`, `^` with an integer exponent, and
    /// parentheses. `**` is accepted for `^`.
    pub fn parse(text: &str, vars: &mut Vars) -> Result<RationalFunction, String> {
        let tokens = tokenize(text)?;
        let mut p = Parser {
            tokens,
            pos: 0,
            vars,
        };
        let r = p.sum()?;
        if p.pos != p.tokens.len() {
            return Err(format!(
                "unexpected `{}` in `{text}`",
                p.tokens[p.pos].show()
            ));
        }
        Ok(r)
    }
}

/// An exact rational from a decimal or integer literal (`1.5e-3`).
pub fn parse_decimal(text: &str) -> Option<BigRational> {
    let (mantissa, exp) = match text.find(['e', 'E']) {
        Some(i) => (&text[..i], text[i + 1..].parse::<i32>().ok()?),
        None => (text, 0),
    };
    let (int, frac) = mantissa.split_once('.').unwrap_or((mantissa, ""));
    if int.is_empty() && frac.is_empty() {
        return None;
    }
    let digits = format!("{int}{frac}");
    let digits = if digits.is_empty() {
        "0".to_string()
    } else {
        digits
    };
    let n: BigInt = digits.parse().ok()?;
    let scale = exp - frac.len() as i32;
    let ten = BigInt::from(10);
    let p = num_traits::pow(ten, scale.unsigned_abs() as usize);
    Some(if scale >= 0 {
        BigRational::from_integer(n * p)
    } else {
        BigRational::new(n, p)
    })
}

/// An exact rational for a float as a person wrote it (shortest decimal
/// form that reads back to the same float), so `0.1` becomes 1/10.
pub fn rational_from_f64(v: f64) -> Option<BigRational> {
    if !v.is_finite() {
        return None;
    }
    let text = format!("{v:e}");
    parse_decimal(&text)
}

#[derive(Clone, Debug, PartialEq)]
enum Token {
    Number(String),
    Name(String),
    Op(char),
}

impl Token {
    fn show(&self) -> String {
        match self {
            Token::Number(s) | Token::Name(s) => s.clone(),
            Token::Op(c) => c.to_string(),
        }
    }
}

fn tokenize(text: &str) -> Result<Vec<Token>, String> {
    let chars: Vec<char> = text.chars().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c.is_whitespace() {
            i += 1;
        } else if c.is_ascii_digit()
            || (c == '.' && chars.get(i + 1).is_some_and(|d| d.is_ascii_digit()))
        {
            let start = i;
            while i < chars.len() && (chars[i].is_ascii_digit() || chars[i] == '.') {
                i += 1;
            }
            if i < chars.len() && (chars[i] == 'e' || chars[i] == 'E') {
                let mut j = i + 1;
                if j < chars.len() && (chars[j] == '+' || chars[j] == '-') {
                    j += 1;
                }
                if j < chars.len() && chars[j].is_ascii_digit() {
                    i = j;
                    while i < chars.len() && chars[i].is_ascii_digit() {
                        i += 1;
                    }
                }
            }
            out.push(Token::Number(chars[start..i].iter().collect()));
        } else if c.is_alphabetic() || c == '_' {
            let start = i;
            while i < chars.len() && (chars[i].is_alphanumeric() || chars[i] == '_') {
                i += 1;
            }
            out.push(Token::Name(chars[start..i].iter().collect()));
        } else if c == '*' && chars.get(i + 1) == Some(&'*') {
            out.push(Token::Op('^'));
            i += 2;
        } else if "+-*/^()".contains(c) {
            out.push(Token::Op(c));
            i += 1;
        } else {
            return Err(format!("unexpected character `{c}`"));
        }
    }
    Ok(out)
}

struct Parser<'a> {
    tokens: Vec<Token>,
    pos: usize,
    vars: &'a mut Vars,
}

impl Parser<'_> {
    fn peek_op(&self) -> Option<char> {
        match self.tokens.get(self.pos) {
            Some(Token::Op(c)) => Some(*c),
            _ => None,
        }
    }
    fn sum(&mut self) -> Result<RationalFunction, String> {
        let mut acc = self.product()?;
        while let Some(op @ ('+' | '-')) = self.peek_op() {
            self.pos += 1;
            let rhs = self.product()?;
            acc = if op == '+' {
                acc.add(&rhs)
            } else {
                acc.sub(&rhs)
            };
        }
        Ok(acc)
    }
    fn product(&mut self) -> Result<RationalFunction, String> {
        let mut acc = self.unary()?;
        while let Some(op @ ('*' | '/')) = self.peek_op() {
            self.pos += 1;
            let rhs = self.unary()?;
            acc = if op == '*' {
                acc.mul(&rhs)
            } else {
                acc.div(&rhs).ok_or("division by zero")?
            };
        }
        Ok(acc)
    }
    fn unary(&mut self) -> Result<RationalFunction, String> {
        match self.peek_op() {
            Some('-') => {
                self.pos += 1;
                Ok(self.unary()?.neg())
            }
            Some('+') => {
                self.pos += 1;
                self.unary()
            }
            _ => self.power(),
        }
    }
    fn power(&mut self) -> Result<RationalFunction, String> {
        let base = self.atom()?;
        if self.peek_op() == Some('^') {
            self.pos += 1;
            let negative = if self.peek_op() == Some('-') {
                self.pos += 1;
                true
            } else {
                false
            };
            let e = match self.tokens.get(self.pos) {
                Some(Token::Number(n)) => n
                    .parse::<i64>()
                    .map_err(|_| format!("exponent `{n}` is not an integer"))?,
                Some(Token::Op('(')) => {
                    let r = self.atom()?;
                    let c = r
                        .num
                        .as_constant()
                        .filter(|_| r.den.is_one())
                        .ok_or("exponent is not a number")?;
                    if !c.is_integer() {
                        return Err("exponent is not an integer".into());
                    }
                    self.pos -= 1;
                    num_traits::ToPrimitive::to_i64(&c.to_integer()).ok_or("exponent too large")?
                }
                _ => return Err("expected an integer exponent".into()),
            };
            self.pos += 1;
            let e = if negative { -e } else { e };
            if e.abs() > 64 {
                return Err("exponent too large".into());
            }
            return base
                .powi(e)
                .ok_or_else(|| "negative power of zero".to_string());
        }
        Ok(base)
    }
    fn atom(&mut self) -> Result<RationalFunction, String> {
        let tok = self
            .tokens
            .get(self.pos)
            .cloned()
            .ok_or("unexpected end of expression")?;
        self.pos += 1;
        match tok {
            Token::Number(n) => {
                let q = parse_decimal(&n).ok_or_else(|| format!("bad number `{n}`"))?;
                Ok(RationalFunction::constant(q))
            }
            Token::Name(name) => Ok(RationalFunction::from_poly(Poly::var(
                self.vars.intern(&name),
            ))),
            Token::Op('(') => {
                let r = self.sum()?;
                if self.peek_op() != Some(')') {
                    return Err("missing `)`".into());
                }
                self.pos += 1;
                Ok(r)
            }
            Token::Op(c) => Err(format!("unexpected `{c}`")),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lowest_terms() {
        let mut v = Vars::new();
        // Briggs–Haldane (1925): kcat = k1*k2/k1 = k2 after cancelling k1.
        let r = RationalFunction::parse("k1*k2*(k3 + k4) / (k1*(k3 + k4))", &mut v).unwrap();
        assert_eq!(r, RationalFunction::parse("k2", &mut v).unwrap());
        let half = RationalFunction::parse("(2*x + 2) / (4*x + 4)", &mut v).unwrap();
        assert_eq!(half, RationalFunction::parse("1/2", &mut v).unwrap());
        assert!(half.equals(&RationalFunction::parse("0.5", &mut v).unwrap()));
    }

    #[test]
    fn decimals_are_exact() {
        assert_eq!(
            parse_decimal("0.1"),
            Some(BigRational::new(1.into(), 10.into()))
        );
        assert_eq!(
            parse_decimal("2.5e3"),
            Some(BigRational::from_integer(2500.into()))
        );
        assert_eq!(
            rational_from_f64(0.1),
            Some(BigRational::new(1.into(), 10.into()))
        );
        assert_eq!(
            rational_from_f64(1e-6),
            Some(BigRational::new(1.into(), 1_000_000.into()))
        );
    }

    #[test]
    fn parse_errors_are_reported() {
        let mut v = Vars::new();
        assert!(RationalFunction::parse("x^y", &mut v).is_err());
        assert!(RationalFunction::parse("(x + 1", &mut v).is_err());
        assert!(RationalFunction::parse("x / 0", &mut v).is_err());
        assert!(RationalFunction::parse("x $ 1", &mut v).is_err());
    }
}
