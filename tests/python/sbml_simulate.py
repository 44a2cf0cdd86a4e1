"""Integrates an SBML file read with libSBML (the SBML reference library)
and SciPy's Radau, independently of the tool that wrote it: species in
concentrations, kinetic laws, assignment rules, and events triggered by
`time >= T`, applied by decreasing priority, each evaluated when it
executes.

Usage: sbml_simulate.py FILE.xml T1,T2,...
Prints CSV: t,<species ids in the file's order>, one row per time (a row
at an event's time holds the state after the event).
"""
import math
import sys

import libsbml
import numpy as np
from scipy.integrate import solve_ivp

NAMES = {"ln": math.log, "log": math.log, "log10": math.log10, "exp": math.exp, "sqrt": math.sqrt,
         "abs": abs, "min": min, "max": max, "pow": math.pow, "pi": math.pi}


def compile_math(ast):
    text = libsbml.formulaToL3String(ast).replace("^", "**")
    return compile(text, "<sbml>", "eval")


def main():
    doc = libsbml.readSBMLFromFile(sys.argv[1])
    model = doc.getModel()
    times = [float(t) for t in sys.argv[2].split(",")]
    values = {}
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

    def apply_rules(v):
        for _ in range(2):
            for var, code in rules:
                v[var] = eval(code, {"__builtins__": {}}, {**NAMES, **v})

    for k in range(model.getNumInitialAssignments()):
        a = model.getInitialAssignment(k)
        apply_rules(values)
        values[a.getSymbol()] = eval(compile_math(a.getMath()), {"__builtins__": {}}, {**NAMES, **values})
    apply_rules(values)
    dynamic = [s.getId() for s in species if not s.getBoundaryCondition() and not s.getConstant()]
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

    def state_values(y):
        v = dict(values)
        for name, i in index.items():
            v[name] = y[i]
        apply_rules(v)
        return v

    def rhs(t, y):
        v = state_values(y)
        v["time"] = t
        dy = np.zeros(len(dynamic))
        for code, changes in reactions:
            rate = eval(code, {"__builtins__": {}}, {**NAMES, **v})
            for name, c in changes.items():
                comp = species[[s.getId() for s in species].index(name)].getCompartment()
                dy[index[name]] += c * rate / values[comp]
        return dy

    events = []
    for k in range(model.getNumEvents()):
        e = model.getEvent(k)
        trigger = e.getTrigger().getMath()
        at = trigger.getChild(1).getValue()
        priority = e.getPriority().getMath().getValue() if e.isSetPriority() else 0
        assignments = [(e.getEventAssignment(i).getVariable(), compile_math(e.getEventAssignment(i).getMath()))
                       for i in range(e.getNumEventAssignments())]
        events.append((at, -priority, assignments))
    events.sort(key=lambda e: (e[0], e[1]))
    y = np.array([values[name] for name in dynamic], dtype=float)
    t = 0.0
    rows = []
    pending = [e for e in events if e[0] <= max(times)]
    boundaries = sorted({e[0] for e in pending} | {max(times)})

    def fire(at, y):
        for when, _, assignments in pending:
            if when != at:
                continue
            v = state_values(y)
            for var, code in assignments:
                new = eval(code, {"__builtins__": {}}, {**NAMES, **v})
                if var in index:
                    y[index[var]] = new
                else:
                    values[var] = new
        return y

    for b in boundaries:
        if b > t:
            last = b == max(times)
            want = [s for s in times if t <= s and (s < b or (last and s <= b))]
            sol = solve_ivp(rhs, (t, b), y, method="Radau", rtol=1e-11, atol=1e-14, dense_output=True)
            if not sol.success:
                sys.exit("solve_ivp failed: " + sol.message)
            for s in want:
                rows.append([s] + list(sol.sol(s) if s > t else y))
            y, t = sol.y[:, -1].copy(), b
        y = fire(b, y)
    # Times at or before the first boundary handled above; sort by time.
    rows.sort(key=lambda r: r[0])
    print(",".join(["t"] + dynamic))
    for r in rows:
        print(",".join(repr(float(v)) for v in r))


main()
