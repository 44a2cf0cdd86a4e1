"""Forward sensitivities of the generated 1,000-species network
(bench/sim_bench.rs network DIR) to kf0..kf9 with SciPy, side by side with
`sim_bench network-sensitivity`: solve_ivp BDF on the augmented system
(y, S_1..S_10), S_k' = J S_k + df/dkf_k, with a sparse block-diagonal
Jacobian (J on each block; the coupling dJ/dy S is left to Newton), at the
tool's tolerances (rtol 1e-6, atol 1e-10), and a plain run for the ratio.

  python3 bench/sensitivity_scipy.py DIR
prints seconds of both runs, their ratio, and the largest difference of
dX_i/dkf_k (i, k < 10) from DIR/sensitivities.txt relative to its scale.
"""
import json
import sys
import time

import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp

d = sys.argv[1]
spec = json.load(open(f"{d}/network.json"))
n, steps = spec["n"], spec["steps"]
m = len(steps)
P = 10
r1 = np.array([s["reactants"][0] for s in steps])
r2 = np.array([s["reactants"][1] if len(s["reactants"]) == 2 else -1 for s in steps])
p1 = np.array([s["products"][0] for s in steps])
p2 = np.array([s["products"][1] if len(s["products"]) == 2 else -1 for s in steps])
kf = np.array([s["kf"] for s in steps])
kr = np.array([s["kr"] for s in steps])
two_r, two_p = r2 >= 0, p2 >= 0
rows, cols, vals = [], [], []
for j, s in enumerate(steps):
    for i in s["reactants"]:
        rows.append(i); cols.append(j); vals.append(-1.0)
    for i in s["products"]:
        rows.append(i); cols.append(j); vals.append(1.0)
N = sp.csr_matrix((vals, (rows, cols)), shape=(n, m))
r2s, p2s = np.where(two_r, r2, 0), np.where(two_p, p2, 0)
steps_idx = np.arange(m)
dr_rows = np.concatenate([steps_idx, steps_idx[two_r], steps_idx, steps_idx[two_p]])
dr_cols = np.concatenate([r1, r2[two_r], p1, p2[two_p]])
N_first = N[:, :P].toarray()


def fluxes(y):
    return kf * y[r1] * np.where(two_r, y[r2s], 1.0) - kr * y[p1] * np.where(two_p, y[p2s], 1.0)


def jac_y(y):
    d_r1 = kf * np.where(two_r, y[r2s], 1.0)
    d_r2 = (kf * y[r1])[two_r]
    d_p1 = -kr * np.where(two_p, y[p2s], 1.0)
    d_p2 = (-kr * y[p1])[two_p]
    dr = sp.csr_matrix((np.concatenate([d_r1, d_r2, d_p1, d_p2]), (dr_rows, dr_cols)), shape=(m, n))
    return (N @ dr).tocsr()


def augmented(t, u):
    y = u[:n]
    S = u[n:].reshape(P, n)
    J = jac_y(y)
    # d rate_k / d kf_k = product of step k's reactants.
    forward = y[r1[:P]] * np.where(two_r[:P], y[r2s[:P]], 1.0)
    dS = (J @ S.T).T + (N_first * forward).T
    return np.concatenate([N @ fluxes(y), dS.ravel()])


def augmented_jac(t, u):
    J = jac_y(u[:n])
    return sp.block_diag([J] * (P + 1), format="csc")


y0 = np.array(spec["initial"])
until = spec["until"]
t0 = time.perf_counter()
plain = solve_ivp(lambda t, y: N @ fluxes(y), (0.0, until), y0, method="BDF",
                  jac=lambda t, y: jac_y(y).tocsc(), rtol=1e-6, atol=1e-10, t_eval=[until])
plain_seconds = time.perf_counter() - t0
assert plain.success, plain.message
t0 = time.perf_counter()
sol = solve_ivp(augmented, (0.0, until), np.concatenate([y0, np.zeros(P * n)]), method="BDF",
                jac=augmented_jac, rtol=1e-6, atol=1e-10, t_eval=[until])
sens_seconds = time.perf_counter() - t0
assert sol.success, sol.message
S = sol.y[n:, -1].reshape(P, n)
ours = np.array([float(x) for x in open(f"{d}/sensitivities.txt").read().split()]).reshape(10, P)
theirs = S[:, :10].T
scale = np.max(np.abs(theirs))
print(f"scipy_plain_seconds {plain_seconds:.6e}")
print(f"scipy_sensitivity_seconds {sens_seconds:.6e}")
print(f"scipy_sensitivity_over_plain {sens_seconds / plain_seconds:.3f}")
print(f"sensitivity_difference_vs_scipy {np.max(np.abs(ours - theirs)) / scale:.3e} (relative to the largest, {scale:.3e})")
