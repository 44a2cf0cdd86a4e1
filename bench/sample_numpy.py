"""Gillespie's direct method in Python with NumPy, on the 4-step scheme of
bench/sample_bench.rs (E + S <=> ES -> E + P, P -> Q, Q -> S in 1 pL), for
the side-by-side ratio in docs/benchmarks.md.

Usage: sample_numpy.py EVENTS   (prints `numpy_events N` and
`numpy_events_per_second R`)

The loop is the textbook one (Gillespie 1977, J. Phys. Chem. 81:2340): the
propensities recomputed from the counts, an exponential waiting time and a
search of the cumulative sums; random numbers are drawn from NumPy in
blocks, which is the fast way to use it from Python.
"""
import sys
import time

import numpy as np

AVOGADRO = 6.02214076e23
OMEGA = 1e-6 * AVOGADRO * 1e-12  # molecules per uM in 1 pL

# Counts and stochastic constants as sample_bench builds them.
x = np.array([round(0.01 * OMEGA), round(1.0 * OMEGA), 0, 0, 0], dtype=np.int64)  # E, S, ES, P, Q
c = np.array([10.0 / OMEGA, 5.0, 20.0, 2.0, 2.0])  # bind, unbind, cat, relax, back
change = np.array([
    [-1, -1, 1, 0, 0],
    [1, 1, -1, 0, 0],
    [1, 0, -1, 1, 0],
    [0, 0, 0, -1, 1],
    [0, 1, 0, 0, -1],
], dtype=np.int64)


def propensities(x):
    e, s, es, p, q = x
    return np.array([c[0] * e * s, c[1] * es, c[2] * es, c[3] * p, c[4] * q])


def main():
    events = int(float(sys.argv[1])) if len(sys.argv) > 1 else 200_000
    rng = np.random.default_rng(1)
    block = 65536
    global x
    t = 0.0
    start = time.perf_counter()
    done = 0
    while done < events:
        exp = rng.standard_exponential(block)
        u = rng.random(block)
        for k in range(min(block, events - done)):
            a = propensities(x)
            cum = np.cumsum(a)
            a0 = cum[-1]
            t += exp[k] / a0
            j = int(np.searchsorted(cum, u[k] * a0, side="right"))
            x += change[j]
            done += 1
    secs = time.perf_counter() - start
    print(f"numpy_events {done}")
    print(f"numpy_events_per_second {done / secs:.4e}")


main()
