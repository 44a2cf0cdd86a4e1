#!/usr/bin/env bash
# Benchmark of `ratewright analyze` on a generated network, beside SymPy.
# Usage: bench/network_bench.sh [SPECIES] [STEPS]   (default 5000 10000)
# Needs a release build (cargo build --release), python3 with sympy, and
# GNU time (/usr/bin/time) for the peak memory.
set -euo pipefail
cd "$(dirname "$0")/.."
species=${1:-5000}
steps=${2:-10000}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
python3 bench/network_gen.py "$species" "$steps" > "$work/net.mech"
bin=target/release/ratewright
echo "network: $species species, $steps steps ($(wc -l < "$work/net.mech") lines)"
for run in 1 2 3; do
  /usr/bin/time -f "analyze (human): %e s wall, %M KB max RSS" "$bin" analyze "$work/net.mech" > "$work/out.txt" 2> "$work/time.txt" || true
  tail -n 1 "$work/time.txt"
done
/usr/bin/time -f "analyze --format json: %e s wall, %M KB max RSS" "$bin" analyze "$work/net.mech" --format json > "$work/out.json" 2> "$work/time.txt" || true
tail -n 1 "$work/time.txt"
echo "JSON output: $(wc -c < "$work/out.json") bytes"
/usr/bin/time -f "check (parse and lower only): %e s wall, %M KB max RSS" "$bin" check "$work/net.mech" > /dev/null 2> "$work/time.txt" || true
tail -n 1 "$work/time.txt"
head -n 1 "$work/out.txt"
echo
echo "SymPy (DomainMatrix over QQ), 60 s limit per size:"
python3 bench/network_sympy.py 60 400:800 800:1600 1600:3200 3200:6400 "$species:$steps"
