#!/usr/bin/env python3
"""Outside check of `linegate values --csv`: every listed number recomputed from the log.

Written from shared-model/FORMAT.md (blob layout; "Semantics": the conversion of a raw
reading to the kernel's input and the score), the README's scaling formula
(raw = round((physical - zero)/lsb), halves away from zero) and its feature definitions;
it shares no code with the tool. The blob is decoded with verify_release.py's and
signal_replay.py's readers (written from FORMAT.md); the raw readings and scaled inputs
are recomputed with numpy, vectorised over every unit and channel; features with
Python's exact integers and numpy as features.py does (math.isqrt for the roots,
numpy's diff for the crossings, the documented Goertzel integer steps).

    values.py cancer OUT.csv
        writes scikit-learn's bundled breast-cancer set as a bench log (unit_id, label,
        c00..c29; benign = GO) and a copy OUT-fault.csv whose unit u0007 has channel c03
        ten times its value (outside the observed range: a FAULT on the device)
    values.py check BLOB MODEL_JSON LOG VALUES_CSV REPLAY_TXT
        checks the CSV (which must list every unit of LOG) against the log and against
        `linegate replay`'s lines for the same blob and log

Checks, per unit and channel: index and line; raw (a reading: from the log's physical
value and the model's lsb and zero; a feature: from the window's raw samples); scaled
(FORMAT.md: floor(((r - offset) * multiplier + 2^(shift-1)) / 2^shift)); physical
(zero + lsb * raw, and within lsb/2 of the log's reading); a refused reading or window
named as the device names it; the score (bias + sum weight * x), the verdict by the
thresholds, and the device line equal to replay's.
Exit 0 all agree, 1 a disagreement (printed), 2 usage or input error, 3 numpy or
scikit-learn missing.
"""

import csv
import json
import math
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
try:
    import numpy as np
except ImportError as e:
    print(f"missing: {e}", file=sys.stderr)
    sys.exit(3)
from features import goertzel_fixed  # noqa: E402  (the documented Goertzel integer steps)
from signal_replay import decode3  # noqa: E402  (FORMAT.md's version-3 reader)
from verify_release import read_model  # noqa: E402  (FORMAT.md's version-1/2 reader)

UNIT_NAMES = ["unit_id", "unit", "serial"]
HEADER = ["index", "line", "unit_id", "channel", "name", "source", "unit", "physical", "raw",
          "scaled", "fault", "score", "verdict", "device_line"]


def cancer(out):
    try:
        from sklearn.datasets import load_breast_cancer
    except ImportError as e:
        print(f"missing: {e}", file=sys.stderr)
        sys.exit(3)
    bc = load_breast_cancer()
    names = [f"c{k:02d}" for k in range(bc.data.shape[1])]
    for path, fault in [(out, False), (out[:-4] + "-fault.csv", True)]:
        with open(path, "w") as f:
            f.write("unit_id,label," + ",".join(names) + "\n")
            for i, (row, t) in enumerate(zip(bc.data, bc.target)):
                row = [float(a) for a in row]
                if fault and i == 7:
                    row[3] *= 10.0
                # load_breast_cancer: target 1 is benign.
                f.write(f"u{i:04d},{'GO' if t == 1 else 'NO-GO'}," + ",".join(repr(a) for a in row) + "\n")
    return 0


def decode(blob):
    version = int.from_bytes(blob[4:6], "little")
    if version in (3, 4):
        return decode3(blob)
    m, _, _, _ = read_model(blob, version)
    m["signals"], m["sources"] = [], [None] * len(m["channels"])
    return m


def round_half_away(q):
    """README: raw = round((physical - zero)/lsb), halves away from zero."""
    return np.sign(q) * np.floor(np.abs(q) + 0.5)


def log_units(path, fm):
    """Every unit of the log: (line, unit id, {reading channel: physical}, [window of
    physical samples per signal]). A bench log has one row per unit; a signal log (the
    model has signals) the README's layout: a unit's rows together, a signal's cells empty
    after its window, readings on the unit's first row."""
    with open(path, newline="", encoding="utf-8-sig") as f:
        rows = list(csv.reader(f))
    low = [h.strip().lower() for h in rows[0]]
    uc = next((low.index(u) for u in UNIT_NAMES if u in low), None)
    readings = [c for c in fm["channels"] if c.get("source") is None]
    out, by = [], {}
    for line, row in enumerate(rows[1:], start=2):
        if not any(x.strip() for x in row):
            continue
        uid = row[uc].strip() if uc is not None else None
        if not fm.get("signals") or uid not in by:
            unit = {"line": line, "id": uid, "rows": []}
            out.append(unit)
            by[uid] = unit
        by[uid]["rows"].append(row)
    for u in out:
        first = u["rows"][0]
        u["readings"] = {c["name"]: float(first[low.index(c["name"].lower())]) for c in readings}
        u["windows"] = []
        for s in fm.get("signals", []):
            col = low.index(s["name"].lower())
            u["windows"].append([float(r[col]) for r in u["rows"] if r[col].strip()])
    return out


def feature(kind, coeff, s, offset):
    """The README's features of raw samples s measured from `offset`, as features.py
    recomputes them: exact integers, math.isqrt, numpy for the crossings."""
    n = len(s)
    c = [x - offset for x in s]
    total, sq = sum(c), sum(x * x for x in c)
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
        d = np.array([n * x - total for x in c], dtype=np.int64)
        return int(np.count_nonzero(np.diff((d >= 0).astype(np.int8))))
    return goertzel_fixed(c, coeff)[0]


def check(blob_path, model_path, log, values_csv, replay_txt):
    m = decode(open(blob_path, "rb").read())
    fm = json.load(open(model_path))
    chans, specs = fm["channels"], m["channels"]
    units = log_units(log, fm)
    with open(values_csv, newline="") as f:
        r = csv.reader(f)
        header = next(r)
        rows = list(r)
    replay = open(replay_txt).read().splitlines()[1:]
    bad = []

    def expect(ok, what):
        if not ok:
            bad.append(what)

    expect(header == HEADER, f"header {header}")
    d = len(chans)
    expect(len(rows) == d * len(units), f"{len(rows)} rows for {len(units)} units of {d} channels")
    sig = {s["name"]: k for k, s in enumerate(fm.get("signals", []))}

    # Raw counts of every unit's readings and windows (README formula, numpy, vectorised).
    zero = np.array([c["zero"] for c in chans])
    lsb = np.array([c["lsb"] for c in chans])
    reading_cols = [i for i, c in enumerate(chans) if c.get("source") is None]
    phys = np.array([[u["readings"][chans[i]["name"]] for i in reading_cols] for u in units])
    raw_read = round_half_away((phys - zero[reading_cols]) / lsb[reading_cols])
    raw_read = np.clip(raw_read, -(2**31), 2**31 - 1).astype(np.int64)

    raws = np.zeros((len(units), d), dtype=np.int64)
    refused = np.zeros((len(units), d), dtype=bool)  # window refused
    for k, u in enumerate(units):
        for j, i in enumerate(reading_cols):
            raws[k, i] = raw_read[k, j]
        for i, src in enumerate(m["sources"]):
            if src is None:
                continue
            s_idx, kind, coeff = src
            spec, sscale = m["signals"][s_idx], fm["signals"][s_idx]
            w = round_half_away((np.array(u["windows"][s_idx]) - sscale["zero"]) / sscale["lsb"])
            w = [int(x) for x in w]
            if len(w) != spec["window"] or any(not spec["raw_min"] <= x <= spec["raw_max"] for x in w):
                refused[k, i] = True
            else:
                raws[k, i] = feature(kind, coeff, w, spec["offset"])

    # FORMAT.md "Semantics", numpy int64 (|(r - offset) * multiplier| < 2^62 is validated).
    lo = np.array([c["raw_min"] for c in specs])
    hi = np.array([c["raw_max"] for c in specs])
    off = np.array([c["offset"] for c in specs], dtype=np.int64)
    mul = np.array([c["multiplier"] for c in specs], dtype=np.int64)
    sh = np.array([c["shift"] for c in specs], dtype=np.int64)
    inside = (raws >= lo) & (raws <= hi) & ~refused
    p = (np.where(inside, raws, off) - off) * mul
    half = np.where(sh > 0, np.left_shift(np.int64(1), np.maximum(sh - 1, 0)), 0)
    scaled = np.where(sh > 0, np.floor_divide(p + half, np.left_shift(np.int64(1), sh)), p)

    for k, u in enumerate(units):
        unit_rows = rows[k * d:(k + 1) * d]
        score = m["bias"] + sum(int(c["weight"]) * int(x) for c, x in zip(specs, scaled[k]))
        # The device's first refusal: a refused window before any reading (FORMAT.md).
        win = next((m["sources"][i][0] for i in range(d) if refused[k, i]), None)
        out_ch = next((i for i in range(d) if not inside[k, i] and not refused[k, i]), None)
        if win is not None:
            want_line = f"{k} FAULT signal{win}"
        elif out_ch is not None:
            want_line = f"{k} FAULT ch{out_ch}"
        else:
            v = "GO" if score >= m["go_min"] else "NO-GO" if score <= m["nogo_max"] else "RECHECK"
            want_line = f"{k} {v} {score}"
        where = f"unit {k} (line {u['line']})"
        expect(k < len(replay) and replay[k] == want_line,
               f"{where}: recomputed line '{want_line}', replay '{replay[k] if k < len(replay) else None}'")
        for i, row in enumerate(unit_rows):
            got = dict(zip(HEADER, row))
            at = f"{where} channel {i} ({chans[i]['name']})"
            expect(got["index"] == str(k) and got["line"] == str(u["line"]), f"{at}: index/line {got['index']}/{got['line']}")
            expect(got["unit_id"] == (u["id"] or ""), f"{at}: unit id {got['unit_id']!r}")
            expect(got["channel"] == str(i) and got["name"] == chans[i]["name"], f"{at}: channel {got['channel']} {got['name']}")
            expect(got["device_line"] == want_line, f"{at}: device line {got['device_line']!r}, recomputed {want_line!r}")
            expect(got["verdict"] == want_line.split(" ")[1], f"{at}: verdict {got['verdict']}")
            want_score = str(score) if win is None and out_ch is None else ""
            expect(got["score"] == want_score, f"{at}: score {got['score']!r}, recomputed {want_score!r}")
            if refused[k, i]:
                want_fault = f"signal{m['sources'][i][0]}"
                expect(got["raw"] == "" and got["scaled"] == "" and got["physical"] == "",
                       f"{at}: refused window but raw {got['raw']!r} scaled {got['scaled']!r}")
                expect(got["fault"] == want_fault, f"{at}: fault {got['fault']!r}, recomputed {want_fault}")
                continue
            expect(got["raw"] == str(raws[k, i]), f"{at}: raw {got['raw']}, recomputed {raws[k, i]}")
            if inside[k, i]:
                expect(got["scaled"] == str(scaled[k, i]) and got["fault"] == "",
                       f"{at}: scaled {got['scaled']!r} fault {got['fault']!r}, recomputed {scaled[k, i]}")
            else:
                expect(got["scaled"] == "" and got["fault"] == f"ch{i}",
                       f"{at}: out of range but scaled {got['scaled']!r} fault {got['fault']!r}")
            want_phys = chans[i]["zero"] + chans[i]["lsb"] * float(raws[k, i])
            expect(got["physical"] != "" and math.isclose(float(got["physical"]), want_phys, rel_tol=1e-12, abs_tol=1e-12),
                   f"{at}: physical {got['physical']!r}, zero + lsb*raw = {want_phys}")
            if chans[i].get("source") is None:
                logged = u["readings"][chans[i]["name"]]
                expect(abs(float(got["physical"]) - logged) <= chans[i]["lsb"] * (0.5 + 1e-9) + 1e-12,
                       f"{at}: physical {got['physical']} more than lsb/2 from the log's {logged}")
    for b in bad[:20]:
        print(b)
    faults = sum(1 for k in range(len(units)) if refused[k].any() or not inside[k].all())
    print(f"{len(units)} units x {d} channels ({faults} FAULT units): {len(bad)} disagreeing")
    return 1 if bad else 0


def main(argv):
    if len(argv) == 3 and argv[1] == "cancer":
        return cancer(argv[2])
    if len(argv) == 7 and argv[1] == "check":
        return check(*argv[2:])
    print(__doc__, file=sys.stderr)
    return 2


if __name__ == "__main__":
    sys.exit(main(sys.argv))
