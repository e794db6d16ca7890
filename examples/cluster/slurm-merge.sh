#!/bin/bash
# The merge of a sharded firemain sweep, as a Slurm job that runs after the array job:
#   sbatch --dependency=afterok:ARRAY_JOB_ID examples/cluster/slurm-merge.sh
# (examples/cluster/submit-slurm.sh does both).
#
# Set in the environment of sbatch:
#   PARTS     the folder holding the partials (check-partial-K-of-N.jsonl)
#   OUT       the folder for the report files
#   FIREMAIN  the firemain binary (default: firemain on PATH)
# merge reads the network and criteria where the shards recorded them and checks their SHA-256;
# add --network / --criteria below if this node mounts them at another path.
#
#SBATCH --job-name=firemain-merge
#SBATCH --cpus-per-task=2
#SBATCH --mem=2G
#SBATCH --time=01:00:00
#SBATCH --output=firemain-merge-%j.log
set -euo pipefail
: "${PARTS:?set PARTS to the folder holding the partials}"
: "${OUT:?set OUT to the folder for the report files}"

status=0
"${FIREMAIN:-firemain}" merge "$PARTS" --out "$OUT" --threads "${SLURM_CPUS_PER_TASK:-1}" || status=$?
# Exit code 1 means findings (some hydrant fails): the files are written and the job did its
# work, so Slurm should not mark it FAILED. 2 (refused: missing shards, other inputs) and 3
# (analysis error) do fail the job.
if [ "$status" -eq 1 ]; then
    echo "firemain merge: findings (some hydrant or junction fails); see $OUT/report.md"
    exit 0
fi
exit "$status"
