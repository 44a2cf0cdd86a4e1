"""Fits progress curves of the four-step scheme of tests/fit.rs with SciPy:
least_squares (method "lm", 3-point finite-difference Jacobian) around
solve_ivp (Radau, rtol 1e-10, atol 1e-12), params on a log scale as
ratewright fits them. Standard errors from sigma^2 (J^T J)^-1 in the
params themselves.

Input (a JSON file): {"series": [{"A0": .., "t": [..], "B": [..], "D": [..]}],
"start": {"k1": .., "k2": .., "k3": .., "k4": ..}, "k5": ..}.
Output: {"params": {name: value}, "stderr": {name: se}, "ssr": ..,
"seconds": the fit's time in process}.
"""

import json
import sys
import time

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares

NAMES = ["k1", "k2", "k3", "k4"]


def main():
    spec = json.load(open(sys.argv[1]))
    k5 = spec["k5"]

    def rhs(t, y, k1, k2, k3, k4):
        a, b, c, d, f = y
        return [-k1 * a, k1 * a - k2 * b, k2 * b - k3 * c + k4 * d, k3 * c - k4 * d - k5 * d, k5 * d]

    def residuals(logk):
        k = np.exp(logk)
        out = []
        for s in spec["series"]:
            t = np.array(s["t"])
            sol = solve_ivp(rhs, (0.0, t[-1]), [s["A0"], 0, 0, 0, 0], method="Radau",
                            t_eval=t, rtol=1e-10, atol=1e-12, args=tuple(k))
            out.extend(sol.y[1] - np.array(s["B"]))
            out.extend(sol.y[3] - np.array(s["D"]))
        return np.array(out)

    x0 = np.log([spec["start"][n] for n in NAMES])
    started = time.perf_counter()
    fit = least_squares(residuals, x0, method="lm", jac="3-point", xtol=1e-15, ftol=1e-15, gtol=1e-15)
    seconds = time.perf_counter() - started
    k = np.exp(fit.x)
    jac = fit.jac / k  # d r / d k = (d r / d ln k) / k
    n, p = jac.shape
    ssr = float(np.sum(fit.fun ** 2))
    cov = ssr / (n - p) * np.linalg.inv(jac.T @ jac)
    print(json.dumps({
        "params": dict(zip(NAMES, map(float, k))),
        "stderr": dict(zip(NAMES, map(float, np.sqrt(np.diag(cov))))),
        "ssr": ssr,
        "seconds": seconds,
    }))


if __name__ == "__main__":
    main()
