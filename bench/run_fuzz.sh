#!/usr/bin/env bash
# Fuzz each target for a fixed number of executions (or a time) and print the executions run.
# Works on the stable toolchain: cargo-fuzz's nightly-only flags are let through with
# RUSTC_BOOTSTRAP=1.
#
# Usage: bench/run_fuzz.sh [RUNS_PER_TARGET] [TARGET...]
#   RUNS_PER_TARGET  executions per target (default 1000000; load_spots gets a tenth of it)
#   TARGET           load_spots, profile, scene (default: all three)
# Environment: FUZZ_SANITIZER (address or none, default address), FUZZ_MAX_TIME (seconds, a
# bound on each run besides the count; default none).
# The growing corpus is bench/fuzz/corpus/<target> (ignored by git), seeded from bench/fuzz/seeds/<target>.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
cd "$root"
runs="${1:-1000000}"
shift || true
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=(load_spots profile scene)
sanitizer="${FUZZ_SANITIZER:-address}"
export RUSTC_BOOTSTRAP=1
if ! cargo fuzz --version >/dev/null 2>&1; then
    cargo install cargo-fuzz --locked
fi
for target in "${targets[@]}"; do
    n="$runs"
    max_len=4096
    if [ "$target" = load_spots ]; then
        # Each decode and spot search costs far more than a parse.
        n=$((runs / 10))
    fi
    corpus="bench/fuzz/corpus/$target"
    mkdir -p "$corpus"
    log="bench/fuzz/$target.log"
    extra=()
    [ -n "${FUZZ_MAX_TIME:-}" ] && extra+=("-max_total_time=$FUZZ_MAX_TIME")
    start=$(date +%s)
    # -rss_limit_mb: the decoding limits must keep memory bounded on any input.
    set +e
    cargo fuzz run --fuzz-dir bench/fuzz --sanitizer "$sanitizer" "$target" "$corpus" "bench/fuzz/seeds/$target" -- \
        -runs="$n" -max_len="$max_len" -rss_limit_mb=2048 -timeout=60 \
        "${extra[@]}" >"$log" 2>&1
    status=$?
    set -e
    secs=$(($(date +%s) - start))
    tail -n 3 "$log"
    execs=$(grep -o 'Done [0-9]* runs' "$log" | tail -n 1 | grep -o '[0-9]*' || echo "?")
    if [ "$status" -ne 0 ]; then
        echo "run_fuzz: $target: FAILED (status $status) after ${secs} s; see $log and bench/fuzz/artifacts/$target/"
        exit "$status"
    fi
    echo "run_fuzz: $target: $execs executions in ${secs} s without a crash"
done
