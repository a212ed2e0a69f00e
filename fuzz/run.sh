#!/usr/bin/env bash
# Runs each fuzz target for a bounded time: fuzz/run.sh [SECONDS per target, default 60].
# The committed seeds (fuzz/seeds/<target>) are read-only inputs; the growing corpus goes
# to a temporary directory. Works on a stable toolchain (RUSTC_BOOTSTRAP=1 lets cargo-fuzz
# use the sanitizer flags it needs). Needs `cargo install cargo-fuzz`.
# Exit status: non-zero if any target crashes (the crashing input is kept in
# fuzz/artifacts/<target>/).
set -euo pipefail
cd "$(dirname "$0")"
seconds="${1:-60}"
export RUSTC_BOOTSTRAP=1
for target in snapshot_decode device_log; do
  corpus="$(mktemp -d)"
  echo "=== fuzz ${target} for ${seconds}s"
  cargo fuzz run --release "${target}" "${corpus}" "seeds/${target}" -- \
    -max_total_time="${seconds}" -max_len=4096 -print_final_stats=1
  rm -rf "${corpus}"
done
