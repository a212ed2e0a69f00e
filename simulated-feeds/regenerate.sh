#!/usr/bin/env bash
# Regenerates every feed of this folder from its scenario: NAME.toml -> NAME.csv and
# NAME.truth.json (NAME.monitor.toml files are monitor configurations, not scenarios).
# Usage: simulated-feeds/regenerate.sh [path/to/steadycal]
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
bin="${1:-}"
if [ -z "$bin" ]; then
  (cd "$here/.." && cargo build --release --quiet --bin steadycal)
  bin="$here/../target/release/steadycal"
fi
for scenario in "$here"/*.toml; do
  case "$scenario" in *.monitor.toml) continue ;; esac
  name="${scenario%.toml}"
  "$bin" simulate "$scenario" --out "$name.csv" --truth "$name.truth.json"
  printf '%-28s %8s bytes\n' "$(basename "$name.csv")" "$(wc -c < "$name.csv")"
done
