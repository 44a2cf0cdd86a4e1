"""The generated 1,000-species network (bench/sim_bench.rs network DIR) with
SciPy solve_ivp BDF and a sparse analytic Jacobian (scipy.sparse CSC),
vectorised with NumPy, at the tolerances of the tool's run (rtol 1e-6,
atol 1e-10).

  python3 bench/sim_network_scipy.py DIR   prints median-free single-run seconds
                                           and the error against DIR/reference.txt
"""
import json
import sys
import time

import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp

d = sys.argv[1]
spec = json.load(open(f"{d}/network.json"))
n = spec["n"]
steps = spec["steps"]
m = len(steps)
# Forward and reverse mass-action terms: rate_j = kf_j * prod(reactants) - kr_j * prod(products).
r1 = np.array([s["reactants"][0] for s in steps])
r2 = np.array([s["reactants"][1] if len(s["reactants"]) == 2 else -1 for s in steps])
p1 = np.array([s["products"][0] for s in steps])
p2 = np.array([s["products"][1] if len(s["products"]) == 2 else -1 for s in steps])
kf = np.array([s["kf"] for s in steps])
kr = np.array([s["kr"] for s in steps])
two_r = r2 >= 0
two_p = p2 >= 0
rows, cols, vals = [], [], []
for j, s in enumerate(steps):
    for i in s["reactants"]:
        rows.append(i); cols.append(j); vals.append(-1.0)
    for i in s["products"]:
        rows.append(i); cols.append(j); vals.append(1.0)
N = sp.csr_matrix((vals, (rows, cols)), shape=(n, m))
r2s = np.where(two_r, r2, 0)
p2s = np.where(two_p, p2, 0)


def fluxes(y):
    fwd = kf * y[r1] * np.where(two_r, y[r2s], 1.0)
    rev = kr * y[p1] * np.where(two_p, y[p2s], 1.0)
    return fwd - rev


def f(t, y):
    return N @ fluxes(y)


# d rate_j / d y_i: the pattern of the flux Jacobian is fixed; values change.
steps_idx = np.arange(m)
dr_rows = np.concatenate([steps_idx, steps_idx[two_r], steps_idx, steps_idx[two_p]])
dr_cols = np.concatenate([r1, r2[two_r], p1, p2[two_p]])


def jac(t, y):
    d_r1 = kf * np.where(two_r, y[r2s], 1.0)
    d_r2 = (kf * y[r1])[two_r]
    d_p1 = -kr * np.where(two_p, y[p2s], 1.0)
    d_p2 = (-kr * y[p1])[two_p]
    dr = sp.csr_matrix((np.concatenate([d_r1, d_r2, d_p1, d_p2]), (dr_rows, dr_cols)), shape=(m, n))
    return (N @ dr).tocsc()


y0 = np.array(spec["initial"])
t0 = time.perf_counter()
sol = solve_ivp(f, (0.0, spec["until"]), y0, method="BDF", jac=jac, rtol=1e-6, atol=1e-10, t_eval=[spec["until"]])
elapsed = time.perf_counter() - t0
assert sol.success, sol.message
ref = np.array([float(x) for x in open(f"{d}/reference.txt").read().split()])
err = np.max(np.abs(sol.y[:, -1] - ref) / np.maximum(np.abs(ref), 1e-6))
print(f"scipy_network_bdf_seconds {elapsed:.6e}")
print(f"scipy_network_bdf_error {err:.3e}")
