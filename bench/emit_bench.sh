#!/usr/bin/env bash
# Benchmark of `ratewright emit` (every target, full and reduced) on a
# generated network, and of compiling the emitted C.
# Usage: bench/emit_bench.sh [SPECIES] [STEPS]   (default 1000 2000)
# Needs a release build (cargo build --release --bin ratewright), gcc, and
# GNU time (/usr/bin/time) for the peak memory.
set -euo pipefail
cd "$(dirname "$0")/.."
species=${1:-1000}
steps=${2:-2000}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
python3 bench/network_gen.py "$species" "$steps" > "$work/net.mech"
bin=target/release/ratewright
echo "network: $species species, $steps steps"
for target in python julia c rust octave r sbml latex json dot; do
  for reduced in "" "--reduced"; do
    if [ -n "$reduced" ] && { [ "$target" = sbml ] || [ "$target" = dot ]; }; then continue; fi
    suffix=${reduced:+_r}
    out="$work/out_$target$suffix"
    [ "$target" = c ] && out="$work/cdir$suffix/"
    mkdir -p "$work/cdir$suffix"
    /usr/bin/time -f "emit --target $target $reduced: %e s wall, %M KB max RSS" \
      "$bin" emit "$work/net.mech" --target "$target" $reduced -o "$out" 2> "$work/time.txt" > /dev/null
    tail -n 1 "$work/time.txt"
  done
done
echo "emitted C source: $(wc -c < "$work/cdir/net.c") bytes"
/usr/bin/time -f "gcc -O1 -c (full system): %e s wall, %M KB max RSS" \
  gcc -std=c99 -Wall -Wextra -Werror -pedantic -O1 -c "$work/cdir/net.c" -o "$work/net.o" 2> "$work/time.txt"
tail -n 1 "$work/time.txt"
