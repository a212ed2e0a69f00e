#!/usr/bin/env bash
# Runs a firmware ELF under QEMU's mps2-an386 (Cortex-M4 with FPU) with semihosting and
# deterministic instruction counting. Usage: run-qemu.sh ELF OUTPUT [SECONDS]
# Output goes to the OUTPUT file, never into a pipe (QEMU spins forever writing into a
# closed pipe), and the run is bounded by `timeout` (default 300 s). The exit status is the
# firmware's semihosting exit status (124 on timeout).
set -euo pipefail
elf=${1:?usage: run-qemu.sh ELF OUTPUT [SECONDS]}
output=${2:?usage: run-qemu.sh ELF OUTPUT [SECONDS]}
seconds=${3:-300}
exec timeout --kill-after=10 "$seconds" qemu-system-arm \
  -machine mps2-an386 -cpu cortex-m4 -nographic -monitor none -serial none \
  -semihosting-config enable=on,target=native \
  -icount shift=0,align=off,sleep=off \
  -kernel "$elf" >"$output" 2>&1 </dev/null
