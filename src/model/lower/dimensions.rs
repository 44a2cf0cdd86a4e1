//! Dimensions: what an expression's dimension follows from its parts, and
//! sums of unlike dimensions.
//!
//! Invariants: one bottom-up pass per expression (no quadratic
//! re-inference); an unknown dimension is never reported as a mismatch.

use super::*;
use crate::diagnostics::{Code, Diagnostic, Span};
use crate::model::expr::{BinOp, Expr, Func};
use crate::model::ir::*;
use crate::model::units::Dim;

impl Lowerer<'_> {
    /// The dimension of an expression where it follows from its parts.
    pub(super) fn infer_dim(&self, e: &Expr) -> Option<Dim> {
        match e {
            Expr::Number(_) => Some(Dim::NONE),
            Expr::Time => Some(Dim::TIME),
            Expr::Name(Sym::Param(i)) => self.model.params[*i].dim,
            Expr::Name(Sym::Species(_) | Sym::Fixed(_) | Sym::Total(_)) => Some(Dim::CONC),
            Expr::Name(Sym::Observable(_)) => None,
            Expr::Neg(a) => self.infer_dim(a),
            Expr::Binary(op, a, b) => {
                let (da, db) = (self.infer_dim(a), self.infer_dim(b));
                match op {
                    BinOp::Add | BinOp::Sub => match (da, db) {
                        (Some(x), Some(y)) if x == y => Some(x),
                        // A bare number added to a dimensioned term: the
                        // number is taken in that dimension's default units.
                        (Some(x), Some(y)) if x == Dim::NONE && is_plain_number(a) => Some(y),
                        (Some(x), Some(y)) if y == Dim::NONE && is_plain_number(b) => Some(x),
                        _ => None,
                    },
                    BinOp::Mul => Some(da?.mul(db?)),
                    BinOp::Div => Some(da?.div(db?)),
                    BinOp::Pow => match (**b).clone() {
                        Expr::Number(p) if p == p.trunc() && p.abs() < 100.0 => {
                            Some(da?.powi(p as i32))
                        }
                        _ if da == Some(Dim::NONE) => Some(Dim::NONE),
                        _ => None,
                    },
                }
            }
            Expr::Call(f, args) => match f {
                Func::Abs | Func::Min | Func::Max => {
                    let d = self.infer_dim(args.first()?)?;
                    if args.iter().skip(1).all(|a| self.infer_dim(a) == Some(d)) {
                        Some(d)
                    } else {
                        None
                    }
                }
                Func::Sqrt => {
                    let d = self.infer_dim(args.first()?)?;
                    if d.conc % 2 == 0 && d.time % 2 == 0 {
                        Some(Dim::new(d.conc / 2, d.time / 2))
                    } else {
                        None
                    }
                }
                _ => {
                    if args.iter().all(|a| self.infer_dim(a) == Some(Dim::NONE)) {
                        Some(Dim::NONE)
                    } else {
                        None
                    }
                }
            },
        }
    }

    /// The dimensions of the first sum, difference, `min` or `max` in `e`
    /// whose two sides have known, different dimensions (a bare number
    /// added to a dimensioned term takes that term's dimension).
    pub(super) fn mismatched_sum(&self, e: &Expr) -> Option<(Dim, Dim)> {
        self.dim_or_mismatch(e).err()
    }

    /// [`Self::infer_dim`] in one bottom-up pass that also stops at the
    /// first mismatched sum (calling `infer_dim` at every node would be
    /// quadratic in a long sum).
    pub(super) fn dim_or_mismatch(&self, e: &Expr) -> Result<Option<Dim>, (Dim, Dim)> {
        // A literal has no dimension of its own here, as a param written
        // without a unit has none: published test problems are often
        // scaled, with constants and offsets written as bare numbers
        // (`(1 + y1) * y2`), so anything a literal takes part in is of
        // unknown dimension and only sums of named quantities are judged.
        let same = |_: &Expr, da: Option<Dim>, _: &Expr, db: Option<Dim>| match (da, db) {
            (Some(x), Some(y)) if x == y => Ok(Some(x)),
            (Some(x), Some(y)) => Err((x, y)),
            _ => Ok(None),
        };
        Ok(match e {
            Expr::Number(_) => None,
            Expr::Neg(a) => self.dim_or_mismatch(a)?,
            Expr::Binary(op, a, b) => {
                let (da, db) = (self.dim_or_mismatch(a)?, self.dim_or_mismatch(b)?);
                match op {
                    BinOp::Add | BinOp::Sub => same(a, da, b, db)?,
                    BinOp::Mul => da.zip(db).map(|(x, y)| x.mul(y)),
                    BinOp::Div => da.zip(db).map(|(x, y)| x.div(y)),
                    BinOp::Pow => match **b {
                        Expr::Number(p) if p == p.trunc() && p.abs() < 100.0 => {
                            da.map(|d| d.powi(p as i32))
                        }
                        _ if da == Some(Dim::NONE) => Some(Dim::NONE),
                        _ => None,
                    },
                }
            }
            Expr::Call(f, args) => {
                let dims = args
                    .iter()
                    .map(|a| self.dim_or_mismatch(a))
                    .collect::<Result<Vec<_>, _>>()?;
                if let (Func::Min | Func::Max, [a, b], [da, db]) =
                    (f, args.as_slice(), dims.as_slice())
                {
                    same(a, *da, b, *db)?;
                }
                let first = dims.first().copied().flatten();
                match f {
                    Func::Abs | Func::Min | Func::Max => {
                        first.filter(|d| dims.iter().all(|x| *x == Some(*d)))
                    }
                    Func::Sqrt => first
                        .filter(|d| d.conc % 2 == 0 && d.time % 2 == 0)
                        .map(|d| Dim::new(d.conc / 2, d.time / 2)),
                    _ => dims
                        .iter()
                        .all(|d| *d == Some(Dim::NONE))
                        .then_some(Dim::NONE),
                }
            }
            _ => self.infer_dim(e),
        })
    }

    /// Reports a sum of different dimensions in `e` (the expression of
    /// `what`, written at `span`); true if there was one.
    pub(super) fn report_mismatched_sum(&mut self, e: &Expr, what: &str, span: Span) -> bool {
        let Some((x, y)) = self.mismatched_sum(e) else {
            return false;
        };
        let units = self.model.units;
        let d = Diagnostic::error(
            Code::DimensionMismatch,
            format!(
                "{what} adds or compares quantities of different dimensions: {} and {}",
                x.display_in(units),
                y.display_in(units)
            ),
        )
        .with_label(span, format!("{} against {}", x.display_in(units), y.display_in(units)))
        .with_help("terms of a sum, and the two sides of `min` or `max`, must have the same dimension; check the units of the params used");
        self.error(d);
        true
    }
}
