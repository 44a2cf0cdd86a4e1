//! C target: a C99 header and source. `rhs`, the Jacobian dense
//! (column-major) and in compressed sparse column form (fixed pattern
//! `colptr`/`rowval`, values in the same order), name arrays, a parameter
//! struct with defaults, the initial state, the full species vector and the
//! observables. Every function and global carries the stem as a prefix, so
//! several models link into one program. The code compiles with
//! `-std=c99 -Wall -Wextra -Werror -pedantic`: no unused variables (each
//! function defines only the names it uses), no zero-length arrays.

use super::names::{C_RESERVED, Names, identifier, quoted};
use super::system::{ConstantKind, Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Expr, Sym};
use std::fmt::Write;

pub struct C;

impl Target for C {
    fn name(&self) -> &'static str {
        "c"
    }
    fn extension(&self) -> &'static str {
        "c"
    }
    fn multi_file(&self) -> bool {
        true
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        let prefix = identifier(&options.stem);
        let header = header(sys, options, &prefix);
        let source = source(sys, options, &prefix);
        Ok(vec![
            EmittedFile {
                name: format!("{}.h", options.stem),
                contents: header,
            },
            EmittedFile {
                name: format!("{}.c", options.stem),
                contents: source,
            },
        ])
    }
}

fn comment(text: &str) -> String {
    text.replace("*/", "* /")
}

fn header(sys: &System, options: &EmitOptions, px: &str) -> String {
    let m = &sys.model;
    let names = Names::new(m, C_RESERVED);
    let up = px.to_uppercase();
    let mut o = String::new();
    let _ = writeln!(o, "/* {} */", comment(&banner(sys, options, "c")));
    let _ = writeln!(
        o,
        "/* Units: concentration {}, time {}. */",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    let _ = writeln!(o, "#ifndef {up}_H\n#define {up}_H\n");
    let _ = writeln!(
        o,
        "/* Sizes. Name arrays hold one more entry, a terminating null pointer. */"
    );
    let _ = writeln!(o, "#define {up}_N_STATE {}", sys.n());
    let _ = writeln!(o, "#define {up}_N_SPECIES {}", m.species.len());
    let _ = writeln!(o, "#define {up}_N_PARAMS {}", sys.constants.len());
    let _ = writeln!(o, "#define {up}_N_OBSERVABLES {}", m.observables.len());
    let _ = writeln!(o, "#define {up}_JAC_NNZ {}\n", sys.jac.len());
    o.push_str("/* Parameters: params with a value, fixed species, totals (default units). */\n");
    let _ = writeln!(o, "typedef struct {px}_params {{");
    if sys.constants.is_empty() {
        o.push_str("    char unused_; /* the model has no parameters */\n");
    }
    for c in &sys.constants {
        let what = match c.kind {
            ConstantKind::Param => "param",
            ConstantKind::Fixed => "fixed species",
            ConstantKind::Total => "total",
        };
        let _ = writeln!(
            o,
            "    double {}; /* {what} {} */",
            names.get(c.sym),
            comment(m.name_of(c.sym))
        );
    }
    let _ = writeln!(o, "}} {px}_params;\n");
    let _ = writeln!(
        o,
        "extern const char *const {px}_state_names[{up}_N_STATE + 1];"
    );
    let _ = writeln!(
        o,
        "extern const char *const {px}_species_names[{up}_N_SPECIES + 1];"
    );
    let _ = writeln!(
        o,
        "extern const char *const {px}_param_names[{up}_N_PARAMS + 1];"
    );
    let _ = writeln!(
        o,
        "extern const char *const {px}_observable_names[{up}_N_OBSERVABLES + 1];"
    );
    let _ = writeln!(
        o,
        "/* Jacobian sparsity (compressed sparse column, 0-based): the entries of"
    );
    let _ = writeln!(
        o,
        "   column j are values[colptr[j] .. colptr[j+1]-1], rows in rowval. */"
    );
    let _ = writeln!(o, "extern const int {px}_jac_colptr[{up}_N_STATE + 1];");
    let _ = writeln!(
        o,
        "extern const int {px}_jac_rowval[{up}_JAC_NNZ > 0 ? {up}_JAC_NNZ : 1];\n"
    );
    let _ = writeln!(o, "/* Fills p with the model's values. */");
    let _ = writeln!(o, "void {px}_default_params({px}_params *p);");
    let _ = writeln!(o, "/* The initial state (N_STATE values). */");
    let _ = writeln!(
        o,
        "void {px}_initial_state(const {px}_params *p, double *y);"
    );
    let _ = writeln!(o, "/* dydt = f(t, y). */");
    let _ = writeln!(
        o,
        "void {px}_rhs(double t, const double *y, const {px}_params *p, double *dydt);"
    );
    let _ = writeln!(
        o,
        "/* J[i + N_STATE*j] = d f_i / d y_j (dense, column-major, N_STATE^2 values). */"
    );
    let _ = writeln!(
        o,
        "void {px}_jac_dense(double t, const double *y, const {px}_params *p, double *J);"
    );
    let _ = writeln!(
        o,
        "/* The JAC_NNZ structural non-zeros in compressed sparse column order. */"
    );
    let _ = writeln!(
        o,
        "void {px}_jac_csc(double t, const double *y, const {px}_params *p, double *values);"
    );
    let _ = writeln!(
        o,
        "/* Every species (N_SPECIES values, declaration order) from the state. */"
    );
    let _ = writeln!(
        o,
        "void {px}_full_state(const double *y, const {px}_params *p, double *x);"
    );
    let _ = writeln!(o, "/* Every observable from the full species vector x. */");
    let _ = writeln!(
        o,
        "void {px}_observables(double t, const double *x, const {px}_params *p, double *out);\n"
    );
    let _ = writeln!(o, "#endif /* {up}_H */");
    o
}

fn name_array(o: &mut String, px: &str, what: &str, size: &str, items: Vec<String>) {
    let mut list: Vec<String> = items.iter().map(|s| quoted(s)).collect();
    list.push("0".into());
    let _ = writeln!(
        o,
        "const char *const {px}_{what}[{size} + 1] = {{{}}};",
        list.join(", ")
    );
}

fn source(sys: &System, options: &EmitOptions, px: &str) -> String {
    let m = &sys.model;
    let names = Names::new(m, C_RESERVED);
    let up = px.to_uppercase();
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::C);
    let mut o = String::new();
    let _ = writeln!(o, "/* {} */", comment(&banner(sys, options, "c")));
    let _ = writeln!(o, "#include <math.h>\n#include \"{}.h\"\n", options.stem);
    name_array(
        &mut o,
        px,
        "state_names",
        &format!("{up}_N_STATE"),
        sys.state
            .iter()
            .map(|&i| m.species[i].name.clone())
            .collect(),
    );
    name_array(
        &mut o,
        px,
        "species_names",
        &format!("{up}_N_SPECIES"),
        m.species.iter().map(|s| s.name.clone()).collect(),
    );
    name_array(
        &mut o,
        px,
        "param_names",
        &format!("{up}_N_PARAMS"),
        sys.constants
            .iter()
            .map(|c| m.name_of(c.sym).to_string())
            .collect(),
    );
    name_array(
        &mut o,
        px,
        "observable_names",
        &format!("{up}_N_OBSERVABLES"),
        m.observables.iter().map(|s| s.name.clone()).collect(),
    );
    let mut colptr = vec![0usize; sys.n() + 1];
    for e in &sys.jac {
        colptr[e.col + 1] += 1;
    }
    for c in 0..sys.n() {
        colptr[c + 1] += colptr[c];
    }
    let list = |v: Vec<usize>| {
        v.iter()
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(
        o,
        "const int {px}_jac_colptr[{up}_N_STATE + 1] = {{{}}};",
        list(colptr)
    );
    let mut rows: Vec<usize> = sys.jac.iter().map(|e| e.row).collect();
    if rows.is_empty() {
        rows.push(0);
    }
    let _ = writeln!(
        o,
        "const int {px}_jac_rowval[{up}_JAC_NNZ > 0 ? {up}_JAC_NNZ : 1] = {{{}}};\n",
        list(rows)
    );

    let _ = writeln!(o, "void {px}_default_params({px}_params *p)\n{{");
    if sys.constants.is_empty() {
        o.push_str("    p->unused_ = 0;\n");
    }
    for c in &sys.constants {
        let _ = writeln!(
            o,
            "    p->{} = {};",
            names.get(c.sym),
            float_literal(c.value)
        );
    }
    o.push_str("}\n\n");

    let _ = writeln!(
        o,
        "void {px}_initial_state(const {px}_params *p, double *y)\n{{\n    (void)p;\n    (void)y;"
    );
    for (r, v) in sys.initial_state().iter().enumerate() {
        let _ = writeln!(o, "    y[{r}] = {};", float_literal(*v));
    }
    o.push_str("}\n\n");

    // rhs
    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    let _ = writeln!(
        o,
        "void {px}_rhs(double t, const double *y, const {px}_params *p, double *dydt)\n{{"
    );
    unused(&mut o, &["t", "y", "p", "dydt"]);
    prelude(&mut o, sys, &names, &needs);
    if !steps.is_empty() {
        let _ = writeln!(o, "    double v[{}];", m.steps.len());
    }
    for &j in &steps {
        let _ = writeln!(
            o,
            "    v[{j}] = {}; /* {} */",
            ex(&sys.rates[j]),
            comment(&m.steps[j].name)
        );
    }
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        let body = if terms.is_empty() {
            "0.0".to_string()
        } else {
            super::python::combination(terms, |j| format!("v[{j}]"))
        };
        let body = c_coefficients(&body);
        let _ = writeln!(
            o,
            "    dydt[{r}] = {body}; /* {} */",
            comment(&m.species[sys.state[r]].name)
        );
    }
    o.push_str("}\n\n");

    // jac_csc and jac_dense
    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    let _ = writeln!(
        o,
        "void {px}_jac_csc(double t, const double *y, const {px}_params *p, double *values)\n{{"
    );
    unused(&mut o, &["t", "y", "p", "values"]);
    prelude(&mut o, sys, &names, &needs);
    for (k, e) in sys.jac.iter().enumerate() {
        let _ = writeln!(
            o,
            "    values[{k}] = {}; /* d {} / d {} */",
            ex(&e.expr),
            comment(&m.species[sys.state[e.row]].name),
            comment(&m.species[sys.state[e.col]].name)
        );
    }
    o.push_str("}\n\n");
    let _ = writeln!(
        o,
        "void {px}_jac_dense(double t, const double *y, const {px}_params *p, double *J)\n{{"
    );
    let _ = writeln!(
        o,
        "    double values[{up}_JAC_NNZ > 0 ? {up}_JAC_NNZ : 1];\n    int i, j;"
    );
    let _ = writeln!(
        o,
        "    for (i = 0; i < {up}_N_STATE * {up}_N_STATE; ++i)\n        J[i] = 0.0;"
    );
    let _ = writeln!(o, "    {px}_jac_csc(t, y, p, values);");
    let _ = writeln!(
        o,
        "    for (j = 0; j < {up}_N_STATE; ++j)\n        for (i = {px}_jac_colptr[j]; i < {px}_jac_colptr[j + 1]; ++i)"
    );
    let _ = writeln!(
        o,
        "            J[{px}_jac_rowval[i] + {up}_N_STATE * j] = values[i];"
    );
    let _ = writeln!(o, "    (void)values;\n}}\n");

    // full state
    let _ = writeln!(
        o,
        "void {px}_full_state(const double *y, const {px}_params *p, double *x)\n{{"
    );
    unused(&mut o, &["y", "p", "x"]);
    let dep_needs = sys.needs(sys.dependent.iter().map(|d| &d.formula));
    prelude(
        &mut o,
        sys,
        &names,
        &Needs {
            state: Vec::new(),
            dependent: Vec::new(),
            ..dep_needs
        },
    );
    for (i, _) in m.species.iter().enumerate() {
        match (sys.slot(i), sys.dependent_of(i)) {
            (Some(r), _) => {
                let _ = writeln!(o, "    x[{i}] = y[{r}];");
            }
            (None, Some(d)) => {
                let e = d.formula.substitute(&|s| match s {
                    Sym::Species(k) => sys.slot(k).map(|_| Expr::Name(Sym::Species(k))),
                    _ => None,
                });
                let text = print_expr(
                    &e,
                    &|s| match s {
                        Sym::Species(k) => format!("y[{}]", sys.slot(k).unwrap_or(0)),
                        other => names.get(other),
                    },
                    Syntax::C,
                );
                let _ = writeln!(o, "    x[{i}] = {text};");
            }
            (None, None) => {
                let _ = writeln!(o, "    x[{i}] = {};", float_literal(m.species[i].initial));
            }
        }
    }
    o.push_str("}\n\n");

    // observables
    let _ = writeln!(
        o,
        "void {px}_observables(double t, const double *x, const {px}_params *p, double *out)\n{{"
    );
    unused(&mut o, &["t", "x", "p", "out"]);
    let obs_needs = sys.needs_over_full(sys.observables.iter());
    let mut species_used = std::collections::BTreeSet::new();
    for e in &sys.observables {
        e.visit_names(&mut |s| {
            if let Sym::Species(i) = s {
                species_used.insert(i);
            }
        });
    }
    for i in species_used {
        let _ = writeln!(
            o,
            "    const double {} = x[{i}];",
            names.get(Sym::Species(i))
        );
    }
    prelude(
        &mut o,
        sys,
        &names,
        &Needs {
            state: Vec::new(),
            dependent: Vec::new(),
            ..obs_needs
        },
    );
    for (k, e) in sys.observables.iter().enumerate() {
        let _ = writeln!(
            o,
            "    out[{k}] = {}; /* {} */",
            ex(e),
            comment(&m.observables[k].name)
        );
    }
    o.push_str("}\n");
    o
}

/// `2 * v[0]` → `2.0 * v[0]`: C literals keep a decimal point.
fn c_coefficients(body: &str) -> String {
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

fn unused(o: &mut String, params: &[&str]) {
    for p in params {
        let _ = writeln!(o, "    (void){p};");
    }
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "    const double {} = y[{r}];",
            names.get(Sym::Species(sys.state[r]))
        );
    }
    for &k in &needs.constants {
        let sym = sys.constants[k].sym;
        let _ = writeln!(o, "    const double {0} = p->{0};", names.get(sym));
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "    const double {} = {};",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::C)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "    const double {} = {};",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::C)
        );
    }
}
