#!/usr/bin/env bash
# Footprint of the example device application on every core it runs on, for a 16-channel
# model at 8- and 16-bit weights: flash and RAM of the example and of Linegate's code in it,
# stack used by one step (stack painting), and instructions executed per classification
# (QEMU one-instruction-per-block trace): the dot product alone, the kernel's classify, and
# the whole step (read + classify + drive lines). One Markdown table per target, then the
# instructions per sample of every signal feature on a 1,024-sample window (the example's
# `cost_*` functions, run at its start) and the stack one feature takes. Then the same
# figures for a model of 4 classes over the same 16 channels (weights drawn from a fixed
# seed by shared-model's `class_blob` example): start-up and step stack of the class
# station, its classify (every row scored, then the decision) and its whole step.
# Usage: firmware/qemu-app/footprint.sh [target ...]
#   (needs qemu-system-arm, qemu-system-riscv32 for RISC-V, binutils' nm, python3)
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
# target, QEMU, machine, CPU (or - for none), model address
boards="thumbv6m-none-eabi qemu-system-arm microbit cortex-m0 0x3F000
thumbv7m-none-eabi qemu-system-arm lm3s6965evb cortex-m3 0x3F000
thumbv7em-none-eabihf qemu-system-arm mps2-an386 cortex-m4 0x3F000
thumbv8m.main-none-eabihf qemu-system-arm mps2-an505 cortex-m33 0x1003F000
riscv32imac-unknown-none-elf qemu-system-riscv32 sifive_e - 0x2043F000"
wanted=("$@")
for tool in qemu-system-arm nm python3; do
  if ! command -v "$tool" >/dev/null; then
    echo "======== SKIPPED: footprint: $tool not found ========"
    exit 0
  fi
done
# Run from the workspace root: .cargo/config.toml here would build the host tool for the device.
lg() { (cd "$root" && cargo run -q --release -p host-trainer -- -q "$@"); }
lg generate --rows 2000 --channels 16 --seed 7 -o "$work/gen16.csv"
# Readings as a 14-bit ADC gives them (20,000 counts per channel), not the generator's
# 0.001 steps: the range a sensor channel on a small core has.
sed -i 's/^lsb = 0.001$/lsb = 0.05/' "$work/gen16.toml"
lg train "$work/gen16.csv" --sheet "$work/gen16.toml" --folds 0 -o "$work/m16.json"
for w in 8 16; do
  lg pack --model "$work/m16.json" --train "$work/gen16.csv" --weight-bits "$w" -o "$work/m16-w$w.lgmb" --override-audit
  (cd "$root" && cargo run -q --release -p host-trainer -- inspect "$work/m16-w$w.lgmb") \
    | grep -o 'device kernel in [0-9]*-bit' | grep -o '[0-9]*-bit' > "$work/kernel-$w.txt"
done
lg replay --blob "$work/m16-w8.lgmb" --model "$work/m16.json" "$work/gen16.csv" --vectors "$work/v.txt" > /dev/null
head -5 "$work/v.txt" > "$work/v4.txt"  # the model line and 4 vectors
for w in 8 16; do
  (cd "$root" && cargo run -q -p shared-model --example class_blob -- \
      "$work/m16-w$w.lgmb" "$work/c16-w$w.lgmb" 4 0 7) | grep -o '[0-9]*-bit' > "$work/ckernel-$w.txt"
done
while read -r target qemu machine cpu addr; do
  if [ ${#wanted[@]} -gt 0 ] && [[ ! " ${wanted[*]} " == *" $target "* ]]; then continue; fi
  if ! command -v "$qemu" >/dev/null; then
    echo "======== SKIPPED: footprint on $target: $qemu not found ========"
    continue
  fi
  if ! (cd "$here" && LINEGATE_VECTORS="$work/v4.txt" CARGO_TARGET_DIR="$here/target/footprint" \
        cargo build -q --release --bin linegate-qemu-app --target "$target" < /dev/null); then
    echo "======== SKIPPED: footprint on $target: build failed (rustup target add $target?) ========"
    continue
  fi
  elf="$here/target/footprint/$target/release/linegate-qemu-app"
  cpuarg=(-cpu "$cpu"); [ "$cpu" = - ] && cpuarg=(-bios none)
  for w in 8 16 c8 c16; do
    blob="$work/m16-w$w.lgmb"
    case $w in c*) blob="$work/c16-w${w#c}.lgmb" ;; esac
    timeout 300 "$qemu" -machine "$machine" "${cpuarg[@]}" -nographic \
      -semihosting-config enable=on,target=native -kernel "$elf" \
      -device loader,file="$blob",addr="$addr",force-raw=on \
      -singlestep -d nochain,exec -D "$work/trace-$w.log" > "$work/out-$w.txt" 2>/dev/null < /dev/null || true
  done
  nm -C -S --size-sort "$elf" > "$work/syms.txt" 2>/dev/null || true
  # Section sizes from the ELF headers (works for Arm and RISC-V alike).
  python3 - "$target" "$elf" "$work" <<'PY'
import re, struct, sys
target, elf, work = sys.argv[1], sys.argv[2], sys.argv[3]
data = open(elf, "rb").read()
# ELF32 little-endian section headers.
shoff, = struct.unpack_from("<I", data, 0x20)
shentsize, shnum, shstrndx = struct.unpack_from("<HHH", data, 0x2E)
def sh(i):
    return struct.unpack_from("<IIIIIIIIII", data, shoff + i * shentsize)
strtab = sh(shstrndx)
names = data[strtab[4]:strtab[4] + strtab[5]]
flash = ram = 0
for i in range(shnum):
    name_off, typ, flags, addr, off, size = sh(i)[:6]
    name = names[name_off:names.index(b"\0", name_off)].decode()
    if not flags & 2 or size == 0:  # SHF_ALLOC
        continue
    if typ == 8:  # NOBITS: .bss, .uninit, stack and heap reservations
        if name in (".bss", ".uninit", ".sbss"):
            ram += size
    else:
        if name in (".data", ".sdata"):
            ram += size
        flash += size
# Linegate's own code and data in the image: the firmware and shared-model crates and the
# format crates they decode with.
ours = 0
def load_funcs(path):
    """Functions (address, size, name) of an `nm -C -S` listing, and Linegate's bytes in it."""
    out, ours = [], 0
    for line in open(path):
        p = line.split(None, 3)
        if len(p) == 4:
            addr, size, kind, name = int(p[0], 16), int(p[1], 16), p[2], p[3].strip()
            if kind in "tT":
                out.append((addr & ~1, size, name))
            if re.match(r"<?(firmware|shared_model|postcard|crc|heapless)::", name) and kind in "tTrR":
                ours += size
    return sorted(out), ours
funcs, ours = load_funcs(work + "/syms.txt")
def containing(pc):
    for a, s, n in funcs:
        if a <= pc < a + s:
            return (a, s, n)
    return None
def count(trace, pat):
    """Instructions from entry into the function matching `pat` until control is back in
    the function that called it (callees included); the worst of all calls."""
    # Every function the pattern names (a generic function has one per kind): the worst
    # of those that ran.
    counts = [c for c in (count_one(trace, e) for e in funcs if re.search(pat, e[2])) if c]
    return max(counts) if counts else None
def count_one(trace, entry):
    pcs = []
    for line in open(trace, errors="replace"):
        m = re.search(r"\[[0-9a-f]+/([0-9a-f]+)/", line)
        if m:
            pcs.append(int(m.group(1), 16))
    best, k = [], 1
    while k < len(pcs):
        if pcs[k] == entry[0] and not (entry[0] <= pcs[k - 1] < entry[0] + entry[1]):
            caller = containing(pcs[k - 1])
            n, k = 1, k + 1
            while k < len(pcs) and not (caller and caller[0] <= pcs[k] < caller[0] + caller[1]):
                n, k = n + 1, k + 1
            best.append(n)
        k += 1
    return max(best) if best else None
print(f"\n### {target}\n")
print("| weights | device kernel | flash (example) | RAM (example, static) | Linegate code in flash | stack from reset through start-up | stack, one step | dot product (16 ch) | classify (16 ch) | whole step (16 ch) |")
print("|---|---|---|---|---|---|---|---|---|---|")
for w in (8, 16):
    out = open(f"{work}/out-{w}.txt").read()
    stack = re.search(r"stack bytes used by one step: (\d+)", out)
    startup = re.search(r"stack bytes used from reset through start-up: (\d+)", out)
    trace = f"{work}/trace-{w}.log"
    cols = [count(trace, p) for p in (r"score_once", r"classify_once", r"Station.*::step$")]
    kernel = open(f"{work}/kernel-{w}.txt").read().strip() or "?"
    cell = lambda v: "–" if v is None else f"{v} instructions"
    print(f"| {w}-bit | {kernel} | {flash} B | {ram} B | {ours} B | {startup.group(1) if startup else '–'} B | {stack.group(1) if stack else '–'} B | "
          + " | ".join(cell(c) for c in cols) + " |")
import os
# The signal features: counted in the 8-bit run, where the example computes each of them
# once at start, before it looks for a model.
if os.path.exists(f"{work}/trace-8.log"):
    out = open(f"{work}/out-8.txt").read()
    stack = re.search(r"stack bytes used by a feature of a 1024-sample window: (\d+)", out)
    names = ["mean", "rms", "min", "max", "peak_to_peak", "abs_peak", "std_dev", "zero_crossings", "band"]
    counts = [count(f"{work}/trace-8.log", rf"::cost_{n}$") for n in names]
    print(f"\nSignal features of one 1,024-sample window (12-bit samples, validation of the window included): instructions per sample; "
          f"window buffer 4,096 B of RAM (i32 samples, the caller's), stack {stack.group(1) if stack else '–'} B\n")
    print("| " + " | ".join(n.replace("_", " ") for n in names) + " |")
    print("|" + "---|" * len(names))
    print("| " + " | ".join("–" if c is None else f"{c / 1024:.1f}" for c in counts) + " |")
print(f"\nA model of 4 classes × 16 channels (GO and three failure classes) on the class station\n")
print("| weights | device kernel | stack from reset through start-up | stack, one step | classify (4 × 16) | whole step (4 × 16) |")
print("|---|---|---|---|---|---|")
for w in (8, 16):
    out = open(f"{work}/out-c{w}.txt").read()
    stack = re.search(r"stack bytes used by one step: (\d+)", out)
    startup = re.search(r"stack bytes used from reset through start-up: (\d+)", out)
    trace = f"{work}/trace-c{w}.log"
    cols = [count(trace, p) for p in (r"classify_classes_once", r"Station.*::step$")]
    kernel = open(f"{work}/ckernel-{w}.txt").read().strip() or "?"
    cell = lambda v: "–" if v is None else f"{v} instructions"
    print(f"| {w}-bit | {kernel} | {startup.group(1) if startup else '–'} B | {stack.group(1) if stack else '–'} B | "
          + " | ".join(cell(c) for c in cols) + " |")
PY
done <<< "$boards"
