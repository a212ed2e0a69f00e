#!/usr/bin/env bash
# Report size and render time for a long replay: simulates ROWS rows of the gas-cell
# scenario, replays them with --report, prints the HTML size, then loads the page in
# headless chromium RUNS times (screenshot at 1280x2000) and prints the wall times, beside
# those of a blank page (chromium's own start-up and teardown, to subtract).
#
# Usage: host-cli/benches/report-render.sh [ROWS] [RUNS]   (defaults 1000000, 5)
# A benchmark, not a test: nothing here fails on a slow machine.
set -euo pipefail
cd "$(dirname "$0")/../.."
rows=${1:-1000000}
runs=${2:-5}
chromium=${CHROMIUM:-/usr/bin/chromium}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cargo build --release -q -p steadycal-cli --bin steadycal
bin=target/release/steadycal
"$bin" simulate simulated-feeds/gas-cell.toml --rows "$rows" --out "$work/feed.csv"
start=$(date +%s.%N)
"$bin" replay "$work/feed.csv" -q --report "$work/report.html"
end=$(date +%s.%N)
bytes=$(wc -c < "$work/report.html")
printf 'report-render: %s rows, replay with --report %.2f s, report %s bytes (%.2f MB)\n' \
  "$rows" "$(echo "$end - $start" | bc)" "$bytes" "$(echo "$bytes / 1000000" | bc -l)"
printf '<!DOCTYPE html><html><body></body></html>\n' > "$work/blank.html"
load() {
  local profile
  profile=$(mktemp -d)
  local t0 t1
  t0=$(date +%s.%N)
  timeout 120 "$chromium" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
    --disable-background-networking --disable-component-update --disable-sync \
    --user-data-dir="$profile" --screenshot="$work/shot.png" --window-size=1280,2000 \
    "file://$1" > /dev/null 2>&1
  t1=$(date +%s.%N)
  rm -rf "$profile"
  echo "$t1 - $t0" | bc
}
for page in blank report; do
  times=()
  for _ in $(seq "$runs"); do
    times+=("$(load "$work/$page.html")")
  done
  sorted=$(printf '%s\n' "${times[@]}" | sort -n | tr '\n' ' ')
  median=$(printf '%s\n' "${times[@]}" | sort -n | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}')
  printf 'report-render: %s page, %s loads, wall seconds: %s(median %s)\n' "$page" "$runs" "$sorted" "$median"
done
