"""SciPy's least_squares (method "lm") on the NIST StRD problems of
tests/data/nist-strd from both of NIST's starts, to set beside
ratewright's results (docs/fitting.md). Prints, per problem and start,
whether the estimates agree with the certified values to 6 significant
digits.

    python3 bench/nist_scipy.py
"""

import os
import numpy as np
from scipy.optimize import least_squares

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "tests", "data", "nist-strd")
MODELS = {
    "Misra1a": lambda b, x: b[0] * (1 - np.exp(-b[1] * x)),
    "Chwirut2": lambda b, x: np.exp(-b[0] * x) / (b[1] + b[2] * x),
    "DanWood": lambda b, x: b[0] * x ** b[1],
    "Misra1b": lambda b, x: b[0] * (1 - (1 + b[1] * x / 2) ** (-2)),
    "Eckerle4": lambda b, x: (b[0] / b[1]) * np.exp(-0.5 * ((x - b[2]) / b[1]) ** 2),
    "Thurber": lambda b, x: (b[0] + b[1] * x + b[2] * x**2 + b[3] * x**3) / (1 + b[4] * x + b[5] * x**2 + b[6] * x**3),
}


def read(name):
    starts, certified, data, in_data = [[], []], [], [], False
    for line in open(os.path.join(DATA, name + ".dat")):
        t = line.split()
        if in_data:
            if len(t) == 2:
                data.append([float(v) for v in t])
            continue
        if len(t) == 6 and t[1] == "=" and t[0].startswith("b"):
            starts[0].append(float(t[2]))
            starts[1].append(float(t[3]))
            certified.append(float(t[4]))
        if line.startswith("Data:") and len(t) > 1 and t[1] == "y":
            in_data = True
    return starts, np.array(certified), np.array(data)


for name, f in MODELS.items():
    starts, certified, data = read(name)
    y, x = data[:, 0], data[:, 1]
    for k, start in enumerate(starts, start=1):
        try:
            fit = least_squares(lambda b: f(b, x) - y, start, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15)
            worst = float(np.max(np.abs((fit.x - certified) / certified)))
            verdict = "agrees" if worst <= 1e-6 else f"fails (worst relative error {worst:.2g})"
        except Exception as e:  # a failure to run is a failure
            verdict = f"fails ({e})"
        print(f"{name} start {k}: {verdict}")
