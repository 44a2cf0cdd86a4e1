//! Rate-law derivation: King–Altman / matrix-tree and rapid equilibrium (being built).
