#!/usr/bin/env bash
# Runs the fuzz targets one after another (the machine is shared: one core each, in turn).
#
#   fuzz/run.sh [RUNS] [TARGET...]      # default: 10000000 runs of each target
#   FUZZ_SECONDS=3600 fuzz/run.sh ...   # stop each target after an hour if RUNS is not reached
#   FUZZ_TIMEOUT=60 fuzz/run.sh ...     # per-input timeout (default 10 s; libFuzzer's clock is
#                                       # wall time, so raise it on a loaded machine)
#
# Needs a nightly toolchain and cargo-fuzz (`cargo install cargo-fuzz`). Builds without a
# sanitizer (safe Rust apart from bounds-checked AVX2 kernels; a sanitizer halves the speed) but with debug assertions and
# overflow checks, so an integer overflow is a crash too. Corpora grow in fuzz/corpus/TARGET
# (not committed) from the committed seeds in fuzz/seeds/TARGET; a crash lands in
# fuzz/artifacts/TARGET/ — keep it under tests/fuzz-crashes/TARGET/ once fixed, where
# tests/fuzz_crashes.rs replays it.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")"
runs=${1:-10000000}
shift || true
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=(raw wav sigmf_meta decode_chain decode_channels)
# The whole-chain targets spend ~80 % of their time in the trellis search's loops; comparison
# tracing (value profiles of every `cmp`) slows them ~8x there and matters little (their
# magic values are the readers', fuzzed by the reader targets with tracing on).
for t in "${targets[@]}"; do
    case $t in
        decode_chain | decode_channels) max_len=16384 trace=(--no-trace-compares) ;;
        *) max_len=4096 trace=() ;;
    esac
    mkdir -p "corpus/$t"
    echo "== $t: $runs runs, max_len $max_len, started $(date -u +%FT%TZ)"
    start=$(date +%s)
    cargo +nightly fuzz run -s none "${trace[@]}" "$t" "corpus/$t" "seeds/$t" -- \
        -runs="$runs" -max_len="$max_len" -timeout="${FUZZ_TIMEOUT:-10}" -rss_limit_mb=2048 -print_final_stats=1 \
        -max_total_time="${FUZZ_SECONDS:-0}"
    echo "== $t: done in $(( $(date +%s) - start )) s"
done
