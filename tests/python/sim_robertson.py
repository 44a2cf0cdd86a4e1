"""Robertson (1966) with SciPy Radau at rtol 1e-12: the cross-check of the
reference values quoted from memory in tests/sim.rs (Bari IVP test set,
Mazzia & Magherini; Hairer & Wanner, Solving ODEs II).
Prints y1,y2,y3 at t = 40 and t = 1e11, one line each."""
import numpy as np
from scipy.integrate import solve_ivp


def f(t, y):
    a, b, c = y
    return [-0.04 * a + 1e4 * b * c, 0.04 * a - 1e4 * b * c - 3e7 * b * b, 3e7 * b * b]


def jac(t, y):
    a, b, c = y
    return [[-0.04, 1e4 * c, 1e4 * b], [0.04, -1e4 * c - 6e7 * b, -1e4 * b], [0.0, 6e7 * b, 0.0]]


sol = solve_ivp(f, (0.0, 1e11), [1.0, 0.0, 0.0], method="Radau", jac=jac, rtol=1e-12,
                atol=[1e-20, 1e-24, 1e-20], t_eval=[40.0, 1e11])
assert sol.success, sol.message
for k in range(2):
    print(",".join(repr(float(v)) for v in sol.y[:, k]))
