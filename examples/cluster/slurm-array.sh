#!/bin/bash
# One shard of a firemain fire-flow sweep, as a task of a Slurm array job.
#
# Submit N shards (task ids must run from 0 to N-1):
#   sbatch --array=0-63 examples/cluster/slurm-array.sh
# or use examples/cluster/submit-slurm.sh, which also queues the merge after them.
#
# Each task analyses the hydrants K, K+N, K+2N, ... (K = SLURM_ARRAY_TASK_ID,
# N = SLURM_ARRAY_TASK_COUNT) and writes PARTS/check-partial-K-of-N.jsonl. With --resume, a task
# that is requeued (node failure, preemption, `scontrol requeue`) goes on from its journal.
#
# Set in the environment of sbatch (exported to the job by default):
#   NETWORK   the network folder, on storage every node mounts at the same path
#   CRITERIA  the criteria file (TOML)
#   PARTS     the folder for the partials (shared storage; created if missing)
#   FIREMAIN  the firemain binary (default: firemain on PATH)
#
#SBATCH --job-name=firemain-shard
#SBATCH --cpus-per-task=2
#SBATCH --mem=2G
#SBATCH --time=04:00:00
#SBATCH --requeue
#SBATCH --output=firemain-shard-%A_%a.log
set -euo pipefail
: "${NETWORK:?set NETWORK to the network folder}"
: "${CRITERIA:?set CRITERIA to the criteria file}"
: "${PARTS:?set PARTS to the shared folder for the partials}"
: "${SLURM_ARRAY_TASK_ID:?submit with sbatch --array=0-(N-1)}"
: "${SLURM_ARRAY_TASK_COUNT:?submit with sbatch --array=0-(N-1)}"

exec "${FIREMAIN:-firemain}" check "$NETWORK" --criteria "$CRITERIA" --out "$PARTS" \
    --shard "$SLURM_ARRAY_TASK_ID/$SLURM_ARRAY_TASK_COUNT" \
    --threads "${SLURM_CPUS_PER_TASK:-1}" --resume
