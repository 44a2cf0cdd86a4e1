#!/usr/bin/env bash
# Fit benchmarks, side by side in one run (release build):
#  1. a rate-table fit of 100 points (competitive inhibition in its named
#     constants), whole process, best of 20;
#  2. a progress-curve fit (four steps, three series of 50 points of two
#     species, four free constants) against SciPy's least_squares around
#     solve_ivp (Radau, rtol 1e-10) on the same data from the same start,
#     whole process (best of 3) and in process (the fit alone).
# Usage: bench/fit_bench.sh   (from the repository root)
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
bin=target/release/ratewright
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

python3 - "$work" <<'PY'
import json, math, random, sys
work = sys.argv[1]
rng = random.Random(11)
# 1. Rate table: 10 substrate x 10 inhibitor levels.
open(f"{work}/comp.mech", "w").write(
    "species S = 10 uM, P, I = 1 uM\nspecies E = 0.01 uM, ES, EI\n"
    "param k1 = 1 /uM/s\nparam km1 = 5 /s\nparam k2 = 2 /s\nparam ki = 1 /uM/s\nparam kmi = 2 /s\n"
    "step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\nstep block E + I <=> EI with ki, kmi\n"
    "total Et = E + ES + EI\nassume steady E, ES, EI\n")
rows = ["S,I,v"]
for i in [0, 0.5, 1, 2, 3, 5, 8, 12, 20, 30]:
    for s in [1, 2, 3, 5, 8, 12, 20, 30, 50, 80]:
        v = 0.02 * s / (7 * (1 + i / 2) + s)
        rows.append(f"{s},{i},{v * (1 + 0.02 * rng.gauss(0, 1))}")
open(f"{work}/rates.csv", "w").write("\n".join(rows) + "\n")
# 2. Progress curves of A -> B -> C <=> D -> F, B and D measured.
def simulate(a0, k, times):
    # Fine explicit RK4 for the data only (the fits integrate themselves).
    y = [a0, 0, 0, 0, 0]; t = 0.0; out = []; h = 1e-3
    def f(y):
        a, b, c, d, e = y
        return [-k[0]*a, k[0]*a - k[1]*b, k[1]*b - k[2]*c + k[3]*d, k[2]*c - k[3]*d - 0.05*d, 0.05*d]
    for target in times:
        while t < target - 1e-12:
            step = min(h, target - t)
            k1 = f(y); k2 = f([y[i] + step/2*k1[i] for i in range(5)])
            k3 = f([y[i] + step/2*k2[i] for i in range(5)]); k4 = f([y[i] + step*k3[i] for i in range(5)])
            y = [y[i] + step/6*(k1[i] + 2*k2[i] + 2*k3[i] + k4[i]) for i in range(5)]; t += step
        out.append(list(y))
    return out
truth = [0.5, 0.2, 0.3, 0.1]
times = [0.6 * j for j in range(50)]
csv = ["series,t,A(0),B,D"]; series = []
for n, a0 in enumerate([5.0, 10.0, 20.0], start=1):
    ys = simulate(a0, truth, times)
    b = [y[1] + 0.02 * rng.gauss(0, 1) for y in ys]; d = [y[3] + 0.02 * rng.gauss(0, 1) for y in ys]
    csv += [f"{n},{t},{a0},{bb},{dd}" for t, bb, dd in zip(times, b, d)]
    series.append({"A0": a0, "t": times, "B": b, "D": d})
open(f"{work}/curves.csv", "w").write("\n".join(csv) + "\n")
json.dump({"series": series, "k5": 0.05, "start": {"k1": 0.3, "k2": 0.3, "k3": 0.2, "k4": 0.2}},
          open(f"{work}/curves.json", "w"))
open(f"{work}/four.mech", "w").write(
    "species A = 10 uM, B, C, D, F\nparam k1 = 0.5 /s\nparam k2 = 0.2 /s\nparam k3 = 0.3 /s\n"
    "param k4 = 0.1 /s\nparam k5 = 0.05 /s\nstep s1 A -> B with k1\nstep s2 B -> C with k2\n"
    "step s3 C <=> D with k3, k4\nstep s4 D -> F with k5\n")
PY

best_of() { # N command...: the best wall time in ms
  local n=$1; shift; local best=1e9
  for _ in $(seq "$n"); do
    local s=$(date +%s.%N); "$@" >/dev/null 2>&1; local e=$(date +%s.%N)
    best=$(python3 -c "print(min($best, ($e - $s) * 1000))")
  done
  echo "$best"
}

rate_ms=$(best_of 20 $bin fit "$work/comp.mech" --data "$work/rates.csv" --free kcat=1,Km_S=3,Ki_I=1)
echo "rate table, 100 points, 3 constants: whole process ${rate_ms} ms (best of 20)"

ours=$(best_of 3 $bin fit "$work/four.mech" --data "$work/curves.csv" --free k1=0.3,k2=0.3,k3=0.2,k4=0.2)
theirs=$(best_of 3 python3 tests/python/fit_progress_scipy.py "$work/curves.json")
echo "progress curves, 3 x 50 points x 2 species, 4 constants: ratewright ${ours} ms, SciPy ${theirs} ms (whole process, best of 3)"
python3 -c "print(f'ratio (whole process): {$theirs / $ours:.1f}x')"
python3 - "$work" <<'PY'
import json, subprocess, sys, time
work = sys.argv[1]
t = time.perf_counter()
subprocess.run(["python3", "-c", "import numpy, scipy.integrate, scipy.optimize"], check=True)
imports = (time.perf_counter() - t) * 1000
print(f"SciPy's imports alone (python3 start + numpy + scipy): {imports:.0f} ms")
PY
$bin fit "$work/four.mech" --data "$work/curves.csv" --free k1=0.3,k2=0.3,k3=0.2,k4=0.2 --format json \
  | python3 -c "import json,sys; j=json.load(sys.stdin); print('ratewright:', {k: round(v['value'], 6) for k, v in j['parameters'].items()}, 'iterations', j['iterations'])"
python3 tests/python/fit_progress_scipy.py "$work/curves.json" \
  | python3 -c "import json,sys; j=json.load(sys.stdin); print('SciPy:     ', {k: round(v, 6) for k, v in j['params'].items()}, 'in process', round(j['seconds'] * 1000), 'ms')"
