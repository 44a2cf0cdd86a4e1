//! The derivation in its output forms: a readable report, LaTeX, the JSON
//! document other tools read (schema in docs/derive.md), and a new
//! mechanism file whose single step carries the derived law.
//!
//! Invariant: every expression in the JSON and mechanism forms is in the
//! mechanism language's syntax over params, totals and non-intermediate
//! species, so it parses back with the same meaning.

use super::constants_form::{readable_value, value_of};
use super::{Constant, Derivation, Derived, VarKind};
use crate::algebra::poly::{Monomial, Poly, Printer, Syntax, Var};
use crate::algebra::print::{self, plain_literal};
use crate::algebra::rational::RationalFunction;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::{Action, Dim, Event, EventKind, Model, ParamDef, Sym, Timing};
use serde_json::{Value, json};
use std::collections::BTreeSet;

fn printer<'a>(d: &'a Derivation, syntax: Syntax, conc: &'a dyn Fn(Var) -> bool) -> Printer<'a> {
    Printer {
        vars: &d.vars,
        syntax,
        is_concentration: conc,
    }
}

/// The numerator with the total pulled out: `E_t*(k1*k2*S - ...)`, and
/// whether that text is a product (needs no parentheses before `/`).
fn numerator_text(d: &Derivation, p: &Printer, keys: &dyn Fn(Var) -> bool) -> (String, bool) {
    let num = &d.rate.num;
    let times = match p.syntax {
        Syntax::Latex => " ",
        Syntax::Plain => "·",
        Syntax::Mech => "*",
    };
    for t in d.totals.iter().filter_map(|t| d.vars.get(&t.name)) {
        let Some(rest) = num
            .div_monomial(&Monomial::var(t))
            .filter(|r| r.degree_in(t) == 0)
        else {
            continue;
        };
        let name = p.var(t);
        if rest.is_one() {
            return (name, true);
        }
        let body = p.collected(&rest, keys);
        let single = rest.collect(keys).len() == 1
            && !body.starts_with('-')
            && !body.contains(" + ")
            && !body.contains(" - ");
        let text = if single {
            format!("{name}{times}{body}")
        } else if p.syntax == Syntax::Latex {
            format!("{name}\\left({body}\\right)")
        } else {
            format!("{name}{times}({body})")
        };
        return (text, true);
    }
    let text = p.collected(num, keys);
    let product = num.len() == 1 && !text.starts_with('-');
    (text, product)
}

/// The rate as one expression.
fn rate_text(d: &Derivation, p: &Printer, keys: &dyn Fn(Var) -> bool) -> String {
    let (num, product) = numerator_text(d, p, keys);
    if d.rate.den.is_one() {
        return num;
    }
    let den = p.collected(&d.rate.den, keys);
    if p.syntax == Syntax::Latex {
        return format!("\\frac{{{num}}}{{{den}}}");
    }
    let num = if product { num } else { format!("({num})") };
    format!("{num}/({den})")
}

/// A constant's definition as one expression.
fn rational_text(r: &RationalFunction, p: &Printer) -> String {
    let num = p.factor(&r.num);
    if r.den.is_one() {
        return p.factored(&r.num);
    }
    if p.syntax == Syntax::Latex {
        return format!("\\frac{{{}}}{{{}}}", p.factored(&r.num), p.factored(&r.den));
    }
    let den = p.factored(&r.den);
    let den_atomic = r.den.len() == 1
        && r.den.terms().all(|(m, c)| {
            num_traits::One::is_one(c) && m.pairs().len() == 1 && m.pairs()[0].1 == 1
        });
    if den_atomic {
        format!("{num}/{den}")
    } else {
        format!("{num}/({})", den)
    }
}

/// The named constants and those the constants form adds.
fn all_constants(d: &Derivation) -> Vec<&Constant> {
    let added = d.constants_form.iter().flat_map(|f| f.added.iter());
    d.constants.iter().chain(added).collect()
}

fn keys_for<'a>(d: &'a Derivation) -> impl Fn(Var) -> bool + 'a {
    move |v| d.is_concentration(v)
}

/// What the rate is the rate of, in words and as a reaction.
pub fn target_text(d: &Derivation, model: &Model) -> String {
    match &d.derived {
        Derived::Overall(o) => {
            let side = |terms: &[(usize, num_bigint::BigInt)]| {
                if terms.is_empty() {
                    return "0".to_string();
                }
                terms
                    .iter()
                    .map(|(i, c)| {
                        let name = &model.species[*i].name;
                        if *c == num_bigint::BigInt::from(1) {
                            name.clone()
                        } else {
                            format!("{c} {name}")
                        }
                    })
                    .collect::<Vec<_>>()
                    .join(" + ")
            };
            let arrow = if reversible(d, o) { "<=>" } else { "->" };
            format!("{} {arrow} {}", side(&o.reactants), side(&o.products))
        }
        Derived::Species(i) => format!("d{}/dt", model.species[*i].name),
        Derived::Flux(j) => format!("net rate of step {}", model.steps[*j].name),
    }
}

/// Whether the overall rate can run backwards (its numerator has a
/// product term).
fn reversible(d: &Derivation, o: &super::Overall) -> bool {
    let products: BTreeSet<Var> = o
        .products
        .iter()
        .filter_map(|(i, _)| d.vars.get(&d_name(d, *i)))
        .collect();
    d.rate
        .num
        .terms()
        .any(|(m, _)| m.pairs().iter().any(|(v, _)| products.contains(v)))
}

fn d_name(d: &Derivation, species: usize) -> String {
    d.kinds
        .iter()
        .position(|k| *k == VarKind::Species(species))
        .map(|v| d.vars.name(v as Var).to_string())
        .unwrap_or_default()
}

fn method_text(d: &Derivation, model: &Model) -> String {
    let forms: Vec<&str> = d
        .steady
        .iter()
        .map(|&i| model.species[i].name.as_str())
        .collect();
    let mut s = format!("quasi-steady state of {} (King–Altman)", forms.join(", "));
    if !d.equilibrium.is_empty() {
        let steps: Vec<&str> = d
            .equilibrium
            .iter()
            .map(|&j| model.steps[j].name.as_str())
            .collect();
        s.push_str(&format!(
            "; rapid equilibrium of {} (Cha)",
            steps.join(", ")
        ));
    }
    s
}

/// The readable report.
pub fn human(d: &Derivation, model: &Model) -> String {
    let keys = keys_for(d);
    let p = printer(d, Syntax::Plain, &keys);
    let mut out = String::new();
    let name = model.name.clone().unwrap_or_else(|| "mechanism".into());
    out.push_str(&format!("{name}: {}\n", method_text(d, model)));
    out.push_str(&format!("rate of: {}\n\n", target_text(d, model)));
    out.push_str(&format!("  v = {}\n\n", rate_text(d, &p, &keys)));
    out.push_str("coefficient form (collected by concentration):\n");
    out.push_str(&format!(
        "  numerator   = {}\n",
        numerator_text(d, &p, &keys).0
    ));
    out.push_str(&format!(
        "  denominator = {}\n",
        p.collected(&d.rate.den, &keys)
    ));
    for t in &d.totals {
        let forms: Vec<&str> = t
            .forms
            .iter()
            .map(|&i| model.species[i].name.as_str())
            .collect();
        let how = if t.declared.is_some() {
            "declared"
        } else {
            "named here"
        };
        out.push_str(&format!("  {} = {} ({how})\n", t.name, forms.join(" + ")));
    }
    if !d.constants.is_empty() {
        out.push_str("\nkinetic constants:\n");
        // Padded by hand: a formatting width over 65,535 panics, and names
        // have no length limit.
        let width = d
            .constants
            .iter()
            .map(|c| c.name.chars().count())
            .max()
            .unwrap_or(0);
        for c in &d.constants {
            let padding = " ".repeat(width - c.name.chars().count());
            out.push_str(&format!(
                "  {}{padding} = {}    ({})\n",
                c.name,
                rational_text(&c.value, &p),
                c.meaning
            ));
        }
    }
    if let Some(form) = &d.constants_form {
        out.push_str(&format!(
            "\nrate law in these constants ({} identifiable combinations: the coefficient ratios):\n  v = {}\n",
            form.identifiable,
            form.text(d, Syntax::Plain)
        ));
        for c in &form.added {
            out.push_str(&format!(
                "  {} = {}    ({})\n",
                c.name,
                rational_text(&c.value, &p),
                c.meaning
            ));
        }
        let values: Vec<(&Constant, String)> = all_constants(d)
            .into_iter()
            .filter_map(|c| {
                let (value, dim) = value_of(c, d, model);
                value
                    .is_finite()
                    .then(|| (c, readable_value(value, dim, model)))
            })
            .collect();
        if !values.is_empty() {
            out.push_str("\nvalues at the file's params:\n");
            let width = values
                .iter()
                .map(|(c, _)| c.name.chars().count())
                .max()
                .unwrap_or(0);
            for (c, text) in values {
                let padding = " ".repeat(width - c.name.chars().count());
                out.push_str(&format!("  {}{padding} = {text}\n", c.name));
            }
        }
    }
    for h in &d.half_saturation {
        let rate = readable_value(h.reference_rate, Some(Dim::RATE), model);
        let reference = match h.peak_at {
            Some(at) => format!(
                "half of the peak rate {rate}, reached at {} = {}: {} inhibits",
                h.species,
                readable_value(at, Some(Dim::CONC), model),
                h.species
            ),
            None => format!("half of the limiting rate {rate}"),
        };
        out.push_str(&format!(
            "\nhalf saturation in {} (the law is of higher degree in it; at the file's values, products absent):\n  K0.5 = {}  ({reference})\n  Hill number at K0.5 = {:.3}\n",
            h.species,
            readable_value(h.k_half, Some(Dim::CONC), model),
            h.hill
        ));
    }
    if !d.inhibition_patterns.is_empty() {
        out.push_str(
            "\ninhibition patterns (1/v against 1/varied; other products and inhibitors absent):\n",
        );
        let rows: Vec<[&str; 4]> = d
            .inhibition_patterns
            .iter()
            .map(|x| {
                [
                    x.inhibitor.as_str(),
                    x.varied.as_str(),
                    x.others.word(),
                    x.pattern.word(),
                ]
            })
            .collect();
        let header = ["inhibitor", "varied", "others", "pattern"];
        let widths: Vec<usize> = (0..4)
            .map(|k| {
                rows.iter()
                    .map(|r| r[k].chars().count())
                    .chain([header[k].len()])
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        for row in std::iter::once(header).chain(rows) {
            let cells: Vec<String> = row
                .iter()
                .zip(&widths)
                .map(|(c, w)| format!("{c}{}", " ".repeat(w - c.chars().count())))
                .collect();
            out.push_str(&format!("  {}\n", cells.join("  ").trim_end()));
        }
    }
    for r in &d.relations {
        let status = if r.holds {
            "holds identically"
        } else {
            "DOES NOT HOLD"
        };
        out.push_str(&format!(
            "\n{} relation: {} = {}  ({status})\n",
            r.name, r.lhs, r.rhs
        ));
    }
    if !d.notes.is_empty() {
        out.push('\n');
        for n in &d.notes {
            out.push_str(&format!("note: {n}\n"));
        }
    }
    out
}

/// LaTeX: the rate and the constants in an `align*` environment.
pub fn latex(d: &Derivation, model: &Model) -> String {
    let keys = keys_for(d);
    let p = printer(d, Syntax::Latex, &keys);
    let mut out = String::new();
    out.push_str(&format!(
        "% {}\n% rate of: {}\n",
        method_text(d, model),
        target_text(d, model)
    ));
    out.push_str("\\begin{align*}\n");
    out.push_str(&format!("  v &= {}", rate_text(d, &p, &keys)));
    for c in &d.constants {
        out.push_str(&format!(
            " \\\\\n  {} &= {}",
            latex_constant_name(&c.name),
            rational_text(&c.value, &p)
        ));
    }
    for r in &d.relations {
        out.push_str(&format!(
            " \\\\\n  % {} relation: {} = {}",
            r.name, r.lhs, r.rhs
        ));
    }
    out.push_str("\n\\end{align*}\n");
    out
}

fn latex_constant_name(name: &str) -> String {
    match name {
        "kcat" => "k_{\\mathrm{cat}}".into(),
        "kcat_r" => "k_{\\mathrm{cat},r}".into(),
        "Keq" => "K_{\\mathrm{eq}}".into(),
        _ => match name.split_once('_') {
            Some((head, species)) => {
                let sub = head.trim_start_matches('K');
                format!(
                    "K_{{\\mathrm{{{}}},\\mathrm{{{}}}}}",
                    print::latex_escape(sub),
                    print::latex_escape(species)
                )
            }
            None => print::latex_name(name),
        },
    }
}

/// The JSON document (schema in docs/derive.md).
pub fn json(d: &Derivation, model: &Model) -> Value {
    let keys = keys_for(d);
    let p = printer(d, Syntax::Mech, &keys);
    let coefficients = |poly: &Poly| -> Value {
        let groups = poly.collect(&keys);
        let mut list: Vec<(&Monomial, &Poly)> = groups.iter().collect();
        list.sort_by(|a, b| {
            a.0.degree()
                .cmp(&b.0.degree())
                .then_with(|| b.0.grlex_cmp(a.0))
        });
        Value::Array(
            list.into_iter()
                .map(|(m, c)| json!({ "concentrations": if m.is_one() { "1".to_string() } else { p.monomial(m) }, "coefficient": p.factored(c) }))
                .collect(),
        )
    };
    let rate_of = match &d.derived {
        Derived::Overall(o) => {
            let map = |terms: &[(usize, num_bigint::BigInt)]| -> Value {
                Value::Object(
                    terms
                        .iter()
                        .map(|(i, c)| {
                            (
                                model.species[*i].name.clone(),
                                json!(c.to_string().parse::<i64>().unwrap_or(0)),
                            )
                        })
                        .collect(),
                )
            };
            json!({ "kind": "overall", "reaction": target_text(d, model), "reactants": map(&o.reactants), "products": map(&o.products) })
        }
        Derived::Species(i) => json!({ "kind": "species", "species": model.species[*i].name }),
        Derived::Flux(j) => json!({ "kind": "flux", "step": model.steps[*j].name }),
    };
    json!({
        "model": model.name,
        "method": method_text(d, model),
        "steady": d.steady.iter().map(|&i| model.species[i].name.clone()).collect::<Vec<_>>(),
        "equilibrium": d.equilibrium.iter().map(|&j| model.steps[j].name.clone()).collect::<Vec<_>>(),
        "rate_of": rate_of,
        "rate": rate_text(d, &p, &keys),
        "numerator": p.poly(&d.rate.num),
        "denominator": p.poly(&d.rate.den),
        "coefficients": { "numerator": coefficients(&d.rate.num), "denominator": coefficients(&d.rate.den) },
        "totals": d.totals.iter().map(|t| json!({
            "name": t.name,
            "forms": t.forms.iter().map(|&i| model.species[i].name.clone()).collect::<Vec<_>>(),
            "declared": t.declared.is_some(),
            "value": t.value,
        })).collect::<Vec<_>>(),
        "constants": Value::Object(all_constants(d).into_iter().map(|c| (c.name.clone(), json!(rational_text(&c.value, &p)))).collect()),
        "constant_meanings": Value::Object(all_constants(d).into_iter().map(|c| (c.name.clone(), json!(c.meaning))).collect()),
        "constants_form": d.constants_form.as_ref().map(|f| f.text(d, Syntax::Mech)),
        "inhibition_patterns": d.inhibition_patterns.iter().map(|x| json!({
            "inhibitor": x.inhibitor,
            "varied": x.varied,
            "others": x.others.word(),
            "pattern": x.pattern.word(),
        })).collect::<Vec<_>>(),
        "half_saturation": d.half_saturation.iter().map(|h| json!({
            "species": h.species,
            "k_half": h.k_half,
            "unit": Dim::CONC.display_in(model.units),
            "hill": h.hill,
            "reference_rate": h.reference_rate,
            "rate_unit": Dim::RATE.display_in(model.units),
            "reference": if h.peak { "peak" } else { "limit" },
            "peak_at": h.peak_at,
        })).collect::<Vec<_>>(),
        "identifiable_combinations": d.constants_form.as_ref().map(|f| f.identifiable),
        "constant_values": Value::Object(all_constants(d).into_iter().filter_map(|c| {
            let (value, dim) = value_of(c, d, model);
            value.is_finite().then(|| (c.name.clone(), json!({
                "value": value,
                "unit": dim.map(|x| x.display_in(model.units)),
                "dimension": dim.map(|x| json!({ "concentration": x.conc, "time": x.time })),
            })))
        }).collect()),
        "relations": d.relations.iter().map(|r| json!({ "name": r.name, "lhs": r.lhs, "rhs": r.rhs, "holds": r.holds })).collect::<Vec<_>>(),
        "intermediates": Value::Object(d.forms.iter().map(|(i, r)| {
            let s = match RationalFunction::new(r.num.clone(), r.den.clone()) { Some(c) => c, None => r.clone() };
            (model.species[*i].name.clone(), json!(rational_text(&s, &p)))
        }).collect()),
        "notes": d.notes,
        "spanning_tree_terms": d.trees,
    })
}

/// A new mechanism: the non-intermediate species, the params the law
/// needs, each total as a param, and one step carrying the derived law.
///
/// With `in_constants`, the params are the named constants of the
/// constants form, valued at the file's params, and the law is that form.
/// Why `--format mech` writes nothing: an option that does not apply, or
/// part of the file (located) the derived file cannot keep.
#[derive(Debug)]
pub enum MechanismError {
    Usage(String),
    Model(Box<Diagnostic>),
}

pub fn mechanism(
    d: &Derivation,
    model: &Model,
    source: &str,
    in_constants: bool,
) -> Result<String, MechanismError> {
    let Derived::Overall(o) = &d.derived else {
        return Err(MechanismError::Usage("`--format mech` writes the overall reaction; it cannot be combined with --species or --flux".into()));
    };
    let form = match (in_constants, &d.constants_form) {
        (false, _) => None,
        (true, Some(f)) => Some(f),
        (true, None) => {
            return Err(MechanismError::Usage("`--constants`: this rate law has no form in named constants (it needs one enzyme total the rate is proportional to)".into()));
        }
    };
    let protocol = protocol_lines(d, model)?;
    let keys = keys_for(d);
    let p = printer(d, Syntax::Mech, &keys);
    let mut out = String::new();
    out.push_str(&format!(
        "# Derived by `ratewright derive` from {source}:\n# {}.\n",
        method_text(d, model)
    ));
    if let Some(kelvin) = model.temperature {
        out.push_str(&format!(
            "# Params are the file's values at its assay temperature ({} K).\n",
            plain_literal(kelvin)
        ));
    }
    out.push_str(if protocol.dilutes {
        "# The intermediates are eliminated; their totals are fixed species here\n# (additions of a stock dilute them).\n"
    } else {
        "# The intermediates are eliminated; their totals are params here.\n"
    });
    let name = model.name.clone().unwrap_or_else(|| "mechanism".into());
    let desc = model
        .description
        .clone()
        .map(|s| format!("{s}, "))
        .unwrap_or_default();
    out.push_str(&format!(
        "mechanism {name}_derived \"{}derived rate law\"\n\n",
        desc.replace('"', "'")
    ));
    out.push_str(&format!(
        "units concentration {}, time {}\n",
        model.units.concentration.symbol(),
        model.units.time.symbol()
    ));
    if let Some(v) = model.volume {
        out.push_str(&format!(
            "volume {} {}\n",
            plain_literal(v),
            model.volume_symbol()
        ));
    }
    out.push('\n');
    let used: BTreeSet<Var> = d
        .rate
        .num
        .vars()
        .union(&d.rate.den.vars())
        .copied()
        .collect();
    let is_form = |i: usize| d.steady.contains(&i);
    for (i, s) in model.species.iter().enumerate() {
        if is_form(i) {
            continue;
        }
        let touched = o.reactants.iter().chain(&o.products).any(|(k, _)| *k == i)
            || used.iter().any(|v| d.kind(*v) == Some(VarKind::Species(i)))
            || protocol.names.contains(&Sym::Species(i));
        if !touched {
            continue;
        }
        let value = if s.initial != 0.0 {
            format!(" = {}", with_unit(s.initial, Some(Dim::CONC), model))
        } else {
            String::new()
        };
        out.push_str(&format!(
            "species {}{value}{}\n",
            s.name,
            describe(&s.description)
        ));
    }
    for (k, f) in model.fixed.iter().enumerate() {
        if used.iter().any(|v| d.vars.name(*v) == f.name) || protocol.names.contains(&Sym::Fixed(k))
        {
            out.push_str(&format!(
                "fixed {} = {}{}\n",
                f.name,
                with_unit(f.value, Some(Dim::CONC), model),
                describe(&f.description)
            ));
        }
    }
    out.push('\n');
    // Params the law uses, and the params their definitions use.
    let mut needed: BTreeSet<usize> = used
        .iter()
        .filter_map(|v| match d.kind(*v) {
            Some(VarKind::Param(i)) => Some(i),
            _ => None,
        })
        .chain(protocol.names.iter().filter_map(|s| match s {
            Sym::Param(i) => Some(*i),
            Sym::Species(_) | Sym::Fixed(_) | Sym::Total(_) | Sym::Observable(_) => None,
        }))
        .collect();
    loop {
        let mut more = Vec::new();
        for &i in &needed {
            if let ParamDef::Expr(e) = &model.params[i].definition {
                for s in e.names() {
                    if let Sym::Param(k) = s
                        && !needed.contains(&k)
                    {
                        more.push(k);
                    }
                }
            }
        }
        if more.is_empty() {
            break;
        }
        needed.extend(more);
    }
    let name_of = |s: Sym| model.name_of(s).to_string();
    if let Some(form) = form {
        for c in form.constants_used(d) {
            let (value, dim) = value_of(c, d, model);
            if !value.is_finite() {
                return Err(MechanismError::Usage(format!(
                    "`--constants`: {} has no finite value at the file's params",
                    c.name
                )));
            }
            // A dimensionless value as an expression, whose dimension is
            // known (a bare number's is not), so the law's checks hold.
            let written = match dim {
                Some(Dim::NONE) => format!("({})", plain_literal(value)),
                _ => with_unit(value, dim, model),
            };
            out.push_str(&format!(
                "param {} = {written} \"{}\"\n",
                c.name,
                c.meaning.replace('"', "'")
            ));
        }
    }
    for &i in &model.param_order {
        if form.is_some() || !needed.contains(&i) {
            continue;
        }
        let prm = &model.params[i];
        let def = match &prm.definition {
            ParamDef::Value(v) => with_unit(*v, prm.dim, model),
            ParamDef::Expr(e) => print::print_expr(e, &name_of, print::Syntax::Mech),
        };
        out.push_str(&format!(
            "param {} = {def}{}\n",
            prm.name,
            describe(&prm.description)
        ));
    }
    for t in &d.totals {
        let forms: Vec<&str> = t
            .forms
            .iter()
            .map(|&i| model.species[i].name.as_str())
            .collect();
        // A dilution changes a total as it changes its forms, and a
        // dilution changes fixed species, not params.
        let (keyword, note) = if protocol.dilutes {
            ("fixed", ", diluted with the mixture")
        } else {
            ("param", "")
        };
        out.push_str(&format!(
            "{keyword} {} = {} \"total of {}{note}\"\n",
            t.name,
            with_unit(t.value, Some(Dim::CONC), model),
            forms.join(" + ")
        ));
    }
    let side = |terms: &[(usize, num_bigint::BigInt)]| {
        if terms.is_empty() {
            return "0".to_string();
        }
        terms
            .iter()
            .map(|(i, c)| {
                let n = &model.species[*i].name;
                if *c == num_bigint::BigInt::from(1) {
                    n.clone()
                } else {
                    format!("{c} {n}")
                }
            })
            .collect::<Vec<_>>()
            .join(" + ")
    };
    let arrow = if reversible(d, o) { "<=>" } else { "->" };
    out.push_str(&format!(
        "\nstep overall {} {arrow} {} law {}\n",
        side(&o.reactants),
        side(&o.products),
        match form {
            Some(f) => f.text(d, Syntax::Mech),
            None => rate_text(d, &p, &keys),
        }
    ));
    let events = protocol.text;
    if !events.is_empty() {
        out.push('\n');
        out.push_str(&events);
    }
    Ok(out)
}

/// The protocol as the derived file writes it, and what it needs there.
struct Protocol {
    /// The event lines, in file order.
    text: String,
    /// Species, fixed species and params the events name.
    names: BTreeSet<Sym>,
    /// Whether an addition of a stock dilutes the mixture.
    dilutes: bool,
}

/// The events of the file in mechanism syntax: the derived file keeps the
/// whole protocol (species changes, additions of a stock, withdrawals,
/// triggers), or refuses when an event needs what derivation removed (an
/// eliminated enzyme form, an observable, a total).
fn protocol_lines(d: &Derivation, model: &Model) -> Result<Protocol, MechanismError> {
    let mut names = BTreeSet::new();
    let mut dilutes = false;
    let conc = |v: f64| with_unit(v, Some(Dim::CONC), model);
    let volume = |v: f64| format!("{} {}", plain_literal(v), model.volume_symbol());
    let mut keep = |sym: Sym, e: &Event| -> Result<(), MechanismError> {
        let refuse = |message: String, label: &str| {
            MechanismError::Model(Box::new(
                Diagnostic::error(Code::TargetCannotExpress, message)
                    .with_label(e.span, label)
                    .with_help(
                        "derive without `--format mech`, or keep this event in the original file",
                    ),
            ))
        };
        match sym {
            Sym::Species(i) if d.steady.contains(&i) => Err(refuse(
                format!(
                    "`--format mech`: this event names `{}`, an enzyme form the derivation eliminates",
                    model.species[i].name
                ),
                "not expressible in the derived file",
            )),
            Sym::Species(_) | Sym::Fixed(_) | Sym::Param(_) => {
                names.insert(sym);
                Ok(())
            }
            Sym::Total(_) | Sym::Observable(_) => Err(refuse(
                format!(
                    "`--format mech`: this event names `{}`, which the derived file does not define",
                    model.name_of(sym)
                ),
                "not expressible in the derived file",
            )),
        }
    };
    let mut text = String::new();
    for e in &model.events {
        let action = match &e.action {
            Action::Species {
                kind,
                species,
                amount,
            } => {
                keep(Sym::Species(*species), e)?;
                let n = &model.species[*species].name;
                match kind {
                    EventKind::Add => format!("add {} {n}", conc(*amount)),
                    EventKind::Remove => format!("remove {} {n}", conc(*amount)),
                    EventKind::Set => format!("set {n} = {}", conc(*amount)),
                }
            }
            Action::Stock {
                volume: v,
                contents,
            } => {
                dilutes = true;
                let mut stock = Vec::new();
                for (sym, c) in contents {
                    keep(*sym, e)?;
                    stock.push(format!("{} {}", conc(*c), model.name_of(*sym)));
                }
                format!("add {} of {}", volume(*v), stock.join(", "))
            }
            Action::Withdraw { volume: v } => format!("remove {}", volume(*v)),
        };
        match &e.timing {
            Timing::At(t) => text.push_str(&format!(
                "{action} at {}\n",
                with_unit(*t, Some(Dim::TIME), model)
            )),
            Timing::When(trigger) => {
                for sym in trigger.rising.names() {
                    keep(sym, e)?;
                }
                text.push_str(&format!("when {}: {action}\n", trigger.text));
            }
        }
    }
    Ok(Protocol {
        text,
        names,
        dilutes,
    })
}

/// A value in the model's default units, written with its unit (so the
/// derived file checks without warnings and reads the same under any
/// `units` line); a dimensionless value or one of unknown dimension bare.
fn with_unit(value: f64, dim: Option<Dim>, model: &Model) -> String {
    match dim {
        Some(d) if d != Dim::NONE => {
            format!("{} {}", plain_literal(value), d.display_in(model.units))
        }
        _ => plain_literal(value),
    }
}

fn describe(d: &Option<String>) -> String {
    match d {
        Some(s) => format!(" \"{}\"", s.replace('"', "'")),
        None => String::new(),
    }
}
