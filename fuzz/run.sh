#!/usr/bin/env bash
# Runs both fuzz targets for SECONDS each (default 60) and fails on the
# first crash, timeout (> 10 s per input) or out-of-memory, which lands in
# fuzz/artifacts/<target>/: a bounded check for CI. For long runs that go
# on past findings, see docs/reliability.md (libFuzzer's fork mode). Needs
# cargo-fuzz (`cargo install cargo-fuzz`); on a stable toolchain
# RUSTC_BOOTSTRAP=1 lets it use the flags it needs.
# Usage: fuzz/run.sh [SECONDS] [TARGET...]
set -euo pipefail
cd "$(dirname "$0")"
seconds="${1:-60}"
shift || true
targets=("${@:-front_end derive_small}")
read -r -a targets <<< "${targets[*]}"
export RUSTC_BOOTSTRAP=1
cargo fuzz build -s none -a --fuzz-dir .
status=0
for t in "${targets[@]}"; do
    mkdir -p "corpus/$t" "artifacts/$t"
    case "$t" in
        front_end) seeds=(../models ../tests/bad_inputs); max_len=4096 ;;
        *) seeds=(); max_len=600 ;;
    esac
    cargo fuzz run -s none -a --fuzz-dir . "$t" "corpus/$t" "${seeds[@]}" -- \
        -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -max_len="$max_len" \
        -dict=dict/mech.dict -print_final_stats=1 || status=1
done
exit "$status"
