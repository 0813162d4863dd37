#!/usr/bin/env bash
# Spots benchmark: `beadline spots` against OpenCV and scikit-image circle detectors on rendered
# strobe photos (issue 3). Writes bench/RESULTS.md, or bench/RESULTS-references-only.md when
# `beadline spots` is not available yet.
#
# Usage: bench/run_spots.sh [--quick] [options of bench/spots_bench.py]
#   BEADLINE=path/to/beadline   binary (default ./target/release/beadline; build it with
#                               cargo build --release)
#   --quick                     five photos, no speed section, one repeat: a check of the harness
#   BEADLINE_SPOTS_RADIUS_ARGS  how the radius range is passed to `beadline spots`
#                               (default "--radius {rmin:.2f}..{rmax:.2f}"; empty: none)
#   BEADLINE_SPOTS_CMD          run this instead of `$BEADLINE spots` (harness test with
#                               bench/standin_spots.py)
# Photos, scenes and the frozen parameters go to bench/out/ (not committed).
set -euo pipefail
cd "$(dirname "$0")/.."
BEADLINE=${BEADLINE:-./target/release/beadline}
if [ ! -x "$BEADLINE" ]; then
    echo "run_spots.sh: no beadline binary at $BEADLINE (set BEADLINE, or cargo build --release)" >&2
    exit 1
fi
. bench/venv.sh
export BENCH_CMDLINE="bench/run_spots.sh $*"
args=()
for a in "$@"; do
    if [ "$a" = "--quick" ]; then
        args+=(--only size_r14,jpeg85_r18,dark_r20,overlap_r20,distractors_r16 --no-speed
               --repeat 1)
    else
        args+=("$a")
    fi
done
exec "$VENV/bin/python" bench/spots_bench.py --beadline "$BEADLINE" "${args[@]}"
