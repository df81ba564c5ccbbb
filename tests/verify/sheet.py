#!/usr/bin/env python3
"""Independent check of the channel sheets `linegate sheet` writes.

Written from the README (channel sheet keys; "the observed range widened by half its span
on each side" and "the largest power of ten giving at least 20,000 counts over it"),
sharing no code with the tool: the sheets are parsed with Python's tomllib, the logs read
with pandas and their ranges taken with numpy.

usage: sheet.py write DIR   writes scikit-learn's bundled wine and breast-cancer sets as
                            DIR/wine.csv and DIR/breast_cancer.csv (label column: go/nogo)
       sheet.py check DIR   compares DIR/<set>.toml with DIR/<set>.csv for both sets
exit:  0 every entry agrees; 1 some entry disagrees (each printed); 2 usage or input error;
       3 a package is missing (numpy, pandas, scikit-learn)
"""

import math
import sys
import tomllib

try:
    import numpy as np
    import pandas as pd
    from sklearn.datasets import load_breast_cancer, load_wine
except ImportError as e:  # the caller prints SKIPPED
    print(f"missing package: {e}", file=sys.stderr)
    sys.exit(3)

SETS = {
    # Wine: cultivar 0 GO, the other two NO-GO (an invented go/no-go question on real data).
    "wine": (load_wine, lambda t: "go" if t == 0 else "nogo"),
    # Breast cancer: benign (1) GO, malignant (0) NO-GO.
    "breast_cancer": (load_breast_cancer, lambda t: "go" if t == 1 else "nogo"),
}
NAME_CAPACITY = 24  # README: "Channel names are at most 24 bytes"

problems = []


def check(what, ok):
    if not ok:
        problems.append(what)
        print(f"disagree: {what}", file=sys.stderr)


def write(folder):
    for name, (load, label) in SETS.items():
        frame = load(as_frame=True).frame
        frame["label"] = [label(t) for t in frame.pop("target")]
        frame.to_csv(f"{folder}/{name}.csv", index=False)


def widened(lo, hi):
    """README: the observed range widened by half its span on each side."""
    span = hi - lo
    return lo - 0.5 * span, hi + 0.5 * span


def lsb_for(lo, hi):
    """README: the largest power of ten giving at least 20,000 counts over the range."""
    k = math.floor(math.log10((hi - lo) / 20000))
    while (hi - lo) / 10.0**k < 20000:
        k -= 1
    while (hi - lo) / 10.0 ** (k + 1) >= 20000:
        k += 1
    return 10.0**k


def check_set(folder, name):
    frame = pd.read_csv(f"{folder}/{name}.csv")
    with open(f"{folder}/{name}.toml", "rb") as f:
        sheet = tomllib.load(f)
    entries = sheet["channel"]
    columns = [c for c in frame.columns if c != "label"]
    check(f"{name}: one entry per channel column", [e.get("column", e["name"]) for e in entries] == columns)
    names = [e["name"].lower() for e in entries]
    check(f"{name}: names unique without case", len(set(names)) == len(names))
    for e in entries:
        col = e.get("column", e["name"])
        values = frame[col].to_numpy(dtype=np.float64)
        lo, hi = float(np.min(values)), float(np.max(values))
        want_min, want_max = widened(lo, hi)
        what = f"{name}: {col}"
        check(f"{what}: min {e['min']!r} against {want_min!r}", e["min"] == want_min)
        check(f"{what}: max {e['max']!r} against {want_max!r}", e["max"] == want_max)
        want_lsb = lsb_for(want_min, want_max)
        check(f"{what}: lsb {e['lsb']!r} against {want_lsb!r}", math.isclose(e["lsb"], want_lsb, rel_tol=1e-12))
        check(f"{what}: zero", e.get("zero", 0.0) == 0.0)
        check(f"{what}: unit left empty", e.get("unit", "") == "")
        check(f"{what}: marked to be confirmed", e.get("confirmed") is False)
        long = len(col.encode("utf-8")) > NAME_CAPACITY
        check(f"{what}: a column key exactly when the name is too long", ("column" in e) == long)
        check(f"{what}: name fits the device", 0 < len(e["name"].encode("utf-8")) <= NAME_CAPACITY)
    return len(entries)


def main(argv):
    if len(argv) != 3 or argv[1] not in ("write", "check"):
        print(__doc__, file=sys.stderr)
        return 2
    if argv[1] == "write":
        write(argv[2])
        return 0
    entries = sum(check_set(argv[2], name) for name in SETS)
    print(f"{entries} entries in {len(SETS)} sheets, {len(problems)} disagreeing")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
