"""Cross-check of an emitted Python module (ratewright emit --target python).

Usage: emit_check_python.py MODULE.py CASES.json

CASES.json holds {"states": [[...], ...], "rhs": [[...], ...]}: states of the
emitted system and the right-hand side the Rust compiler computed there.
Checks, at every state:
  * rhs(t, y, PARAMS) equals the Rust values (relative 1e-9);
  * jac(t, y, PARAMS) equals Richardson-extrapolated central differences
    of the emitted rhs (step 1e-3 |y_j|, error O(h^4)) to 1e-6 of the
    column scale plus the round-off of the difference quotient;
  * y0() equals INITIAL in STATE order.
Prints "ok" and exits 0, or prints the first mismatches and exits 1.
"""
import importlib.util
import json
import sys

import numpy as np


def load(path):
    spec = importlib.util.spec_from_file_location("emitted_model", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def main():
    module = load(sys.argv[1])
    with open(sys.argv[2]) as f:
        cases = json.load(f)
    p = dict(module.PARAMS)
    failures = []
    y0 = module.y0(p)
    if list(y0) != [module.INITIAL[n] for n in module.STATE]:
        failures.append("y0 does not follow INITIAL")
    for y, want in zip(cases["states"], cases["rhs"]):
        y = np.array(y, dtype=float)
        got = module.rhs(0.5, y, p)
        want = np.array(want, dtype=float)
        scale = np.maximum(np.abs(want), 1e-300)
        bad = np.abs(got - want) > 1e-9 * np.maximum(scale, np.abs(want).max() * 1e-6)
        if bad.any():
            failures.append(f"rhs at {y.tolist()}: emitted {got.tolist()} vs compiler {want.tolist()}")
        J = module.jac(0.5, y, p)
        f0 = module.rhs(0.5, y, p)
        # Size of the terms that cancel inside rhs (bounded by |J||y| + |f| for
        # mass-action and rational rates): sets the round-off of a difference.
        terms = (np.abs(J) @ np.abs(y) + np.abs(f0)).max()
        for j in range(len(y)):
            h = 1e-3 * max(abs(y[j]), 1e-6)

            def central(h):
                yp, ym = y.copy(), y.copy()
                yp[j] += h
                ym[j] -= h
                return (module.rhs(0.5, yp, p) - module.rhs(0.5, ym, p)) / (2 * h)

            # Richardson-extrapolated central difference, error O(h^4)
            # (common practice; e.g. Press et al., Numerical Recipes, 5.7).
            fd = (4 * central(h / 2) - central(h)) / 3
            col_scale = max(np.abs(fd).max(), np.abs(J[:, j]).max(), 1e-300)
            tol = 1e-6 * col_scale + 16 * np.finfo(float).eps * terms / h
            if np.abs(fd - J[:, j]).max() > tol:
                failures.append(f"jac column {j} at {y.tolist()}: analytic {J[:, j].tolist()} vs central {fd.tolist()}")
    if failures:
        print("\n".join(failures[:10]))
        sys.exit(1)
    print("ok")


if __name__ == "__main__":
    main()
