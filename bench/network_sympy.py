"""SymPy's time for the exact core of `analyze`: the rank of N and a basis
of its left null space (the conservation laws), on the networks
bench/network_gen.py generates.

Usage: network_sympy.py [LIMIT_SECONDS] SPECIES:STEPS ...

Each size runs in a child process with a time limit (default 60 s). SymPy
works on a DomainMatrix over QQ (its fastest exact path: sparse
fraction-free elimination in Python/gmpy), doing the same exact work as
ratewright: rank of N and the null space of N^T.
"""

import multiprocessing as mp
import os
import re
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from network_gen import generate  # noqa: E402

TERM = re.compile(r"^(?:(\d+)\s+)?(\w+)$")


def stoichiometry(text):
    species = []
    steps = []
    for line in text.splitlines():
        if line.startswith("species "):
            for part in line[len("species "):].split(","):
                species.append(part.split("=")[0].strip())
        elif line.startswith("step "):
            body = line.split(" ", 2)[2].rsplit(" with ", 1)[0]
            arrow = "<=>" if "<=>" in body else "->"
            lhs, rhs = body.split(arrow)
            change = {}
            for sign, side in ((-1, lhs), (1, rhs)):
                for term in side.split("+"):
                    term = term.strip()
                    if term == "0":
                        continue
                    coef, name = TERM.match(term).groups()
                    change[name] = change.get(name, 0) + sign * int(coef or 1)
            steps.append(change)
    index = {s: i for i, s in enumerate(species)}
    return len(species), len(steps), [(index[s], j, c) for j, ch in enumerate(steps) for s, c in ch.items() if c]


def work(nspecies, nsteps, queue):
    from sympy import QQ
    from sympy.polys.matrices import DomainMatrix

    n, m, entries = stoichiometry(generate(nspecies, nsteps))
    start = time.perf_counter()
    elements = {}
    for i, j, c in entries:
        elements.setdefault(i, {})[j] = QQ(c)
    N = DomainMatrix(elements, (n, m), QQ)
    rank = N.rank()
    laws = N.transpose().nullspace()
    queue.put((time.perf_counter() - start, rank, laws.shape[0]))


def main():
    args = sys.argv[1:]
    limit = 60.0
    if args and ":" not in args[0]:
        limit = float(args.pop(0))
    print(f"| species | steps | SymPy rank + left null space | rank | laws |")
    print(f"|---|---|---|---|---|")
    for size in args:
        nspecies, nsteps = map(int, size.split(":"))
        queue = mp.Queue()
        child = mp.Process(target=work, args=(nspecies, nsteps, queue))
        child.start()
        child.join(limit)
        if child.is_alive():
            child.terminate()
            child.join()
            print(f"| {nspecies} | {nsteps} | over {limit:.0f} s (stopped) | | |", flush=True)
            continue
        seconds, rank, laws = queue.get()
        print(f"| {nspecies} | {nsteps} | {seconds:.2f} s | {rank} | {laws} |", flush=True)


if __name__ == "__main__":
    main()
