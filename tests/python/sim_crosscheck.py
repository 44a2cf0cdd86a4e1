"""Reference time courses from SciPy's solve_ivp (Radau) for the simulation
cross-check in tests/sim.rs.

Input: a JSON file written by the Rust test with the model's fluxes as
Python expressions over y[i] (species), P[i] (params), F[i] (fixed species),
T[i] (totals) and t; the stoichiometry; events; output times; tolerances.
Output (stdout): CSV with header t,<species>,<observables>, one row per
output time, the same shape as `ratewright run -o x.csv`.

Events follow the same protocol semantics as the tool documents: at an
event time the integration stops, the species changes, totals are
recomputed from the species, and the integration restarts; an output at the
event time holds the state after the event.
"""
import json
import math
import re
import sys

import numpy as np
from scipy.integrate import solve_ivp


def main():
    spec = json.load(open(sys.argv[1]))
    n = len(spec["species"])
    ns = {"np": np, "math": math, "pi": math.pi}
    for name in ["exp", "log", "log10", "sqrt", "fabs", "pow"]:
        ns[name] = getattr(math, name)
    ns.update({"abs": abs, "min": min, "max": max, "ln": math.log})
    fluxes = eval("lambda t, y, P, F, T: [" + ", ".join(spec["fluxes"]) + "]", ns)
    observables = eval("lambda t, y, P, F, T: [" + ", ".join(spec["observables"]) + "]", ns)
    P = spec["params"]
    F = spec["fixed"]
    stoich = spec["stoichiometry"]  # per step: [[species, coefficient], ...]

    def totals_of(y):
        return [sum(c * y[i] for i, c in tot) for tot in spec["totals"]]

    # The stoichiometry as a matrix, and the Jacobian's pattern (species i
    # changes with species k when a step that changes i has a flux that reads
    # y[k]) so that SciPy's finite differences need few evaluations on
    # large networks.
    N = np.zeros((n, len(stoich)))
    for j, changes in enumerate(stoich):
        for i, c in changes:
            N[i, j] += c
    reads = np.zeros((len(stoich), n))
    for j, flux in enumerate(spec["fluxes"]):
        for k in re.findall(r"\by\[(\d+)\]", flux):
            reads[j, int(k)] = 1.0
    pattern = ((N != 0).astype(float) @ reads + np.eye(n)) != 0

    def rhs(t, y, T):
        return N @ np.asarray(fluxes(t, y, P, F, T), dtype=float)

    times = spec["times"]
    end = times[-1]
    events = sorted([e for e in spec["events"] if e["time"] <= end], key=lambda e: e["time"])
    y = np.array(spec["initial"], dtype=float)

    def apply(e, y):
        i = e["species"]
        if e["kind"] == "add":
            y[i] += e["amount"]
        elif e["kind"] == "remove":
            y[i] = max(y[i] - e["amount"], 0.0)
        else:
            y[i] = e["amount"]

    k = 0
    while k < len(events) and events[k]["time"] <= 0.0:
        apply(events[k], y)
        k += 1
    rows = []
    t0 = 0.0
    while True:
        last = k >= len(events)
        t1 = end if last else events[k]["time"]
        T = totals_of(y)
        want = [t for t in times if t >= t0 and (t <= t1 if last else t < t1)]
        if t1 > t0:
            sol = solve_ivp(lambda t, yy: rhs(t, yy, T), (t0, t1), y, method="Radau",
                            rtol=spec["rtol"], atol=spec["atol"], dense_output=True,
                            jac_sparsity=pattern)
            if not sol.success:
                sys.exit("solve_ivp failed: " + sol.message)
            for t in want:
                yt = sol.sol(t) if t > t0 else y
                rows.append([t] + list(yt) + list(observables(t, yt, P, F, T)))
            y = sol.y[:, -1].copy()
        else:
            for t in want:
                rows.append([t] + list(y) + list(observables(t, y, P, F, T)))
        if last:
            break
        while k < len(events) and events[k]["time"] <= t1:
            apply(events[k], y)
            k += 1
        t0 = t1
    print(",".join(["t"] + spec["species"] + spec["observable_names"]))
    for r in rows:
        print(",".join(repr(float(v)) for v in r))


main()
