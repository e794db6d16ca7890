#!/bin/bash
# Runs a sharded firemain sweep on Kubernetes: the Indexed Job of the shards, a wait until it is
# complete, then the merge Job. Needs kubectl set to the cluster, the claim `firemain-data`
# holding /data/network and /data/criteria.toml, and the image named in both manifests.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
timeout="${TIMEOUT:-24h}"
kubectl apply -f "$here/k8s-shards-job.yaml"
# Fails (and stops here) if the shards' Job fails or times out: the merge would refuse anyway.
kubectl wait --for=condition=complete job/firemain-shards --timeout="$timeout"
kubectl apply -f "$here/k8s-merge-job.yaml"
kubectl wait --for=condition=complete job/firemain-merge --timeout=1h
kubectl logs job/firemain-merge
