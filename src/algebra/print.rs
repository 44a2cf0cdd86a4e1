//! Printing expressions in each target syntax from one precedence table (being built).
