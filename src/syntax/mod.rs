//! The syntax stage: the pest grammar (grammar/mechanism.pest) and the
//! syntax tree with spans. Invariants: parsing never panics and never
//! recurses deeper than `MAX_NESTING` parentheses (checked before the
//! grammar runs); every node's span lies in its file's text; numbers and
//! units are kept as written (conversion happens in `model/`).

pub mod ast;
pub mod format;
pub mod parse;

pub use ast::*;
pub use parse::parse;
