#!/usr/bin/env bash
# Flash and RAM footprint of the firmware at opt-level "s" (release profile), with the
# core's share separated: the same firmware is built a second time with the
# `footprint-baseline` feature (the monitor replaced by an opaque stand-in), and the
# difference of the two builds is what the core (plus the libm and compiler-builtins code
# it pulls in) adds. The embedded device log (read-only data in flash) is reported apart.
# Usage: firmware/footprint.sh [TARGET] [extra cargo args]   (default thumbv7em-none-eabihf)
set -euo pipefail
cd "$(dirname "$0")"
target=${1:-thumbv7em-none-eabihf}
shift || true
elf=target/$target/release/steadycal-firmware
section() { size -A "$1" | awk -v s="$2" '$1 == s { print $2 }'; }
cargo build --release --target "$target" --features footprint-baseline "$@" >&2
base_text=$(section "$elf" .text); base_rodata=$(section "$elf" .rodata)
cargo build --release --target "$target" "$@" >&2
text=$(section "$elf" .text); rodata=$(section "$elf" .rodata)
vectors=$(section "$elf" .vector_table); bss=$(section "$elf" .bss); data=$(section "$elf" .data)
feed=$(stat -c %s "$(ls -t target/"$target"/release/build/steadycal-firmware-*/out/feed.log | head -n1)")
echo "target $target $*"
echo "flash: .vector_table $vectors + .text $text + .rodata $rodata (device log $feed) + .data $data"
echo "flash without the device log: $(( vectors + text + rodata - feed + data )) bytes"
echo "core share (full minus baseline): .text $(( text - base_text )) + .rodata $(( rodata - base_rodata )) = $(( text - base_text + rodata - base_rodata )) bytes"
echo "static RAM: .data $data + .bss $bss bytes (the monitor lives on the stack; see the firmware's memory lines)"
echo "largest core symbols kept out of line (llvm-nm, bytes):"
llvm-nm --size-sort -S -C --radix=d "$elf" | grep -E 'steadycal_core|libm' | sort -k2 -n -r | head -n 8 | awk '{ $1=""; $3=""; print }'
