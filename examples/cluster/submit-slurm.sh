#!/bin/bash
# Queues a sharded firemain sweep on Slurm: an array job of N shards, then the merge, which
# starts only when every shard has succeeded (afterok).
#
#   NETWORK=/shared/net CRITERIA=/shared/criteria.toml PARTS=/shared/parts OUT=/shared/report \
#       examples/cluster/submit-slurm.sh 64 [--wait]
#
# --wait: return when the merge has ended, with its exit status (sbatch --wait).
set -euo pipefail
n="${1:?give the number of shards}"
shift
here="$(cd "$(dirname "$0")" && pwd)"
: "${NETWORK:?}" "${CRITERIA:?}" "${PARTS:?}" "${OUT:?}"
mkdir -p "$PARTS"
array=$(sbatch --parsable --array="0-$((n - 1))" "$here/slurm-array.sh")
array="${array%%;*}"
echo "shards: job $array (array 0-$((n - 1)))"
sbatch --dependency="afterok:$array" --kill-on-invalid-dep=yes "$@" "$here/slurm-merge.sh"
