#!/usr/bin/env bash
# Footprint of the example device application on the QEMU lm3s6965evb (Cortex-M3), for a
# 16-channel model: flash and RAM by section, stack used by one step (stack painting),
# and instructions executed per classification (QEMU one-instruction-per-block trace).
# Usage: firmware/qemu-app/footprint.sh   (needs qemu-system-arm, binutils-arm-none-eabi, python3)
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
for tool in qemu-system-arm arm-none-eabi-size arm-none-eabi-nm python3; do
  if ! command -v "$tool" >/dev/null; then
    echo "======== SKIPPED: footprint: $tool not found ========"
    exit 0
  fi
done
# Run from the workspace root: .cargo/config.toml here would build the host tool for the device.
lg() { (cd "$root" && cargo run -q --release -p host-trainer -- -q "$@"); }
lg generate --rows 2000 --channels 16 --seed 7 -o "$work/gen16.csv"
lg train "$work/gen16.csv" --sheet "$work/gen16.toml" --folds 0 -o "$work/m16.json"
lg pack --model "$work/m16.json" --train "$work/gen16.csv" -o "$work/m16.lgmb" --hex 0x3F000
lg replay --blob "$work/m16.lgmb" --model "$work/m16.json" "$work/gen16.csv" --vectors "$work/v.txt" > /dev/null
head -5 "$work/v.txt" > "$work/v4.txt"  # the model line and 4 vectors
(cd "$here" && LINEGATE_VECTORS="$work/v4.txt" cargo build -q --release --bin linegate-qemu-app)
elf="$here/target/thumbv7m-none-eabi/release/linegate-qemu-app"
echo "== sections (bytes), linegate-qemu-app, release"
arm-none-eabi-size -A "$elf" | awk '$1 ~ /^\.(vector_table|text|rodata|data|bss|uninit)$/ {print "  " $1, $2; if ($1==".data"||$1==".bss"||$1==".uninit") ram+=$2; else flash+=$2} END {print "  flash total " flash " bytes; RAM total " ram " bytes (no heap)"}'
timeout 120 qemu-system-arm -cpu cortex-m3 -machine lm3s6965evb -nographic \
  -semihosting-config enable=on,target=native -kernel "$elf" \
  -device loader,file="$work/m16.hex" -singlestep -d nochain,exec -D "$work/trace.log" > "$work/out.txt" 2>/dev/null
grep '^#' "$work/out.txt" | sed 's/^# /  /'
arm-none-eabi-nm -C -S "$elf" > "$work/syms.txt"
python3 - "$work/syms.txt" "$work/trace.log" <<'PY'
import re, sys
syms = {}
for line in open(sys.argv[1]):
    p = line.split(None, 3)
    if len(p) == 4 and p[2] in "tT":
        syms[p[3].strip()] = (int(p[0], 16), int(p[1], 16))
def find(pat):
    for name, v in syms.items():
        if re.search(pat, name):
            return name, v
    return None, None
pcs = []
for line in open(sys.argv[2]):
    m = re.search(r"\[[0-9a-f]+/([0-9a-f]+)/", line)
    if m:
        pcs.append(int(m.group(1), 16))
# Count executed instructions from a function's entry until control returns after the call
# site (callees included): entry is reached by a 32-bit BL, so the return lands 4 bytes on.
for label, pat in [
    ("dot product only: bias + sum of weight x scaled input (16 channels)", r"score_once"),
    ("kernel classify: range checks + conversion + dot product + verdict (16 channels)", r"classify_once"),
    ("whole step: read sensors + classify + drive lines (16 channels)", r"Station.*::step$"),
]:
    name, v = find(pat)
    if not v:
        print(f"  {label}: symbol not found"); continue
    start = v[0] & ~1
    counts, k = [], 0
    while k < len(pcs):
        if pcs[k] == start and k > 0:
            ret, n, k = pcs[k - 1] + 4, 0, k + 1
            while k < len(pcs) and pcs[k] != ret:
                n, k = n + 1, k + 1
            counts.append(n + 1)
        k += 1
    if counts:
        print(f"  {label}: {max(counts)} instructions per call, worst of {len(counts)} calls (min {min(counts)})")
PY
