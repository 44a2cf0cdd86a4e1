//! Identifiers in emitted code. Model names are unique across kinds, but a
//! name may be a keyword of the target (`if`, `end`, `double`), clash with
//! a name the emitted code uses itself (`t`, `y`, `p`, `np`), or contain
//! characters the target does not allow (`µ`). [`Names`] maps every symbol
//! to an identifier that is valid, unused by the template, and unique.

use crate::model::{Model, Sym};
use std::collections::{BTreeMap, BTreeSet};

/// The identifier of every symbol of a model in one target.
#[derive(Debug, Clone)]
pub struct Names {
    map: BTreeMap<Sym, String>,
}

impl Names {
    /// `reserved`: keywords of the target and the template's own names.
    pub fn new(model: &Model, reserved: &[&str]) -> Names {
        let mut taken: BTreeSet<String> = reserved.iter().map(|s| s.to_string()).collect();
        let mut map = BTreeMap::new();
        let syms = (0..model.species.len())
            .map(Sym::Species)
            .chain((0..model.fixed.len()).map(Sym::Fixed))
            .chain((0..model.params.len()).map(Sym::Param))
            .chain((0..model.totals.len()).map(Sym::Total))
            .chain((0..model.observables.len()).map(Sym::Observable));
        for sym in syms {
            let base = identifier(model.name_of(sym));
            let mut id = base.clone();
            let mut n = 1;
            while taken.contains(&id) {
                id = if n == 1 {
                    format!("{base}_")
                } else {
                    format!("{base}_{n}")
                };
                n += 1;
            }
            taken.insert(id.clone());
            map.insert(sym, id);
        }
        Names { map }
    }

    pub fn get(&self, sym: Sym) -> String {
        self.map
            .get(&sym)
            .cloned()
            .unwrap_or_else(|| "undefined_name".into())
    }
}

/// A name made of ASCII letters, digits and `_`, starting with a letter;
/// other characters become `_uXXXX` (and a name that would start with `_`
/// or a digit gets an `x` in front).
pub fn identifier(name: &str) -> String {
    let mut out = String::new();
    for (i, ch) in name.chars().enumerate() {
        if ch.is_ascii_alphanumeric() || ch == '_' {
            if i == 0 && ch.is_ascii_digit() {
                out.push('_');
            }
            out.push(ch);
        } else {
            out.push_str(&format!("_u{:04x}", ch as u32));
        }
    }
    // Every target accepts a leading letter; R and Octave refuse a leading
    // `_`, and C reserves some names that start with one.
    if out.starts_with('_') || out.is_empty() {
        out.insert(0, 'x');
    }
    out
}

/// Whether `s` is already a plain ASCII identifier.
pub fn is_identifier(s: &str) -> bool {
    let mut chars = s.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
}

/// A string literal with `"` delimiters, escaped the way C, Rust, Julia,
/// Python, R and JSON all read it (ASCII control characters as `\xNN` are
/// avoided: model names and descriptions are printable text).
pub fn quoted(s: &str) -> String {
    let mut out = String::from("\"");
    for ch in s.chars() {
        match ch {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\t' => out.push_str("\\t"),
            c if (c as u32) < 0x20 => out.push(' '),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

pub const PYTHON_RESERVED: &[&str] = &[
    "False",
    "None",
    "True",
    "and",
    "as",
    "assert",
    "async",
    "await",
    "break",
    "class",
    "continue",
    "def",
    "del",
    "elif",
    "else",
    "except",
    "finally",
    "for",
    "from",
    "global",
    "if",
    "import",
    "in",
    "is",
    "lambda",
    "nonlocal",
    "not",
    "or",
    "pass",
    "raise",
    "return",
    "try",
    "while",
    "with",
    "yield",
    "np",
    "t",
    "y",
    "p",
    "dy",
    "J",
    "v",
    "y0",
    "main",
    "rhs",
    "jac",
    "math",
    "sys",
    "csv",
    "print",
    "len",
    "range",
    "float",
    "int",
    "list",
    "dict",
    "abs",
    "min",
    "max",
    "pow",
    "full_state",
    "reduce_state",
    "observables",
    "simulate",
    "PARAMS",
    "INITIAL",
    "SPECIES",
    "STATE",
    "OBSERVABLES",
    "EVENTS",
    "DEPENDENT",
    "argparse",
    "solve_ivp",
    "args",
    "out",
    "values",
    "x",
    "JAC_ROWS",
    "JAC_COLS",
    "TOTALS",
    "STEPS",
    "jac_values",
    "state_from_full",
];

pub const C_RESERVED: &[&str] = &[
    "auto",
    "break",
    "case",
    "char",
    "const",
    "continue",
    "default",
    "do",
    "double",
    "else",
    "enum",
    "extern",
    "float",
    "for",
    "goto",
    "if",
    "inline",
    "int",
    "long",
    "register",
    "restrict",
    "return",
    "short",
    "signed",
    "sizeof",
    "static",
    "struct",
    "switch",
    "typedef",
    "union",
    "unsigned",
    "void",
    "volatile",
    "while",
    "_Bool",
    "_Complex",
    "_Imaginary",
    "t",
    "y",
    "p",
    "dydt",
    "J",
    "values",
    "pow",
    "exp",
    "log",
    "log10",
    "sqrt",
    "fabs",
    "fmin",
    "fmax",
    "NAN",
    "INFINITY",
    "y0",
    "full",
    "n",
    "i",
    "j",
    // the rates array of the right-hand side
    "v",
    // object-like macros of <math.h> (C99 and glibc's extensions): a local
    // variable of that name would be replaced by the macro's expansion
    "HUGE_VAL",
    "HUGE_VALF",
    "HUGE_VALL",
    "FP_NAN",
    "FP_INFINITE",
    "FP_ZERO",
    "FP_SUBNORMAL",
    "FP_NORMAL",
    "FP_ILOGB0",
    "FP_ILOGBNAN",
    "FP_FAST_FMA",
    "FP_FAST_FMAF",
    "FP_FAST_FMAL",
    "MATH_ERRNO",
    "MATH_ERREXCEPT",
    "math_errhandling",
    "M_E",
    "M_LOG2E",
    "M_LOG10E",
    "M_LN2",
    "M_LN10",
    "M_PI",
    "M_PI_2",
    "M_PI_4",
    "M_1_PI",
    "M_2_PI",
    "M_2_SQRTPI",
    "M_SQRT2",
    "M_SQRT1_2",
    "DOMAIN",
    "SING",
    "OVERFLOW",
    "UNDERFLOW",
    "TLOSS",
    "PLOSS",
    "X_TLOSS",
    "errno",
];

pub const RUST_RESERVED: &[&str] = &[
    "as",
    "async",
    "await",
    "break",
    "const",
    "continue",
    "crate",
    "dyn",
    "else",
    "enum",
    "extern",
    "false",
    "fn",
    "for",
    "gen",
    "if",
    "impl",
    "in",
    "let",
    "loop",
    "match",
    "mod",
    "move",
    "mut",
    "pub",
    "ref",
    "return",
    "self",
    "Self",
    "static",
    "struct",
    "super",
    "trait",
    "true",
    "type",
    "unsafe",
    "use",
    "where",
    "while",
    "abstract",
    "become",
    "box",
    "do",
    "final",
    "macro",
    "override",
    "priv",
    "typeof",
    "unsized",
    "virtual",
    "yield",
    "try",
    "t",
    "x",
    "y",
    "p",
    "v",
    // the generated functions' own parameters and the module's items (a
    // `let` of a constant's name would be a pattern, not a binding)
    "values",
    "out",
    "DEFAULT_PARAMS",
    "JAC_COLPTR",
    "JAC_NNZ",
    "JAC_ROWVAL",
    "PARAM_NAMES",
    "SPECIES_NAMES",
    "STATE_NAMES",
    "rhs",
    "init",
    "jac_csc",
    "jac_dense",
    "jac_mul",
    "full_state",
    "j",
    "f64",
    "full",
    "N",
];

pub const JULIA_RESERVED: &[&str] = &[
    "baremodule",
    "begin",
    "break",
    "catch",
    "const",
    "continue",
    "do",
    "else",
    "elseif",
    "end",
    "export",
    "false",
    "finally",
    "for",
    "function",
    "global",
    "if",
    "import",
    "let",
    "local",
    "macro",
    "module",
    "quote",
    "return",
    "struct",
    "true",
    "try",
    "using",
    "while",
    "abstract",
    "mutable",
    "primitive",
    "type",
    "where",
    "in",
    "isa",
    "t",
    "u",
    "du",
    "p",
    "J",
    "exp",
    "log",
    "log10",
    "sqrt",
    "abs",
    "min",
    "max",
    "pi",
    "im",
    "Inf",
    "NaN",
    "u0",
    "full_state",
    "missing",
    "nothing",
];

pub const OCTAVE_RESERVED: &[&str] = &[
    "break",
    "case",
    "catch",
    "classdef",
    "continue",
    "do",
    "else",
    "elseif",
    "end",
    "end_try_catch",
    "end_unwind_protect",
    "endclassdef",
    "endenumeration",
    "endevents",
    "endfor",
    "endfunction",
    "endif",
    "endmethods",
    "endparfor",
    "endproperties",
    "endswitch",
    "endwhile",
    "enumeration",
    "events",
    "for",
    "function",
    "global",
    "if",
    "methods",
    "otherwise",
    "parfor",
    "persistent",
    "properties",
    "return",
    "switch",
    "try",
    "until",
    "unwind_protect",
    "unwind_protect_cleanup",
    "while",
    "t",
    "y",
    "p",
    "dydt",
    "J",
    "exp",
    "log",
    "log10",
    "sqrt",
    "abs",
    "min",
    "max",
    "pi",
    "e",
    "i",
    "j",
    "Inf",
    "NaN",
    "eps",
    "model",
    "y0",
];

pub const R_RESERVED: &[&str] = &[
    "if",
    "else",
    "repeat",
    "while",
    "function",
    "for",
    "next",
    "break",
    "TRUE",
    "FALSE",
    "NULL",
    "Inf",
    "NaN",
    "NA",
    "NA_integer_",
    "NA_real_",
    "NA_character_",
    "in",
    "t",
    "y",
    "parms",
    "dydt",
    "J",
    "exp",
    "log",
    "log10",
    "sqrt",
    "abs",
    "min",
    "max",
    "pi",
    "c",
    "list",
    "matrix",
    "T",
    "F",
    "y0",
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identifiers_are_valid_and_unique() {
        assert_eq!(identifier("k_on"), "k_on");
        assert_eq!(identifier("µM"), "x_u00b5M");
        assert_eq!(identifier("2A"), "x_2A");
        assert_eq!(identifier("_x"), "x_x");
        assert!(is_identifier(&identifier("a-b c")));
        let mut m = Model::default();
        for name in ["if", "if_", "y"] {
            m.species.push(crate::model::Species {
                name: name.into(),
                initial: 0.0,
                initial_given: false,
                description: None,
                span: Default::default(),
            });
        }
        let names = Names::new(&m, PYTHON_RESERVED);
        let got: Vec<String> = (0..3).map(|i| names.get(Sym::Species(i))).collect();
        assert_eq!(got, ["if_", "if__", "y_"]);
    }
}
