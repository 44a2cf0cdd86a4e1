"""Cross-check of `ratewright analyze --format json` with SymPy (exact).

Usage: network_crosscheck.py ANALYSIS.json[:TRUTH.json] ...

For each analysis (and, where given, the network as its generator wrote it:
species, and per step the reactant and product coefficients), checks with
exact rational arithmetic in SymPy:
  - the stoichiometric matrix equals the one built from the truth file;
  - the rank equals SymPy's rank of N;
  - every conservation law y satisfies y^T N = 0, has integer coefficients
    with gcd 1, and the laws are linearly independent, with
    number of laws = species - rank (so they are a basis of the left null space);
  - every found non-negative law is an extreme ray of the cone
    { y >= 0 : y^T N = 0 } (N restricted to its species has rank one less
    than their number), and where the analysis claims the non-negative laws
    span ("spans"), every law is non-negative;
  - the link matrix L and N_R satisfy N = L * N_R, with the identity on the
    independent species;
  - from the truth file: complexes, linkage classes and deficiency, computed
    here independently (union-find over the reaction graph, SymPy rank).
Prints one line per file and exits 1 if any check fails.
"""

import json
import math
import sys
from fractions import Fraction

import sympy


def rational(v):
    if isinstance(v, str):
        return sympy.Rational(v)
    return sympy.Rational(v)


def matrix(rows, ncols):
    if not rows:
        return sympy.zeros(0, ncols)
    return sympy.Matrix([[rational(v) for v in r] for r in rows])


def check(analysis_path, truth_path):
    errors = []
    with open(analysis_path) as f:
        a = json.load(f)
    species = a["species"]
    steps = a["steps"]
    n, m = len(species), len(steps)
    N = matrix(a["stoichiometry"], m)
    if N.shape != (n, m):
        errors.append(f"stoichiometry has shape {N.shape}, expected {(n, m)}")
        return errors
    truth = None
    if truth_path:
        with open(truth_path) as f:
            truth = json.load(f)
        T = sympy.zeros(n, m)
        for j, (lhs, rhs) in enumerate(truth["steps"]):
            for name, c in lhs.items():
                if name in species:
                    T[species.index(name), j] -= rational(c)
            for name, c in rhs.items():
                if name in species:
                    T[species.index(name), j] += rational(c)
        if T != N:
            errors.append("stoichiometric matrix differs from the generator's")
    rank = N.rank() if n and m else 0
    if rank != a["rank"]:
        errors.append(f"rank {a['rank']}, SymPy finds {rank}")
    laws = a["conservation_laws"]
    if len(laws) != n - rank:
        errors.append(f"{len(laws)} laws, expected species - rank = {n - rank}")
    Y = sympy.zeros(len(laws), n)
    for k, law in enumerate(laws):
        coefs = law["coefficients"]
        values = [int(v) for v in coefs.values()]
        if any(v == 0 for v in values):
            errors.append(f"law {law['name']} lists a zero coefficient")
        if values and math.gcd(*values) != 1:
            errors.append(f"law {law['name']} coefficients have gcd {math.gcd(*values)}")
        for name, v in coefs.items():
            Y[k, species.index(name)] = int(v)
    if laws:
        if not (Y * N).is_zero_matrix:
            errors.append("some law y has y^T N != 0")
        if Y.rank() != len(laws):
            errors.append("the laws are not linearly independent")
    # A found non-negative law must be an extreme ray of {y >= 0 : y^T N = 0}:
    # the laws supported within its support form a line, i.e.
    # rank(N restricted to its species) = support size - 1.
    for law in laws:
        if law.get("kind") == "nonnegative":
            rows = sorted(species.index(name) for name in law["coefficients"])
            sub = N.extract(rows, list(range(m))) if m else sympy.zeros(len(rows), 0)
            sub_rank = sub.rank() if m else 0
            if sub_rank != len(rows) - 1:
                errors.append(f"law {law['name']} is not an extreme ray (rank {sub_rank} on {len(rows)} species)")
    if a["nonnegative_basis"] == "spans":
        if any(int(v) < 0 for law in laws for v in law["coefficients"].values()):
            errors.append("claims a non-negative basis but a law has a negative coefficient")
    # Reder's link matrix.
    independent = a["independent"]
    dependent = a["dependent"]
    if sorted(independent + dependent) != sorted(species) or len(dependent) != len(laws):
        errors.append("independent and dependent species do not partition the species, one dependent per law")
    L = matrix(a["link_matrix"], len(independent))
    NR = matrix(a["reduced_stoichiometry"], m)
    if L.shape == (n, len(independent)) and NR.shape == (len(independent), m):
        if not (L * NR - N).is_zero_matrix:
            errors.append("N != L * N_R")
        for p, name in enumerate(independent):
            row = species.index(name)
            expect = [1 if q == p else 0 for q in range(len(independent))]
            if list(L.row(row)) != expect:
                errors.append(f"link matrix row of independent {name} is not a unit row")
        for i, name in enumerate(independent):
            if list(NR.row(i)) != list(N.row(species.index(name))):
                errors.append(f"N_R row of {name} is not N's row")
    else:
        errors.append(f"link matrix {L.shape} or N_R {NR.shape} has the wrong shape")
    if truth is not None:
        # Complexes over dynamic species only (fixed species are constants).
        complexes = []
        edges = []
        for lhs, rhs in truth["steps"]:
            ends = []
            for side in (lhs, rhs):
                key = tuple(sorted((s, str(Fraction(str(c)))) for s, c in side.items() if s in species))
                if key not in complexes:
                    complexes.append(key)
                ends.append(complexes.index(key))
            edges.append(tuple(ends))
        parent = list(range(len(complexes)))

        def find(x):
            while parent[x] != x:
                x = parent[x]
            return x

        for u, v in edges:
            parent[find(u)] = find(v)
        classes = len({find(c) for c in range(len(complexes))})
        deficiency = len(complexes) - classes - rank
        if len(a["complexes"]) != len(complexes):
            errors.append(f"{len(a['complexes'])} complexes, expected {len(complexes)}")
        if len(a["linkage_classes"]) != classes:
            errors.append(f"{len(a['linkage_classes'])} linkage classes, expected {classes}")
        if a["deficiency"] != deficiency:
            errors.append(f"deficiency {a['deficiency']}, expected {deficiency}")
    return errors


def main():
    failed = 0
    for arg in sys.argv[1:]:
        analysis_path, _, truth_path = arg.partition(":")
        errors = check(analysis_path, truth_path or None)
        if errors:
            failed += 1
            print(f"FAIL {analysis_path}: " + "; ".join(errors))
        else:
            print(f"ok {analysis_path}")
    print(f"{len(sys.argv) - 1 - failed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
