//! Code emission, one module per target behind one trait (being built).
