#!/usr/bin/env bash
# Fuzz the loader + spot finder and the rig profile parser for a fixed time each and print the
# executions run. Usage: bench/run_fuzz.sh [SECONDS_PER_TARGET] (default 60).
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
cd "$root/fuzz"
seconds="${1:-60}"
if ! rustup toolchain list 2>/dev/null | grep -q '^nightly'; then
    if ! rustup toolchain install nightly --profile minimal; then
        echo "run_fuzz: cargo fuzz needs a nightly toolchain and none can be installed here; skipped."
        exit 0
    fi
fi
if ! cargo +nightly fuzz --version >/dev/null 2>&1; then
    cargo install cargo-fuzz --locked
fi
for target in load_spots profile; do
    corpus="corpus/$target"
    mkdir -p "$corpus"
    if [ "$target" = load_spots ] && [ -d ../../testimages ]; then
        # Seed with the project's own small photos, if any.
        find ../../testimages -maxdepth 2 -type f -size -200k \
            \( -name '*.png' -o -name '*.jpg' -o -name '*.tif' \) -exec cp -n {} "$corpus/" \; || true
    fi
    log="$target.log"
    # -rss_limit_mb: the decoding limits must keep memory bounded on any input.
    # cargo fuzz looks for fuzz/ at the project root unless told where the fuzz crate is.
    (cd "$root" && cargo +nightly fuzz run --fuzz-dir fuzz "$target" "fuzz/$corpus" -- \
        -max_total_time="$seconds" -rss_limit_mb=2048 -max_len=262144) 2>&1 | tee "$log" | tail -n 3
    execs=$(grep -o 'Done [0-9]* runs' "$log" | tail -n 1 | grep -o '[0-9]*' || echo "?")
    echo "run_fuzz: $target: $execs executions in ${seconds} s without a crash"
done
