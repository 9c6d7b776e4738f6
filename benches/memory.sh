#!/usr/bin/env bash
# Cost per step of the memory-friction integrator (generalised Langevin equation, one auxiliary
# variable, exact (v, z) O-step) against plain BAOAB on the same escape problem, in one run.
# Prints ns per step (median of REPS runs) and the ratio.
#
#   benches/memory.sh
#   REPS=5 benches/memory.sh
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
reps=${REPS:-3}
cargo build --release --quiet --manifest-path "$here/Cargo.toml"
esc="$here/target/release/escapade"
median() { sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
ns() { # threads [--set ...]
    local t=$1
    shift
    for _ in $(seq "$reps"); do
        "$esc" simulate "$here/benches/memory.toml" --json --quiet --threads "$t" "$@" |
            python3 -c 'import json,sys; s=json.load(sys.stdin)["simulation"]; print(s["wall_seconds"]/s["total_steps"]*1e9)'
    done | median
}
printf '%-34s %8s %8s   %s\n' "integrator" "threads" "ns/step" "time / BAOAB's"
for t in 1 2; do
    b=$(ns "$t")
    printf '%-34s %8s %8.2f   %s\n' "baoab (memoryless)" "$t" "$b" "1"
    m=$(ns "$t" --set particle.memory_time=0.5)
    printf '%-34s %8s %8.2f   %.2f\n' "baoab-memory (tau = 0.5)" "$t" "$m" "$(echo "$m / $b" | bc -l)"
done
