"""Cross-check of `ratewright derive` with SymPy.

Reads a JSON description of a mechanism (forms, steps with their rate
constants, the steps at rapid equilibrium, the total, the species whose rate
is derived) and the derived rate. Builds the same linear steady-state system
independently (quasi-steady state for every form; for rapid-equilibrium
steps the equilibrium condition of each step plus the steady state of each
group's sum, as Cha 1968 sets it up), solves it with SymPy, and prints JSON:
{"ok": bool, "difference": str, "seconds": {...}}.

Usage: derive_sympy.py SPEC.json [--method cramer|linsolve|both]
"""

import json
import re
import sys
import time

import sympy as sp
from sympy.parsing.sympy_parser import parse_expr


def main():
    spec = json.load(open(sys.argv[1]))
    method = "cramer"
    if "--method" in sys.argv:
        method = sys.argv[sys.argv.index("--method") + 1]

    names = set()
    texts = [spec["derived"], spec["total"]]
    for st in spec["steps"]:
        texts += [st["kf"], st.get("kr") or ""]
        names.update(st["reactants"].keys())
        names.update(st["products"].keys())
    for t in texts:
        names.update(re.findall(r"[A-Za-z_][A-Za-z_0-9]*", t))
    syms = {n: sp.Symbol(n, positive=True) for n in names}

    def ex(text):
        return parse_expr(text.replace("^", "**"), local_dict=syms)

    forms = [syms[f] for f in spec["forms"]]
    form_set = set(spec["forms"])

    def rate(st):
        fwd = ex(st["kf"])
        for n, c in st["reactants"].items():
            fwd *= syms[n] ** c
        v = fwd
        if st.get("kr"):
            rev = ex(st["kr"])
            for n, c in st["products"].items():
                rev *= syms[n] ** c
            v -= rev
        return v

    def net(st, name):
        return st["products"].get(name, 0) - st["reactants"].get(name, 0)

    rates = [rate(st) for st in spec["steps"]]
    fast = [i for i, st in enumerate(spec["steps"]) if st["name"] in spec["fast"]]

    # Groups of forms joined by fast steps; a fast step closing a cycle is
    # left out (its equilibrium follows from the others under detailed balance).
    parent = {f: f for f in spec["forms"]}

    def find(x):
        while parent[x] != x:
            x = parent[x]
        return x

    equations = []
    fast_cycle = False
    for i in fast:
        st = spec["steps"][i]
        a = [n for n in st["reactants"] if n in form_set][0]
        b = [n for n in st["products"] if n in form_set][0]
        ra, rb = find(a), find(b)
        if ra == rb:
            fast_cycle = True
            continue
        parent[rb] = ra
        equations.append(rates[i])
    groups = {}
    for f in spec["forms"]:
        groups.setdefault(find(f), []).append(f)
    group_list = list(groups.values())
    for g in group_list[1:]:
        # Fast steps inside a group cancel in the group's sum.
        equations.append(sum(net(st, f) * rates[j] for j, st in enumerate(spec["steps"]) for f in g))
    equations.append(sum(forms) - ex(spec["total"]))

    seconds = {}
    solutions = {}
    if method in ("cramer", "both"):
        t0 = time.perf_counter()
        A = sp.Matrix([[sp.diff(e, x) for x in forms] for e in equations])
        b = -sp.Matrix([e.subs({x: 0 for x in forms}) for e in equations])
        det = A.det(method="berkowitz")
        sol = {}
        for k, x in enumerate(forms):
            Ak = A.copy()
            Ak[:, k] = b
            sol[x] = sp.cancel(Ak.det(method="berkowitz") / det)
        seconds["cramer"] = time.perf_counter() - t0
        solutions["cramer"] = sol
    if method in ("linsolve", "both"):
        t0 = time.perf_counter()
        (tup,) = sp.linsolve(equations, forms)
        sol = {x: sp.cancel(v) for x, v in zip(forms, tup)}
        seconds["linsolve"] = time.perf_counter() - t0
        solutions["linsolve"] = sol

    if fast and not fast_cycle:
        # (A cycle of fast steps has a limit of its own unless its
        # constants obey detailed balance; those cases keep Cha's setup.)
        # A rapid equilibrium is the limit of the steady state as its steps
        # grow infinitely fast (common practice; the justification of Cha
        # 1968's method). Here every form is at steady state, the fast
        # steps' constants are divided by eps, and eps -> 0: the rate of
        # the product then comes from all steps, the fast ones included,
        # independently of how ratewright reads it off the slow steps.
        t0 = time.perf_counter()
        eps = sp.Symbol("eps_fast", positive=True)
        scaled = [r / eps if j in fast else r for j, r in enumerate(rates)]
        balances = [
            sum(net(st, f) * scaled[j] for j, st in enumerate(spec["steps"]))
            for f in spec["forms"][1:]
        ]
        balances.append(sum(forms) - ex(spec["total"]))
        (tup,) = sp.linsolve(balances, forms)
        sol = dict(zip(forms, tup))
        flux = sum(net(st, spec["rate_species"]) * scaled[j] for j, st in enumerate(spec["steps"])) / spec["nu"]
        num, den = sp.fraction(sp.cancel(sp.together(flux.subs(sol))))
        pn, pd = sp.Poly(num, eps), sp.Poly(den, eps)
        k = min(m[0] for m in pd.monoms())
        lowest_num = min(m[0] for m in pn.monoms()) if not pn.is_zero else k
        if lowest_num < k:
            limit = sp.oo
        else:
            limit = sp.cancel(pn.coeff_monomial(eps**k) / pd.coeff_monomial(eps**k))
        seconds["limit"] = time.perf_counter() - t0
        diff = sp.cancel(sp.together(limit - ex(spec["derived"])))
        print(json.dumps({"ok": diff == 0, "difference": "" if diff == 0 else f"limit: {diff}", "seconds": seconds}))
        return

    ok = True
    differences = []
    for name, sol in solutions.items():
        flux = sum(net(st, spec["rate_species"]) * rates[j] for j, st in enumerate(spec["steps"])) / spec["nu"]
        diff = sp.cancel(sp.together(flux.subs(sol) - ex(spec["derived"])))
        if diff != 0:
            ok = False
            differences.append(f"{name}: {diff}")
    print(json.dumps({"ok": ok, "difference": "; ".join(differences), "seconds": seconds}))


if __name__ == "__main__":
    main()
