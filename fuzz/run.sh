#!/usr/bin/env bash
# Coverage-guided fuzzing of firemain's loaders and solver (cargo-fuzz / libFuzzer).
#
#   fuzz/run.sh [SECONDS] [TARGET...]
#
# Builds every target once (nightly toolchain, `cargo install cargo-fuzz`), then runs each
# TARGET (default: all of `cargo fuzz list`) for SECONDS (default 60) of wall-clock time, all
# at once (FUZZ_JOBS=N runs at most N at a time). A run that finds a crash is restarted on the
# rest of its time (at most FUZZ_RESTARTS=10 times), so a long run keeps going after a find.
#
# Environment:
#   FUZZ_LOG_DIR    logs, crash inputs (artifacts/<target>/) and the grown corpora
#                   (corpus/<target>/); default fuzz/logs/
#   FUZZ_JOBS       targets run at the same time (default: all)
#   FUZZ_SANITIZER  cargo fuzz's --sanitizer (default none: safe Rust, twice the speed)
#   FUZZ_RESTARTS   restarts of one target after crashes (default 10)
#
# The committed corpora in fuzz/corpus/<target>/ are read, never written: new inputs go to
# the log folder's corpus (minimize them into fuzz/corpus with `cargo fuzz cmin`, see
# DEVELOPERS.md, "Fuzzing"). Each target gets the dictionary of its file format (fuzz/dict/:
# CSV, TOML or JSON tokens, and numbers that broke readers before). Prints per target:
# executions, exec/s, coverage, corpus size and crashes.
set -u

here="$(cd "$(dirname "$0")" && pwd)"
cd "$here" || exit 2
seconds="${1:-60}"
shift || true
logs="${FUZZ_LOG_DIR:-$here/logs}"
sanitizer="${FUZZ_SANITIZER:-none}"
restarts="${FUZZ_RESTARTS:-10}"
mkdir -p "$logs"
logs="$(cd "$logs" && pwd)"

echo "building the fuzz targets (sanitizer $sanitizer, debug assertions on)"
if ! cargo +nightly fuzz build --sanitizer "$sanitizer" --debug-assertions >"$logs/build.log" 2>&1; then
    tail -30 "$logs/build.log"
    echo "build failed; see $logs/build.log" >&2
    exit 2
fi
bin_dir="$here/target/x86_64-unknown-linux-gnu/release"

if [ "$#" -gt 0 ]; then
    targets=("$@")
else
    mapfile -t targets < <(cargo +nightly fuzz list)
fi
jobs="${FUZZ_JOBS:-${#targets[@]}}"

# -max_len: twice the largest seed, at least 4 KiB (the demo's pipes.csv is the largest file).
max_len() {
    local largest
    largest=$(find "corpus/$1" -type f -printf '%s\n' 2>/dev/null | sort -n | tail -1)
    largest=$((${largest:-0} * 2))
    [ "$largest" -lt 4096 ] && largest=4096
    echo "$largest"
}

# The dictionary of a target's file format (fuzz/dict/, the numbers appended), or nothing.
dict_arg() {
    local kind
    case "$1" in
    solve) return ;;
    gis_pipes | gis_hydrants | journal) kind=json ;;
    model_toml | criteria | method | project | gis_mapping) kind=toml ;;
    *) kind=csv ;;
    esac
    mkdir -p "$logs/dict"
    cat "dict/$kind.dict" dict/numbers.dict >"$logs/dict/$kind.dict"
    echo "-dict=$logs/dict/$kind.dict"
}

# Runs one target for $seconds, restarting after a crash while time is left.
run_target() {
    local t="$1"
    local log="$logs/$t.log"
    local work="$logs/corpus/$t"
    local artifacts="$logs/artifacts/$t/"
    mkdir -p "$work" "$artifacts" "corpus/$t"
    : >"$log"
    local end=$(($(date +%s) + seconds))
    local n=0
    local dict
    dict=$(dict_arg "$t")
    while :; do
        local left=$((end - $(date +%s)))
        [ "$left" -le 0 ] && break
        echo "=== run $n: ${left} s left ($(date))" >>"$log"
        "$bin_dir/$t" "$work" "corpus/$t" \
            -max_total_time="$left" -rss_limit_mb=1024 -timeout=10 \
            -max_len="$(max_len "$t")" -print_final_stats=1 \
            -artifact_prefix="$artifacts" $dict >>"$log" 2>&1
        local rc=$?
        echo "=== exit $rc" >>"$log"
        [ "$rc" -eq 0 ] && break
        n=$((n + 1))
        [ "$n" -gt "$restarts" ] && break
    done
}

echo "running ${#targets[@]} target(s) for $seconds s each, $jobs at a time; logs in $logs"
running=0
for t in "${targets[@]}"; do
    if [ ! -x "$bin_dir/$t" ]; then
        echo "unknown target $t (see cargo fuzz list)" >&2
        exit 2
    fi
    run_target "$t" &
    running=$((running + 1))
    if [ "$running" -ge "$jobs" ]; then
        wait -n
        running=$((running - 1))
    fi
done
wait

# Summary from libFuzzer's final statistics (one block per run of a target) and its status
# lines (the last `cov:` figure is the coverage reached).
status=0
printf '%-18s %12s %9s %7s %7s %8s\n' target executions exec/s cov corpus crashes
for t in "${targets[@]}"; do
    log="$logs/$t.log"
    execs=$(grep -a 'stat::number_of_executed_units' "$log" | awk '{s += $NF} END {print s + 0}')
    rate=$((execs / (seconds > 0 ? seconds : 1)))
    cov=$(grep -ao 'cov: [0-9]*' "$log" | tail -1 | awk '{print $2}')
    corp=$(grep -ao 'corp: [0-9]*' "$log" | tail -1 | awk '{print $2}')
    crashes=$(find "$logs/artifacts/$t" -type f \( -name 'crash-*' -o -name 'timeout-*' \
        -o -name 'oom-*' -o -name 'leak-*' \) 2>/dev/null | wc -l)
    [ "$crashes" -gt 0 ] && status=1
    printf '%-18s %12s %9s %7s %7s %8s\n' "$t" "$execs" "$rate" "${cov:--}" "${corp:--}" "$crashes"
done
[ "$status" -ne 0 ] && echo "crash inputs are in $logs/artifacts/<target>/"
exit "$status"
