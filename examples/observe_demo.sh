#!/usr/bin/env bash
# Invented example: trajectories made by escapade's own engine, analysed as if they were data.
#
# examples/observe_trajectory.rs runs one overdamped particle in a 3.5 kT double well (D = 1,
# Euler–Maruyama, sampled every 0.01) and prints "t,x" lines; here two independent runs of
# 2000 time units are read as a colloid's positions in um and times in s. `observe` gives the
# free energy with σ_U and the rates between the wells with their intervals, writes the profile
# and a scenario reading it, and `rate` then gives the theory on the observed profile.
# Files go to a new temporary folder (or $OUT).
set -euo pipefail
cd "$(dirname "$0")/.."
OUT=${OUT:-$(mktemp -d)}
mkdir -p "$OUT"
echo "files in $OUT" >&2
cargo build --release --quiet --example observe_trajectory --bin escapade
for seed in 1 2; do
    target/release/examples/observe_trajectory 3.5 2000 "$seed" > "$OUT/run$seed.csv"
done
cat > "$OUT/model.toml" <<'TOML'
# what the trajectories are measured in, and the particle's diffusion coefficient
title = "invented colloid in a double-well trap"

[units]
energy = "kT"
length = "um"
time = "s"

[particle]
diffusion = 1.0      # um^2/s

[potential]
family = "double-well"
barrier = 3.5
half_width = 1.0

[states]
start = -1.0
TOML
target/release/escapade observe "$OUT/run1.csv" "$OUT/run2.csv" --scenario "$OUT/model.toml" \
    --diffusion --plot "$OUT/observed.svg" --profile "$OUT/profile.csv" --scenario-out "$OUT/observed.toml"
target/release/escapade rate "$OUT/observed.toml"
