"""Integrates an SBML file with a changing compartment and state-triggered
events, read with libSBML (the SBML reference library) and integrated with
SciPy's solve_ivp (Radau, with event functions for the triggers),
independently of the tool that wrote it.

Supported: one or more compartments (sizes may change by events), species
in concentrations, kinetic laws in amount per time (divided by the
compartment size for d[conc]/dt), assignment rules, and events whose
trigger is `time >= T` (timed) or `f > 0` (state-triggered, fired when f
rises through zero; `initialValue="true"` so a trigger already true at the
start does not fire). All assignments of an event are evaluated before any
is applied (SBML Level 3 semantics); events at one time by decreasing
priority.

Usage: sbml_assay_simulate.py FILE.xml T1,T2,...
Prints CSV: t,<species ids>,<compartment ids>, one row per requested time
(after the events at that time), then a line `# fired,<time>` per
state-triggered firing.
"""
import math
import sys

import libsbml
import numpy as np
from scipy.integrate import solve_ivp

NAMES = {"ln": math.log, "log": math.log, "log10": math.log10, "exp": math.exp, "sqrt": math.sqrt,
         "abs": abs, "min": min, "max": max, "pow": math.pow, "pi": math.pi}


def compile_math(ast):
    text = libsbml.formulaToL3String(ast).replace("^", "**").replace("&&", " and ").replace("||", " or ")
    return compile(text, "<sbml>", "eval")


def main():
    doc = libsbml.readSBMLFromFile(sys.argv[1])
    if doc.getNumErrors(libsbml.LIBSBML_SEV_ERROR) > 0:
        sys.exit("libSBML: " + doc.getErrorLog().toString())
    model = doc.getModel()
    times = [float(t) for t in sys.argv[2].split(",")]
    end = max(times)
    values = {}
    compartments = [model.getCompartment(k).getId() for k in range(model.getNumCompartments())]
    for k in range(model.getNumCompartments()):
        c = model.getCompartment(k)
        values[c.getId()] = c.getSize()
    species = [model.getSpecies(k) for k in range(model.getNumSpecies())]
    for s in species:
        values[s.getId()] = s.getInitialConcentration()
    for k in range(model.getNumParameters()):
        q = model.getParameter(k)
        values[q.getId()] = q.getValue()
    rules = [(model.getRule(k).getVariable(), compile_math(model.getRule(k).getMath()))
             for k in range(model.getNumRules())]

    def ev(code, v):
        return eval(code, {"__builtins__": {}}, {**NAMES, **v})

    def apply_rules(v):
        for _ in range(3):
            for var, code in rules:
                v[var] = ev(code, v)

    for k in range(model.getNumInitialAssignments()):
        a = model.getInitialAssignment(k)
        apply_rules(values)
        values[a.getSymbol()] = ev(compile_math(a.getMath()), values)
    apply_rules(values)
    dynamic = [s.getId() for s in species if not s.getBoundaryCondition() and not s.getConstant()]
    compartment_of = {s.getId(): s.getCompartment() for s in species}
    index = {name: i for i, name in enumerate(dynamic)}
    reactions = []
    for k in range(model.getNumReactions()):
        r = model.getReaction(k)
        changes = {}
        for ref, sign in [(r.getReactant(i), -1) for i in range(r.getNumReactants())] + \
                         [(r.getProduct(i), 1) for i in range(r.getNumProducts())]:
            if ref.getSpecies() in index:
                changes[ref.getSpecies()] = changes.get(ref.getSpecies(), 0.0) + sign * ref.getStoichiometry()
        reactions.append((compile_math(r.getKineticLaw().getMath()), changes))

    def state_values(t, y):
        v = dict(values)
        for name, i in index.items():
            v[name] = y[i]
        v["time"] = t
        apply_rules(v)
        return v

    def rhs(t, y):
        v = state_values(t, y)
        dy = np.zeros(len(dynamic))
        for code, changes in reactions:
            rate = ev(code, v)
            for name, c in changes.items():
                dy[index[name]] += c * rate / v[compartment_of[name]]
        return dy

    timed, triggered = [], []
    for k in range(model.getNumEvents()):
        e = model.getEvent(k)
        math_ast = e.getTrigger().getMath()
        priority = e.getPriority().getMath().getValue() if e.isSetPriority() else 0
        assignments = [(e.getEventAssignment(i).getVariable(), compile_math(e.getEventAssignment(i).getMath()))
                       for i in range(e.getNumEventAssignments())]
        left = math_ast.getChild(0)
        if math_ast.getType() == libsbml.AST_RELATIONAL_GEQ and left.getType() == libsbml.AST_NAME_TIME:
            timed.append((math_ast.getChild(1).getValue(), -priority, assignments))
        elif math_ast.getType() == libsbml.AST_RELATIONAL_GT:
            # f > 0 with the right-hand side 0.
            triggered.append((compile_math(left), -priority, assignments))
        else:
            sys.exit("unsupported trigger: " + libsbml.formulaToL3String(math_ast))
    timed.sort(key=lambda e: (e[0], e[1]))

    def fire(assignments, t, y):
        v = state_values(t, y)
        new = [(var, ev(code, v)) for var, code in assignments]
        for var, value in new:
            if var in index:
                y[index[var]] = value
            else:
                values[var] = value
        return y

    y = np.array([values[name] for name in dynamic], dtype=float)
    t = 0.0
    rows = []
    fired_times = []

    def record(s, state):
        v = state_values(s, state)
        rows.append([s] + [state[index[n]] for n in dynamic] + [v[c] for c in compartments])

    def trigger_functions():
        fns = []
        for code, _, _ in triggered:
            def f(s, state, code=code):
                return ev(code, state_values(s, state))
            f.terminal = True
            f.direction = 1
            fns.append(f)
        return fns

    boundaries = sorted({e[0] for e in timed if e[0] <= end} | {end})
    for k, e in enumerate(timed):
        if e[0] <= 0.0:
            y = fire(e[2], 0.0, y)
    pending = [b for b in boundaries if b > 0.0]
    want = sorted(times)
    wi = 0
    while wi < len(want) and want[wi] <= 0.0:
        record(want[wi], y)
        wi += 1
    for b in pending:
        while t < b:
            sol = solve_ivp(rhs, (t, b), y, method="Radau", rtol=1e-11, atol=1e-14,
                            dense_output=True, events=trigger_functions() or None)
            if not sol.success:
                sys.exit("solve_ivp failed: " + sol.message)
            hit = None
            if triggered:
                for k, te in enumerate(sol.t_events):
                    if len(te) and (hit is None or te[0] < hit[0]):
                        hit = (te[0], k)
            stop = hit[0] if hit else b
            while wi < len(want) and want[wi] < stop:
                record(want[wi], sol.sol(want[wi]))
                wi += 1
            y, t = sol.sol(stop).copy(), stop
            if hit:
                fired_times.append(stop)
                y = fire(triggered[hit[1]][2], t, y)
                # Step past the root so the same crossing is not found again.
                t_next = min(b, t + 1e-9 * max(1.0, abs(t)))
                sol2 = solve_ivp(rhs, (t, t_next), y, method="Radau", rtol=1e-11, atol=1e-14)
                y, t = sol2.y[:, -1].copy(), t_next
        for e in timed:
            if e[0] == b:
                y = fire(e[2], b, y)
        while wi < len(want) and want[wi] <= b:
            record(want[wi], y)
            wi += 1
    print(",".join(["t"] + dynamic + compartments))
    for r in rows:
        print(",".join(repr(float(v)) for v in r))
    for s in fired_times:
        print(f"# fired,{float(s)!r}")


main()
