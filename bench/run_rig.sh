#!/usr/bin/env bash
# Rig throughput: photos per minute for 12 MP JPEGs (8 rendered photos at 4240 x 2830, queued
# 100 times through symlinks) and peak memory of the whole run (GNU time), on this machine.
# Usage: bench/run_rig.sh [QUEUED] (default 100). Writes nothing in the repository.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
queued="${1:-100}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
cd "$root"
cargo build --release --quiet
bin="$root/target/release/beadline"
"$bin" demo --dir "$work/demo" >/dev/null
mkdir -p "$work/photos" "$work/queue"
for i in 0 1 2 3 4 5 6 7; do
    # The demo scene scaled to 4240 x 2830 (12 MP), a new noise seed per photo.
    sed -e "s/^px_per_m = .*/px_per_m = 2650.0/" -e "s/^width_px = .*/width_px = 4240/" \
        -e "s/^height_px = .*/height_px = 2830/" -e "s/^origin_x_px = .*/origin_x_px = 795.0/" \
        -e "s/^origin_y_px = .*/origin_y_px = 2578.0/" -e "s/^seed = .*/seed = $((i + 1))/" \
        "$work/demo/scene.toml" > "$work/scene$i.toml"
    "$bin" render "$work/scene$i.toml" --out "$work/photos/p$i.jpg"
done
for n in $(seq -w 0 $((queued - 1))); do
    ln -s "$work/photos/p$((10#$n % 8)).jpg" "$work/queue/q$n.jpg"
done
/usr/bin/time -v "$bin" rig "$work/queue" --rate 25 --ball-diameter 0.04 --quiet \
    --out "$work/results.jsonl" 2> "$work/time.txt" || true
wall=$(grep 'Elapsed (wall clock)' "$work/time.txt" | awk '{print $NF}')
rss=$(grep 'Maximum resident set size' "$work/time.txt" | awk '{print $NF}')
secs=$(python3 -c "p='$wall'.split(':'); print(sum(float(x)*60**i for i,x in enumerate(reversed(p))))")
ok=$(grep -c '"status":"ok"' "$work/results.jsonl" || true)
lines=$(wc -l < "$work/results.jsonl")
echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)"
echo "photos: $lines results ($ok ok) of $queued queued 12 MP JPEGs (4240 x 2830)"
echo "wall: ${secs} s; photos per minute: $(python3 -c "print(round($lines*60/$secs, 1))")"
echo "peak memory (max RSS): $((rss / 1024)) MiB"
