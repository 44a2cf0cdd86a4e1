"""Makes the demo data of models/data (invented scenarios) by simulation
with seeded noise, so that the README's tour has something to fit.

    python3 models/data/make_demo_data.py target/release/ratewright

- lipase_inhibition.csv: initial rates of lipase_mixed.mech's law (Km 26 uM,
  kcat 30 /s, E_t 0.02 uM, Ki 2 uM, Kii 8 uM) over substrate x inhibitor,
  3% relative noise, in uM/min.
- plate_reader.csv: plate_reader.mech run from five starting substrate
  concentrations, its `signal` every 30 s for 10 min, noise sd 5 units.
Only the standard library is used; the seed is fixed, so the files are
reproducible.
"""

import csv
import os
import random
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))


def lipase(rng):
    km, kcat, et, ki, kii = 26.0, 30.0, 0.02, 2.0, 8.0
    rows = ["S [uM],I [uM],v [uM/min]"]
    for i in [0.0, 2.0, 6.0, 18.0]:
        for s in [2.5, 5.0, 10.0, 20.0, 40.0, 80.0, 160.0]:
            v = kcat * et * s / (km * (1 + i / ki) + s * (1 + i / kii)) * 60.0
            rows.append(f"{s},{i},{v * (1 + 0.03 * rng.gauss(0, 1)):.6g}")
    return "\n".join(rows) + "\n"


def plate_reader(rng, binary):
    model = os.path.join(HERE, "..", "plate_reader.mech")
    rows = ["series,t [min],S(0) [uM],signal"]
    times = ",".join(str(30 * k) for k in range(21))
    for series, s0 in enumerate([2.5, 5.0, 10.0, 20.0, 40.0], start=1):
        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "run.csv")
            subprocess.run(
                [binary, "run", model, "--set", f"S={s0} uM", "--times", times, "-o", path],
                check=True, capture_output=True,
            )
            table = list(csv.DictReader(open(path)))
        for row in table:
            t = float(row["t"]) / 60.0
            signal = float(row["signal"]) + 5.0 * rng.gauss(0, 1)
            rows.append(f"{series},{t:g},{s0},{signal:.6g}")
    return "\n".join(rows) + "\n"


def main():
    binary = sys.argv[1] if len(sys.argv) > 1 else "ratewright"
    rng = random.Random(2026)
    with open(os.path.join(HERE, "lipase_inhibition.csv"), "w") as f:
        f.write(lipase(rng))
    with open(os.path.join(HERE, "plate_reader.csv"), "w") as f:
        f.write(plate_reader(rng, binary))


if __name__ == "__main__":
    main()
