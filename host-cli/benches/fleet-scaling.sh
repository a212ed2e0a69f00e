#!/usr/bin/env bash
# Fleet scaling with cores: replays a directory of CHANNELS copies of a ROWS-row feed with
# `steadycal fleet --jobs 1` and then `--jobs N` for N up to the machine's core count, and
# prints wall time, CPU time and the speed-up over one job. A benchmark, not a test: run it
# on an otherwise idle machine (nothing fails on a slow one).
#
# Usage: host-cli/benches/fleet-scaling.sh [CHANNELS] [ROWS]   (defaults 8 and 1000000)
set -euo pipefail
cd "$(dirname "$0")/../.."
channels="${1:-8}"
rows="${2:-1000000}"
bin=target/release/steadycal
cargo build --release --quiet --bin steadycal
work="${BENCH_DIR:-$(mktemp -d)}"
mkdir -p "$work/fleet"
feed="$work/feed-$rows.csv"
[ -s "$feed" ] || "$bin" simulate simulated-feeds/gas-cell.toml --rows "$rows" --out "$feed"
for i in $(seq 1 "$channels"); do cp "$feed" "$work/fleet/channel-$i.csv"; done
cores=$(nproc)
base=""
for jobs in $(seq 1 "$cores"); do
  /usr/bin/time -f '%e %U %S' -o "$work/time.txt" "$bin" fleet "$work/fleet" --jobs "$jobs" >/dev/null
  read -r wall user sys < "$work/time.txt"
  [ -n "$base" ] || base="$wall"
  awk -v j="$jobs" -v w="$wall" -v u="$user" -v s="$sys" -v b="$base" -v c="$channels" -v r="$rows" \
    'BEGIN { printf "--jobs %d: %6.2f s wall, %6.2f s CPU, %5.2f M rows/s, speed-up %.2f\n", j, w, u+s, c*r/w/1e6, b/w }'
done
