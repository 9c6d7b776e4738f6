#!/usr/bin/env bash
# Runs the peer task (../shared/peers/README.txt) with escapade and with the C, numba and numpy peers
# in one go, so the ratios come from one run on one machine. Prints ns per trajectory step
# (median of REPS runs) and each peer's time relative to escapade at the same thread count.
#
#   benches/peers.sh            # builds the peers into ${TMPDIR:-/tmp}/escapade-peers if needed
#   REPS=5 benches/peers.sh
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
peers=$(cd "$here/../shared/peers" && pwd)
reps=${REPS:-3}
build=${PEERS_BUILD:-${TMPDIR:-/tmp}/escapade-peers}
if [ ! -x "$build/bin/peer_c" ] || [ ! -x "$build/venv/bin/python" ]; then
    PEERS_BUILD="$build" "$peers/build.sh" --venv >/dev/null
fi
cargo build --release --quiet --manifest-path "$here/Cargo.toml"
esc="$here/target/release/escapade"
args=(--eb 4 --dt 1e-3 --tmax 1e4 --n 2000 --seed 12345)

median() { sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
ns_escapade() { # threads [scenario]
    for _ in $(seq "$reps"); do
        "$esc" simulate "$here/benches/${2:-peer_task}.toml" --json --quiet --threads "$1" |
            python3 -c 'import json,sys; s=json.load(sys.stdin)["simulation"]; print(s["wall_seconds"]/s["total_steps"]*1e9)'
    done | median
}
ns_peer() { # command...
    for _ in $(seq "$reps"); do
        "$@" 2>/dev/null | python3 -c 'import json,sys; print(json.load(sys.stdin)["ns_per_step"])'
    done | median
}
py="$build/venv/bin/python"
printf '%-28s %8s %8s   %s\n' "program" "threads" "ns/step" "time / escapade's"
for t in 1 2; do
    e=$(ns_escapade "$t")
    printf '%-28s %8s %8.2f   %s\n' "escapade (this crate)" "$t" "$e" "1"
    v=$(ns_escapade "$t" peer_task_formula)
    printf '%-28s %8s %8.2f   %.2f\n' "escapade, formula potential" "$t" "$v" "$(echo "$v / $e" | bc -l)"
    for name in c c_portable; do
        v=$(ns_peer "$build/bin/peer_$name" "${args[@]}" --threads "$t")
        printf '%-28s %8s %8.2f   %.2f\n' "peer_$name" "$t" "$v" "$(echo "$v / $e" | bc -l)"
    done
    v=$(ns_peer "$py" "$peers/peer_numba.py" "${args[@]}" --threads "$t" --rng xoshiro)
    printf '%-28s %8s %8.2f   %.2f\n' "peer_numba (xoshiro)" "$t" "$v" "$(echo "$v / $e" | bc -l)"
    v=$(ns_peer "$py" "$peers/peer_numba.py" "${args[@]}" --threads "$t")
    printf '%-28s %8s %8.2f   %.2f\n' "peer_numba (builtin normal)" "$t" "$v" "$(echo "$v / $e" | bc -l)"
    if [ "$t" = 1 ]; then
        v=$(ns_peer "$py" "$peers/peer_numpy.py" "${args[@]}")
        printf '%-28s %8s %8.2f   %.2f\n' "peer_numpy" "$t" "$v" "$(echo "$v / $e" | bc -l)"
    fi
done
