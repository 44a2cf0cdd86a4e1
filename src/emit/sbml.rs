//! SBML target: SBML Level 3 Version 2 core. One compartment, its size the
//! declared volume in litres (1 when none is declared); species in concentrations (fixed species are
//! boundary conditions and constant); params with values are constant
//! parameters, derived params get initial assignments, observables and
//! totals assignment rules (a total follows its species through events);
//! reactions carry the reversible flag and content-MathML kinetic laws (the
//! rate times the compartment size, so the law is in substance per time as
//! SBML requires); the timed additions, withdrawals and resets become SBML
//! events, prioritised in file order and evaluated when they execute, so
//! events at one time apply one after another as in `ratewright run`.
//!
//! The reduced system has no meaning for an exchange file of reactions, so
//! `--reduced` is refused here (see `Target::supports_reduced`).

use super::names::{Names, identifier};
use super::system::System;
use super::{EmitOptions, EmittedFile, Target};
use crate::algebra::print::{Syntax, plain_literal, print_expr, xml_escape};
use crate::diagnostics::Diagnostic;
use crate::model::{Action, Dim, EventKind, Expr, ParamDef, Rate, Sym, Timing, Units, coef_f64};
use std::collections::BTreeSet;
use std::fmt::Write;

pub struct Sbml;

/// Identifiers the document uses itself.
const RESERVED: &[&str] = &[
    "compartment",
    "time",
    "pi",
    "exponentiale",
    "true",
    "false",
    "infinity",
    "notanumber",
    "avogadro",
];
const COMPARTMENT: &str = "compartment";

impl Target for Sbml {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn runs_assay_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "sbml"
    }
    fn extension(&self) -> &'static str {
        "xml"
    }
    fn supports_reduced(&self) -> bool {
        false
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.xml", options.stem),
            contents: document(sys, options),
        }])
    }
}

fn unit_id(d: Dim, units: Units) -> String {
    let part = |sym: &str, p: i32| match p {
        0 => String::new(),
        1 => sym.to_string(),
        -1 => format!("per_{sym}"),
        p if p > 0 => format!("{sym}{p}"),
        p => format!("per_{sym}{}", -p),
    };
    let parts: Vec<String> = [
        part(units.concentration.symbol(), d.conc),
        part(units.time.symbol(), d.time),
    ]
    .into_iter()
    .filter(|s| !s.is_empty())
    .collect();
    if parts.is_empty() {
        "dimensionless".into()
    } else {
        identifier(&format!("u_{}", parts.join("_")))
    }
}

/// `<unit>` elements for concentration^conc · time^time in the model's units.
fn unit_elements(d: Dim, units: Units, o: &mut String) {
    let scale = units.concentration.molar().log10().round() as i32;
    if d.conc != 0 {
        let _ = writeln!(
            o,
            "          <unit kind=\"mole\" exponent=\"{}\" scale=\"{scale}\" multiplier=\"1\"/>",
            d.conc
        );
        let _ = writeln!(
            o,
            "          <unit kind=\"litre\" exponent=\"{}\" scale=\"0\" multiplier=\"1\"/>",
            -d.conc
        );
    }
    if d.time != 0 {
        let (scale, mult) = match units.time.symbol() {
            "ms" => (-3, 1.0),
            _ => (0, units.time.seconds()),
        };
        let _ = writeln!(
            o,
            "          <unit kind=\"second\" exponent=\"{}\" scale=\"{scale}\" multiplier=\"{}\"/>",
            d.time,
            plain_literal(mult)
        );
    }
}

fn document(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let units = m.units;
    let names = Names::new(m, RESERVED);
    let id = |s: Sym| names.get(s);
    let math = |e: &Expr| print_expr(e, &id, Syntax::MathML);
    let model_id = identifier(m.name.as_deref().unwrap_or(&options.stem));
    let mut o = String::new();
    o.push_str("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    o.push_str("<sbml xmlns=\"http://www.sbml.org/sbml/level3/version2/core\" level=\"3\" version=\"2\">\n");
    let title = m
        .description
        .clone()
        .unwrap_or_else(|| m.name.clone().unwrap_or_default());
    let _ = writeln!(
        o,
        "  <model id=\"{model_id}\" name=\"{}\" substanceUnits=\"substance\" timeUnits=\"time_unit\" volumeUnits=\"litre\" extentUnits=\"substance\">",
        xml_escape(&title)
    );
    let _ = writeln!(
        o,
        "    <notes>\n      <body xmlns=\"http://www.w3.org/1999/xhtml\"><p>{}</p></body>\n    </notes>",
        xml_escape(&super::banner(sys, options, "sbml"))
    );

    // Unit definitions: substance, time, concentration, and every param dimension.
    let mut dims: BTreeSet<(i32, i32)> = BTreeSet::new();
    dims.insert((1, 0));
    for p in &m.params {
        if let Some(d) = p.dim
            && d != Dim::NONE
        {
            dims.insert((d.conc, d.time));
        }
    }
    o.push_str("    <listOfUnitDefinitions>\n");
    o.push_str("      <unitDefinition id=\"substance\">\n        <listOfUnits>\n");
    let scale = units.concentration.molar().log10().round() as i32;
    let _ = writeln!(
        o,
        "          <unit kind=\"mole\" exponent=\"1\" scale=\"{scale}\" multiplier=\"1\"/>"
    );
    o.push_str("        </listOfUnits>\n      </unitDefinition>\n");
    o.push_str("      <unitDefinition id=\"time_unit\">\n        <listOfUnits>\n");
    unit_elements(Dim::TIME, units, &mut o);
    o.push_str("        </listOfUnits>\n      </unitDefinition>\n");
    for (c, t) in &dims {
        let d = Dim::new(*c, *t);
        let _ = writeln!(
            o,
            "      <unitDefinition id=\"{}\">\n        <listOfUnits>",
            unit_id(d, units)
        );
        unit_elements(d, units, &mut o);
        o.push_str("        </listOfUnits>\n      </unitDefinition>\n");
    }
    o.push_str("    </listOfUnitDefinitions>\n");

    // The mixture's volume when the file declares one; its size changes
    // with additions and withdrawals.
    let volume_changes = m
        .events
        .iter()
        .any(|e| matches!(e.action, Action::Stock { .. } | Action::Withdraw { .. }));
    let dilutes = m
        .events
        .iter()
        .any(|e| matches!(e.action, Action::Stock { .. }));
    let _ = writeln!(
        o,
        "    <listOfCompartments>\n      <compartment id=\"{COMPARTMENT}\" spatialDimensions=\"3\" size=\"{}\" units=\"litre\" constant=\"{}\"/>\n    </listOfCompartments>",
        plain_literal(m.volume_litres().unwrap_or(1.0)),
        !volume_changes
    );

    o.push_str("    <listOfSpecies>\n");
    for (i, s) in m.species.iter().enumerate() {
        let _ = writeln!(
            o,
            "      <species id=\"{}\"{} compartment=\"{COMPARTMENT}\" initialConcentration=\"{}\" substanceUnits=\"substance\" hasOnlySubstanceUnits=\"false\" boundaryCondition=\"false\" constant=\"false\"/>",
            id(Sym::Species(i)),
            name_attr(&s.name, s.description.as_deref()),
            plain_literal(s.initial)
        );
    }
    for (i, f) in m.fixed.iter().enumerate() {
        let _ = writeln!(
            o,
            "      <species id=\"{}\"{} compartment=\"{COMPARTMENT}\" initialConcentration=\"{}\" substanceUnits=\"substance\" hasOnlySubstanceUnits=\"false\" boundaryCondition=\"true\" constant=\"{}\"/>",
            id(Sym::Fixed(i)),
            name_attr(&f.name, f.description.as_deref()),
            plain_literal(f.value),
            // A dilution changes a fixed species too.
            !dilutes
        );
    }
    o.push_str("    </listOfSpecies>\n");

    let conc = unit_id(Dim::CONC, units);
    o.push_str("    <listOfParameters>\n");
    for (i, p) in m.params.iter().enumerate() {
        let unit = match p.dim {
            Some(d) if d == Dim::NONE => " units=\"dimensionless\"".to_string(),
            Some(d) => format!(" units=\"{}\"", unit_id(d, units)),
            None => String::new(),
        };
        let value = match p.definition {
            ParamDef::Value(v) => format!(" value=\"{}\"", plain_literal(v)),
            ParamDef::Expr(_) => String::new(),
        };
        let _ = writeln!(
            o,
            "      <parameter id=\"{}\"{}{value}{unit} constant=\"true\"/>",
            id(Sym::Param(i)),
            name_attr(&p.name, p.description.as_deref())
        );
    }
    // A total follows its species (an assignment rule below): an event
    // that adds to a species changes it, as `ratewright run` does.
    for (i, t) in m.totals.iter().enumerate() {
        let _ = writeln!(
            o,
            "      <parameter id=\"{}\" name=\"{}\" units=\"{conc}\" constant=\"false\"/>",
            id(Sym::Total(i)),
            xml_escape(&t.name)
        );
    }
    for (i, ob) in m.observables.iter().enumerate() {
        let _ = writeln!(
            o,
            "      <parameter id=\"{}\" name=\"{}\" constant=\"false\"/>",
            id(Sym::Observable(i)),
            xml_escape(&ob.name)
        );
    }
    o.push_str("    </listOfParameters>\n");

    if !sys.derived.is_empty() {
        o.push_str("    <listOfInitialAssignments>\n");
        for &i in &sys.derived {
            if let Some(e) = sys.derived_expr(i) {
                let _ = writeln!(
                    o,
                    "      <initialAssignment symbol=\"{}\">\n        <math xmlns=\"http://www.w3.org/1998/Math/MathML\">{}</math>\n      </initialAssignment>",
                    id(Sym::Param(i)),
                    math(e)
                );
            }
        }
        o.push_str("    </listOfInitialAssignments>\n");
    }

    if !m.observables.is_empty() || !m.totals.is_empty() {
        o.push_str("    <listOfRules>\n");
        for (i, t) in m.totals.iter().enumerate() {
            let sum = t
                .terms
                .iter()
                .map(|&(k, c)| {
                    let species = Expr::Name(Sym::Species(k));
                    let c = coef_f64(c);
                    if c == 1.0 {
                        species
                    } else {
                        Expr::mul(Expr::Number(c), species)
                    }
                })
                .reduce(Expr::add)
                .unwrap_or(Expr::Number(0.0));
            let _ = writeln!(
                o,
                "      <assignmentRule variable=\"{}\">\n        <math xmlns=\"http://www.w3.org/1998/Math/MathML\">{}</math>\n      </assignmentRule>",
                id(Sym::Total(i)),
                math(&sum)
            );
        }
        for (i, ob) in m.observables.iter().enumerate() {
            let _ = writeln!(
                o,
                "      <assignmentRule variable=\"{}\">\n        <math xmlns=\"http://www.w3.org/1998/Math/MathML\">{}</math>\n      </assignmentRule>",
                id(Sym::Observable(i)),
                math(&ob.expr)
            );
        }
        o.push_str("    </listOfRules>\n");
    }

    if !m.steps.is_empty() {
        o.push_str("    <listOfReactions>\n");
        for (j, s) in m.steps.iter().enumerate() {
            let _ = writeln!(
                o,
                "      <reaction id=\"{}\"{} reversible=\"{}\">",
                identifier(&format!("step_{}", s.name)),
                name_attr(&s.name, s.description.as_deref()),
                s.reversible
            );
            let refs = |terms: &[crate::model::Term], tag: &str, o: &mut String| {
                if terms.is_empty() {
                    return;
                }
                let _ = writeln!(o, "        <listOf{tag}>");
                for t in terms {
                    let _ = writeln!(
                        o,
                        "          <speciesReference species=\"{}\" stoichiometry=\"{}\" constant=\"true\"/>",
                        id(t.sym),
                        plain_literal(coef_f64(t.coefficient))
                    );
                }
                let _ = writeln!(o, "        </listOf{tag}>");
            };
            refs(&s.reactants, "Reactants", &mut o);
            refs(&s.products, "Products", &mut o);
            // Species a law reads but the step does not change: modifiers.
            if let Rate::Law(law) = &s.rate {
                let on_sides: BTreeSet<Sym> = s
                    .reactants
                    .iter()
                    .chain(&s.products)
                    .map(|t| t.sym)
                    .collect();
                let mods: Vec<Sym> = law
                    .names()
                    .into_iter()
                    .filter(|n| {
                        matches!(n, Sym::Species(_) | Sym::Fixed(_)) && !on_sides.contains(n)
                    })
                    .collect();
                if !mods.is_empty() {
                    o.push_str("        <listOfModifiers>\n");
                    for sym in mods {
                        let _ = writeln!(
                            o,
                            "          <modifierSpeciesReference species=\"{}\"/>",
                            id(sym)
                        );
                    }
                    o.push_str("        </listOfModifiers>\n");
                }
            }
            let rate = m.step_rate(j);
            let _ = writeln!(
                o,
                "        <kineticLaw>\n          <math xmlns=\"http://www.w3.org/1998/Math/MathML\"><apply><times/><ci> {COMPARTMENT} </ci>{}</apply></math>\n        </kineticLaw>",
                math(&rate)
            );
            o.push_str("      </reaction>\n");
        }
        o.push_str("    </listOfReactions>\n");
    }

    if !m.events.is_empty() {
        o.push_str("    <listOfEvents>\n");
        for (k, e) in m.events.iter().enumerate() {
            let (name, assignments) = event_assignments(m, e, &id);
            let (when, trigger, initial) = match &e.timing {
                Timing::At(t) => (
                    format!("at {}", plain_literal(*t)),
                    format!(
                        "<apply><geq/>{}<cn> {} </cn></apply>",
                        print_expr(&Expr::Time, &id, Syntax::MathML),
                        plain_literal(*t)
                    ),
                    // A time of 0 fires at the start.
                    "false",
                ),
                Timing::When(trigger) => (
                    format!("when {}", trigger.text),
                    format!(
                        "<apply><gt/>{}<cn type=\"integer\"> 0 </cn></apply>",
                        print_expr(&trigger.rising, &id, Syntax::MathML)
                    ),
                    // A condition already true at the start does not fire then.
                    "true",
                ),
            };
            let _ = writeln!(
                o,
                "      <event id=\"event_{k}\" name=\"{} {}\" useValuesFromTriggerTime=\"false\">",
                xml_escape(&name),
                xml_escape(&when)
            );
            let _ = writeln!(
                o,
                "        <trigger initialValue=\"{initial}\" persistent=\"true\">\n          <math xmlns=\"http://www.w3.org/1998/Math/MathML\">{trigger}</math>\n        </trigger>"
            );
            // Events at one time apply in file order, each to the state the
            // previous one left (values taken when it executes).
            let _ = writeln!(
                o,
                "        <priority>\n          <math xmlns=\"http://www.w3.org/1998/Math/MathML\"><cn type=\"integer\"> {} </cn></math>\n        </priority>",
                m.events.len() - k
            );
            o.push_str("        <listOfEventAssignments>\n");
            for (variable, value) in assignments {
                let _ = writeln!(
                    o,
                    "          <eventAssignment variable=\"{variable}\">\n            <math xmlns=\"http://www.w3.org/1998/Math/MathML\">{value}</math>\n          </eventAssignment>"
                );
            }
            o.push_str("        </listOfEventAssignments>\n      </event>\n");
        }
        o.push_str("    </listOfEvents>\n");
    }
    o.push_str("  </model>\n</sbml>\n");
    o
}

/// An event's name and its assignments (variable id, MathML value). All
/// values are computed from the state before the event (SBML evaluates
/// every assignment of an event before applying any), so a dilution
/// writes each concentration as c·V/(V+ΔV) + c_stock·ΔV/(V+ΔV) and the
/// compartment as V+ΔV, whatever a simulator does with amounts when a
/// compartment changes size.
fn event_assignments(
    m: &crate::model::Model,
    e: &crate::model::Event,
    id: &dyn Fn(Sym) -> String,
) -> (String, Vec<(String, String)>) {
    let ci = |s: &str| format!("<ci> {s} </ci>");
    match &e.action {
        Action::Species {
            kind,
            species,
            amount,
        } => {
            let sp = id(Sym::Species(*species));
            let amount = plain_literal(*amount);
            let value = match kind {
                EventKind::Add => format!("<apply><plus/>{}<cn> {amount} </cn></apply>", ci(&sp)),
                EventKind::Remove => format!(
                    "<apply><max/><apply><minus/>{}<cn> {amount} </cn></apply><cn type=\"integer\"> 0 </cn></apply>",
                    ci(&sp)
                ),
                EventKind::Set => format!("<cn> {amount} </cn>"),
            };
            let word = match kind {
                EventKind::Add => "add",
                EventKind::Remove => "remove",
                EventKind::Set => "set",
            };
            (
                format!("{word} {}", m.species[*species].name),
                vec![(sp, value)],
            )
        }
        Action::Stock { volume, contents } => {
            let litres = volume * m.volume_unit.as_ref().map(|u| u.1).unwrap_or(1.0);
            let added = plain_literal(litres);
            let new_size = format!(
                "<apply><plus/>{}<cn> {added} </cn></apply>",
                ci(COMPARTMENT)
            );
            let mut out = vec![(COMPARTMENT.to_string(), new_size.clone())];
            let diluted = |sym: Sym| {
                let stock = contents.iter().find(|(s, _)| *s == sym).map(|(_, c)| *c);
                let kept = format!("<apply><times/>{}{}</apply>", ci(&id(sym)), ci(COMPARTMENT));
                let amount = match stock {
                    Some(c) => format!(
                        "<apply><plus/>{kept}<apply><times/><cn> {} </cn><cn> {added} </cn></apply></apply>",
                        plain_literal(c)
                    ),
                    None => kept,
                };
                (
                    id(sym),
                    format!("<apply><divide/>{amount}{new_size}</apply>"),
                )
            };
            out.extend((0..m.species.len()).map(|i| diluted(Sym::Species(i))));
            out.extend((0..m.fixed.len()).map(|i| diluted(Sym::Fixed(i))));
            let names: Vec<&str> = contents.iter().map(|(s, _)| m.name_of(*s)).collect();
            (
                format!("add {} L of stock ({})", added, names.join(", ")),
                out,
            )
        }
        Action::Withdraw { volume } => {
            let litres = plain_literal(volume * m.volume_unit.as_ref().map(|u| u.1).unwrap_or(1.0));
            (
                format!("remove {litres} L"),
                vec![(
                    COMPARTMENT.to_string(),
                    format!(
                        "<apply><minus/>{}<cn> {litres} </cn></apply>",
                        ci(COMPARTMENT)
                    ),
                )],
            )
        }
    }
}

fn name_attr(name: &str, description: Option<&str>) -> String {
    match description {
        Some(d) => format!(" name=\"{} ({})\"", xml_escape(name), xml_escape(d)),
        None => format!(" name=\"{}\"", xml_escape(name)),
    }
}
