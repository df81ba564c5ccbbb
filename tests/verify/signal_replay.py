#!/usr/bin/env python3
"""Independent replay of a model with signal features over a signal log.

Written from shared-model/FORMAT.md (the version-3 blob: header, payload, signal section,
kernel semantics), the signal-log layout documented in the README, and the feature
definitions of shared_model::features (checked against numpy in features.py, whose
functions this script uses); it shares no code with the tool. It decodes the blob,
reads the log with Python's csv module, converts every sample and reading to raw counts
with the conversions of the float model file, computes each feature, runs the kernel and
compares every line with `linegate replay`'s output.

usage: signal_replay.py BLOB MODEL_JSON LOG REPLAY_TXT
exit:  0 every line agrees; 1 a line differs (printed); 2 usage or input error;
       3 numpy missing
"""

import csv
import math
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
try:
    import numpy as np  # noqa: F401  (features.py needs it)
except ImportError as e:
    print(f"missing: {e}", file=sys.stderr)
    sys.exit(3)
from features import goertzel_fixed  # noqa: E402
from verify_release import kernel, read_model, to_raw  # noqa: E402

UNIT_NAMES = ["unit_id", "unit", "serial"]
FEATURES = ["mean", "rms", "min", "max", "peak_to_peak", "abs_peak", "std_dev",
            "zero_crossings", "band"]


def decode3(blob):
    """A version-3 blob (FORMAT.md): version 1's layout, then the signal section."""
    m, r, n, count = read_model(blob, 3)
    chans = m["channels"]
    if len(chans) != count:
        raise ValueError("channel count")
    signals = []
    for _ in range(r.varint()):
        s = {k: r.signed() for k in ["raw_min", "raw_max", "offset"]}
        s["window"] = r.varint()
        signals.append(s)
    sources = []
    for _ in range(r.varint()):
        if r.varint() == 0:
            sources.append(None)
            continue
        sig = r.byte()
        kind = FEATURES[r.varint()]
        coeff = r.signed() if kind == "band" else None
        sources.append((sig, kind, coeff))
    if r.i != n or len(sources) != len(chans):
        raise ValueError("payload length")
    m["signals"], m["sources"] = signals, sources
    return m


def feature(kind, coeff, s, spec):
    """shared_model::features, in Python's exact integers."""
    n = spec["window"]
    c = [x - spec["offset"] for x in s]
    total = sum(c)
    sq = sum(x * x for x in c)
    if kind == "mean":
        return total
    if kind == "rms":
        return math.isqrt(sq)
    if kind == "min":
        return min(c)
    if kind == "max":
        return max(c)
    if kind == "peak_to_peak":
        return max(s) - min(s)
    if kind == "abs_peak":
        return max(abs(x) for x in c)
    if kind == "std_dev":
        return math.isqrt(n * sq - total * total)
    if kind == "zero_crossings":
        above = [n * x - total >= 0 for x in c]
        return sum(1 for a, b in zip(above, above[1:]) if a != b)
    return goertzel_fixed(c, coeff)[0]


def units(path, fm):
    """The signal log as the README lays it out: rows of a unit together, in sample order;
    a signal's cells empty after its window; readings on the unit's first row."""
    with open(path, newline="", encoding="utf-8-sig") as f:
        rows = list(csv.reader(f))
    head = [h.strip() for h in rows[0]]
    low = [h.lower() for h in head]
    uc = next(low.index(u) for u in UNIT_NAMES if u in low)
    order, by = [], {}
    for row in rows[1:]:
        if not any(x.strip() for x in row):
            continue
        u = row[uc].strip()
        if u not in by:
            order.append(u)
            by[u] = []
        by[u].append(row)
    for u in order:
        rs = by[u]
        windows = []
        for s in fm["signals"]:
            col = low.index(s["name"].lower())
            vals = [float(r[col]) for r in rs[: s["window"]]]
            windows.append([to_raw(v, s) for v in vals])
        readings = []
        for c in fm["channels"]:
            if c.get("source") is None:
                col = low.index(c["name"].lower())
                readings.append(to_raw(float(rs[0][col]), c))
        yield windows, readings


def line(i, m, windows, readings):
    """FORMAT.md: features in channel order, a refused window first, then the kernel."""
    raw, it = [], iter(readings)
    for src in m["sources"]:
        if src is None:
            raw.append(next(it))
            continue
        sig, kind, coeff = src
        spec, w = m["signals"][sig], windows[sig]
        if len(w) != spec["window"] or any(
            not (spec["raw_min"] <= x <= spec["raw_max"]) for x in w
        ):
            return f"{i} FAULT signal{sig}"
        raw.append(feature(kind, coeff, w, spec))
    v, score = kernel(m, raw)
    return f"{i} FAULT ch{score}" if v == "FAULT" else f"{i} {v} {score}"


def main(argv):
    if len(argv) != 5:
        print(__doc__, file=sys.stderr)
        return 2
    import json

    blob = open(argv[1], "rb").read()
    fm = json.load(open(argv[2]))
    m = decode3(blob)
    got = open(argv[4]).read().splitlines()
    want = [f"# model {m['model_id']} blob {m['blob_id']}"]
    for i, (w, r) in enumerate(units(argv[3], fm)):
        want.append(line(i, m, w, r))
    bad = [(k, a, b) for k, (a, b) in enumerate(zip(want, got)) if a != b]
    for k, a, b in bad[:20]:
        print(f"line {k + 1}: recomputed '{a}', replay printed '{b}'")
    if len(want) != len(got):
        print(f"recomputed {len(want)} lines, replay printed {len(got)}")
        return 1
    if bad:
        return 1
    kinds = sorted({x.split()[1] for x in want[1:]})
    print(f"{len(want) - 1} units agree ({', '.join(kinds)})")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
