"""Robertson (1966) to t = 1e11 with SciPy solve_ivp and the analytic
Jacobian, LSODA and BDF, at the tolerances of bench/sim_bench.rs.

  python3 bench/sim_robertson_scipy.py REPS     in-process median seconds and
                                                end-state error, both methods
  python3 bench/sim_robertson_scipy.py once M   one solve with method M (for
                                                whole-process timing)
"""
import sys
import time

import numpy as np
from scipy.integrate import solve_ivp

RTOL, ATOL = 1e-8, 1e-12
# Bari IVP test set (Mazzia & Magherini), ROBER at t = 1e11 (from memory,
# cross-checked with Radau at rtol 1e-12 in tests/python/sim_robertson.py).
REF = np.array([0.2083340149701255e-7, 0.8333360770334713e-13, 0.9999999791665050])


def f(t, y):
    a, b, c = y
    return np.array([-0.04 * a + 1e4 * b * c, 0.04 * a - 1e4 * b * c - 3e7 * b * b, 3e7 * b * b])


def jac(t, y):
    a, b, c = y
    return np.array([[-0.04, 1e4 * c, 1e4 * b], [0.04, -1e4 * c - 6e7 * b, -1e4 * b], [0.0, 6e7 * b, 0.0]])


def solve(method):
    sol = solve_ivp(f, (0.0, 1e11), [1.0, 0.0, 0.0], method=method, jac=jac, rtol=RTOL, atol=ATOL, t_eval=[1e11])
    assert sol.success, sol.message
    return sol.y[:, -1]


if sys.argv[1] == "once":
    solve(sys.argv[2])
else:
    reps = int(sys.argv[1])
    for method in ["LSODA", "BDF"]:
        times = []
        for _ in range(reps):
            t0 = time.perf_counter()
            y = solve(method)
            times.append(time.perf_counter() - t0)
        err = np.max(np.abs(y - REF) / REF)
        print(f"scipy_{method.lower()}_seconds {np.median(times):.6e}")
        print(f"scipy_{method.lower()}_error {err:.3e}")
