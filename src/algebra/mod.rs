//! Symbolic expressions and exact polynomials: simplification and
//! differentiation of IR expressions (`calculus`), printing expressions in
//! every target's syntax from one precedence table (`print`), and exact
//! multivariate polynomials and rational functions (`poly`).

pub mod calculus;
pub mod poly;
pub mod print;
pub mod rational;
