//! Julia target: in-place `f!(du, u, p, t)` and `jac!(J, u, p, t)` in the
//! calling convention of Julia's ODE solvers, a named parameter tuple
//! `PARAMS`, the initial state `u0`, names, events, and (always)
//! `full_state(u, p)` that rebuilds every species from the state (the
//! dependent species of the reduced system from the totals), and
//! `simulate(times)`, which runs the protocol (timed events, stock
//! additions, withdrawals and the volume, `when` events located by the
//! solver's continuous callbacks) after `using OrdinaryDiffEq`.

use super::names::{JULIA_RESERVED, Names};
use super::system::{Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Action, EventKind, Expr, Sym};
use std::fmt::Write;

pub struct Julia;

impl Target for Julia {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn runs_assay_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "julia"
    }
    fn extension(&self) -> &'static str {
        "jl"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.jl", options.stem),
            contents: source(sys, options),
        }])
    }
}

/// A Julia string literal (`$` would interpolate).
fn jq(s: &str) -> String {
    super::names::quoted(s).replace('$', "\\$")
}

/// Reserved names plus the rate locals `v_1 … v_n`.
pub(crate) fn reserved_with_rates(base: &[&str], steps: usize) -> Vec<String> {
    let mut v: Vec<String> = base.iter().map(|s| s.to_string()).collect();
    v.extend((1..=steps).map(|j| format!("v_{j}")));
    v
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let mut reserved = reserved_with_rates(JULIA_RESERVED, m.steps.len());
    reserved.extend(
        [
            "observables",
            "simulate",
            "TRIGGERS",
            "VOLUME",
            "FIXED",
            "STATE_SPECIES",
            "TOTALS",
            "apply_event",
            "state_from_full",
            "rising_values",
            "x",
        ]
        .map(String::from),
    );
    reserved.extend((1..=sys.triggers.len()).map(|k| format!("rising_{k}")));
    let reserved: Vec<&str> = reserved.iter().map(String::as_str).collect();
    let names = Names::new(m, &reserved);
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::Julia);
    let mut o = String::new();
    let _ = writeln!(o, "# {}", banner(sys, options, "julia"));
    if let Some(d) = &m.description {
        let _ = writeln!(o, "# {}", d.replace('\n', " "));
    }
    let _ = writeln!(
        o,
        "# Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    o.push_str("# f!(du, u, p, t) and jac!(J, u, p, t) are in place, with p a named tuple\n# like PARAMS; build an ODE problem from f!, jac!, u0, a time span and PARAMS.\n\n");
    let list = |v: Vec<String>| v.iter().map(|s| jq(s)).collect::<Vec<_>>().join(", ");
    let _ = writeln!(
        o,
        "const SPECIES = [{}]",
        list(m.species.iter().map(|s| s.name.clone()).collect())
    );
    let _ = writeln!(
        o,
        "const STATE = [{}]",
        list(
            sys.state
                .iter()
                .map(|&i| m.species[i].name.clone())
                .collect()
        )
    );
    let _ = writeln!(
        o,
        "const OBSERVABLES = [{}]",
        list(m.observables.iter().map(|s| s.name.clone()).collect())
    );
    o.push_str(
        "\n# Params with a value, fixed species and totals (default units).\nconst PARAMS = (",
    );
    let fields: Vec<String> = sys
        .constants
        .iter()
        .map(|c| format!("{} = {}", names.get(c.sym), float_literal(c.value)))
        .collect();
    o.push_str(&fields.join(", "));
    if fields.len() == 1 {
        o.push(',');
    }
    o.push_str(")\n\n# Initial state (STATE order).\n");
    let init: Vec<String> = sys
        .initial_state()
        .iter()
        .map(|v| float_literal(*v))
        .collect();
    let _ = writeln!(o, "const u0 = Float64[{}]", init.join(", "));
    o.push_str("\n# Timed events in the order they apply (by time, file order at one time):\n# add, remove, set change a species; stock dilutes everything by V/(V+dV),\n# then adds c*dV/(V+dV) of each stock species and fixed species; withdraw\n# lowers the volume, concentrations unchanged.\nconst EVENTS = [\n");
    for (t, e) in sys.timed_events() {
        let _ = writeln!(
            o,
            "    (time = {}, {}),",
            float_literal(t),
            action(sys, &names, &e.action)
        );
    }
    o.push_str("]\n");
    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    o.push_str("\nfunction f!(du, u, p, t)\n");
    prelude(&mut o, sys, &names, &needs);
    for &j in &steps {
        let _ = writeln!(
            o,
            "    v_{} = {}  # {}",
            j + 1,
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        let body = if terms.is_empty() {
            "0.0".into()
        } else {
            super::python::combination(terms, |j| format!("v_{}", j + 1))
        };
        let _ = writeln!(
            o,
            "    du[{}] = {body}  # {}",
            r + 1,
            m.species[sys.state[r]].name
        );
    }
    o.push_str("    return nothing\nend\n");

    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    o.push_str("\n# The analytic Jacobian J[i, j] = d f_i / d u_j.\nfunction jac!(J, u, p, t)\n");
    prelude(&mut o, sys, &names, &needs);
    o.push_str("    fill!(J, zero(eltype(J)))\n");
    for e in &sys.jac {
        let _ = writeln!(o, "    J[{}, {}] = {}", e.row + 1, e.col + 1, ex(&e.expr));
    }
    o.push_str("    return nothing\nend\n");

    o.push_str("\n# Every species (SPECIES order) from the state u.\nfunction full_state(u, p)\n");
    prelude(&mut o, sys, &names, &sys.full_state_needs());
    let all = sys.full_state_terms(m, &|s| names.get(s));
    let _ = writeln!(o, "    return [{}]\nend", all.join(", "));
    protocol(&mut o, sys, &names);
    o.push_str(SIMULATE);
    o
}

/// The fields of an event's action, after its time.
fn action(sys: &System, names: &Names, a: &Action) -> String {
    let m = &sys.model;
    match a {
        Action::Species {
            kind,
            species,
            amount,
        } => format!(
            "kind = :{}, species = {}, amount = {}",
            match kind {
                EventKind::Add => "add",
                EventKind::Remove => "remove",
                EventKind::Set => "set",
            },
            jq(&m.species[*species].name),
            float_literal(*amount)
        ),
        Action::Stock { volume, contents } => {
            let mut species = Vec::new();
            let mut fixed = Vec::new();
            for (sym, c) in contents {
                match sym {
                    Sym::Species(i) => species.push(format!("{} => {}", i + 1, float_literal(*c))),
                    Sym::Fixed(_) | Sym::Param(_) | Sym::Total(_) | Sym::Observable(_) => fixed
                        .push(format!(
                            "Symbol({}) => {}",
                            jq(&names.get(*sym)),
                            float_literal(*c)
                        )),
                }
            }
            format!(
                "kind = :stock, volume = {}, species = Pair{{Int,Float64}}[{}], fixed = Pair{{Symbol,Float64}}[{}]",
                float_literal(*volume),
                species.join(", "),
                fixed.join(", ")
            )
        }
        Action::Withdraw { volume } => {
            format!("kind = :withdraw, volume = {}", float_literal(*volume))
        }
    }
}

/// Observables and rising functions over the full species vector, the
/// triggers, the volume, the fixed species and the totals.
fn protocol(o: &mut String, sys: &System, names: &Names) {
    let m = &sys.model;
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::Julia);
    for f in sys.functions_over_full() {
        let body = match &f.condition {
            Some(c) => {
                let _ = writeln!(o, "\n# `when {c}`: positive once the condition holds.");
                ex(f.exprs[0])
            }
            None => {
                o.push_str(
                    "\n# Every observable (OBSERVABLES order) from the full species vector x.\n",
                );
                let values: Vec<String> = f.exprs.iter().map(|e| ex(e)).collect();
                format!("Float64[{}]", values.join(", "))
            }
        };
        let _ = writeln!(o, "function {}(t, x, p)", f.name);
        for i in f.species(sys) {
            let _ = writeln!(o, "    {} = x[{}]", names.get(Sym::Species(i)), i + 1);
        }
        prelude(o, sys, names, &f.needs(sys));
        let _ = writeln!(o, "    return {body}\nend");
    }
    o.push_str("\n# Triggered events: each fires when its rising function crosses zero upwards\n# (never at t = 0 for a condition already true).\nconst TRIGGERS = [\n");
    for (k, (e, _, _)) in sys.when_events().into_iter().enumerate() {
        let _ = writeln!(
            o,
            "    (rising = rising_{}, {}),",
            k + 1,
            action(sys, names, &e.action)
        );
    }
    let symbols = |v: Vec<String>| {
        v.iter()
            .map(|s| format!("Symbol({})", jq(s)))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(
        o,
        "]\n\n# The starting volume ({}; nothing: not declared), the fixed species (a\n# dilution changes them too) and the species index of each state slot.\nconst VOLUME = {}\nconst FIXED = Symbol[{}]\nconst STATE_SPECIES = Int[{}]",
        m.volume_symbol(),
        m.volume
            .map(float_literal)
            .unwrap_or_else(|| "nothing".into()),
        symbols(
            (0..m.fixed.len())
                .map(|i| names.get(Sym::Fixed(i)))
                .collect()
        ),
        super::one_based(&sys.state, ", ")
    );
    o.push_str("# Totals in PARAMS, recomputed after each event: (field, species, coefficients).\nconst TOTALS = Tuple{Symbol,Vector{Int},Vector{Float64}}[");
    let totals: Vec<String> = sys
        .totals_after_events()
        .into_iter()
        .map(|(i, species, coefficients)| {
            format!(
                "(Symbol({}), [{}], [{}])",
                jq(&names.get(Sym::Total(i))),
                super::one_based(&species, ", "),
                coefficients
                    .iter()
                    .map(|c| float_literal(*c))
                    .collect::<Vec<_>>()
                    .join(", ")
            )
        })
        .collect();
    o.push_str(&totals.join(", "));
    o.push_str("]\n");
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "    {} = u[{}]",
            names.get(Sym::Species(sys.state[r])),
            r + 1
        );
    }
    for &k in &needs.constants {
        let _ = writeln!(o, "    {0} = p.{0}", names.get(sys.constants[k].sym));
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "    {} = {}",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::Julia)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "    {} = {}",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::Julia)
        );
    }
}

const SIMULATE: &str = r#"
# One event on the full species vector x, the parameters p (fixed species
# are diluted too) and the volume at time t; returns all three.
function apply_event(e, x, p, volume, t)
    x = copy(x)
    if e.kind == :add
        i = findfirst(==(e.species), SPECIES)
        x[i] += e.amount
    elseif e.kind == :remove
        i = findfirst(==(e.species), SPECIES)
        x[i] = max(x[i] - e.amount, 0.0)
    elseif e.kind == :set
        x[findfirst(==(e.species), SPECIES)] = e.amount
    elseif e.kind == :stock
        after = volume + e.volume
        kept = volume / after
        x .*= kept
        p = merge(p, NamedTuple{Tuple(FIXED)}(Tuple(p[f] * kept for f in FIXED)))
        for (i, c) in e.species
            x[i] += c * e.volume / after
        end
        for (f, c) in e.fixed
            p = merge(p, NamedTuple{(f,)}((p[f] + c * e.volume / after,)))
        end
        volume = after
    elseif e.kind == :withdraw
        if e.volume >= volume * (1 - 1e-12)
            error("at t = $t, a withdrawal of $(e.volume) is more than the volume $volume left")
        end
        volume -= e.volume
    end
    return x, p, volume
end

# The state and parameters from a full species vector: the totals are
# recomputed, since an event changes the amounts they conserve.
function state_from_full(x, p)
    for (name, species, coefficients) in TOTALS
        p = merge(p, NamedTuple{(name,)}((sum(coefficients .* x[species]),)))
    end
    return x[STATE_SPECIES], p
end

function rising_values(t, u, p)
    x = full_state(u, p)
    return Float64[trigger.rising(t, x, p) for trigger in TRIGGERS]
end

"""
    simulate(times; p = PARAMS, rtol = 1e-8, atol = 1e-12, solver = Rodas5P())

Integrates from t = 0 through EVENTS and TRIGGERS (call after `using
OrdinaryDiffEq`), piece by piece between events; a VectorContinuousCallback
stops a piece where a rising function crosses zero. Returns a matrix with
one row per output time: t, every species, every observable, the volume if
declared; at an event's time a row shows the state after the event.
"""
function simulate(times; p = PARAMS, rtol = 1e-8, atol = 1e-12, solver = Rodas5P())
    times = collect(Float64, times)
    stop_at = isempty(times) ? 0.0 : maximum(times)
    pending = [e for e in EVENTS if e.time <= stop_at]
    volume = VOLUME
    u = copy(u0)
    width = 1 + length(SPECIES) + length(OBSERVABLES) + (VOLUME === nothing ? 0 : 1)
    out = fill(NaN, length(times), width)
    next = 1
    function record(t, state)
        x = full_state(state, p)
        out[next, :] = vcat(t, x, observables(t, x, p), VOLUME === nothing ? Float64[] : [volume])
        next += 1
    end
    function fire(events, t)
        x = full_state(u, p)
        for e in events
            x, p, volume = apply_event(e, x, p, volume, t)
        end
        u, p = state_from_full(x, p)
    end
    f = ODEFunction(f!; jac = jac!)
    fire([e for e in pending if e.time <= 0], 0.0)
    pending = [e for e in pending if e.time > 0]
    # A condition already true at the start waits until it has been false.
    armed = .!(rising_values(0.0, u, p) .> 0)
    t = 0.0
    while next <= length(times) && times[next] <= 0
        record(times[next], u)
    end
    firings = 0
    for b in sort(unique(vcat([e.time for e in pending], stop_at)))
        b > 0 || continue
        while t < b
            hit = Ref((0, 0))
            callback = isempty(TRIGGERS) ? nothing : VectorContinuousCallback(
                (g, v, s, integrator) -> (g .= rising_values(s, v, integrator.p)),
                (integrator, k) -> (hit[] = (k, 1); terminate!(integrator)),
                length(TRIGGERS);
                affect_neg! = (integrator, k) -> (hit[] = (k, -1); terminate!(integrator)),
            )
            sol = solve(ODEProblem(f, u, (t, b), p), solver;
                        reltol = rtol, abstol = atol, callback = callback)
            if !(sol.retcode in (ReturnCode.Success, ReturnCode.Terminated))
                error("integration failed after t = $t: $(sol.retcode)")
            end
            stop = sol.t[end]
            while next <= length(times) && times[next] < stop
                record(times[next], sol(times[next]))
            end
            u = sol.u[end]
            t = stop
            k, direction = hit[]
            k == 0 && break
            if direction > 0 && armed[k]
                firings += 1
                firings > 100_000 && error("triggered events fired more than 100000 times; a condition may be flipping at every step")
                armed[k] = false
                fire([TRIGGERS[k]], t)
            else
                # A condition that became false may fire again on its next rise.
                armed[k] = true
            end
            # Step just past the root (an Euler step of 1e-9 of the time), so
            # the same crossing is not found again.
            past = min(b, t + 1e-9 * max(1.0, abs(t)))
            du = similar(u)
            f!(du, u, p, t)
            u = u .+ (past - t) .* du
            t = past
            armed .|= .!(rising_values(t, u, p) .> 0)
        end
        fire([e for e in pending if e.time == b], b)
        # An armed condition the events made true fires at once (file order).
        while true
            now = findall(armed .& (rising_values(b, u, p) .> 0))
            isempty(now) && break
            armed[now] .= false
            fire(TRIGGERS[now], b)
        end
        armed .|= .!(rising_values(b, u, p) .> 0)
        while next <= length(times) && times[next] <= b
            record(times[next], u)
        end
    end
    return out
end
"#;
