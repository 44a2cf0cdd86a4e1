#!/usr/bin/env python3
"""Writes a generated mechanism with N steps (and about N/2 species) to stdout:
a mix of first- and second-order, reversible and irreversible mass-action
steps, each species touched, for front-end benchmarks."""
import random
import sys

n_steps = int(sys.argv[1]) if len(sys.argv) > 1 else 10000
seed = int(sys.argv[2]) if len(sys.argv) > 2 else 1
rng = random.Random(seed)
n_species = max(2, n_steps // 2)
out = ["mechanism generated \"benchmark network\"", "units concentration uM, time s", ""]
for i in range(n_species):
    out.append(f"species X{i} = {rng.randint(0, 9)} uM")
out.append("")
out.append("param k1 = 1.5 /s")
out.append("param k2 = 0.3 /uM/s")
out.append("param kr = 2 /s")
out.append("")
for j in range(n_steps):
    a = j % n_species
    b = (a + 1 + rng.randrange(n_species - 1)) % n_species
    c = rng.randrange(n_species)
    kind = rng.randrange(3)
    if kind == 0:
        out.append(f"step r{j} X{a} -> X{b} with k1")
    elif kind == 1:
        out.append(f"step r{j} X{a} <=> X{b} with k1, kr")
    else:
        out.append(f"step r{j} X{a} + X{c} -> X{b} + X{c} with k2")
print("\n".join(out))
