//! Grammar and syntax tree of the mechanism language (being built).
