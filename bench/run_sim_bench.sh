#!/usr/bin/env bash
# Reproduces the simulation benchmarks of docs/benchmarks.md (section
# "Simulation"). Builds release binaries once, then measures side by side in
# one run:
#  (a) Robertson to 1e11: the tool in process and as a whole process, against
#      SciPy solve_ivp LSODA and BDF with the analytic Jacobian (in process
#      and whole process);
#  (b) generated 1,000-species, 3,000-step networks (random partners, and
#      partners among nearby species) against SciPy BDF with a sparse
#      analytic Jacobian;
#  (c) the compiled model against a hand-written Rust RHS and Jacobian
#      handed to diffsol;
#  (d) forward sensitivities to ten rate constants on (b)'s networks against
#      a plain run, and SciPy BDF on the augmented system; the kinase cycle's
#      control analysis in process.
# Usage: bench/run_sim_bench.sh [REPS]   (from the repository root)
set -euo pipefail
cd "$(dirname "$0")/.."
REPS=${1:-30}
cargo build --release --bin ratewright --example sim_bench >&2
BIN=target/release/ratewright
BENCH=target/release/examples/sim_bench
OUT=target/sim-bench
mkdir -p "$OUT"

echo "# (a) Robertson to t = 1e11, rtol 1e-8, atol 1e-12"
$BENCH robertson "$REPS"
python3 bench/sim_robertson_scipy.py "$REPS"

# Whole processes: median wall time of REPS runs each.
python3 - "$REPS" "$BIN" <<'PY'
import statistics, subprocess, sys, time
reps, binary = int(sys.argv[1]), sys.argv[2]
def wall(cmd):
    ts = []
    for _ in range(reps):
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
        ts.append(time.perf_counter() - t0)
    return statistics.median(ts)
print(f"process_tool_seconds {wall([binary, 'run', 'models/robertson.mech', '--times', '1e11', '--rtol', '1e-8', '--atol', '1e-12']):.6e}")
print(f"process_scipy_lsoda_seconds {wall(['python3', 'bench/sim_robertson_scipy.py', 'once', 'LSODA']):.6e}")
print(f"process_scipy_bdf_seconds {wall(['python3', 'bench/sim_robertson_scipy.py', 'once', 'BDF']):.6e}")
PY

for kind in network network-local; do
  DIR="$OUT/$kind"
  echo "# (b) generated $kind: 1,000 species, 3,000 steps, to t = 10, rtol 1e-6, atol 1e-10"
  $BENCH "$kind" "$DIR"
  $BENCH network-run "$DIR" 5
  python3 - "$BIN" "$DIR" <<'PY'
import subprocess, sys, time
binary, out = sys.argv[1], sys.argv[2]
t0 = time.perf_counter()
subprocess.run([binary, 'run', f'{out}/network.mech', '--times', '10', '-o', f'{out}/network.csv'], check=True, stderr=subprocess.DEVNULL)
print(f"process_tool_network_seconds {time.perf_counter() - t0:.6e}")
PY
  python3 bench/sim_network_scipy.py "$DIR"
  echo "# sensitivities to kf0..kf9 on the same network, against a plain run (and SciPy's augmented system)"
  $BENCH network-sensitivity "$DIR" 5
  python3 bench/sensitivity_scipy.py "$DIR"
done

echo "# control analysis of models/kinase_cycle.mech in process"
$BENCH control 500

echo "# dense against sparse LU by size (sets numeric::SPARSE_THRESHOLD)"
$BENCH threshold 5
