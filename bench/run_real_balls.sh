#!/usr/bin/env bash
# Real-balls benchmark: `beadline spots` and `measure` on rendered balls with markings, spin,
# side light, a glossy highlight, motion in depth and a bright backdrop shape, beside the plain
# ball (the real-balls issue). Writes bench/REAL_BALLS_RESULTS.md; photos go to bench/out/real/.
#
# Usage: bench/run_real_balls.sh   (BEADLINE=path/to/beadline, default ./target/release/beadline)
set -euo pipefail
cd "$(dirname "$0")/.."
BEADLINE=${BEADLINE:-./target/release/beadline}
if [ ! -x "$BEADLINE" ]; then
    echo "run_real_balls.sh: no beadline binary at $BEADLINE (cargo build --release)" >&2
    exit 1
fi
. bench/venv.sh
exec "$VENV/bin/python" bench/real_balls.py --beadline "$BEADLINE" "$@"
