#!/usr/bin/env bash
# Hostile-input benchmark: `ratewright check` on every file of
# tests/bad_inputs/ (release build, whole process, best of 3 per file), and
# on the generated limit cases (100,000-deep nesting, a 64 MiB + 1 byte file,
# an 800 kB line, `use "/dev/zero"`). Prints one line per file: exit code,
# seconds. Usage: bench/hardening.sh
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
bin=./target/release/ratewright
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
python3 - "$tmp" <<'PY'
import sys, os
d = sys.argv[1]
open(os.path.join(d, "nesting_100000.mech"), "w").write("param k = " + "(" * 100000 + "1" + ")" * 100000 + "\n")
with open(os.path.join(d, "file_64mib_plus_1.mech"), "w") as f:
    f.write("species A = 1 uM\n")
    line = "# padding padding padding padding padding padding padding padding\n"
    n = 64 * 1024 * 1024 // len(line) + 1
    f.write(line * n)
open(os.path.join(d, "line_800kB.mech"), "w").write("species A = 1 uM\nparam k = " + " + ".join(["1"] * 200000) + " + nope\n")
open(os.path.join(d, "use_dev_zero.mech"), "w").write('use "/dev/zero"\n')
PY
measure() {
    local best=999 code=0
    for _ in 1 2 3; do
        local start end
        start=$(date +%s.%N)
        set +e
        "$bin" check "$1" >/dev/null 2>&1
        code=$?
        set -e
        end=$(date +%s.%N)
        best=$(python3 -c "print(min($best, $end - $start))")
    done
    printf '%s %.3f %s\n' "$code" "$best" "$1"
}
for f in tests/bad_inputs/*.mech "$tmp"/*.mech; do
    measure "$f"
done | tee "$tmp/results.txt"
python3 - "$tmp/results.txt" <<'PY'
import sys
rows = [l.split() for l in open(sys.argv[1])]
corpus = [float(r[1]) for r in rows if "tests/bad_inputs/" in r[2]]
print(f"corpus: {len(corpus)} files, exit codes {sorted(set(r[0] for r in rows if 'tests/bad_inputs/' in r[2]))}, "
      f"slowest {max(corpus):.3f} s, median {sorted(corpus)[len(corpus)//2]:.3f} s")
PY
