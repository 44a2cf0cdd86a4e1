//! Resolved expression trees of the IR. Names are already resolved to
//! [`Sym`]s and numbers are in the model's default units, so evaluation needs
//! no look-ups by name.

use super::ir::Sym;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
pub enum BinOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
pub enum Func {
    Exp,
    Ln,
    Log10,
    Sqrt,
    Abs,
    Min,
    Max,
    Pow,
}

impl Func {
    pub fn from_name(name: &str) -> Option<Func> {
        Some(match name {
            "exp" => Func::Exp,
            "ln" => Func::Ln,
            "log10" => Func::Log10,
            "sqrt" => Func::Sqrt,
            "abs" => Func::Abs,
            "min" => Func::Min,
            "max" => Func::Max,
            "pow" => Func::Pow,
            _ => return None,
        })
    }
    pub fn name(self) -> &'static str {
        match self {
            Func::Exp => "exp",
            Func::Ln => "ln",
            Func::Log10 => "log10",
            Func::Sqrt => "sqrt",
            Func::Abs => "abs",
            Func::Min => "min",
            Func::Max => "max",
            Func::Pow => "pow",
        }
    }
    pub fn arity(self) -> usize {
        match self {
            Func::Min | Func::Max | Func::Pow => 2,
            _ => 1,
        }
    }
    pub fn apply(self, args: &[f64]) -> f64 {
        let a = args.first().copied().unwrap_or(f64::NAN);
        let b = args.get(1).copied().unwrap_or(f64::NAN);
        match self {
            Func::Exp => a.exp(),
            Func::Ln => a.ln(),
            Func::Log10 => a.log10(),
            Func::Sqrt => a.sqrt(),
            Func::Abs => a.abs(),
            Func::Min => a.min(b),
            Func::Max => a.max(b),
            Func::Pow => a.powf(b),
        }
    }
}

/// An expression over species, fixed species, params, totals, observables,
/// numbers and time `t`. `pi` is lowered to its number.
#[derive(Debug, Clone, PartialEq)]
pub enum Expr {
    Number(f64),
    Name(Sym),
    Time,
    Neg(Box<Expr>),
    Binary(BinOp, Box<Expr>, Box<Expr>),
    Call(Func, Vec<Expr>),
}

// Constructors named after the operation they build (`Expr::mul(a, b)`
// makes a product node); they are not arithmetic on values, so the
// operator traits would mislead.
#[allow(clippy::should_implement_trait)]
impl Expr {
    pub fn num(v: f64) -> Expr {
        Expr::Number(v)
    }
    pub fn name(s: Sym) -> Expr {
        Expr::Name(s)
    }
    pub fn bin(op: BinOp, a: Expr, b: Expr) -> Expr {
        Expr::Binary(op, Box::new(a), Box::new(b))
    }
    pub fn mul(a: Expr, b: Expr) -> Expr {
        Expr::bin(BinOp::Mul, a, b)
    }
    pub fn sub(a: Expr, b: Expr) -> Expr {
        Expr::bin(BinOp::Sub, a, b)
    }
    pub fn add(a: Expr, b: Expr) -> Expr {
        Expr::bin(BinOp::Add, a, b)
    }
    pub fn pow(a: Expr, b: Expr) -> Expr {
        Expr::bin(BinOp::Pow, a, b)
    }

    /// Evaluates with `value(sym)` giving the current value of every name.
    pub fn eval(&self, value: &dyn Fn(Sym) -> f64, t: f64) -> f64 {
        match self {
            Expr::Number(v) => *v,
            Expr::Name(s) => value(*s),
            Expr::Time => t,
            Expr::Neg(e) => -e.eval(value, t),
            Expr::Binary(op, a, b) => {
                let (a, b) = (a.eval(value, t), b.eval(value, t));
                match op {
                    BinOp::Add => a + b,
                    BinOp::Sub => a - b,
                    BinOp::Mul => a * b,
                    BinOp::Div => a / b,
                    BinOp::Pow => pow(a, b),
                }
            }
            Expr::Call(f, args) => {
                let vals: Vec<f64> = args.iter().map(|a| a.eval(value, t)).collect();
                f.apply(&vals)
            }
        }
    }

    /// Calls `f` on every name the expression mentions (with repeats).
    pub fn visit_names(&self, f: &mut dyn FnMut(Sym)) {
        match self {
            Expr::Number(_) | Expr::Time => {}
            Expr::Name(s) => f(*s),
            Expr::Neg(e) => e.visit_names(f),
            Expr::Binary(_, a, b) => {
                a.visit_names(f);
                b.visit_names(f);
            }
            Expr::Call(_, args) => args.iter().for_each(|a| a.visit_names(f)),
        }
    }

    /// The distinct names mentioned, in first-seen order.
    pub fn names(&self) -> Vec<Sym> {
        let mut out = Vec::new();
        self.visit_names(&mut |s| {
            if !out.contains(&s) {
                out.push(s)
            }
        });
        out
    }

    pub fn mentions_time(&self) -> bool {
        match self {
            Expr::Time => true,
            Expr::Number(_) | Expr::Name(_) => false,
            Expr::Neg(e) => e.mentions_time(),
            Expr::Binary(_, a, b) => a.mentions_time() || b.mentions_time(),
            Expr::Call(_, args) => args.iter().any(Expr::mentions_time),
        }
    }

    /// Replaces every name by the expression `f` returns (or keeps it).
    pub fn substitute(&self, f: &dyn Fn(Sym) -> Option<Expr>) -> Expr {
        match self {
            Expr::Name(s) => f(*s).unwrap_or(Expr::Name(*s)),
            Expr::Number(_) | Expr::Time => self.clone(),
            Expr::Neg(e) => Expr::Neg(Box::new(e.substitute(f))),
            Expr::Binary(op, a, b) => Expr::bin(*op, a.substitute(f), b.substitute(f)),
            Expr::Call(func, args) => {
                Expr::Call(*func, args.iter().map(|a| a.substitute(f)).collect())
            }
        }
    }

    /// Number of nodes (for size limits).
    pub fn size(&self) -> usize {
        match self {
            Expr::Number(_) | Expr::Name(_) | Expr::Time => 1,
            Expr::Neg(e) => 1 + e.size(),
            Expr::Binary(_, a, b) => 1 + a.size() + b.size(),
            Expr::Call(_, args) => 1 + args.iter().map(Expr::size).sum::<usize>(),
        }
    }
}

/// Power with exact small integer exponents (so `x^2` at x < 0 is defined).
pub fn pow(a: f64, b: f64) -> f64 {
    if b == b.trunc() && b.abs() <= 64.0 {
        a.powi(b as i32)
    } else {
        a.powf(b)
    }
}
