#!/usr/bin/env bash
# Reproduces the firmware's instruction counts per push: builds the release firmware
# (opt-level "s"), runs it twice under QEMU with -icount shift=0 (run-qemu.sh), checks the
# two runs print identical counts, and converts SysTick ticks to instructions with the
# ratio the firmware measures on a loop of known length (40 on mps2-an386).
# Usage: firmware/measure.sh [extra cargo args, e.g. --features fast-math]
set -euo pipefail
cd "$(dirname "$0")"
command -v qemu-system-arm >/dev/null || { echo "qemu-system-arm missing: run firmware/install-qemu.sh" >&2; exit 2; }
cargo build --release --target thumbv7em-none-eabihf "$@" >&2
elf=target/thumbv7em-none-eabihf/release/steadycal-firmware
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
./run-qemu.sh "$elf" "$out/run1.txt" 300
./run-qemu.sh "$elf" "$out/run2.txt" 300
grep -E '^(counter|timing)' "$out/run1.txt" >"$out/t1"
grep -E '^(counter|timing)' "$out/run2.txt" >"$out/t2"
if ! cmp -s "$out/t1" "$out/t2"; then
  echo "counts differ between two runs:" >&2; diff "$out/t1" "$out/t2" >&2; exit 1
fi
awk '
  /^counter/ { for (i = 2; i <= NF; i++) { split($i, kv, "="); v[kv[1]] = kv[2] }
               ratio = v["instructions"] / v["ticks"];
               printf "SysTick: %d instructions in %d ticks = %.2f instructions per tick (deterministic: 2 runs identical)\n", v["instructions"], v["ticks"], ratio;
               r = sprintf("%.0f", ratio) + 0 }
  /^timing/  { for (i = 3; i <= NF; i++) { split($i, kv, "="); v[kv[1]] = kv[2] }
               if (v["pushes"] > 0)
                 printf "%-17s %6d pushes: mean %5.0f instructions per push (min %d, max %d; +-%d per push from the tick quantum)\n",
                        $2, v["pushes"], v["ticks"] * r / v["pushes"], v["min_ticks"] * r, v["max_ticks"] * r, r }
' "$out/t1"
grep -E '^(memory|summary)' "$out/run1.txt"
