//! Compiled right-hand sides and Jacobians (being built).
