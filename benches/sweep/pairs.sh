#!/usr/bin/env bash
# The fire-flow sweep's speed targets (docs/performance.md, "The sweep's speed targets"), measured
# as back-to-back pairs: the build before the sweep-speed work (commit 2c7b083, or
# FIREMAIN_BEFORE) against the working tree's build, on the seeded synthetic networks:
#   10k:  all 2,500 hydrants, 2 threads
#   100k: the 200-hydrant sample `--shard 0/125`, 2 threads
# For each pair it prints both sweep wall times (the `s wall` of the `--stats` line), their ratio,
# the numeric factorizations per hydrant and the whole process's peak memory. A pair is run back
# to back because this machine's speed drifts by up to a quarter within an hour: the ratio is the
# figure that holds.
#
#   benches/sweep/pairs.sh [ROUNDS] [10k|100k|both]      (default: 3 both)
#
# Work files go to target/bench-sweep (FIREMAIN_BENCH_DIR): the old build's source and binary,
# the networks (generated once) and each run's output folder.
set -euo pipefail

rounds=${1:-3}
which=${2:-both}
root=$(git rev-parse --show-toplevel)
cd "$root"
before=${FIREMAIN_BEFORE:-2c7b083}
work=${FIREMAIN_BENCH_DIR:-$root/target/bench-sweep}
mkdir -p "$work"

# The build before, from its own source tree and target folder (a shared target folder could
# hand one build's binary to the other).
old_src="$work/before-$before"
if [[ ! -x "$old_src/target/release/firemain" ]]; then
    rm -rf "$old_src"
    mkdir -p "$old_src"
    git archive "$before" | tar -x -C "$old_src"
    cargo build --release --quiet --manifest-path "$old_src/Cargo.toml" \
        --target-dir "$old_src/target"
fi
cargo build --release --quiet
cp target/release/firemain "$work/firemain-now"
old_bin="$old_src/target/release/firemain"
new_bin="$work/firemain-now"

network() { # junctions → folder
    local dir="$work/n$1"
    if [[ ! -f "$dir/model.toml" ]]; then
        rm -rf "$dir"
        cargo run --release --quiet --example synthetic -- --junctions "$1" --seed 1 --out "$dir" >/dev/null 2>&1
    fi
    echo "$dir"
}

# One run: prints "wall_s factorizations_per_hydrant peak_MB". Exit status 1 (failing hydrants
# found) is the expected outcome of these networks.
run() { # binary network-folder extra-args...
    local bin=$1 net=$2
    shift 2
    local out="$work/out"
    rm -rf "$out"
    local status=0
    /usr/bin/time -f '%M' -o "$work/time.txt" "$bin" check "$net" \
        --criteria criteria/common-practice-us.toml --stats --threads 2 --quiet --out "$out" "$@" \
        >/dev/null 2>"$work/stderr.txt" || status=$?
    if [[ $status -gt 1 ]]; then
        echo "firemain exited with $status:" >&2
        cat "$work/stderr.txt" >&2
        exit 1
    fi
    local line
    line=$(grep '^sweep:' "$work/stderr.txt")
    local wall per_hydrant
    wall=$(sed -E 's/.* ([0-9.]+) s wall.*/\1/' <<<"$line")
    per_hydrant=$(sed -E 's/.*\(([0-9.]+) per hydrant.*/\1/' <<<"$line")
    echo "$wall $per_hydrant $(( $(tail -1 "$work/time.txt") / 1024 ))"
}

pairs() { # label junctions extra-args...
    local label=$1 net
    net=$(network "$2")
    shift 2
    local i
    for ((i = 1; i <= rounds; i++)); do
        read -r w0 f0 m0 < <(run "$old_bin" "$net" "$@")
        read -r w1 f1 m1 < <(run "$new_bin" "$net" "$@")
        awk -v l="$label" -v i="$i" -v w0="$w0" -v w1="$w1" -v f0="$f0" -v f1="$f1" \
            -v m0="$m0" -v m1="$m1" 'BEGIN {
                printf "%-5s %5d %10.2f %10.2f %6.2f %10.2f %10.2f %10d %10d\n",
                    l, i, w0, w1, w1 / w0, f0, f1, m0, m1 }'

    done
}

echo "before: $before; now: $(git rev-parse --short HEAD)$(git diff --quiet || echo ' (with uncommitted changes)')"
printf '%-5s %5s %10s %10s %6s %10s %10s %10s %10s\n' network round before_s now_s ratio F/h_before F/h_now MB_before MB_now
if [[ $which == 10k || $which == both ]]; then
    pairs 10k 10000
fi
if [[ $which == 100k || $which == both ]]; then
    pairs 100k 100000 --shard 0/125
fi
