"""Reference values for tests/sample.rs, computed with SciPy.

Reads a JSON file (the path is the only argument) with a list `requests`
and prints a JSON list with one answer per request:

- {"kind": "chi2_ppf", "q": Q, "df": DF}: the Q quantile of the chi-square
  distribution with DF degrees of freedom (scipy.stats.chi2.ppf).
- {"kind": "cme", "species": [...], "initial": [...], "omega": OMEGA,
   "reactions": [{"reactants": {NAME: NU}, "products": {NAME: NU},
   "k": K}], "times": [...]}: the chemical master equation of a closed
  mass-action network, solved exactly on its finite reachable state space
  with scipy.linalg.expm of the generator. The propensity of a reaction is
  c * prod C(n_i, nu_i) with c = k * prod(nu_i!) * OMEGA^(1 - m), m the
  reaction's order (Gillespie 1977, J. Phys. Chem. 81:2340, sec. II), from
  the deterministic constant K in concentration units. Answers the
  marginal distribution of each species at each time:
  {"marginals": [[[p(count = 0), p(1), ...] per species] per time]}.
"""
import json
import math
import sys

import numpy as np
from scipy.linalg import expm
from scipy.stats import chi2


def cme(req):
    names = req["species"]
    index = {n: i for i, n in enumerate(names)}
    omega = float(req["omega"])
    reactions = []
    for r in req["reactions"]:
        nu_in = {index[n]: int(v) for n, v in r["reactants"].items()}
        nu_out = {index[n]: int(v) for n, v in r["products"].items()}
        m = sum(nu_in.values())
        c = float(r["k"]) * math.prod(math.factorial(v) for v in nu_in.values()) * omega ** (1 - m)
        change = [nu_out.get(i, 0) - nu_in.get(i, 0) for i in range(len(names))]
        reactions.append((nu_in, c, change))
    start = tuple(int(v) for v in req["initial"])
    states = {start: 0}
    order = [start]
    edges = []
    k = 0
    while k < len(order):
        x = order[k]
        for nu_in, c, change in reactions:
            a = c * math.prod(math.comb(x[i], v) for i, v in nu_in.items())
            if a <= 0.0:
                continue
            y = tuple(x[i] + change[i] for i in range(len(x)))
            if y not in states:
                if len(order) >= int(req.get("max_states", 5000)):
                    raise SystemExit("the reachable state space is larger than max_states")
                states[y] = len(order)
                order.append(y)
            edges.append((states[x], states[y], a))
        k += 1
    n = len(order)
    q = np.zeros((n, n))
    for i, j, a in edges:
        q[j, i] += a
        q[i, i] -= a
    p0 = np.zeros(n)
    p0[0] = 1.0
    out = []
    for t in req["times"]:
        p = expm(q * float(t)) @ p0
        per_species = []
        for s in range(len(names)):
            top = max(x[s] for x in order)
            marginal = [0.0] * (top + 1)
            for x, pi in zip(order, p):
                marginal[x[s]] += float(pi)
            per_species.append(marginal)
        out.append(per_species)
    return {"marginals": out, "states": n}


def main():
    with open(sys.argv[1]) as f:
        spec = json.load(f)
    answers = []
    for req in spec["requests"]:
        if req["kind"] == "chi2_ppf":
            answers.append(float(chi2.ppf(req["q"], req["df"])))
        elif req["kind"] == "cme":
            answers.append(cme(req))
        else:
            raise SystemExit(f"unknown request {req['kind']}")
    print(json.dumps(answers))


main()
