#!/usr/bin/env bash
# Where the instructions of a push go on the Cortex-M4F: runs the release firmware on the
# first ROWS rows of the demo feed under QEMU with one instruction per translation block and
# an execution log (-d exec), counts how often each address ran, and attributes every
# address to its source function with llvm-symbolizer (inlined frames included). Prints the
# out-of-line functions (with calls) and the inlined core functions, per check of the run.
# A diagnostic, not a benchmark: firmware/measure.sh gives the figures to quote.
# The second part counts only what runs inside `Monitor::push` (from its entry to the return
# address of the call), per check after the first SKIP checks (the warm-up and the
# likelihood sums' start): a push is a check when it ran the ladder's update, whose frames
# the symbolizer names; the other pushes are readings.
# Environment: PROFILE_DEPTH (frames under push, default 3), PROFILE_ROWS (lines, default 30).
# Usage: firmware/profile.sh [ROWS] [SKIP]   (defaults 3000 and 200; needs qemu-system-arm,
#   llvm-symbolizer, llvm-nm, python3; the log takes about 100 bytes per executed
#   instruction: 12,000 rows write about 7 GB)
set -euo pipefail
cd "$(dirname "$0")"
rows="${1:-3000}"
skip="${2:-200}"
for tool in qemu-system-arm llvm-symbolizer llvm-nm python3; do
  command -v "$tool" >/dev/null || { echo "$tool missing" >&2; exit 2; }
done
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
STEADYCAL_FEED_ROWS="$rows" CARGO_TARGET_DIR="$work/target" \
  cargo build --release --target thumbv7em-none-eabihf --quiet >&2
elf="$work/target/thumbv7em-none-eabihf/release/steadycal-firmware"
timeout --kill-after=10 1200 qemu-system-arm -machine mps2-an386 -cpu cortex-m4 -nographic \
  -monitor none -serial none -semihosting-config enable=on,target=native \
  -icount shift=0,align=off,sleep=off -accel tcg,one-insn-per-tb=on -d exec,nochain \
  -D "$work/trace.log" -kernel "$elf" >"$work/out.txt" 2>&1 </dev/null || true
grep -E '^timing' "$work/out.txt" >&2 || { echo "no timing lines: run failed" >&2; exit 1; }
checks=$(awk '/^summary/ { for (i = 2; i <= NF; i++) { split($i, kv, "="); if (kv[1] == "checks") print kv[2] } }' "$work/out.txt")
awk '{ split($4, a, "/"); if (a[2] ~ /^[0-9a-f]+$/) n[a[2]]++ } END { for (pc in n) print n[pc], pc }' \
  "$work/trace.log" >"$work/pcs.txt"
awk '{ print "0x" $2 }' "$work/pcs.txt" |
  llvm-symbolizer --obj="$elf" --inlining --functions=short --output-style=JSON >"$work/sym.json"
llvm-nm -n -S "$elf" | awk '$3 ~ /[tT]/' >"$work/syms.txt"
python3 - "$work" "$checks" "$skip" <<'PY'
import collections, json, os, sys
work, checks, skip = sys.argv[1], max(int(sys.argv[2] or 1), 1), int(sys.argv[3])
counts = {}
for line in open(f"{work}/pcs.txt"):
    c, pc = line.split()
    counts[int(pc, 16)] = int(c)
total = sum(counts.values())
print(f"{total} instructions executed, {checks} checks in the run (figures below: per check)")
print("\nout-of-line functions (self, with the calls into them):")
rows = []
for line in open(f"{work}/syms.txt"):
    p = line.split()
    if len(p) < 4:
        continue
    start, size, name = int(p[0], 16), int(p[1], 16), p[3]
    n = sum(c for pc, c in counts.items() if start <= pc < start + size)
    rows.append((n, counts.get(start, 0), name))
for n, calls, name in sorted(rows, reverse=True)[:15]:
    print(f"{n / checks:9.1f}  calls {calls / checks:5.2f}  {name[:100]}")
print("\ninlined core functions (innermost steadycal_core frame, with its caller):")
inner = collections.Counter()
for line in open(f"{work}/sym.json"):
    d = json.loads(line)
    frames = [f for f in d["Symbol"] if "/core/src/" in f["FileName"] and "/rustc/" not in f["FileName"]]
    if not frames:
        continue
    caller = frames[1]["FunctionName"] if len(frames) > 1 else ""
    inner[f"{frames[0]['FunctionName'][:40]} < {caller[:40]}"] += counts.get(int(d["Address"], 16), 0)
for key, n in inner.most_common(30):
    print(f"{n / checks:9.1f}  {key}")

depth = int(os.environ.get("PROFILE_DEPTH", "3"))
print("\npushes only: per check after the first", skip, f"checks, by the frames under push (depth {depth})")
symbols = {}
for line in open(f"{work}/sym.json"):
    d = json.loads(line)
    symbols[int(d["Address"], 16)] = d["Symbol"]
ladder_update = {pc for pc, frames in symbols.items()
                 if any(f["FunctionName"].startswith("update_assessed") for f in frames)}
entry = next(int(line.split()[0], 16) for line in open(f"{work}/syms.txt")
             if "7monitor" in line.split()[3] and "$GT$4push17h" in line.split()[3])
live = collections.Counter()
live_checks = seen_checks = 0
inside, ret, prev, call, is_check = False, None, 0, None, False
with open(f"{work}/trace.log", "rb") as trace:
    for line in trace:
        fields = line.split(b"[", 1)
        if len(fields) < 2:
            continue
        parts = fields[1].split(b"/", 2)
        if len(parts) < 2:
            continue
        pc = int(parts[1], 16)
        if not inside:
            if pc == entry:
                inside, ret, call, is_check = True, prev + 4, collections.Counter({pc: 1}), False
            prev = pc
            continue
        if pc == ret:
            inside = False
            if is_check:
                seen_checks += 1
                if seen_checks > skip:
                    live.update(call)
                    live_checks += 1
        else:
            call[pc] += 1
            is_check = is_check or pc in ladder_update
        prev = pc
n = max(live_checks, 1)
print(f"{live_checks} checks, {sum(live.values()) / n:.1f} instructions per check inside push")
phases = collections.Counter()
for pc, c in live.items():
    frames = symbols.get(pc, [])
    outer = frames[-1]["FunctionName"].split("<")[0] if frames else "?"
    core = [f["FunctionName"].split("<")[0] for f in reversed(frames)
            if "/core/src/" in f["FileName"] and "/rustc/" not in f["FileName"]]
    phases[f"{outer} :: {' > '.join(core[:depth])}"] += c
for key, c in phases.most_common(int(os.environ.get("PROFILE_ROWS", "30"))):
    print(f"{c / n:9.1f}  {key}")
PY
