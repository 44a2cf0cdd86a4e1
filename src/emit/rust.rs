//! Rust target: a dependency-free module whose functions have exactly the
//! closure signatures of diffsol's `OdeBuilder` (`rhs(x, p, t, y)`,
//! `jac_mul(x, p, t, v, y)` for J·v, `init(p, t, y)`), plus the dense and
//! compressed-sparse-column Jacobian, names, default parameters and the
//! full species vector. Parameters are a slice in `PARAM_NAMES` order.

use super::names::{Names, RUST_RESERVED, quoted};
use super::system::{Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Expr, Sym};
use std::fmt::Write;

pub struct Rust;

impl Target for Rust {
    fn name(&self) -> &'static str {
        "rust"
    }
    fn extension(&self) -> &'static str {
        "rs"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.rs", options.stem),
            contents: source(sys, options),
        }])
    }
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let reserved = super::julia::reserved_with_rates(RUST_RESERVED, m.steps.len());
    let reserved: Vec<&str> = reserved.iter().map(String::as_str).collect();
    let names = Names::new(m, &reserved);
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::Rust);
    let mut o = String::new();
    let _ = writeln!(o, "//! {}", banner(sys, options, "rust"));
    let _ = writeln!(
        o,
        "//!\n//! Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    o.push_str(
        "//! The functions match diffsol's closure signatures, for example:\n\
         //! `OdeBuilder::<M>::new().p(DEFAULT_PARAMS.to_vec()).rhs_implicit(rhs, jac_mul).init(init, N).build()`.\n",
    );
    o.push_str("#![allow(non_snake_case, unused_variables, dead_code, clippy::all)]\n\n");
    let list = |v: Vec<String>| v.iter().map(|s| quoted(s)).collect::<Vec<_>>().join(", ");
    let np = sys.constants.len();
    let nnz = sys.jac.len();
    let _ = writeln!(
        o,
        "/// Number of state variables.\npub const N: usize = {};",
        sys.n()
    );
    let _ = writeln!(
        o,
        "/// Number of structural non-zeros of the Jacobian.\npub const JAC_NNZ: usize = {nnz};"
    );
    let _ = writeln!(
        o,
        "pub const STATE_NAMES: [&str; N] = [{}];",
        list(
            sys.state
                .iter()
                .map(|&i| m.species[i].name.clone())
                .collect()
        )
    );
    let _ = writeln!(
        o,
        "pub const SPECIES_NAMES: [&str; {}] = [{}];",
        m.species.len(),
        list(m.species.iter().map(|s| s.name.clone()).collect())
    );
    let _ = writeln!(
        o,
        "/// Params with a value, fixed species and totals.\npub const PARAM_NAMES: [&str; {np}] = [{}];",
        list(
            sys.constants
                .iter()
                .map(|c| m.name_of(c.sym).to_string())
                .collect()
        )
    );
    let vals: Vec<String> = sys
        .constants
        .iter()
        .map(|c| float_literal(c.value))
        .collect();
    let _ = writeln!(
        o,
        "pub const DEFAULT_PARAMS: [f64; {np}] = [{}];",
        vals.join(", ")
    );
    let mut colptr = vec![0usize; sys.n() + 1];
    for e in &sys.jac {
        colptr[e.col + 1] += 1;
    }
    for c in 0..sys.n() {
        colptr[c + 1] += colptr[c];
    }
    let join = |v: Vec<usize>| {
        v.iter()
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(
        o,
        "/// Compressed sparse column pattern of the Jacobian.\npub const JAC_COLPTR: [usize; N + 1] = [{}];",
        join(colptr)
    );
    let _ = writeln!(
        o,
        "pub const JAC_ROWVAL: [usize; JAC_NNZ] = [{}];\n",
        join(sys.jac.iter().map(|e| e.row).collect())
    );

    let _ = writeln!(
        o,
        "/// The initial state.\npub fn init(p: &[f64], t: f64, y: &mut [f64]) {{"
    );
    for (r, v) in sys.initial_state().iter().enumerate() {
        let _ = writeln!(o, "    y[{r}] = {};", float_literal(*v));
    }
    o.push_str("}\n\n");

    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    o.push_str("/// y = dx/dt at state x, parameters p, time t.\npub fn rhs(x: &[f64], p: &[f64], t: f64, y: &mut [f64]) {\n");
    prelude(&mut o, sys, &names, &needs);
    for &j in &steps {
        let _ = writeln!(
            o,
            "    let v_{} = {}; // {}",
            j + 1,
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        let body = if terms.is_empty() {
            "0.0".into()
        } else {
            float_coefficients(&super::python::combination(terms, |j| {
                format!("v_{}", j + 1)
            }))
        };
        let _ = writeln!(
            o,
            "    y[{r}] = {body}; // {}",
            m.species[sys.state[r]].name
        );
    }
    o.push_str("}\n\n");

    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    o.push_str("/// The Jacobian's non-zeros in compressed sparse column order.\npub fn jac_csc(x: &[f64], p: &[f64], t: f64, values: &mut [f64]) {\n");
    prelude(&mut o, sys, &names, &needs);
    for (k, e) in sys.jac.iter().enumerate() {
        let _ = writeln!(o, "    values[{k}] = {};", ex(&e.expr));
    }
    o.push_str("}\n\n");
    o.push_str(
        "/// The dense Jacobian, column-major: j[r + N * c] = d rhs_r / d x_c.\n\
         pub fn jac_dense(x: &[f64], p: &[f64], t: f64, j: &mut [f64]) {\n    \
         let mut values = [0.0; JAC_NNZ];\n    jac_csc(x, p, t, &mut values);\n    \
         j.iter_mut().for_each(|e| *e = 0.0);\n    \
         for c in 0..N {\n        for k in JAC_COLPTR[c]..JAC_COLPTR[c + 1] {\n            \
         j[JAC_ROWVAL[k] + N * c] = values[k];\n        }\n    }\n}\n\n\
         /// y = J(x) v: the Jacobian-vector product diffsol's closure API takes.\n\
         pub fn jac_mul(x: &[f64], p: &[f64], t: f64, v: &[f64], y: &mut [f64]) {\n    \
         let mut values = [0.0; JAC_NNZ];\n    jac_csc(x, p, t, &mut values);\n    \
         y.iter_mut().for_each(|e| *e = 0.0);\n    \
         for c in 0..N {\n        for k in JAC_COLPTR[c]..JAC_COLPTR[c + 1] {\n            \
         y[JAC_ROWVAL[k]] += values[k] * v[c];\n        }\n    }\n}\n\n",
    );

    o.push_str("/// Every species (SPECIES_NAMES order) from the state x.\npub fn full_state(x: &[f64], p: &[f64], out: &mut [f64]) {\n");
    let needs = sys.needs(sys.dependent.iter().map(|d| &d.formula));
    let needs = Needs {
        state: (0..sys.n()).collect(),
        dependent: (0..sys.dependent.len()).collect(),
        ..needs
    };
    prelude(&mut o, sys, &names, &needs);
    for i in 0..m.species.len() {
        let v = if sys.slot(i).is_some() || sys.dependent_of(i).is_some() {
            names.get(Sym::Species(i))
        } else {
            float_literal(m.species[i].initial)
        };
        let _ = writeln!(o, "    out[{i}] = {v};");
    }
    o.push_str("}\n");
    o
}

/// `2 * v_1` → `2.0 * v_1`.
fn float_coefficients(body: &str) -> String {
    body.split(' ')
        .map(|w| {
            if !w.is_empty() && w.chars().all(|c| c.is_ascii_digit()) {
                format!("{w}.0")
            } else {
                w.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "    let {} = x[{r}];",
            names.get(Sym::Species(sys.state[r]))
        );
    }
    for &k in &needs.constants {
        let _ = writeln!(o, "    let {} = p[{k}];", names.get(sys.constants[k].sym));
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "    let {}: f64 = {};",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::Rust)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "    let {}: f64 = {};",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::Rust)
        );
    }
}
