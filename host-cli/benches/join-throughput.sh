#!/usr/bin/env bash
# Two-file join throughput, end to end: a sensor log and a reference log joined by time
# (`replay SENSOR --reference REF --match-within 0.5s`), and peak memory.
#
# Generates a ROWS-row feed from the demo scenario with `steadycal simulate`, splits it into
# a sensor log (t,raw: every row) and a reference log (t,ref: the rows with a reference),
# then runs `/usr/bin/time -v steadycal replay SENSOR --reference REF --match-within 0.5s
# --events EVENTS` and prints sensor rows/s and the peak resident set size. Run twice with
# different ROWS to see that peak RSS does not grow with the feed length. A benchmark, not
# a test: nothing fails on a slow machine.
#
# Usage: host-cli/benches/join-throughput.sh [ROWS] [extra replay options...]
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
sensor="$work/sensor-$rows.csv"
reference="$work/reference-$rows.csv"
if [ ! -s "$feed" ]; then
  "$bin" simulate simulated-feeds/gas-cell.toml --rows "$rows" --out "$feed"
fi
if [ ! -s "$sensor" ] || [ ! -s "$reference" ]; then
  awk -F, -v s="$sensor" -v r="$reference" '
    NR == 1 { print "t,raw" > s; print "t,ref" > r; next }
    { print $1 "," $2 > s; if ($3 != "") print $1 "," $3 > r }' "$feed"
fi
echo "sensor log: $sensor ($rows rows, $(wc -c < "$sensor") bytes); reference log: $(($(wc -l < "$reference") - 1)) rows"
/usr/bin/time -v "$bin" replay "$sensor" --reference "$reference" --match-within 0.5s \
  --events "$work/events.jsonl" --quiet "$@" 2> "$work/time.txt" > /dev/null
seconds=$(awk -F': ' '/Elapsed \(wall clock\)/ {n=split($2,p,":"); s=0; for(i=1;i<=n;i++) s=s*60+p[i]; print s}' "$work/time.txt")
rss=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$work/time.txt")
awk -v rows="$rows" -v s="$seconds" -v rss="$rss" \
  'BEGIN { printf "join (events written)  %7.2f s  %6.2f M sensor rows/s  peak RSS %6.1f MiB\n", s, rows/s/1e6, rss/1024 }'
