//! When two values or expressions from the two models mean the same.
//!
//! Values are compared in one canonical unit system (mol/L, s) so that
//! `1 mM` and `1000 uM`, or two files with different default units, agree.
//! Expressions are compared by value: every name gets a pseudo-random value
//! that is the same on both sides when the names are paired (converted to
//! each side's default units by the name's dimension), and the two
//! expressions must agree at every sample point to a relative 1e-9. This is
//! the probabilistic identity test for expressions (Schwartz 1980, J. ACM
//! 27:701; Zippel 1979): a rational function that is not identically equal
//! agrees at random points only by accident.

use super::pairing::Pairing;
use crate::model::{BinOp, Coef};
use crate::model::{Dim, Expr, Func, Model, ParamDef, Rate, Sym, Term, Units};
use std::collections::BTreeMap;

/// Relative tolerance for "the same number" after unit conversion: unit
/// factors are powers of ten, so two spellings of one quantity differ only
/// by rounding in the last bits.
pub const RELATIVE_TOLERANCE: f64 = 1e-9;
const SAMPLE_POINTS: u64 = 4;

/// The identity of a name across both models: paired names share a key.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Key {
    /// A paired item, named by its old symbol.
    Pair(Sym),
    OldOnly(Sym),
    NewOnly(Sym),
}

impl Key {
    fn code(self) -> u64 {
        let (side, sym) = match self {
            Key::Pair(s) => (0u64, s),
            Key::OldOnly(s) => (1, s),
            Key::NewOnly(s) => (2, s),
        };
        let (kind, index) = match sym {
            Sym::Species(i) => (0u64, i),
            Sym::Fixed(i) => (1, i),
            Sym::Param(i) => (2, i),
            Sym::Total(i) => (3, i),
            Sym::Observable(i) => (4, i),
        };
        (side << 60) ^ (kind << 56) ^ index as u64
    }
}

/// Dimensions of the names whose dimension the IR may leave open.
#[derive(Debug, Clone)]
pub struct Dims {
    pub params: Vec<Option<Dim>>,
    pub observables: Vec<Option<Dim>>,
}

impl Dims {
    fn of(model: &Model) -> Dims {
        let mut params: Vec<Option<Dim>> = model.params.iter().map(|p| p.dim).collect();
        // A unitless param used as a mass-action constant has that constant's dimension.
        for step in &model.steps {
            if let Rate::MassAction { forward, reverse } = &step.rate {
                let mut infer = |e: &Expr, side: &[Term]| {
                    if let Expr::Name(Sym::Param(i)) = e
                        && params[*i].is_none()
                    {
                        let order = Model::order(side);
                        if order.is_integer() {
                            params[*i] = Some(Dim::mass_action_constant(order.to_integer() as i32));
                        }
                    }
                };
                infer(forward, &step.reactants);
                if let Some(r) = reverse {
                    infer(r, &step.products);
                }
            }
        }
        let mut dims = Dims {
            params,
            observables: vec![None; model.observables.len()],
        };
        // A derived param with no written unit has the dimension of its
        // formula over the (possibly inferred) dimensions of its parts.
        for &i in &model.param_order {
            if dims.params[i].is_none()
                && let ParamDef::Expr(e) = &model.params[i].definition
            {
                dims.params[i] = infer_dim(e, &|s| dims.sym_dim(s)).known();
            }
        }
        // Observables may use earlier ones; a few passes settle any order.
        for _ in 0..model.observables.len().min(8) + 1 {
            for (i, o) in model.observables.iter().enumerate() {
                let d = infer_dim(&o.expr, &|s| dims.sym_dim(s)).known();
                dims.observables[i] = d;
            }
        }
        dims
    }

    pub fn sym_dim(&self, sym: Sym) -> Option<Dim> {
        match sym {
            Sym::Species(_) | Sym::Fixed(_) | Sym::Total(_) => Some(Dim::CONC),
            Sym::Param(i) => self.params.get(i).copied().flatten(),
            Sym::Observable(i) => self.observables.get(i).copied().flatten(),
        }
    }
}

/// A dimension as inferred from an expression's parts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Inferred {
    Known(Dim),
    /// A plain number: adopts whatever dimension its place needs.
    Free,
    Unknown,
}

impl Inferred {
    fn known(self) -> Option<Dim> {
        match self {
            Inferred::Known(d) => Some(d),
            Inferred::Free => Some(Dim::NONE),
            Inferred::Unknown => None,
        }
    }
}

/// The dimension of an expression given the dimensions of its names.
pub fn infer_dim(e: &Expr, dim_of: &dyn Fn(Sym) -> Option<Dim>) -> Inferred {
    use Inferred::*;
    let either = |a: Inferred, b: Inferred| match (a, b) {
        (Known(d), _) | (_, Known(d)) => Known(d),
        (Free, Free) => Free,
        _ => Unknown,
    };
    match e {
        Expr::Number(_) => Free,
        Expr::Name(s) => dim_of(*s).map(Known).unwrap_or(Unknown),
        Expr::Time => Known(Dim::TIME),
        Expr::Neg(a) => infer_dim(a, dim_of),
        Expr::Binary(op, a, b) => {
            let (da, db) = (infer_dim(a, dim_of), infer_dim(b, dim_of));
            match op {
                BinOp::Add | BinOp::Sub => either(da, db),
                BinOp::Mul | BinOp::Div => {
                    let flip = |d: Dim| {
                        if *op == BinOp::Div {
                            Dim::NONE.div(d)
                        } else {
                            d
                        }
                    };
                    match (da, db) {
                        (Known(x), Known(y)) => Known(if *op == BinOp::Div {
                            x.div(y)
                        } else {
                            x.mul(y)
                        }),
                        (Known(x), Free) => Known(x),
                        (Free, Known(y)) => Known(flip(y)),
                        (Free, Free) => Free,
                        _ => Unknown,
                    }
                }
                BinOp::Pow => match (da, b.as_ref()) {
                    (Free, _) => Free,
                    (Known(d), _) if d == Dim::NONE => Known(Dim::NONE),
                    (Known(d), Expr::Number(n)) if n.fract() == 0.0 && n.abs() <= 64.0 => {
                        Known(d.powi(*n as i32))
                    }
                    _ => Unknown,
                },
            }
        }
        Expr::Call(f, args) => {
            let arg = |i: usize| args.get(i).map(|a| infer_dim(a, dim_of)).unwrap_or(Unknown);
            match f {
                Func::Exp | Func::Ln | Func::Log10 => Known(Dim::NONE),
                Func::Abs => arg(0),
                Func::Min | Func::Max => either(arg(0), arg(1)),
                Func::Sqrt => match arg(0) {
                    Known(d) if d.conc % 2 == 0 && d.time % 2 == 0 => {
                        Known(Dim::new(d.conc / 2, d.time / 2))
                    }
                    Free => Free,
                    _ => Unknown,
                },
                Func::Pow => match (arg(0), args.get(1)) {
                    (Free, _) => Free,
                    (Known(d), Some(Expr::Number(n))) if n.fract() == 0.0 && n.abs() <= 64.0 => {
                        Known(d.powi(*n as i32))
                    }
                    _ => Unknown,
                },
            }
        }
    }
}

/// How many canonical units (mol/L, s) one default unit of `dim` is.
pub fn canonical_factor(dim: Dim, units: Units) -> f64 {
    units.concentration.molar().powi(dim.conc) * units.time.seconds().powi(dim.time)
}

/// Whether two numbers agree to [`RELATIVE_TOLERANCE`] (NaN agrees with NaN,
/// so both sides failing to evaluate at a point is no difference).
pub fn close(a: f64, b: f64) -> bool {
    if a.is_nan() || b.is_nan() {
        return a.is_nan() && b.is_nan();
    }
    a == b || (a - b).abs() <= RELATIVE_TOLERANCE * a.abs().max(b.abs())
}

/// Deterministic pseudo-random number in [0.5, 2) for a key and a point
/// (splitmix64 finaliser: Steele, Lea & Flood 2014, OOPSLA).
fn sample(code: u64, point: u64) -> f64 {
    let mut z = code
        .wrapping_add(point.wrapping_mul(0x9E37_79B9_7F4A_7C15))
        .wrapping_add(0x2545_F491_4F6C_DD1D);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    0.5 + 1.5 * ((z >> 11) as f64 / (1u64 << 53) as f64)
}

/// Which side of the comparison a symbol belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Side {
    Old,
    New,
}

/// Both models, their dimensions, and (once found) the pairing.
pub struct Context<'a> {
    pub old: &'a Model,
    pub new: &'a Model,
    pub old_dims: Dims,
    pub new_dims: Dims,
    pub pairing: Pairing,
}

impl<'a> Context<'a> {
    pub fn new(old: &'a Model, new: &'a Model) -> Context<'a> {
        Context {
            old,
            new,
            old_dims: Dims::of(old),
            new_dims: Dims::of(new),
            pairing: Pairing::default(),
        }
    }

    pub fn model(&self, side: Side) -> &'a Model {
        match side {
            Side::Old => self.old,
            Side::New => self.new,
        }
    }

    pub fn dims(&self, side: Side) -> &Dims {
        match side {
            Side::Old => &self.old_dims,
            Side::New => &self.new_dims,
        }
    }

    pub fn key(&self, side: Side, sym: Sym) -> Key {
        match side {
            Side::Old => match self.pairing.named.get(&sym) {
                Some(_) => Key::Pair(sym),
                None => Key::OldOnly(sym),
            },
            Side::New => match self.pairing.named_back.get(&sym) {
                Some(old) => Key::Pair(*old),
                None => Key::NewOnly(sym),
            },
        }
    }

    fn same_units(&self) -> bool {
        self.old.units == self.new.units
    }

    /// Whether a quantity of dimension `dim` (unknown: taken as a plain
    /// number) has the same value on both sides.
    pub fn same_value(&self, old: f64, new: f64, dim: Option<Dim>) -> bool {
        match dim {
            Some(d) if !self.same_units() => close(
                old * canonical_factor(d, self.old.units),
                new * canonical_factor(d, self.new.units),
            ),
            _ => close(old, new),
        }
    }

    /// Evaluates an expression of one side at a sample point, the value in
    /// canonical units when its dimension is known.
    fn eval(&self, side: Side, e: &Expr, point: u64) -> f64 {
        let model = self.model(side);
        let dims = self.dims(side);
        let units = model.units;
        let value = |s: Sym| {
            let canonical = sample(self.key(side, s).code(), point);
            match dims.sym_dim(s) {
                Some(d) => canonical / canonical_factor(d, units),
                None => canonical,
            }
        };
        let t = sample(u64::MAX, point) / units.time.seconds();
        e.eval(&value, t)
    }

    /// Whether two expressions mean the same, with paired names identified.
    /// `dims` gives each result's dimension (needed only when the default
    /// units differ; unknown dimensions are compared as plain numbers).
    pub fn same_expr(&self, old: &Expr, new: &Expr, dims: (Option<Dim>, Option<Dim>)) -> bool {
        let (fo, fn_) = if self.same_units() {
            (1.0, 1.0)
        } else {
            let f = |d: Option<Dim>, u: Units| d.map(|d| canonical_factor(d, u)).unwrap_or(1.0);
            (f(dims.0, self.old.units), f(dims.1, self.new.units))
        };
        (0..SAMPLE_POINTS).all(|p| {
            close(
                self.eval(Side::Old, old, p) * fo,
                self.eval(Side::New, new, p) * fn_,
            )
        })
    }

    /// The dimension of an expression on one side.
    pub fn expr_dim(&self, side: Side, e: &Expr) -> Option<Dim> {
        let dims = self.dims(side);
        infer_dim(e, &|s| dims.sym_dim(s)).known()
    }

    /// A side of a step as a multiset over keys (repeated terms merged).
    pub fn side_keys(&self, side: Side, terms: &[Term]) -> BTreeMap<Key, Coef> {
        let mut m: BTreeMap<Key, Coef> = BTreeMap::new();
        for t in terms {
            *m.entry(self.key(side, t.sym)).or_default() += t.coefficient;
        }
        m.retain(|_, c| *c != Coef::default());
        m
    }

    /// Whether the net rates of two steps mean the same.
    pub fn same_rate(&self, old_step: usize, new_step: usize) -> bool {
        let rate = Some(Dim::RATE);
        self.same_expr(
            &self.old.step_rate(old_step),
            &self.new.step_rate(new_step),
            (rate, rate),
        )
    }

    /// Whether a step's net rate is the negative of another's (the step was
    /// written the other way round).
    pub fn opposite_rate(&self, old_step: usize, new_step: usize) -> bool {
        let rate = Some(Dim::RATE);
        let negated = Expr::Neg(Box::new(self.new.step_rate(new_step)));
        self.same_expr(&self.old.step_rate(old_step), &negated, (rate, rate))
    }

    /// Whether two params have the same definition (a number with the same
    /// value, or an expression that means the same).
    pub fn same_param_definition(&self, old: usize, new: usize) -> bool {
        let (a, b) = (&self.old.params[old], &self.new.params[new]);
        let dims = (self.old_dims.params[old], self.new_dims.params[new]);
        match (&a.definition, &b.definition) {
            (ParamDef::Value(x), ParamDef::Value(y)) => self.same_value(*x, *y, dims.0.or(dims.1)),
            // A derived param of undeclared dimension takes the one its
            // parts give (their dimensions may be inferred from their use),
            // so the same formula in other units is the same param.
            (ParamDef::Expr(x), ParamDef::Expr(y)) => self.same_expr(
                x,
                y,
                (
                    dims.0.or_else(|| self.expr_dim(Side::Old, x)),
                    dims.1.or_else(|| self.expr_dim(Side::New, y)),
                ),
            ),
            _ => false,
        }
    }

    /// Whether two totals name the same combination (and the same value,
    /// when either gives one).
    pub fn same_total(&self, old: usize, new: usize) -> bool {
        let (a, b) = (&self.old.totals[old], &self.new.totals[new]);
        let terms = |side: Side, t: &crate::model::Total| -> BTreeMap<Key, Coef> {
            t.terms
                .iter()
                .map(|(i, c)| (self.key(side, Sym::Species(*i)), *c))
                .collect()
        };
        terms(Side::Old, a) == terms(Side::New, b)
            && a.value_given == b.value_given
            && (!a.value_given || self.same_value(a.value, b.value, Some(Dim::CONC)))
    }

    /// Whether two observables mean the same.
    pub fn same_observable(&self, old: usize, new: usize) -> bool {
        let (x, y) = (
            &self.old.observables[old].expr,
            &self.new.observables[new].expr,
        );
        self.same_expr(
            x,
            y,
            (
                self.old_dims.observables[old].or_else(|| self.expr_dim(Side::Old, x)),
                self.new_dims.observables[new].or_else(|| self.expr_dim(Side::New, y)),
            ),
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn samples_are_deterministic_and_in_range() {
        for code in [0u64, 1, 77, u64::MAX] {
            for p in 0..10 {
                let v = sample(code, p);
                assert!((0.5..2.0).contains(&v));
                assert_eq!(v, sample(code, p));
            }
        }
        assert_ne!(sample(1, 0), sample(2, 0));
    }

    #[test]
    fn closeness_is_relative() {
        // 1 mM written as 1e-3 M and as 1000 uM × 1e-6 (SI prefixes) differ only by rounding.
        assert!(close(1e-3, 1000.0 * 1e-6));
        assert!(!close(1.0, 1.0 + 1e-6));
        assert!(close(f64::NAN, f64::NAN));
        assert!(!close(f64::NAN, 1.0));
    }

    #[test]
    fn dimensions_of_expressions() {
        // (k_off + k_cat) / k_on with k_off, k_cat in /s and k_on in /uM/s
        // is a concentration: the Michaelis constant (Briggs & Haldane 1925).
        let dim_of = |s: Sym| match s {
            Sym::Param(0) | Sym::Param(1) => Some(Dim::new(0, -1)),
            Sym::Param(2) => Some(Dim::new(-1, -1)),
            _ => Some(Dim::CONC),
        };
        let km = Expr::bin(
            BinOp::Div,
            Expr::add(Expr::Name(Sym::Param(0)), Expr::Name(Sym::Param(1))),
            Expr::Name(Sym::Param(2)),
        );
        assert_eq!(infer_dim(&km, &dim_of), Inferred::Known(Dim::CONC));
        let signal = Expr::add(
            Expr::mul(Expr::Number(850.0), Expr::Name(Sym::Species(0))),
            Expr::Number(120.0),
        );
        assert_eq!(infer_dim(&signal, &dim_of), Inferred::Known(Dim::CONC));
    }
}
