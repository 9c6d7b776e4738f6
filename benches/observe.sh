#!/usr/bin/env bash
# Cost of `escapade observe` against trajectory length: a trajectory of N samples (the tool's own
# Euler–Maruyama in a 3.5 kT double well, examples/observe_trajectory.rs, "t,x" text) analysed
# REPS times; prints the median wall time and the peak memory (max RSS) per length, so memory
# independent of the length shows as a flat column.
#
#   benches/observe.sh              # 1e5, 1e6 and 1e7 samples
#   SIZES="1e7" REPS=5 benches/observe.sh
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
reps=${REPS:-3}
sizes=${SIZES:-"1e5 1e6 1e7"}
tmp=${TMPDIR:-/tmp}/escapade-observe-bench
mkdir -p "$tmp"
cargo build --release --quiet --manifest-path "$here/Cargo.toml" --example observe_trajectory --bin escapade
esc="$here/target/release/escapade"
median() { sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
printf "%-10s %-12s %-14s %s\n" samples "file (MB)" "wall (s)" "max RSS (MB)"
for n in $sizes; do
    f="$tmp/traj_$n.csv"
    # samples every 0.01 time units
    duration=$(python3 -c "print(float('$n') * 0.01)")
    [ -s "$f" ] || "$here/target/release/examples/observe_trajectory" 3.5 "$duration" 7 > "$f"
    mb=$(du -m "$f" | cut -f1)
    wall=$(for _ in $(seq "$reps"); do
        /usr/bin/time -f "%e %M" "$esc" -q observe "$f" --json 2>&1 >/dev/null | tail -1 | cut -d' ' -f1
    done | median)
    rss=$(/usr/bin/time -f "%M" "$esc" -q observe "$f" --json 2>&1 >/dev/null | tail -1)
    printf "%-10s %-12s %-14s %s\n" "$n" "$mb" "$wall" "$((rss / 1024))"
done
