#!/usr/bin/env bash
# Benchmark: report.html of the 10k-junction synthetic network, its size and the time Debian's
# chromium takes to load it, run its script and draw it (headless screenshot), against the time
# it takes for an empty page (the browser's own start-up), in interleaved runs.
#
#   benches/report/browser_render.sh [RUNS]      (default 5; needs chromium on the PATH)
#
# Prints the report's size, the median wall time of each, and their difference (the page's own
# cost). Figures from this machine are in docs/performance.md.
set -euo pipefail
cd "$(dirname "$0")/../.."
runs="${1:-5}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

cargo build --release --quiet --example synthetic
cargo build --release --quiet
cargo run --release --quiet --example synthetic -- --junctions 10000 --seed 1 --out "$work/net" 2>/dev/null
start=$(date +%s.%N)
./target/release/firemain check "$work/net" --criteria criteria/common-practice-us.toml \
  --out "$work/out" --quiet >/dev/null 2>&1 || [ $? -eq 1 ]
end=$(date +%s.%N)
echo "check --out on the 10k network: $(echo "$end - $start" | bc) s"
echo "report.html: $(stat -c %s "$work/out/report.html") bytes, $(grep -c 'class="sheet' "$work/out/report.html") hydrant sheets"
echo '<!DOCTYPE html><title>empty</title>' > "$work/empty.html"

render() {
  local page="$1" profile="$work/profile-$RANDOM"
  local t0 t1
  t0=$(date +%s.%N)
  chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
    --disable-background-networking --disable-component-update --disable-sync \
    --hide-scrollbars --user-data-dir="$profile" --window-size=1280,1800 \
    --screenshot="$work/shot.png" "file://$page" >/dev/null 2>&1
  t1=$(date +%s.%N)
  rm -rf "$profile"
  echo "$t1 - $t0" | bc
}

report_times=(); empty_times=()
for _ in $(seq "$runs"); do
  empty_times+=("$(render "$work/empty.html")")
  report_times+=("$(render "$work/out/report.html")")
done
median() { printf '%s\n' "$@" | sort -n | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
e=$(median "${empty_times[@]}"); r=$(median "${report_times[@]}")
echo "chromium, empty page:  median ${e} s over ${runs} runs"
echo "chromium, report.html: median ${r} s over ${runs} runs"
echo "the report's own cost: $(echo "$r - $e" | bc) s"
