#!/usr/bin/env bash
# Reproduces the stochastic-simulation benchmarks of docs/benchmarks.md
# (section "Stochastic simulation"): reaction events per second of the exact
# methods on one core (the 4-step scheme, the generated 1,000-species
# network of `sim_bench network`, random networks by size for the
# direct/next-reaction threshold), NumPy's direct method on the 4-step
# scheme for the ratio, and exact runs against tau-leaping on the
# 20-species chain.
# Usage: bench/run_sample_bench.sh   (from the repository root)
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --example sample_bench --example sim_bench >&2
BENCH=target/release/examples/sample_bench
OUT=target/sample-bench
mkdir -p "$OUT"
echo "# 4-step scheme, 1 pL, about 2e7 events"
$BENCH small 2e7
echo "# NumPy direct method, same scheme"
python3 bench/sample_numpy.py 300000
echo "# generated 1,000-species network, 1 fL, to t = 0.3"
target/release/examples/sim_bench network "$OUT" >/dev/null
$BENCH network "$OUT/network.mech" 0.3
echo "# direct against next-reaction by size"
$BENCH threshold
echo "# exact against tau-leaping, 20-species chain, 20 runs"
$BENCH leap 20
