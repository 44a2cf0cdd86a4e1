#!/usr/bin/env bash
# `ratewright diff` on a generated mechanism (bench/gen_mechanism.py) against
# (a) a copy with its lines shuffled (no change in meaning) and (b) a copy
# with one param value changed. Release build, whole process.
# Usage: bench/diff.sh [STEPS]
set -euo pipefail
cd "$(dirname "$0")/.."
steps=${1:-2000}
cargo build --release --quiet
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
python3 bench/gen_mechanism.py "$steps" > "$tmp/old.mech"
python3 - "$tmp" <<'PY'
import random, sys
d = sys.argv[1]
lines = open(f"{d}/old.mech").read().split("\n")
random.Random(7).shuffle(lines)
open(f"{d}/shuffled.mech", "w").write("\n".join(lines) + "\n")
text = open(f"{d}/old.mech").read().replace("param kr = 2 /s", "param kr = 3 /s")
open(f"{d}/changed.mech", "w").write(text)
PY
echo "file: $(wc -l < "$tmp/old.mech") lines"
for other in shuffled changed; do
  for i in 1 2 3; do
    /usr/bin/time -f "$other, run $i: %e s wall, %M KiB max RSS" \
      ./target/release/ratewright diff "$tmp/old.mech" "$tmp/$other.mech" 2>&1 >/dev/null | tail -1 || true
  done
done
