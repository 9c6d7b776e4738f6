#!/usr/bin/env bash
# Invented example: one ensemble split over a cluster job array, then merged.
#
# Each array task runs part K of N of the trajectory indices and writes its own record file; the
# merge reports exactly the numbers one uninterrupted run would give (each trajectory's random
# stream depends only on the seed and its index). A task that was killed can be rerun with
# --resume: it skips the trajectories already in its record file.
#
# With a scheduler that sets an array index (1-based here), submit e.g.
#   sbatch --array=1-8 examples/job_array.sh          # SLURM: SLURM_ARRAY_TASK_ID
# and afterwards:
#   escapade merge runs/part_*.csv
# Without a scheduler, `examples/job_array.sh all` runs the parts one after another and merges.
set -euo pipefail
N=${PARTS:-8}
SCENARIO=${SCENARIO:-examples/double_well_reduced.toml}
mkdir -p runs
run_part() {
    escapade simulate "$SCENARIO" --shard "$1/$N" --records "runs/part_$1.csv" --resume --quiet
}
if [ "${1:-}" = "all" ]; then
    for k in $(seq 1 "$N"); do run_part "$k" > /dev/null; done
    escapade merge runs/part_*.csv
else
    run_part "${SLURM_ARRAY_TASK_ID:-${PBS_ARRAY_INDEX:-${SGE_TASK_ID:-1}}}"
fi
