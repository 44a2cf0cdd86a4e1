//! Python target: a self-contained module (numpy only) with parameter and
//! initial-value dicts, `rhs(t, y, p)`, `jac(t, y, p)`, the names, the
//! protocol's events, and a `__main__` that integrates with SciPy's BDF and
//! the analytic Jacobian and writes CSV shaped like `ratewright run -o`.

use super::names::{Names, PYTHON_RESERVED, quoted};
use super::system::{ConstantKind, Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, plain_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Action, Coef, EventKind, Expr, Sym, Timing, coef_f64};
use std::fmt::Write;

pub struct Python;

impl Target for Python {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn runs_assay_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "python"
    }
    fn extension(&self) -> &'static str {
        "py"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        let contents = module(sys, options);
        Ok(vec![EmittedFile {
            name: format!("{}.py", options.stem),
            contents,
        }])
    }
}

fn module(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let names = Names::new(m, PYTHON_RESERVED);
    let name = |s: Sym| names.get(s);
    let ex = |e: &Expr| print_expr(e, &name, Syntax::Python);
    let mut o = String::new();
    let units = format!(
        "concentration {}, time {}",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );

    // Docstring.
    o.push_str("\"\"\"");
    o.push_str(&banner(sys, options, "python").replace('\\', "/"));
    o.push_str("\n\n");
    if let Some(d) = &m.description {
        let _ = writeln!(o, "{}\n", d.replace("\"\"\"", "'''").replace('\\', "/"));
    }
    let _ = writeln!(
        o,
        "Units: {units}. State y (in STATE order): {}.",
        state_names(sys).join(", ")
    );
    if sys.reduced {
        o.push_str("Reduced system: the dependent species follow from the totals (see\nDEPENDENT and full_state); totals are parameters.\n");
    }
    o.push_str(
        "\nrhs(t, y, p) and jac(t, y, p) take p as a dict like PARAMS; y0(p) is the\n\
         initial state. Run as a script to integrate with SciPy (BDF with the\n\
         analytic Jacobian) and write CSV: t, every species, every observable.\n\
         \"\"\"\n\nimport numpy as np\n\n",
    );

    // Names and defaults.
    let list = |v: Vec<String>| v.iter().map(|s| quoted(s)).collect::<Vec<_>>().join(", ");
    let _ = writeln!(
        o,
        "SPECIES = [{}]",
        list(m.species.iter().map(|s| s.name.clone()).collect())
    );
    let _ = writeln!(o, "STATE = [{}]", list(state_names(sys)));
    let _ = writeln!(
        o,
        "OBSERVABLES = [{}]",
        list(m.observables.iter().map(|s| s.name.clone()).collect())
    );
    let _ = writeln!(
        o,
        "STEPS = [{}]",
        list(m.steps.iter().map(|s| s.name.clone()).collect())
    );
    o.push_str("\n# Parameters: params with a value, fixed species and totals (default units).\nPARAMS = {\n");
    for c in &sys.constants {
        let what = match c.kind {
            ConstantKind::Param => "param",
            ConstantKind::Fixed => "fixed species",
            ConstantKind::Total => "total",
        };
        let desc = match c.sym {
            Sym::Param(i) => m.params[i].description.clone(),
            Sym::Fixed(i) => m.fixed[i].description.clone(),
            _ => None,
        };
        let note = desc
            .map(|d| format!(": {}", d.replace('\n', " ")))
            .unwrap_or_default();
        let _ = writeln!(
            o,
            "    {}: {},  # {what}{note}",
            quoted(m.name_of(c.sym)),
            float_literal(c.value)
        );
    }
    // Every species, not only the state variables: `--set` of a start value
    // recomputes the totals from these, as `ratewright run --set` does.
    o.push_str("}\n\n# Initial values of every species (the state variables start from these,\n# and the totals are computed from them).\nINITIAL = {\n");
    let state_start: std::collections::BTreeMap<usize, f64> =
        sys.state.iter().copied().zip(sys.initial_state()).collect();
    for (i, species) in m.species.iter().enumerate() {
        let v = state_start.get(&i).copied().unwrap_or(species.initial);
        let _ = writeln!(o, "    {}: {},", quoted(&species.name), float_literal(v));
    }
    o.push_str("}\n\n# Timed events in file order: (time, kind, target, amount). kind is add,\n# remove or set (target a species, amount a concentration), stock (target\n# {name: stock concentration}, amount the volume added: everything is\n# diluted by V/(V+dV), then the stock adds c*dV/(V+dV)) or withdraw (amount\n# the volume taken; concentrations unchanged).\nEVENTS = [\n");
    let action = |a: &Action| -> (String, String, String) {
        match a {
            Action::Species {
                kind,
                species,
                amount,
            } => (
                quoted(match kind {
                    EventKind::Add => "add",
                    EventKind::Remove => "remove",
                    EventKind::Set => "set",
                }),
                quoted(&m.species[*species].name),
                float_literal(*amount),
            ),
            Action::Stock { volume, contents } => (
                quoted("stock"),
                format!(
                    "{{{}}}",
                    contents
                        .iter()
                        .map(|(s, c)| format!("{}: {}", quoted(m.name_of(*s)), float_literal(*c)))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
                float_literal(*volume),
            ),
            Action::Withdraw { volume } => (
                quoted("withdraw"),
                "None".to_string(),
                float_literal(*volume),
            ),
        }
    };
    for e in &m.events {
        if let Timing::At(t) = e.timing {
            let (kind, target, amount) = action(&e.action);
            let _ = writeln!(o, "    ({}, {kind}, {target}, {amount}),", float_literal(t));
        }
    }
    o.push_str("]\n\n# The mixture's starting volume (None: not declared) and the fixed species\n# (parameters a dilution changes too).\n");
    let _ = writeln!(
        o,
        "VOLUME = {}\nFIXED = [{}]",
        m.volume.map(float_literal).unwrap_or_else(|| "None".into()),
        m.fixed
            .iter()
            .map(|f| quoted(&f.name))
            .collect::<Vec<_>>()
            .join(", ")
    );
    o.push_str("\n# Triggered events: (rising function of (t, x, p), kind, target, amount);\n# each fires when its function rises through zero (the condition becomes\n# true), never at t = 0 for a condition already true.\nTRIGGERS = [\n");
    let mut k = 0;
    for e in &m.events {
        if let Timing::When(_) = e.timing {
            let (kind, target, amount) = action(&e.action);
            let _ = writeln!(
                o,
                "    (lambda t, x, p: rising_{k}(t, x, p), {kind}, {target}, {amount}),"
            );
            k += 1;
        }
    }
    o.push_str("]\n\n# Conserved totals: name -> {species: coefficient}.\nTOTALS = {\n");
    for t in &m.totals {
        let terms: Vec<String> = t
            .terms
            .iter()
            .map(|(i, c)| {
                format!(
                    "{}: {}",
                    quoted(&m.species[*i].name),
                    plain_literal(coef_f64(*c))
                )
            })
            .collect();
        let _ = writeln!(o, "    {}: {{{}}},", quoted(&t.name), terms.join(", "));
    }
    o.push_str("}\n");
    if sys.reduced {
        o.push_str(
            "\n# Dependent species: name -> (total it follows from, formula).\nDEPENDENT = {\n",
        );
        for d in &sys.dependent {
            let _ = writeln!(
                o,
                "    {}: ({}, {}),",
                quoted(&m.species[d.species].name),
                quoted(&m.totals[d.total].name),
                quoted(&print_expr(
                    &d.formula,
                    &|s| m.name_of(s).to_string(),
                    Syntax::Mech
                ))
            );
        }
        o.push_str("}\n");
    }

    // y0
    o.push_str("\n\ndef y0(p=None):\n    \"\"\"The initial state vector (STATE order).\"\"\"\n    return np.array([INITIAL[name] for name in STATE], dtype=float)\n");

    // rhs
    let steps = sys.used_steps();
    let rate_refs: Vec<&Expr> = steps.iter().map(|&j| &sys.rates[j]).collect();
    let needs = sys.needs(rate_refs.iter().copied());
    o.push_str(
        "\n\ndef rhs(t, y, p):\n    \"\"\"d(state)/dt at time t, state y and parameters p.\"\"\"\n",
    );
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "    v = np.zeros({})", m.steps.len().max(1));
    for &j in &steps {
        let _ = writeln!(
            o,
            "    v[{j}] = {}  # {}",
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    let _ = writeln!(o, "    dy = np.zeros({})", sys.n());
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        if !terms.is_empty() {
            let _ = writeln!(
                o,
                "    dy[{r}] = {}  # {}",
                combination(terms, |j| format!("v[{j}]")),
                m.species[sys.state[r]].name
            );
        }
    }
    o.push_str("    return dy\n");

    // jac: the structural non-zeros once, dense and sparse views of them.
    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    let ints = |v: Vec<usize>| {
        v.iter()
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(
        o,
        "\n\n# Jacobian sparsity: jac_values()[k] is d rhs[JAC_ROWS[k]] / d y[JAC_COLS[k]].\nJAC_ROWS = np.array([{}], dtype=int)\nJAC_COLS = np.array([{}], dtype=int)",
        ints(sys.jac.iter().map(|e| e.row).collect()),
        ints(sys.jac.iter().map(|e| e.col).collect())
    );
    o.push_str(
        "\n\ndef jac_values(t, y, p):\n    \"\"\"The Jacobian's structural non-zeros (JAC_ROWS, JAC_COLS order).\"\"\"\n",
    );
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "    values = np.zeros({})", sys.jac.len());
    for (k, e) in sys.jac.iter().enumerate() {
        let _ = writeln!(o, "    values[{k}] = {}", ex(&e.expr));
    }
    o.push_str("    return values\n");
    let _ = writeln!(
        o,
        "\n\ndef jac(t, y, p):\n    \"\"\"The analytic Jacobian d rhs[i] / d y[j] as a dense matrix.\"\"\"\n    J = np.zeros(({n}, {n}))\n    J[JAC_ROWS, JAC_COLS] = jac_values(t, y, p)\n    return J",
        n = sys.n()
    );

    // full_state and observables
    o.push_str(
        "\n\ndef full_state(y, p):\n    \"\"\"Every species (SPECIES order) from the state vector",
    );
    if sys.reduced {
        o.push_str(": dependent species from the totals in p.\"\"\"\n");
        let deps: Vec<&Expr> = sys.dependent.iter().map(|d| &d.formula).collect();
        let needs = sys.needs(deps);
        let needs = Needs {
            dependent: (0..sys.dependent.len()).collect(),
            ..needs
        };
        prelude(
            &mut o,
            sys,
            &names,
            &Needs {
                state: (0..sys.n()).collect(),
                ..needs
            },
        );
    } else {
        o.push_str(" (the full system: the state itself).\"\"\"\n");
        prelude(
            &mut o,
            sys,
            &names,
            &Needs {
                state: (0..sys.n()).collect(),
                ..Needs::default()
            },
        );
    }
    let all: Vec<String> = (0..m.species.len())
        .map(|i| name(Sym::Species(i)))
        .collect();
    let _ = writeln!(o, "    return np.array([{}], dtype=float)", all.join(", "));

    o.push_str("\n\ndef observables(t, x, p):\n    \"\"\"Every observable (OBSERVABLES order) from the full species vector x.\"\"\"\n");
    let needs = full_needs(sys.observables.iter());
    for i in 0..m.species.len() {
        if needs.contains(&Sym::Species(i)) {
            let _ = writeln!(o, "    {} = x[{i}]", name(Sym::Species(i)));
        }
    }
    prelude(
        &mut o,
        sys,
        &names,
        &sys.needs_over_full(sys.observables.iter()),
    );
    let obs: Vec<String> = sys.observables.iter().map(ex).collect();
    let _ = writeln!(o, "    return np.array([{}], dtype=float)", obs.join(", "));

    for (k, (rising, event)) in sys
        .triggers
        .iter()
        .zip(m.events.iter().filter_map(|e| match &e.timing {
            Timing::When(t) => Some(t),
            Timing::At(_) => None,
        }))
        .enumerate()
    {
        let _ = writeln!(
            o,
            "\n\ndef rising_{k}(t, x, p):\n    \"\"\"`when {}`: positive once the condition holds.\"\"\"",
            event.text.replace('\\', "/").replace('"', "'")
        );
        let needs = full_needs(std::iter::once(rising));
        for i in 0..m.species.len() {
            if needs.contains(&Sym::Species(i)) {
                let _ = writeln!(o, "    {} = x[{i}]", name(Sym::Species(i)));
            }
        }
        prelude(
            &mut o,
            sys,
            &names,
            &sys.needs_over_full(std::iter::once(rising)),
        );
        let _ = writeln!(o, "    return {}", ex(rising));
    }

    if sys.reduced {
        o.push_str(REDUCE_STATE_REDUCED);
    } else {
        o.push_str(REDUCE_STATE_FULL);
    }
    o.push_str(SIMULATE);
    o
}

fn state_names(sys: &System) -> Vec<String> {
    sys.state
        .iter()
        .map(|&i| sys.model.species[i].name.clone())
        .collect()
}

/// Symbols mentioned (with derived params' and dependents' inputs).
fn full_needs<'a>(exprs: impl Iterator<Item = &'a Expr>) -> std::collections::BTreeSet<Sym> {
    let mut set = std::collections::BTreeSet::new();
    for e in exprs {
        e.visit_names(&mut |s| {
            set.insert(s);
        });
    }
    set
}

/// Assignments that define the names `needs` lists, in dependency order.
fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    let m = &sys.model;
    for &r in &needs.state {
        let _ = writeln!(o, "    {} = y[{r}]", names.get(Sym::Species(sys.state[r])));
    }
    for &k in &needs.constants {
        let sym = sys.constants[k].sym;
        let _ = writeln!(o, "    {} = p[{}]", names.get(sym), quoted(m.name_of(sym)));
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "    {} = {}",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::Python)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "    {} = {}",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::Python)
        );
    }
}

/// `-v[0] + 2 * v[3]`: a stoichiometric combination of step rates.
pub(crate) fn combination(terms: &[(usize, Coef)], item: impl Fn(usize) -> String) -> String {
    let mut out = String::new();
    for (k, (j, c)) in terms.iter().enumerate() {
        let v = coef_f64(*c);
        let mag = v.abs();
        let body = if mag == 1.0 {
            item(*j)
        } else {
            format!("{} * {}", plain_literal(mag), item(*j))
        };
        match (k, v < 0.0) {
            (0, true) => {
                out.push('-');
                out.push_str(&body)
            }
            (0, false) => out.push_str(&body),
            (_, true) => {
                out.push_str(" - ");
                out.push_str(&body)
            }
            (_, false) => {
                out.push_str(" + ");
                out.push_str(&body)
            }
        }
    }
    out
}

const REDUCE_STATE_FULL: &str = r#"

def state_from_full(x, p):
    """The state vector and parameters from a full species vector (after an
    event): totals recomputed, since an event changes them and rate laws or
    observables may use them."""
    p = dict(p)
    index = {name: i for i, name in enumerate(SPECIES)}
    for total, terms in TOTALS.items():
        if total in p:
            p[total] = sum(c * x[index[s]] for s, c in terms.items())
    return np.array(x, dtype=float), p
"#;

const REDUCE_STATE_REDUCED: &str = r#"

def state_from_full(x, p):
    """The state vector and parameters from a full species vector: the
    independent species, and totals recomputed (an event changes them)."""
    p = dict(p)
    index = {name: i for i, name in enumerate(SPECIES)}
    for total, terms in TOTALS.items():
        if total in p:
            p[total] = sum(c * x[index[s]] for s, c in terms.items())
    return np.array([x[index[name]] for name in STATE], dtype=float), p
"#;

const SIMULATE: &str = r#"

def apply_event(kind, target, amount, x, p, volume):
    """One event on the full species vector x, the parameters p (fixed
    species are diluted too) and the volume; returns all three."""
    index = {name: i for i, name in enumerate(SPECIES)}
    if kind == "add":
        x[index[target]] += amount
    elif kind == "remove":
        x[index[target]] = max(x[index[target]] - amount, 0.0)
    elif kind == "set":
        x[index[target]] = amount
    elif kind == "stock":
        after = volume + amount
        kept = volume / after
        x = x * kept
        for name in FIXED:
            p[name] *= kept
        for name, c in target.items():
            if name in index:
                x[index[name]] += c * amount / after
            else:
                p[name] += c * amount / after
        volume = after
    elif kind == "withdraw":
        if amount >= volume:
            raise RuntimeError(f"a withdrawal of {amount} is more than the volume {volume} left")
        volume = volume - amount
    return x, p, volume


def simulate(times, p=None, rtol=1e-8, atol=1e-12):
    """Integrates from t = 0 through EVENTS and TRIGGERS with SciPy's BDF
    method and the analytic Jacobian. Returns an array with one row per
    output time: every species (SPECIES order), then every observable. At
    an event's time the row shows the state after the event."""
    return simulate_rows(times, p, rtol, atol, event_rows=False)[1]


def simulate_rows(times, p=None, rtol=1e-8, atol=1e-12, event_rows=True):
    """As simulate, returning (row times, rows, volumes); with event_rows,
    each event's time has a row just before and just after it."""
    from scipy.integrate import solve_ivp

    p = dict(PARAMS if p is None else p)
    times = np.asarray(times, dtype=float)
    jacobian = jac
    if len(STATE) > 50:
        # Large systems: the sparse Jacobian (SciPy then factorizes sparsely).
        from scipy.sparse import csc_matrix

        def jacobian(t, y, p):
            return csc_matrix((jac_values(t, y, p), (JAC_ROWS, JAC_COLS)), shape=(len(STATE), len(STATE)))

    out_t, rows, volumes = [], [], []
    y = y0(p)
    volume = VOLUME
    end = float(times.max()) if len(times) else 0.0
    pending = sorted((e for e in EVENTS if e[0] <= end), key=lambda e: e[0])
    boundaries = sorted({e[0] for e in pending if e[0] > 0.0} | {end})
    next_out = 0

    def record(t, y, p):
        x = full_state(y, p)
        out_t.append(float(t))
        rows.append(np.concatenate([x, observables(t, x, p)]))
        volumes.append(volume)

    def fire(events, y, p, volume):
        x = full_state(y, p)
        for _, kind, target, amount in events:
            x, p, volume = apply_event(kind, target, amount, x, p, volume)
        y, p = state_from_full(x, p)
        return y, p, volume

    y, p, volume = fire([e for e in pending if e[0] <= 0.0], y, p, volume)
    t = 0.0
    while next_out < len(times) and times[next_out] <= 0.0:
        record(times[next_out], y, p)
        next_out += 1
    for b in boundaries:
        while t < b:
            functions = []
            for rising, *_ in TRIGGERS:
                # solve_ivp passes `args` (here p) to event functions too.
                def g(s, state, p, rising=rising):
                    return rising(s, full_state(state, p), p)
                g.terminal = True
                g.direction = 1
                functions.append(g)
            sol = solve_ivp(rhs, (t, b), y, method="BDF", jac=jacobian, args=(p,), dense_output=True,
                            events=functions or None, rtol=rtol, atol=atol)
            if not sol.success:
                raise RuntimeError(f"integration failed at t = {sol.t[-1]}: {sol.message}")
            hit = None
            for k, found in enumerate(sol.t_events or []):
                if len(found) and (hit is None or found[0] < hit[0]):
                    hit = (float(found[0]), k)
            stop = hit[0] if hit else b
            # Outputs at the end time come after the events there, if any.
            last = hit is None and b == end and not any(e[0] == b for e in pending)
            while next_out < len(times) and (times[next_out] < stop or (last and times[next_out] <= stop)):
                record(times[next_out], sol.sol(times[next_out]), p)
                next_out += 1
            y, t = sol.sol(stop), stop
            if hit is None:
                break
            if event_rows:
                record(t, y, p)
            y, p, volume = fire([TRIGGERS[hit[1]]], y, p, volume)
            if event_rows and not (next_out < len(times) and times[next_out] == t):
                record(t, y, p)
            # Step just past the root, so the same crossing is not found again.
            past = min(b, t + 1e-9 * max(1.0, abs(t)))
            y = solve_ivp(rhs, (t, past), y, method="BDF", jac=jacobian, args=(p,), rtol=rtol, atol=atol).y[:, -1]
            t = past
        fired = [e for e in pending if e[0] == b]
        if fired:
            if event_rows:
                record(b, y, p)
            y, p, volume = fire(fired, y, p, volume)
            if event_rows and not (next_out < len(times) and times[next_out] == b):
                record(b, y, p)
        while next_out < len(times) and times[next_out] <= b:
            record(times[next_out], y, p)
            next_out += 1
    return out_t, np.array(rows).reshape(len(rows), len(SPECIES) + len(OBSERVABLES)), volumes


def main(argv=None):
    import argparse
    import csv
    import sys

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--until", type=float, required=True, help="end time (model time unit)")
    parser.add_argument("--points", type=int, default=101, help="number of equally spaced output times")
    parser.add_argument("--rtol", type=float, default=1e-8)
    parser.add_argument("--atol", type=float, default=1e-12)
    parser.add_argument("--set", action="append", default=[], metavar="NAME=VALUE",
                        help="override a parameter or an initial value (default units)")
    parser.add_argument("-o", "--output", help="CSV file (default: standard output)")
    args = parser.parse_args(argv)
    p = dict(PARAMS)
    set_totals = set()
    starts_changed = False
    for item in args.set:
        key, _, value = item.partition("=")
        key = key.strip()
        if key in p:
            p[key] = float(value)
            set_totals.add(key)
        elif key in INITIAL:
            INITIAL[key] = float(value)
            starts_changed = True
        else:
            parser.error(f"no parameter or species named {key!r}")
    if starts_changed:
        # New start values change the totals they belong to (unless a total
        # was set itself), as with `ratewright run --set`.
        for total, terms in TOTALS.items():
            if total in p and total not in set_totals:
                p[total] = sum(c * INITIAL[s] for s, c in terms.items())
    times = np.linspace(0.0, args.until, args.points)
    # As `ratewright run`: each event's time twice (before, then after).
    row_times, rows, volumes = simulate_rows(times, p, rtol=args.rtol, atol=args.atol)
    out = open(args.output, "w", newline="") if args.output else sys.stdout
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["t"] + SPECIES + OBSERVABLES + (["volume"] if VOLUME is not None else []))
    for t, row, volume in zip(row_times, rows, volumes):
        extra = [repr(float(volume))] if VOLUME is not None else []
        writer.writerow([repr(float(t))] + [repr(float(v)) for v in row] + extra)
    if args.output:
        out.close()


if __name__ == "__main__":
    main()
"#;
