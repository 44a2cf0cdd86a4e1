#!/usr/bin/env bash
# Front-end benchmark: `ratewright check` on a generated 10,000-step
# mechanism, release build, whole process. Usage: bench/check.sh [STEPS]
set -euo pipefail
cd "$(dirname "$0")/.."
steps=${1:-10000}
cargo build --release --quiet
tmp=$(mktemp -d)
python3 bench/gen_mechanism.py "$steps" > "$tmp/gen.mech"
echo "file: $(wc -l < "$tmp/gen.mech") lines, $(wc -c < "$tmp/gen.mech") bytes"
for i in 1 2 3 4 5; do
  /usr/bin/time -f "run $i: %e s wall, %M KiB max RSS" ./target/release/ratewright check "$tmp/gen.mech" 2>&1 >/dev/null | tail -1
done
rm -rf "$tmp"
