//! Meaning-level comparison of two models (being built).
