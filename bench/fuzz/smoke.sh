#!/usr/bin/env bash
# Smoke run of every fuzz target for CI: a few thousand executions each, from the committed
# seeds (bench/fuzz/seeds/<target>) into a throw-away corpus, on the stable toolchain
# (RUSTC_BOOTSTRAP=1 lets cargo-fuzz's nightly-only flags through). Installs cargo-fuzz when it
# is missing. Exits non-zero on any crash; the crashing input is left in bench/fuzz/artifacts/<target>/.
#
# Usage: bench/fuzz/smoke.sh
# Environment: FUZZ_SMOKE_RUNS (executions per target, default 3000), FUZZ_SANITIZER (address
# or none, default address), CARGO_FUZZ_ROOT (where to install cargo-fuzz if missing, default
# cargo's own), CARGO_TARGET_DIR (as for cargo).
set -euo pipefail
root="$(cd "$(dirname "$0")/../.." && pwd)"
cd "$root"
runs="${FUZZ_SMOKE_RUNS:-3000}"
sanitizer="${FUZZ_SANITIZER:-address}"
export RUSTC_BOOTSTRAP=1
t0=$(date +%s)
if [ -n "${CARGO_FUZZ_ROOT:-}" ]; then
    export PATH="$CARGO_FUZZ_ROOT/bin:$PATH"
fi
if ! cargo fuzz --version >/dev/null 2>&1; then
    echo "smoke: installing cargo-fuzz"
    cargo install cargo-fuzz --locked --version 0.13.2 ${CARGO_FUZZ_ROOT:+--root "$CARGO_FUZZ_ROOT"}
fi
t1=$(date +%s)
cargo fuzz build --fuzz-dir bench/fuzz --sanitizer "$sanitizer"
t2=$(date +%s)
scratch="$(mktemp -d)"
trap 'rm -rf "$scratch"' EXIT
passed=0
failed=0
for target in load_spots profile scene; do
    mkdir -p "$scratch/$target"
    if cargo fuzz run --fuzz-dir bench/fuzz --sanitizer "$sanitizer" "$target" \
        "$scratch/$target" "bench/fuzz/seeds/$target" -- \
        -runs="$runs" -max_len=4096 -rss_limit_mb=2048 -timeout=60 \
        >"$scratch/$target.log" 2>&1; then
        done_line=$(grep -o 'Done [0-9]* runs in [0-9]* second(s)' "$scratch/$target.log" | tail -n 1 || true)
        echo "smoke: $target: ${done_line:-done}"
        passed=$((passed + 1))
    else
        tail -n 40 "$scratch/$target.log"
        echo "smoke: $target: FAILED; crashing input in bench/fuzz/artifacts/$target/"
        failed=$((failed + 1))
    fi
done
t3=$(date +%s)
echo "smoke: install $((t1 - t0)) s, build $((t2 - t1)) s, runs $((t3 - t2)) s"
echo "fuzz: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
