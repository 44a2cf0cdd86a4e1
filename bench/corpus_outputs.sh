#!/usr/bin/env bash
# Runs every command on every mechanism in models/ and tests/ (fixtures and
# hostile inputs) and stores stdout, stderr, written files and exit codes
# under OUT_DIR, one folder per file and command. Two runs of this script
# (before and after a refactor) are compared with `diff -r`: a change that
# must not change what users see leaves no difference.
#
# The binary must be called `ratewright` (usage messages name it).
#   bench/corpus_outputs.sh target/debug/ratewright /tmp/before
#   ... change ...
#   bench/corpus_outputs.sh target/debug/ratewright /tmp/after
#   diff -r /tmp/before /tmp/after
set -u
bin=$(readlink -f "$1")
out=$2
top=$(cd "$(dirname "$0")/.." && pwd)
rm -rf "$out"; mkdir -p "$out"
cd "$top"

# one invocation: name, then the command's arguments; a written file, if
# any, is named by $written (relative to the scratch folder)
record() {
  local dir=$1 name=$2; shift 2
  local scratch; scratch=$(mktemp -d)
  ( cd "$scratch" && timeout 120 "$bin" "$@" >"$dir/$name.out" 2>"$dir/$name.err"; echo $? >"$dir/$name.rc" )
  for f in "$scratch"/*; do
    [ -e "$f" ] && cp -r "$f" "$dir/$name.file.$(basename "$f")"
  done
  rm -rf "$scratch"
  # the scratch folder's random name must not show in the comparison
  # nor the checkout's location (worktrees are compared with each other)
  sed -i -e "s#$scratch#SCRATCH#g" -e "s#$top#TOP#g" "$dir/$name.out" "$dir/$name.err" 2>/dev/null
}

files=$(ls models/*.mech tests/fixtures/*.mech tests/fixtures/diff/*.mech tests/bad_inputs/* 2>/dev/null)
for src in $files; do
  key=$(echo "$src" | tr '/' '_'); dir="$out/$key"; mkdir -p "$dir"
  m="$top/$src"
  record "$dir" check check "$m"
  record "$dir" check_json check --format json "$m"
  record "$dir" check_deny check --deny-warnings "$m"
  cp "$m" "$dir/fmt_input"; ( cd "$dir" && timeout 60 "$bin" fmt fmt_input >fmt.out 2>fmt.err; echo $? >fmt.rc; sed -i "s#$top#TOP#g" fmt.out fmt.err )
  record "$dir" fmt_check fmt --check "$m"
  record "$dir" analyze analyze "$m"
  record "$dir" analyze_json analyze --format json "$m"
  for f in human json latex mech; do record "$dir" "derive_$f" derive --format "$f" "$m"; done
  for t in python julia c rust octave r sbml latex json dot; do
    record "$dir" "emit_$t" emit "$m" --target "$t" -o "emitted.$t"
    record "$dir" "emit_${t}_reduced" emit "$m" --target "$t" --reduced -o "emitted.$t"
  done
  record "$dir" run_csv run "$m" -o run.csv
  record "$dir" run_json run "$m" -o run.json
  record "$dir" run_reduced run "$m" --reduced --points 7 -o run.csv
  record "$dir" run_esdirk run "$m" --method esdirk --points 5 -o run.csv
  record "$dir" run_stdout run "$m" --points 4
  record "$dir" steady steady "$m"
  record "$dir" steady_json steady --format json "$m"
  p=$(grep -oE '^[[:space:]]*param[[:space:]]+[A-Za-z_][A-Za-z0-9_]*' "$m" 2>/dev/null | head -1 | awk '{print $2}')
  s=$(grep -oE '^[[:space:]]*species[[:space:]]+[A-Za-z_][A-Za-z0-9_]*' "$m" 2>/dev/null | head -1 | awk '{print $2}')
  if [ -n "$p" ] && [ -n "$s" ]; then
    record "$dir" scan_at scan "$m" --vary "$p=0.5..2:3" --measure "$s" --at 1 -o scan.csv
    record "$dir" scan_steady scan "$m" --vary "$p=0.5..2:3:log" --measure "$s" --steady -o scan.csv
  fi
done
d=tests/fixtures/diff
for a in $d/*.mech; do for b in $d/*.mech; do
  key="diff_$(basename "$a" .mech)_$(basename "$b" .mech)"; dir="$out/$key"; mkdir -p "$dir"
  record "$dir" human diff "$top/$a" "$top/$b"
  record "$dir" json diff --format json "$top/$a" "$top/$b"
done; done
echo "recorded $(find "$out" -name '*.rc' | wc -l) invocations in $out"
