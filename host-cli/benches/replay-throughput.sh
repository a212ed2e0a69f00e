#!/usr/bin/env bash
# Replay throughput, end to end (CSV parse + core + writing events), and peak memory.
#
# Generates a ROWS-row feed from the demo scenario with `steadycal simulate`, then runs
# `/usr/bin/time -v steadycal replay FEED --events EVENTS` and prints rows/s and the peak
# resident set size. Run twice with different ROWS to see that peak RSS does not grow with
# the feed length. This is a benchmark, not a test: nothing fails on a slow machine.
#
# Usage: host-cli/benches/replay-throughput.sh [ROWS] [extra replay options...]
#   ROWS defaults to 10000000. Needs /usr/bin/time (Debian package `time`).
set -euo pipefail
cd "$(dirname "$0")/../.."
rows="${1:-10000000}"
shift || true
bin=target/release/steadycal
cargo build --release --quiet --bin steadycal
work="${BENCH_DIR:-$(mktemp -d)}"
mkdir -p "$work"
feed="$work/feed-$rows.csv"
if [ ! -s "$feed" ]; then
  "$bin" simulate simulated-feeds/gas-cell.toml --rows "$rows" --out "$feed"
fi
size=$(wc -c < "$feed")
echo "feed: $feed ($rows rows, $size bytes)"
run() {
  local label="$1"; shift
  /usr/bin/time -v "$@" 2> "$work/time.txt" > /dev/null
  local seconds rss
  seconds=$(awk -F': ' '/Elapsed \(wall clock\)/ {n=split($2,p,":"); s=0; for(i=1;i<=n;i++) s=s*60+p[i]; print s}' "$work/time.txt")
  rss=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$work/time.txt")
  awk -v label="$label" -v rows="$rows" -v s="$seconds" -v rss="$rss" -v bytes="$size" \
    'BEGIN { printf "%-34s %7.2f s  %6.2f M rows/s  %7.1f MB/s  peak RSS %6.1f MiB\n", label, s, rows/s/1e6, bytes/s/1e6, rss/1024 }'
}
run "replay (events written)" "$bin" replay "$feed" --events "$work/events.jsonl" --quiet "$@"
run "replay f64 (events written)" "$bin" replay "$feed" --events "$work/events.jsonl" --precision f64 --quiet "$@"
run "reading only (cat, for scale)" cat "$feed"
