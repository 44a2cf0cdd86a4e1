"""Generates a large, seeded mechanism for the `analyze` benchmark.

Usage: network_gen.py SPECIES STEPS [SEED] > big.mech

The network is shaped like a metabolic model: a third of the species are
metabolites, the rest are enzymes, each with a free form and two complexes
catalysing two conversions by Michaelis-Menten steps (bind <=>, then turn
over ->), so every enzyme total is conserved. The remaining steps join
metabolites at random (A -> B, A + B <=> C, 2 A -> B, A <=> B + C), with a
few sources and sinks; every column has 2 to 4 entries.
"""

import random
import sys


def generate(nspecies, nsteps, seed=1):
    rng = random.Random(seed)
    nenz = nspecies * 2 // 9  # three forms each: about two thirds of the species
    nmet = nspecies - 3 * nenz
    lines = [f"mechanism generated_{nspecies}_{nsteps} \"generated for the analyze benchmark\"", "units concentration uM, time s"]
    mets = [f"M{i}" for i in range(nmet)]
    for m in mets:
        if rng.random() < 0.5:
            lines.append(f"species {m} = {rng.randint(1, 100)} uM")
        else:
            lines.append(f"species {m}")
    steps = []
    for k in range(nenz):
        lines.append(f"species E{k} = {rng.randint(1, 10) / 100} uM, E{k}a, E{k}b")
        for form in ("a", "b"):
            if len(steps) + 2 > nsteps:
                break
            s, p = rng.sample(mets, 2)
            steps.append(f"E{k} + {s} <=> E{k}{form} with 10, 1")
            steps.append(f"E{k}{form} -> E{k} + {p} with 5")
    while len(steps) < nsteps:
        kind = rng.random()
        if kind < 0.02:
            steps.append(f"0 -> {rng.choice(mets)} with 0.1")
        elif kind < 0.04:
            steps.append(f"{rng.choice(mets)} -> 0 with 0.1")
        elif kind < 0.45:
            a, b = rng.sample(mets, 2)
            steps.append(f"{a} -> {b} with 1")
        elif kind < 0.75:
            a, b, c = rng.sample(mets, 3)
            steps.append(f"{a} + {b} <=> {c} with 1, 0.5")
        elif kind < 0.85:
            a, b = rng.sample(mets, 2)
            steps.append(f"2 {a} -> {b} with 1")
        else:
            a, b, c = rng.sample(mets, 3)
            steps.append(f"{a} <=> {b} + {c} with 1, 0.5")
    for j, s in enumerate(steps):
        lines.append(f"step r{j} {s}")
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    nspecies = int(sys.argv[1])
    nsteps = int(sys.argv[2])
    seed = int(sys.argv[3]) if len(sys.argv) > 3 else 1
    sys.stdout.write(generate(nspecies, nsteps, seed))
