#!/usr/bin/env bash
# Flash footprint of the firmware by source: every byte of .text and .rodata of the full
# release ELF (opt-level "s", fat LTO, debug info on) is attributed to a crate, so the
# core's share is measured inside one build instead of as the difference of two builds
# (firmware/footprint.sh, which is kept and reports the other figure).
#
# How a byte is attributed
# - .text: every 2-byte unit (Thumb instructions are 2 or 4 bytes, 2-aligned; literal
#   pools and padding are covered too) is looked up with `llvm-symbolizer --inlining`.
#   Its BUCKET is the crate of the innermost source frame, inlined frames included: a
#   generic function of steadycal-core monomorphized and inlined into a firmware function
#   counts as steadycal-core, and a firmware trait impl (the NOR flash) inlined into a
#   core function counts as firmware. One refinement: frames of Rust's own `core`/`alloc`
#   library count for the nearest enclosing frame's crate when that is a dependency (so
#   `u64::wrapping_sub` inside `__adddf3` is compiler-builtins, inside `logf` is libm);
#   when the enclosing frame is steadycal-core, the firmware or a runtime crate, or when
#   there is none (an out-of-line library function), they are "rust core library".
#   Bytes without line information (hand-written assembly, padding) take the crate named
#   by their symbol, else "unattributed".
# - OWNER: who needs the bytes. For a unit whose inline stack holds a frame of
#   steadycal-core, of the firmware or of a runtime crate (cortex-m, cortex-m-rt,
#   cortex-m-semihosting, critical-section), the innermost such frame is the owner. Out of
#   line dependency code (libm's `logf`, `__adddf3`, `memcpy`, `core::fmt::write`) is owned
#   by whoever references it: direct branches and calls, function addresses loaded from
#   literal pools or built by movw/movt, and function pointers held in .rodata (vtables)
#   whose table is in turn referenced; owners propagate through chains of such functions.
#   Owner "core+firmware" means both reach it.
# - .rodata: each object of the symbol table (string literals, switch tables, vtables,
#   panic locations, libm's tables, the device log) takes the bucket and owner of the code
#   (or rodata) that references it. The device log is reported apart. Bytes of .rodata no
#   symbol covers (alignment) and objects nothing references are "unattributed".
#
# CORE SHARE (this script's definition, also in firmware/README.md): the bytes whose bucket
# is steadycal-core, plus the bytes of every other bucket (libm, heapless, crc, cobs,
# steadycal-fpu, postcard/serde if present, Rust's core library, compiler-builtins) that
# only steadycal-core reaches, in .text and .rodata. Firmware code that exists because the
# monitor does (event lines, the restore check, the extra part of `main`) is firmware, and
# dependency code both reach (memcpy, memset, ...) is reported as shared, in neither share.
#
# Usage: firmware/footprint-by-source.sh [TARGET] [extra cargo args]
#        (default thumbv7em-none-eabihf; needs llvm-symbolizer, llvm-objdump, llvm-readelf)
# Environment: FOOTPRINT_ELF=path skips the build and reads that ELF (release profile);
#              FOOTPRINT_RODATA=N lists the N largest .rodata objects of the core share;
#              FOOTPRINT_TOP=N lists the N largest functions of the core share (default 12).
set -euo pipefail
cd "$(dirname "$0")"
target=${1:-thumbv7em-none-eabihf}
shift || true
if [ -n "${FOOTPRINT_ELF:-}" ]; then
  elf=$FOOTPRINT_ELF
else
  cargo build --release --target "$target" "$@" >&2
  elf=target/$target/release/steadycal-firmware
fi
# Every device log a build of this target wrote (fast-math builds write their own); the
# one embedded in the ELF is found by content.
feeds=$(ls -t target/"$target"/release/build/steadycal-firmware-*/out/feed.log | tr '\n' ' ')
root=$(cd .. && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

llvm-readelf -S -W "$elf" >"$work/sections"
llvm-readelf -s -W "$elf" >"$work/symbols"
llvm-objdump -d --no-show-raw-insn "$elf" >"$work/disasm"
python3 - "$elf" "$work" text >"$work/addresses" <<'EOF'
import sys
for line in open(sys.argv[2] + "/sections"):
    f = line.replace("[", " ").replace("]", " ").split()
    if len(f) > 5 and f[1] == ".text":
        start, size = int(f[3], 16), int(f[5], 16)
        for a in range(start, start + size, 2):
            print(hex(a))
EOF
llvm-symbolizer --inlining --obj="$elf" <"$work/addresses" >"$work/frames"

echo "target $target $*"
python3 - "$elf" "$work" "$root" $feeds <<'EOF'
import bisect, os, re, struct, sys
from collections import defaultdict

elf, work, root = sys.argv[1], sys.argv[2], sys.argv[3]
data = open(elf, "rb").read()
feed, feed_len = b"", -1
for path in sys.argv[4:]:
    candidate = open(path, "rb").read()
    if data.find(candidate) >= 0:
        feed, feed_len = candidate, len(candidate)
        break

# Sections: name -> (address, file offset, size).
sections = {}
for line in open(work + "/sections"):
    f = line.replace("[", " ").replace("]", " ").split()
    if len(f) > 6 and f[1].startswith("."):
        sections[f[1]] = (int(f[3], 16), int(f[4], 16), int(f[5], 16))
text_a, text_o, text_n = sections[".text"]
ro_a, ro_o, ro_n = sections[".rodata"]
vt_a, vt_o, vt_n = sections[".vector_table"]

def word(addr):
    for a, o, n in (sections[".text"], sections[".rodata"], sections[".vector_table"]):
        if a <= addr and addr + 4 <= a + n:
            return struct.unpack_from("<I", data, o + addr - a)[0]
    return None

# Symbols: functions (Thumb bit cleared) and .rodata objects.
funcs, objects = {}, []
for line in open(work + "/symbols"):
    f = line.split()
    if len(f) < 8 or not f[0].rstrip(":").isdigit():
        continue
    value, size, kind, name = int(f[1], 16), int(f[2]), f[3], f[7]
    if kind == "FUNC" and text_a <= value & ~1 < text_a + text_n:
        funcs[value & ~1] = (name, size)
    elif kind == "OBJECT" and ro_a <= value < ro_a + ro_n and size > 0:
        objects.append((value, size, name))
func_starts = sorted(funcs)
# The device log by content (on some targets it has no symbol of its own).
at = data.find(feed, ro_o, ro_o + ro_n) if feed else -1
if at >= 0 and not any(o[0] == ro_a + at - ro_o and o[1] == feed_len for o in objects):
    objects.append((ro_a + at - ro_o, feed_len, "(device log)"))
objects.sort()
obj_starts = [o[0] for o in objects]

def func_of(addr):
    i = bisect.bisect_right(func_starts, addr) - 1
    if i >= 0:
        start = func_starts[i]
        if addr < start + max(funcs[start][1], 2):
            return start
    return None

def obj_of(addr):
    i = bisect.bisect_right(obj_starts, addr) - 1
    if i >= 0 and addr < objects[i][0] + objects[i][1]:
        return i
    return None

RUNTIME = {"cortex-m", "cortex-m-rt", "cortex-m-semihosting", "critical-section"}
OWNERS = {"steadycal-core": "core", "steadycal-firmware": "firmware"}
OWNERS.update({c: "runtime" for c in RUNTIME})

def crate_of_path(path):
    if path.startswith(root + "/core/"):
        return "steadycal-core"
    if path.startswith(root + "/firmware/"):
        return "steadycal-firmware"
    if path.startswith(root + "/fpu/"):
        return "steadycal-fpu"
    if "/library/compiler-builtins/" in path:
        return "compiler-builtins"
    if re.search(r"/library/(core|alloc)/", path):
        return "rust-lib"
    m = re.search(r"/([A-Za-z0-9_-]+?)-\d+\.\d+\.\d+[^/]*/", path)
    if m:
        return m.group(1).replace("_", "-")
    return None

def crate_of_symbol(name):
    if "compiler_builtins" in name or name.startswith("__aeabi") or re.match(r"^__\w+[sd]f\d?$", name):
        return "compiler-builtins"
    for mangled, crate in (("steadycal_core", "steadycal-core"), ("steadycal_firmware", "steadycal-firmware"),
                           ("cortex_m_rt", "cortex-m-rt"), ("cortex_m_semihosting", "cortex-m-semihosting"),
                           ("cortex_m", "cortex-m"), ("libm", "libm"), ("heapless", "heapless")):
        if mangled in name:
            return crate
    if name in ("Reset", "main", "HardFault", "DefaultHandler", "__pre_init", "__stext") or name.startswith("HardFault"):
        return "cortex-m-rt"
    if name in ("memcpy", "memset", "memmove", "memcmp"):
        return "compiler-builtins"
    return None

# Frames of every 2-byte unit of .text, innermost first.
units = []  # (addr, [crate per frame])
block = []
for line in open(work + "/frames"):
    line = line.rstrip("\n")
    if line == "":
        if block:
            units.append(block)
        block = []
    else:
        block.append(line)
if block:
    units.append(block)
assert len(units) == text_n // 2, (len(units), text_n)

def bucket_and_direct_owner(addr, lines):
    paths = lines[1::2]
    crates = [crate_of_path(p.rsplit(":", 2)[0]) for p in paths]
    crates = [c for c in crates if c is not None]
    if not crates:
        f = func_of(addr)
        c = crate_of_symbol(funcs[f][0]) if f is not None else None
        return (c or "unattributed"), (OWNERS.get(c) if c else None)
    bucket = crates[0]
    if bucket == "rust-lib":
        outer = next((c for c in crates if c != "rust-lib"), None)
        if outer is not None and outer not in OWNERS:
            bucket = outer
    owner = next((OWNERS[c] for c in crates if c in OWNERS), None)
    return bucket, owner

unit_bucket, unit_owner = [], []
for i, lines in enumerate(units):
    b, o = bucket_and_direct_owner(text_a + 2 * i, lines)
    unit_bucket.append(b)
    unit_owner.append(o)

def unit_index(addr):
    return (addr - text_a) // 2

# References from code: branch targets, pc-relative literal loads, movw/movt pairs.
refs = []  # (from: ("code", addr) or ("obj", index), to address)
insn = re.compile(r"^\s+([0-9a-f]+):\s+(\S+)\s*(.*)$")
pending = {}
for line in open(work + "/disasm"):
    m = insn.match(line)
    if not m:
        continue
    addr, op, rest = int(m.group(1), 16), m.group(2), m.group(3)
    if op == ".word" or op == ".short" or op == ".byte":
        continue
    t = re.search(r"@ 0x([0-9a-f]+)", rest)
    if op.startswith("ldr") and "[pc" in rest and t:
        v = word(int(t.group(1), 16))
        if v is not None:
            refs.append((("code", addr), v))
        continue
    b = re.match(r"^(b|bl|blx|cbz|cbnz|b\w\w)(\.w|\.n)?$", op)
    t = re.search(r"0x([0-9a-f]+) <", rest)
    if b and t:
        refs.append((("code", addr), int(t.group(1), 16)))
        continue
    mw = re.match(r"(r\d+|lr|ip|sb|sl|fp), #(\d+)", rest)
    if op in ("movw",) and mw:
        pending[mw.group(1)] = int(mw.group(2))
    elif op == "movt" and mw and mw.group(1) in pending:
        refs.append((("code", addr), pending.pop(mw.group(1)) | (int(mw.group(2)) << 16)))
def scan_words(first, last):
    for i in range(first, last):
        start, size, name = objects[i]
        if size > 65536:
            continue
        for a in range((start + 3) & ~3, start + size - 3, 4):
            refs.append((("obj", start), word(a)))

# Words in .rodata objects (vtables, switch tables of string pointers, panic locations)
# and in the vector table. Object referrers are keyed by start address until the pieces
# below are added.
scan_words(0, len(objects))
for a in range(vt_a, vt_a + vt_n, 4):
    refs.append((("vectors", a), word(a)))
# Read-only data without a symbol (merged string literals, constants) is cut into pieces
# at every address code or data refers to; each piece is an object of its own.
targets = sorted({v for _, v in refs if v is not None and ro_a <= v < ro_a + ro_n and obj_of(v) is None})
pieces = []
prev_end = ro_a
for start, end in sorted([(s0, s0 + n) for s0, n, _ in objects] + [(ro_a + ro_n, ro_a + ro_n)]):
    if start > prev_end:
        cuts = [t for t in targets if prev_end <= t < start]
        for k, c in enumerate(cuts):
            stop = cuts[k + 1] if k + 1 < len(cuts) else start
            pieces.append((c, stop - c, "(no symbol)"))
    prev_end = max(prev_end, end)
objects = sorted(objects + pieces)
obj_starts = [o[0] for o in objects]
index_of = {o[0]: i for i, o in enumerate(objects)}
piece_starts = {p[0] for p in pieces}
for i, (start, size, name) in enumerate(objects):
    if start in piece_starts:
        scan_words(i, i + 1)
refs = [((k, index_of[x]) if k == "obj" else (k, x), v) for (k, x), v in refs]

func_refs = defaultdict(list)  # function start -> referrers
obj_refs = defaultdict(list)   # object index -> referrers
for src, v in refs:
    if v is None:
        continue
    if src[0] == "code" and func_of(src[1]) == func_of(v & ~1) and func_of(v & ~1) is not None:
        continue  # a branch inside the function
    if (v & ~1) in funcs:
        func_refs[v & ~1].append(src)
    elif ro_a <= v < ro_a + ro_n:
        j = obj_of(v)
        if j is not None:
            obj_refs[j].append(src)

# Owners of out-of-line functions and of objects: fixpoint over the reference graph.
func_owner = defaultdict(set)
obj_owner = defaultdict(set)

def owners_of(src):
    kind, x = src
    if kind == "vectors":
        return {"runtime"}
    if kind == "obj":
        return obj_owner[x]
    o = unit_owner[unit_index(x)]
    if o is not None:
        return {o}
    f = func_of(x)
    return func_owner[f] if f is not None else set()

changed = True
while changed:
    changed = False
    for f, srcs in func_refs.items():
        new = set().union(*(owners_of(s) for s in srcs))
        if not new <= func_owner[f]:
            func_owner[f] |= new
            changed = True
    for j, srcs in obj_refs.items():
        new = set().union(*(owners_of(s) for s in srcs))
        if not new <= obj_owner[j]:
            obj_owner[j] |= new
            changed = True

def owner_label(owners):
    if not owners:
        return "unreached"
    if owners == {"core"}:
        return "core"
    if owners == {"firmware"}:
        return "firmware"
    if owners == {"runtime"}:
        return "runtime"
    return "+".join(sorted(owners))

tally = defaultdict(lambda: [0, 0])  # (bucket, owner label) -> [text, rodata]
for i in range(len(units)):
    o = unit_owner[i]
    if o is not None:
        owners = {o}
    else:
        f = func_of(text_a + 2 * i)
        owners = func_owner[f] if f is not None else set()
    tally[(unit_bucket[i], owner_label(owners))][0] += 2

def bucket_of_src(src):
    kind, x = src
    if kind == "code":
        return unit_bucket[unit_index(x)]
    if kind == "obj":
        return obj_bucket.get(x)
    return "cortex-m-rt"

obj_bucket = {}
for _ in range(4):  # objects referenced by objects take their referrer's bucket
    for j, (start, size, name) in enumerate(objects):
        buckets = {bucket_of_src(s) for s in obj_refs.get(j, [])} - {None}
        if len(buckets) == 1:
            obj_bucket[j] = buckets.pop()
        elif buckets:
            obj_bucket[j] = crate_of_symbol(name) or "rodata of mixed referrers"
covered = 0
device_log = 0
for j, (start, size, name) in enumerate(objects):
    covered += size
    if size == feed_len:
        device_log += size
        continue
    b = obj_bucket.get(j, crate_of_symbol(name) or "unattributed")
    tally[(b, owner_label(obj_owner[j]))][1] += size
tally[("unattributed", "unreached")][1] += ro_n - covered
if os.environ.get("FOOTPRINT_RODATA"):
    print("rodata objects of the core share, largest first (size, bucket, owner, symbol):")
    listed = []
    for j, (start, size, name) in enumerate(objects):
        b = obj_bucket.get(j, crate_of_symbol(name) or "unattributed")
        o = owner_label(obj_owner[j])
        if size != feed_len and (b == "steadycal-core" or o == "core"):
            listed.append((size, b, o, name))
    for size, b, o, name in sorted(listed, reverse=True)[: int(os.environ["FOOTPRINT_RODATA"])]:
        print(f"  {size:>6}  {b:<22} {o:<16} {name[:90]}")

# Report.
def demangle(name):
    m = re.match(r"^_ZN(.*)17h[0-9a-f]{16}E$", name)
    if not m:
        return name
    rest, parts = m.group(1), []
    while rest and rest[0].isdigit():
        n = int(re.match(r"\d+", rest).group(0))
        rest = rest[len(str(n)):]
        parts.append(rest[:n])
        rest = rest[n:]
    out = "::".join(parts)
    for a, b in (("$LT$", "<"), ("$GT$", ">"), ("$C$", ","), ("$u20$", " "), ("$RF$", "&"), ("..", "::"), ("$u7b$", "{"), ("$u7d$", "}")):
        out = out.replace(a, b)
    return out

def total(pred):
    t = sum(v[0] for k, v in tally.items() if pred(*k))
    r = sum(v[1] for k, v in tally.items() if pred(*k))
    return t, r

def line(label, t, r):
    print(f"  {label:<58} {t + r:>7}  (.text {t}, .rodata {r})")

print(f"ELF {elf}")
print(f".vector_table {vt_n} + .text {text_n} + .rodata {ro_n} (device log {device_log})")
print("by source (bucket = crate of the innermost source frame; owner = who reaches it):")
print(" core share: steadycal-core plus what only the core reaches")
core_t, core_r = total(lambda b, o: b == "steadycal-core")
line("steadycal-core", core_t, core_r)
deps = sorted({b for b, o in tally if o == "core" and b != "steadycal-core"})
for b in deps:
    line(f"{b} (reached only from the core)", *total(lambda bb, o, b=b: bb == b and o == "core"))
share_t, share_r = total(lambda b, o: b == "steadycal-core" or o == "core")
line("= CORE SHARE", share_t, share_r)
print(" firmware: its own crate plus what only the firmware reaches")
fw_t, fw_r = total(lambda b, o: b == "steadycal-firmware")
line("steadycal-firmware (firmware/src)", fw_t, fw_r)
for b in sorted({b for b, o in tally if o == "firmware" and b != "steadycal-firmware"}):
    line(f"{b} (reached only from the firmware)", *total(lambda bb, o, b=b: bb == b and o == "firmware"))
print(" runtime: cortex-m, cortex-m-rt, cortex-m-semihosting, critical-section, and what only they reach")
for b in sorted({b for b, o in tally if o == "runtime"} | (RUNTIME & {b for b, o in tally})):
    line(b, *total(lambda bb, o, b=b: bb == b and (o == "runtime" or bb in RUNTIME)
                   and bb not in ("steadycal-core", "steadycal-firmware")))
print(" shared (reached from more than one of core, firmware, runtime) and the rest")
rest = defaultdict(lambda: [0, 0])
for (b, o), (t, r) in tally.items():
    if b in ("steadycal-core", "steadycal-firmware") or b in RUNTIME or o in ("core", "firmware", "runtime"):
        continue
    rest[(b, o)][0] += t
    rest[(b, o)][1] += r
for (b, o), (t, r) in sorted(rest.items()):
    line(f"{b} [{o}]", t, r)
print(f"  {'device log (embedded, .rodata)':<58} {device_log:>7}")
print(f"  {'.vector_table (cortex-m-rt)':<58} {vt_n:>7}")
accounted = sum(t + r for t, r in tally.values()) + device_log
print(f"check: {accounted} bytes attributed = .text {text_n} + .rodata {ro_n}")
print(f"flash without the device log: {vt_n + text_n + ro_n - device_log} bytes (.vector_table + .text + .rodata; .data is empty)")
print(f"CORE SHARE by source: {share_t + share_r} bytes (.text {share_t} + .rodata {share_r})")
top = int(os.environ.get("FOOTPRINT_TOP", "12"))
if top > 0:
    per = defaultdict(int)
    for i in range(len(units)):
        o = unit_owner[i]
        f = func_of(text_a + 2 * i)
        owners = {o} if o is not None else (func_owner[f] if f is not None else set())
        if unit_bucket[i] == "steadycal-core" or owner_label(owners) == "core":
            per[funcs[f][0] if f is not None else "(outside symbols)"] += 2
    print(f"largest contributors to the core share's .text, by function symbol (core code inlined into a firmware function is listed under that function):")
    for name, n in sorted(per.items(), key=lambda x: -x[1])[:top]:
        print(f"  {n:>7}  {demangle(name)}")
up_t, up_r = total(lambda b, o: b == "steadycal-core" or "core" in o.split("+"))
print(f"core share plus code the core shares with the firmware or runtime (upper bound): {up_t + up_r} bytes (.text {up_t} + .rodata {up_r})")
EOF
