#!/usr/bin/env bash
# Forward flux sampling at 15 kT (benches/ffs_15kt.toml) on 2 threads: accuracy against the exact
# MFPT rate, the 95% half-width, wall time and steps, beside what brute force would need for the
# same half-width (n escapes with 1.96/sqrt(n) equal to it, each taking 1/k / dt steps, at the ns
# per step brute force reaches on the peer task on 2 threads).
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
cargo build --release --quiet --manifest-path "$here/Cargo.toml"
esc="$here/target/release/escapade"
bf_ns=$("$esc" simulate "$here/benches/peer_task.toml" --json --quiet --threads 2 --set simulation.trajectories=20000 |
    python3 -c 'import json,sys; s=json.load(sys.stdin)["simulation"]; print(s["wall_seconds"]/s["total_steps"]*1e9)')
"$esc" compare "$here/benches/ffs_15kt.toml" --json --quiet --threads 2 | python3 -c "
import json, sys
d = json.load(sys.stdin); s = d['simulation']; exact = d['rates']['mfpt']
lo, hi = s['rate_ci95']; half = 0.5 * (hi - lo) / s['rate']
n = (1.96 / half) ** 2
bf_steps = n / exact / s['dt']
print(f'FFS rate {s[\"rate\"]:.5e}  exact MFPT rate {exact:.5e}  deviation {100*(s[\"rate\"]/exact-1):+.2f}%')
print(f'95% half-width {100*half:.2f}%  wall {s[\"wall_seconds\"]:.2f} s on {s[\"threads\"]} threads  steps {s[\"total_steps\"]:.3e}')
print(f'brute force for the same half-width: {n:.0f} escapes, {bf_steps:.3e} steps, about {bf_steps*$bf_ns*1e-9/3600:.1f} h at $bf_ns ns/step')
"
