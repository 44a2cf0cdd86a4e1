//! A flat register program: expressions lowered once into a list of
//! instructions over numbered registers, with common subexpressions shared.
//!
//! Why: the solver calls the right-hand side and Jacobian thousands of times;
//! walking `Expr` trees and resolving names on each call would dominate the
//! cost of small models. Here every name is resolved at compile time to a
//! state slot or a constant slot, and everything that depends only on
//! constants is computed once (the *prelude*) when constants are set. The
//! *body* runs on every call and reads the state and time.
//!
//! Invariants: an instruction only reads registers written by earlier
//! instructions (prelude registers count as earlier than every body
//! instruction); no instruction branches on a value, so NaN pushed into the
//! state reaches every output that structurally depends on it.

use crate::model::{BinOp, Expr, Func};
use std::collections::HashMap;

pub type Reg = u32;

/// One instruction's operation; also the key for sharing equal subexpressions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Node {
    /// A literal (bits of the f64, so it can be hashed).
    Literal(u64),
    /// A constant slot (param, fixed species, total).
    Constant(u32),
    /// A state slot.
    State(u32),
    Time,
    Neg(Reg),
    Add(Reg, Reg),
    Sub(Reg, Reg),
    Mul(Reg, Reg),
    Div(Reg, Reg),
    PowInt(Reg, i32),
    Pow(Reg, Reg),
    Exp(Reg),
    Ln(Reg),
    Log10(Reg),
    Sqrt(Reg),
    Abs(Reg),
    Min(Reg, Reg),
    Max(Reg, Reg),
}

/// What a name in an expression stands for, as decided by the caller.
#[derive(Debug, Clone)]
pub enum Leaf {
    State(u32),
    Constant(u32),
    /// Replace the name by this expression (observables, dependent species).
    Inline(Expr),
}

/// A compiled program: a prelude run when constants change and a body run
/// on every evaluation.
#[derive(Debug, Clone, Default)]
pub struct Program {
    prelude: Vec<(Reg, Node)>,
    body: Vec<(Reg, Node)>,
    nregs: usize,
}

impl Program {
    pub fn register_count(&self) -> usize {
        self.nregs
    }
    pub fn body_len(&self) -> usize {
        self.body.len()
    }

    /// Runs the prelude: fills every register that depends only on constants.
    pub fn run_prelude(&self, regs: &mut [f64], constants: &[f64]) {
        for &(dst, node) in &self.prelude {
            regs[dst as usize] = eval_node(node, regs, &[], constants, 0.0);
        }
    }

    /// Runs the body at state `y` and time `t`; the prelude must have run.
    #[inline]
    pub fn run_body(&self, regs: &mut [f64], y: &[f64], t: f64) {
        for &(dst, node) in &self.body {
            regs[dst as usize] = eval_node(node, regs, y, &[], t);
        }
    }
}

#[inline(always)]
fn eval_node(node: Node, r: &[f64], y: &[f64], constants: &[f64], t: f64) -> f64 {
    match node {
        Node::Literal(bits) => f64::from_bits(bits),
        Node::Constant(k) => constants[k as usize],
        Node::State(i) => y[i as usize],
        Node::Time => t,
        Node::Neg(a) => -r[a as usize],
        Node::Add(a, b) => r[a as usize] + r[b as usize],
        Node::Sub(a, b) => r[a as usize] - r[b as usize],
        Node::Mul(a, b) => r[a as usize] * r[b as usize],
        Node::Div(a, b) => r[a as usize] / r[b as usize],
        Node::PowInt(a, n) => r[a as usize].powi(n),
        Node::Pow(a, b) => crate::model::expr::pow(r[a as usize], r[b as usize]),
        Node::Exp(a) => r[a as usize].exp(),
        Node::Ln(a) => r[a as usize].ln(),
        Node::Log10(a) => r[a as usize].log10(),
        Node::Sqrt(a) => r[a as usize].sqrt(),
        Node::Abs(a) => r[a as usize].abs(),
        Node::Min(a, b) => r[a as usize].min(r[b as usize]),
        Node::Max(a, b) => r[a as usize].max(r[b as usize]),
    }
}

/// Builds a [`Program`] from expressions, sharing equal subexpressions.
pub struct ProgramBuilder<'a> {
    resolve: &'a dyn Fn(crate::model::Sym) -> Leaf,
    prelude: Vec<(Reg, Node)>,
    body: Vec<(Reg, Node)>,
    memo: HashMap<Node, Reg>,
    varies: Vec<bool>,
    inline_depth: usize,
}

/// Error while lowering (only for pathological inputs: runaway inlining).
#[derive(Debug, Clone, PartialEq)]
pub struct LowerError(pub String);

impl<'a> ProgramBuilder<'a> {
    pub fn new(resolve: &'a dyn Fn(crate::model::Sym) -> Leaf) -> Self {
        ProgramBuilder {
            resolve,
            prelude: Vec::new(),
            body: Vec::new(),
            memo: HashMap::new(),
            varies: Vec::new(),
            inline_depth: 0,
        }
    }

    /// Lowers an expression; returns the register that will hold its value.
    pub fn lower(&mut self, e: &Expr) -> Result<Reg, LowerError> {
        Ok(match e {
            Expr::Number(v) => self.emit(Node::Literal(v.to_bits())),
            Expr::Time => self.emit(Node::Time),
            Expr::Name(s) => match (self.resolve)(*s) {
                Leaf::State(i) => self.emit(Node::State(i)),
                Leaf::Constant(k) => self.emit(Node::Constant(k)),
                Leaf::Inline(inner) => {
                    if self.inline_depth > 64 {
                        return Err(LowerError(
                            "names refer to each other too deeply (a cycle?)".into(),
                        ));
                    }
                    self.inline_depth += 1;
                    let r = self.lower(&inner);
                    self.inline_depth -= 1;
                    r?
                }
            },
            Expr::Neg(a) => {
                let a = self.lower(a)?;
                self.emit(Node::Neg(a))
            }
            Expr::Binary(op, a, b) => {
                if *op == BinOp::Pow
                    && let Some(n) = small_integer(b)
                {
                    let a = self.lower(a)?;
                    return Ok(self.emit(Node::PowInt(a, n)));
                }
                let (a, b) = (self.lower(a)?, self.lower(b)?);
                match op {
                    // Commutative: order the operands so `x*y` and `y*x` share a register.
                    BinOp::Add => self.emit(Node::Add(a.min(b), a.max(b))),
                    BinOp::Mul => self.emit(Node::Mul(a.min(b), a.max(b))),
                    BinOp::Sub => self.emit(Node::Sub(a, b)),
                    BinOp::Div => self.emit(Node::Div(a, b)),
                    BinOp::Pow => self.emit(Node::Pow(a, b)),
                }
            }
            Expr::Call(f, args) => {
                if *f == Func::Pow
                    && args.len() == 2
                    && let Some(n) = small_integer(&args[1])
                {
                    let a = self.lower(&args[0])?;
                    return Ok(self.emit(Node::PowInt(a, n)));
                }
                let mut regs = Vec::with_capacity(args.len());
                for a in args {
                    regs.push(self.lower(a)?);
                }
                let arg = |i: usize| {
                    regs.get(i)
                        .copied()
                        .ok_or_else(|| LowerError(format!("`{}` is missing an argument", f.name())))
                };
                match f {
                    Func::Exp => self.emit(Node::Exp(arg(0)?)),
                    Func::Ln => self.emit(Node::Ln(arg(0)?)),
                    Func::Log10 => self.emit(Node::Log10(arg(0)?)),
                    Func::Sqrt => self.emit(Node::Sqrt(arg(0)?)),
                    Func::Abs => self.emit(Node::Abs(arg(0)?)),
                    Func::Min => self.emit(Node::Min(arg(0)?, arg(1)?)),
                    Func::Max => self.emit(Node::Max(arg(0)?, arg(1)?)),
                    Func::Pow => self.emit(Node::Pow(arg(0)?, arg(1)?)),
                }
            }
        })
    }

    fn emit(&mut self, node: Node) -> Reg {
        if let Some(&r) = self.memo.get(&node) {
            return r;
        }
        let reg = self.varies.len() as Reg;
        let varies = match node {
            Node::State(_) | Node::Time => true,
            Node::Literal(_) | Node::Constant(_) => false,
            Node::Neg(a)
            | Node::PowInt(a, _)
            | Node::Exp(a)
            | Node::Ln(a)
            | Node::Log10(a)
            | Node::Sqrt(a)
            | Node::Abs(a) => self.varies[a as usize],
            Node::Add(a, b)
            | Node::Sub(a, b)
            | Node::Mul(a, b)
            | Node::Div(a, b)
            | Node::Pow(a, b)
            | Node::Min(a, b)
            | Node::Max(a, b) => self.varies[a as usize] || self.varies[b as usize],
        };
        self.varies.push(varies);
        if varies {
            self.body.push((reg, node));
        } else {
            self.prelude.push((reg, node));
        }
        self.memo.insert(node, reg);
        reg
    }

    pub fn finish(self) -> Program {
        Program {
            prelude: self.prelude,
            body: self.body,
            nregs: self.varies.len(),
        }
    }
}

fn small_integer(e: &Expr) -> Option<i32> {
    match e {
        Expr::Number(v) if *v == v.trunc() && v.abs() <= 64.0 => Some(*v as i32),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Sym;

    #[test]
    fn shares_subexpressions_and_splits_constants_from_the_body() {
        // k * A * B - k * B * A: the product is computed once.
        let k = Expr::Name(Sym::Param(0));
        let a = Expr::Name(Sym::Species(0));
        let b = Expr::Name(Sym::Species(1));
        let e = Expr::sub(
            Expr::mul(Expr::mul(k.clone(), a.clone()), b.clone()),
            Expr::mul(Expr::mul(k, a), b),
        );
        let resolve = |s: Sym| match s {
            Sym::Species(i) => Leaf::State(i as u32),
            _ => Leaf::Constant(0),
        };
        let mut builder = ProgramBuilder::new(&resolve);
        let out = builder.lower(&e).unwrap();
        let p = builder.finish();
        let mut regs = vec![0.0; p.register_count()];
        p.run_prelude(&mut regs, &[3.0]);
        p.run_body(&mut regs, &[2.0, 5.0], 0.0);
        assert_eq!(regs[out as usize], 0.0);
        // State loads A, B; products k*A, (k*A)*B; the difference: 5 body instructions.
        assert_eq!(p.body_len(), 5);
    }
}
