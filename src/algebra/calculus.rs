//! Simplification and symbolic differentiation of IR expressions (being built).
