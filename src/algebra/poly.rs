//! Exact multivariate polynomials and rational functions (being built).
