#!/usr/bin/env python3
"""Outside check of Linegate's soft-margin trainer (`--trainer max-margin`) and of its
cross-validated choice of C, against scikit-learn, sharing no code with Linegate.

    python3 soft_margin.py LINEGATE_BINARY TMPDIR

Sources:
  - scikit-learn's sklearn.svm.SVC(kernel="linear"), a wrapper of libsvm (C.-C. Chang and
    C.-J. Lin, "LIBSVM: a library for support vector machines", ACM TIST 2011), which
    solves the dual of the soft-margin SVM with a free bias,
        min 1/2 |w|^2 + sum_i C_i max(0, 1 - y_i (w.z_i + b)),
    by SMO to a KKT tolerance (tol=1e-7 here);
  - sklearn.preprocessing.StandardScaler (mean and population std, ddof=0; scale 1 for a
    constant channel), the standard scores the trainer is specified to train on;
  - sklearn.model_selection.train_test_split (stratified 70/30, random_state=1);
  - the data sets bundled with scikit-learn (no downloads): Wisconsin diagnostic breast
    cancer (load_breast_cancer: benign = GO, malignant = NO-GO; 30 channels c00..c29),
    wine (load_wine: class 0 = GO, classes 1 and 2 = NO-GO; c00..c12) and Fisher's iris
    (load_iris: versicolor = GO, virginica = NO-GO; c0..c3).

Checks, on each set:
  1. objective, for C in 0.01, 0.1, 1, 10 (`train --c C --folds 0 --no-operating-point`
     on the 70 % split): the device-scaled inputs x are rebuilt from the readings with the
     model's channel scaling (raw = round half away from zero((v - zero)/lsb),
     x = (raw - offset)/half); StandardScaler's mean_/scale_ on the training x against the
     model's summary.soft_margin.spread; libsvm's primal objective (computed here from
     coef_ and intercept_) against the model's summary.soft_margin.objective; that
     objective attainable along the written model's direction (exact 1-D minimum over the
     scale); the direction (cosine of libsvm's w/std with the model's weights); the
     GO/NO-GO decisions of both on the held-out 30 % at threshold 0;
  2. the choice of C (`train` with the default --c auto, --no-operating-point,
     --cv-output folds.csv, on the whole set): on exactly the folds Linegate wrote, every C
     of its grid is re-run with libsvm (standardised by each fold's training units), and
     the pooled false GO / false NO-GO counts and the chosen C are compared.
Exit 0 all agree, 1 a disagreement (listed), 3 numpy or scikit-learn missing.
"""
import csv
import json
import math
import os
import subprocess
import sys
import warnings

try:
    import numpy as np
    from sklearn.datasets import load_breast_cancer, load_iris, load_wine
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.model_selection import train_test_split
    from sklearn.preprocessing import StandardScaler
    from sklearn.svm import SVC
except ImportError as e:  # pragma: no cover
    print(f"reference libraries missing: {e}")
    sys.exit(3)

OBJ_C = [0.01, 0.1, 1.0, 10.0]
OBJ_REL = 1e-4  # |ours - libsvm's| <= OBJ_REL * max(1, libsvm's)
TIGHTER = 1e-6  # ours <= libsvm's * (1 + TIGHTER) + 1e-9
SPREAD_REL = 1e-9
MIN_COS = 0.9999
TIE = 1e-6  # held-out units this close to either boundary (unit |w| in x space) may differ


def svc(c):
    return SVC(kernel="linear", C=c, tol=1e-7, max_iter=100_000_000, cache_size=500)


def datasets():
    """(name, readings, is_go, channel names) of the three bundled sets."""
    bc = load_breast_cancer()
    wine = load_wine()
    iris = load_iris()
    keep = iris.target > 0
    return [
        ("breast_cancer", bc.data, bc.target == 1, [f"c{k:02d}" for k in range(30)]),
        ("wine", wine.data, wine.target == 0, [f"c{k:02d}" for k in range(13)]),
        ("iris", iris.data[keep], iris.target[keep] == 1, [f"c{k}" for k in range(4)]),
    ]


def write_log(path, ids, v, go, names):
    with open(path, "w", newline="") as f:
        f.write("unit,label," + ",".join(names) + "\n")
        for i, row, g in zip(ids, v, go):
            f.write(f"u{i:04d},{'GO' if g else 'NO-GO'}," + ",".join(repr(float(a)) for a in row) + "\n")


def linegate(binary, args):
    p = subprocess.run([binary, *args], capture_output=True, text=True)
    if p.returncode != 0:
        raise RuntimeError(f"linegate {' '.join(args)} exited {p.returncode}:\n{p.stdout}{p.stderr}")
    return p.stdout


def round_half_away(t):
    r = np.trunc(t)  # t - trunc(t) is exact, so ties are seen exactly
    return r + np.sign(t) * (np.abs(t - r) >= 0.5)


def device_x(model, v):
    """The device-scaled inputs of readings v (units x channels), from the model's scaling."""
    ch = model["channels"]
    lsb = np.array([c["lsb"] for c in ch])
    zero = np.array([c["zero"] for c in ch])
    off = np.array([c["offset"] for c in ch], dtype=float)
    half = np.array([c["half"] for c in ch], dtype=float)
    raw = round_half_away((v - zero) / lsb)
    return (raw - off) / half


def primal(w, b, z, y, c):
    return 0.5 * float(w @ w) + float(np.sum(c * np.maximum(0.0, 1.0 - y * (z @ w + b))))


def best_scale(u, c0, z, y, c):
    """min over s >= 0 of primal(s u, s c0): exact, piecewise quadratic in s."""
    a = float(u @ u)
    m = y * (z @ u + c0)
    best = primal(0 * u, 0.0, z, y, c)
    pos = m > 0
    bps = np.sort(1.0 / m[pos])
    cands = list(bps)
    edges = [0.0, *bps, math.inf]
    for lo, hi in zip(edges[:-1], edges[1:]):
        mid = hi if math.isinf(hi) else (lo + hi) / 2
        active = 1.0 - mid * m > 0
        s = float(np.sum(c[active] * m[active])) / a
        if lo <= s <= hi:
            cands.append(s)
    for s in cands:
        best = min(best, primal(s * u, s * c0, z, y, c))
    return best


def to_x(w_z, b_z, mean, std):
    """A separator over standard scores expressed over device-scaled x."""
    w = w_z / std
    return w, b_z - float(w @ mean)


class Report:
    def __init__(self):
        self.checks = 0
        self.errs = []

    def check(self, ok, what):
        self.checks += 1
        if not ok:
            self.errs.append(what)
            print(f"DISAGREE: {what}")


def objective_checks(binary, tmp, rep, name, v, go, names, figs):
    ids = np.arange(len(go))
    tr, te = train_test_split(ids, test_size=0.3, stratify=go, random_state=1)
    tr, te = np.sort(tr), np.sort(te)
    log = os.path.join(tmp, f"{name}_train.csv")
    write_log(log, tr, v[tr], go[tr], names)
    y = np.where(go, 1.0, -1.0)
    for c in OBJ_C:
        out = os.path.join(tmp, f"{name}_c{c}.json")
        linegate(binary, ["train", log, "--c", repr(c), "--folds", "0", "--no-operating-point",
                          "-o", out, "--force", "-q"])
        m = json.load(open(out))
        where = f"{name} C={c}"
        x_tr, x_te = device_x(m, v[tr]), device_x(m, v[te])
        sc = StandardScaler().fit(x_tr)
        spread = m["summary"]["soft_margin"]["spread"]
        mean, std = np.array(spread["mean"]), np.array(spread["std"])
        dm = np.max(np.abs(mean - sc.mean_) / np.maximum(np.abs(sc.mean_), sc.scale_))
        ds = np.max(np.abs(std - sc.scale_) / sc.scale_)
        figs["spread"] = max(figs["spread"], dm, ds)
        rep.check(dm <= SPREAD_REL, f"{where}: spread mean differs from StandardScaler's by {dm:.3g} (relative)")
        rep.check(ds <= SPREAD_REL, f"{where}: spread std differs from StandardScaler's by {ds:.3g} (relative)")
        z = sc.transform(x_tr)
        yt = y[tr]
        ci = np.full(len(tr), c)
        with warnings.catch_warnings():
            warnings.simplefilter("error", ConvergenceWarning)
            s = svc(c).fit(z, yt)
        assert list(s.classes_) == [-1.0, 1.0]
        wz, bz = s.coef_[0], float(s.intercept_[0])
        sk = primal(wz, bz, z, yt, ci)
        ours = m["summary"]["soft_margin"]["objective"]
        d = abs(ours - sk)
        figs["obj"] = max(figs["obj"], d / max(1.0, sk))
        figs["obj_rows"].append(f"{name} C={c}: linegate {ours:.9g}, libsvm {sk:.9g}, difference {ours - sk:+.3g}")
        rep.check(d <= OBJ_REL * max(1.0, sk), f"{where}: objective {ours!r}, libsvm's {sk!r} (difference {d:.3g})")
        rep.check(ours <= sk * (1 + TIGHTER) + 1e-9,
                  f"{where}: objective {ours!r} above libsvm's {sk!r} by {ours - sk:.3g}")
        # The written model's direction, over standard scores: w_z = w_x * std (up to scale).
        wx, bx = np.array(m["weights"]), float(m["bias"])
        u, c0 = wx * sc.scale_, bx + float(wx @ sc.mean_)
        along = best_scale(u, c0, z, yt, ci)
        figs["along"] = max(figs["along"], abs(along - ours) / max(1.0, ours))
        rep.check(along <= ours * (1 + TIGHTER) + 1e-9 and along >= sk - OBJ_REL * max(1.0, sk),
                  f"{where}: the written direction attains {along!r}, the model reports {ours!r}, libsvm {sk!r}")
        swx, sbx = to_x(wz, bz, sc.mean_, sc.scale_)
        cos = float(swx @ wx) / (np.linalg.norm(swx) * np.linalg.norm(wx))
        figs["cos"] = min(figs["cos"], cos)
        rep.check(cos >= MIN_COS, f"{where}: cosine of libsvm's direction with the model's {cos!r}")
        rep.check(m["threshold"] == 0, f"{where}: threshold {m['threshold']!r}, not 0")
        ours_s = (x_te @ wx + bx) / np.linalg.norm(wx)
        sk_s = (x_te @ swx + sbx) / np.linalg.norm(swx)
        differ = (ours_s > 0) != (sk_s > 0)
        near = (np.abs(ours_s) < TIE) | (np.abs(sk_s) < TIE)
        bad = int(np.sum(differ & ~near))
        figs["mismatch"] += bad
        figs["near"] += int(np.sum(differ & near))
        figs["heldout"] += len(te)
        rep.check(bad == 0, f"{where}: {bad} of {len(te)} held-out decisions differ "
                            f"(scores {[(round(a, 6), round(b, 6)) for a, b in zip(ours_s[differ], sk_s[differ])]})")


def choice_checks(binary, tmp, rep, name, v, go, names, figs):
    n = len(go)
    log = os.path.join(tmp, f"{name}.csv")
    write_log(log, np.arange(n), v, go, names)
    out = os.path.join(tmp, f"{name}_auto.json")
    folds_path = os.path.join(tmp, f"{name}_folds.csv")
    linegate(binary, ["train", log, "--no-operating-point", "--cv-output", folds_path,
                      "-o", out, "--force", "-q"])
    m = json.load(open(out))
    cc = m["provenance"]["c_choice"]
    reps, fgw, rows = cc["repeats"], cc["false_go_weight"], cc["rows"]
    where = f"{name} C choice"

    # The folds file: every repeat a partition of all units, ids and labels as in the log.
    folds = {}
    ok_file, why = True, []
    with open(folds_path, newline="") as f:
        r = csv.DictReader(f)
        if r.fieldnames != ["repeat", "fold", "line", "unit", "label"]:
            ok_file, why = False, why + [f"header {r.fieldnames}"]
        for row in r:
            i = int(row["line"]) - 2
            if not (0 <= i < n) or row["unit"] != f"u{i:04d}" or row["label"] != ("GO" if go[i] else "NO-GO"):
                ok_file, why = False, why + [f"row {row} does not match line {i + 2} of the log"]
                continue
            folds.setdefault(int(row["repeat"]), {}).setdefault(int(row["fold"]), []).append(i)
    if sorted(folds) != list(range(1, reps + 1)):
        ok_file, why = False, why + [f"repeats {sorted(folds)}, provenance says {reps}"]
    for rr, fs in folds.items():
        allu = sorted(i for f_ in fs.values() for i in f_)
        if allu != list(range(n)):
            ok_file, why = False, why + [f"repeat {rr} does not hold every unit once"]
        if len(fs) != cc["folds"]:
            ok_file, why = False, why + [f"repeat {rr} has {len(fs)} folds, provenance says {cc['folds']}"]
        gos = [int(np.sum(go[f_])) for f_ in fs.values()]
        if max(gos) - min(gos) > 1:
            ok_file, why = False, why + [f"repeat {rr} not stratified: GO units per fold {gos}"]
    rep.check(ok_file, f"{where}: folds file: {'; '.join(why[:5])}")

    # The product's own rows: cost and choice as specified.
    costs = [r_["cost"] for r_ in rows]
    mine = max((r_ for r_ in rows), key=lambda r_: (-r_["cost"], r_["c"]))["c"]
    rep.check(cc["chosen"] == mine and m["provenance"]["c"] == cc["chosen"],
              f"{where}: chosen {cc['chosen']}, provenance.c {m['provenance']['c']}, "
              f"cheapest (largest of equal) of its own rows {mine}")

    x = device_x(m, v)
    y = np.where(go, 1.0, -1.0)
    ref = []
    for r_ in rows:
        c = r_["c"]
        fg = fn = 0
        for rr in sorted(folds):
            for k in sorted(folds[rr]):
                te = np.array(sorted(folds[rr][k]))
                trn = np.array(sorted(i for kk, f_ in folds[rr].items() if kk != k for i in f_))
                sc = StandardScaler().fit(x[trn])
                with warnings.catch_warnings():
                    warnings.simplefilter("error", ConvergenceWarning)
                    s = svc(c).fit(sc.transform(x[trn]), y[trn])
                dec = s.decision_function(sc.transform(x[te])) > 0
                fg += int(np.sum(dec & ~go[te]))
                fn += int(np.sum(~dec & go[te]))
        cost = fgw * fg + fn
        ref.append((c, fg, fn, cost))
        dg, dn = r_["false_go"] - fg, r_["false_nogo"] - fn
        figs["count"] = max(figs["count"], abs(dg), abs(dn))
        figs["count_rows"].append(f"{name} C={c:g}: false GO {r_['false_go']} vs {fg} ({dg:+d}), "
                                  f"false NO-GO {r_['false_nogo']} vs {fn} ({dn:+d}), "
                                  f"cost {r_['cost']:g} vs {cost:g}")
        rep.check(abs(dg) <= reps, f"{where}: C={c}: false GO {r_['false_go']}, libsvm {fg} (tolerance {reps})")
        rep.check(abs(dn) <= reps, f"{where}: C={c}: false NO-GO {r_['false_nogo']}, libsvm {fn} (tolerance {reps})")
        rep.check(r_["cost"] == fgw * r_["false_go"] + r_["false_nogo"],
                  f"{where}: C={c}: cost {r_['cost']} is not {fgw} x {r_['false_go']} + {r_['false_nogo']}")
    ref_best = max(ref, key=lambda t: (-t[3], t[0]))
    tol = (fgw + 1) * reps
    chosen = cc["chosen"]
    ref_of_chosen = next(t[3] for t in ref if t[0] == chosen)
    if chosen == ref_best[0]:
        figs["choice"].append(f"{name}: C = {chosen:g} (libsvm too), grid {[t[0] for t in ref]}, costs {costs}")
        rep.check(True, "")
    else:
        near = ref_of_chosen - ref_best[3] <= tol
        msg = (f"{name}: linegate chose C = {chosen:g}, libsvm on the same folds C = {ref_best[0]:g}; "
               f"libsvm's cost of C = {chosen:g} is {ref_of_chosen:g}, its least {ref_best[3]:g} (tolerance {tol:g})")
        figs["choice"].append(msg + (" -- accepted" if near else ""))
        if near:
            print(f"note: {msg}: within tolerance, accepted")
        rep.check(near, msg)


def main(binary, tmp):
    rep = Report()
    figs = {"spread": 0.0, "obj": 0.0, "along": 0.0, "cos": 1.0, "mismatch": 0, "near": 0,
            "heldout": 0, "count": 0, "choice": [], "obj_rows": [], "count_rows": []}
    for name, v, go, names in datasets():
        objective_checks(binary, tmp, rep, name, v, go, names, figs)
        choice_checks(binary, tmp, rep, name, v, go, names, figs)
    for line in figs["obj_rows"]:
        print(line)
    for line in figs["count_rows"]:
        print(line)
    print(f"spread: largest relative difference from StandardScaler {figs['spread']:.3g}")
    print(f"objective: largest |linegate - libsvm| / max(1, libsvm) {figs['obj']:.3g}; "
          f"written direction's best objective vs reported: largest relative difference {figs['along']:.3g}")
    print(f"direction: least cosine {figs['cos']:.12f}")
    print(f"held-out decisions: {figs['mismatch']} differ of {figs['heldout']} "
          f"(+{figs['near']} within {TIE:g} of a boundary)")
    print(f"C choice: largest count difference {figs['count']}")
    for line in figs["choice"]:
        print(line)
    print(f"{rep.checks} checks, {len(rep.errs)} disagreeing")
    return 0 if not rep.errs else 1


if __name__ == "__main__":
    if len(sys.argv) != 3:
        print(__doc__)
        sys.exit(2)
    sys.exit(main(sys.argv[1], sys.argv[2]))
