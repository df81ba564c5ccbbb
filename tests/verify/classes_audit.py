#!/usr/bin/env python3
"""Outside checks of the audit of a model of several classes (driven by
tests/tests/all/classes_audit.rs).

  classes_audit.py make DIR   scikit-learn's bundled wine and iris sets (three classes), scaled
                              to [-1, 1] by each feature's range over the whole set, split
                              stratified 70/30 (train_test_split, several seeds), and float rows
                              from LinearSVC (one-vs-rest, its default C) on the training part:
                              DIR/case-*/case.json for the Rust side to release and audit.
  classes_audit.py check DIR  for every case the audit wrote (audit.json, units.csv, model.json,
                              raw.json):
    - the device decision of every unit recomputed with Python integers from audit.json's
      fixed rows and conversions (the kernel's rule as FORMAT.md and shared-model say it)
      against the audit's per-unit decisions (units.csv): 0 mismatches;
    - each log's confusion matrix against scikit-learn's confusion_matrix of the true classes
      and those recomputed decisions;
    - every cell's two-sided Clopper-Pearson interval against scipy.stats.beta.ppf and
      statsmodels' proportion_confint(method="beta");
    - the float rule's decision recomputed with numpy from model.json;
    - the rounding proof by brute force: for every unit the audit says PROVED, every
      difference of the float leader's score against each other class moved by plus or minus
      that pair's bound (every corner of the box) leaves the device rule's decision equal to
      the float rule's;
    - no flips: the recomputed device decisions equal the float decisions on every scored unit.
Exit 0 when all agree, 1 on a disagreement, 3 when a package is missing.
"""
import csv
import itertools
import json
import os
import sys

try:
    import numpy as np
    from scipy.stats import beta
    from sklearn.datasets import load_iris, load_wine
    from sklearn.metrics import confusion_matrix
    from sklearn.model_selection import train_test_split
    from sklearn.svm import LinearSVC
    from statsmodels.stats.proportion import proportion_confint
except ImportError as e:  # the Rust driver prints SKIPPED
    print(f"missing package: {e}")
    sys.exit(3)

SEEDS = [0, 1, 2]
GAP = 0.05


def make(out):
    cases = []
    for name, loader, go in [("wine", load_wine, 0), ("iris", load_iris, None)]:
        data = loader()
        x, y = data.data, data.target
        lo, hi = x.min(axis=0), x.max(axis=0)
        scaled = 2.0 * (x - lo) / (hi - lo) - 1.0
        classes = [f"{name}-{c}" for c in data.target_names]
        for seed in SEEDS:
            tr, te = train_test_split(
                np.arange(len(y)), test_size=0.3, stratify=y, random_state=seed
            )
            svc = LinearSVC().fit(scaled[tr], y[tr])
            rows = [
                {"name": classes[k], "weights": svc.coef_[k].tolist(), "bias": float(svc.intercept_[k])}
                for k in range(len(classes))
            ]
            case = {
                "name": f"{name}-seed{seed}",
                "classes": classes,
                "go": go,
                "go_gap": GAP,
                "class_gap": GAP,
                "rows": rows,
                "train": {"points": scaled[tr].tolist(), "classes": y[tr].tolist()},
                "holdout": {"points": scaled[te].tolist(), "classes": y[te].tolist()},
            }
            d = os.path.join(out, f"case-{len(cases)}")
            os.makedirs(d, exist_ok=True)
            with open(os.path.join(d, "case.json"), "w") as f:
                json.dump(case, f)
            cases.append(d)
    print(f"{len(cases)} cases written")


def device(audit, raw):
    """The device's decision from the fixed rows: (verdict, class index, lead) or FAULT."""
    xs = []
    for c, r in zip(audit["conversions"], raw):
        if r < c["raw_min"] or r > c["raw_max"]:
            return ("FAULT", None, None)
        p = (r - c["offset"]) * c["multiplier"]
        xs.append(p if c["shift"] == 0 else (p + (1 << (c["shift"] - 1))) >> c["shift"])
    scores = [row["bias"] + sum(w * x for w, x in zip(row["weights"], xs)) for row in audit["rows"]]
    leader = max(range(len(scores)), key=lambda k: (scores[k], -k))
    lead = scores[leader] - max(s for k, s in enumerate(scores) if k != leader)
    if audit["go"] is not None and leader == audit["go"]:
        verdict = "GO" if lead >= audit["go_gap"][0] else "RECHECK"
    else:
        verdict = "NO-GO" if lead >= audit["class_gap"][0] else "RECHECK"
    return (verdict, leader, lead)


def check(out):
    checks = 0
    bad = []
    proved_total = 0
    unproved_total = 0

    def agree(ok, what):
        nonlocal checks
        checks += 1
        if not ok:
            bad.append(what)

    for case_dir in sorted(d for d in os.listdir(out) if d.startswith("case-")):
        d = os.path.join(out, case_dir)
        case = json.load(open(os.path.join(d, "case.json")))
        audit = json.load(open(os.path.join(d, "audit.json")))
        model = json.load(open(os.path.join(d, "model.json")))
        raw = json.load(open(os.path.join(d, "raw.json")))
        units = list(csv.DictReader(open(os.path.join(d, "units.csv"))))
        names = audit["classes"]
        k = len(names)
        fc = model["classes"]
        offset = np.array([c["offset"] for c in model["channels"]], dtype=float)
        half = np.array([c["half"] for c in model["channels"]], dtype=float)
        w = np.array([r["weights"] for r in fc["rows"]])
        b = np.array([r["bias"] for r in fc["rows"]])
        a_scale = audit["scale"]
        bounds = audit["pair_bounds"]["bounds"]
        at = 0
        for li, log in enumerate(audit["logs"]):
            rows = raw[log["name"]]
            truth = case[log["name"]]["classes"]
            mine = []
            for i, r in enumerate(rows):
                u = units[at + i]
                dv = device(audit, r)
                # The audit's per-unit decision (units.csv) against Python's integers.
                got = (u["device"], u["device_class"] or None, int(u["device_lead"]) if u["device_lead"] else None)
                want = (dv[0], names[dv[1]] if dv[1] is not None else None, dv[2])
                agree(got == want, f"{case['name']} {log['name']} unit {i}: audit {got}, Python {want}")
                mine.append("FAULT" if dv[0] == "FAULT" else ("RECHECK" if dv[0] == "RECHECK" else names[dv[1]]))
                # The float rule from model.json (numpy).
                x = (np.array(r, dtype=float) - offset) / half
                s = w @ x + b
                lead_k = int(np.argmax(s))
                others = [s[j] for j in range(k) if j != lead_k]
                float_lead = s[lead_k] - max(others)
                gap = fc["go_gap"] if fc["go"] is not None and lead_k == fc["go"] else fc["class_gap"]
                decided = float_lead >= gap
                float_decision = names[lead_k] if decided else "RECHECK"
                agree(u["float"] == float_decision, f"{case['name']} unit {i}: float {u['float']} vs numpy {float_decision}")
                if dv[0] != "FAULT":
                    agree(float_decision == mine[-1], f"{case['name']} {log['name']} unit {i}: flip ({float_decision} vs device {mine[-1]})")
                # The proof by brute force: every corner of the box of differences.
                if u["proved"] == "true":
                    proved_total += 1
                    g = audit["go_gap"][0] if audit["go"] is not None and lead_k == audit["go"] else audit["class_gap"][0]
                    diffs = [(j, a_scale * (s[lead_k] - s[j])) for j in range(k) if j != lead_k]
                    changed = False
                    for signs in itertools.product([-1.0, 1.0], repeat=len(diffs)):
                        dd = [dj + sg * bounds[lead_k][j] for (j, dj), sg in zip(diffs, signs)]
                        still_leader = all(v > 0 for v in dd)
                        dec = still_leader and min(dd) >= g
                        if not still_leader or dec != decided:
                            changed = True
                    agree(not changed, f"{case['name']} {log['name']} unit {i}: PROVED but a corner changes the decision")
                else:
                    unproved_total += 1
            at += len(rows)
            # Confusion matrix against scikit-learn.
            labels = names + ["RECHECK", "FAULT"]
            cm = confusion_matrix([names[t] for t in truth], mine, labels=labels)[:k]
            agree(cm.tolist() == log["confusion"], f"{case['name']} {log['name']}: confusion {log['confusion']} vs sklearn {cm.tolist()}")
            # Clopper-Pearson against scipy and statsmodels.
            conf = audit["confidence"]
            alpha = 1.0 - conf
            for t in range(k):
                n = int(cm[t].sum())
                for c in range(k + 2):
                    cnt = int(cm[t][c])
                    rr = log["row_rates"][t][c]
                    lo = 0.0 if cnt == 0 else beta.ppf(alpha / 2, cnt, n - cnt + 1)
                    hi = 1.0 if cnt == n else beta.ppf(1 - alpha / 2, cnt + 1, n - cnt)
                    sm_lo, sm_hi = proportion_confint(cnt, n, alpha=alpha, method="beta")
                    sm_lo = 0.0 if np.isnan(sm_lo) else sm_lo
                    sm_hi = 1.0 if np.isnan(sm_hi) else sm_hi
                    ok = (
                        rr["count"] == cnt
                        and rr["of"] == n
                        and abs(rr["low"] - lo) < 1e-9
                        and abs(rr["high"] - hi) < 1e-9
                        and abs(rr["low"] - sm_lo) < 1e-9
                        and abs(rr["high"] - sm_hi) < 1e-9
                    )
                    agree(ok, f"{case['name']} {log['name']} cell {t},{c}: {rr} vs scipy ({lo}, {hi}) statsmodels ({sm_lo}, {sm_hi})")
            agree(log["flips"] == 0, f"{case['name']} {log['name']}: {log['flips']} flips")
        agree(at == len(units), f"{case['name']}: {len(units)} unit rows, {at} units")
    for x in bad[:20]:
        print("DISAGREES:", x)
    print(f"proved units {proved_total}, not proved {unproved_total}")
    print(f"{checks} checks, {len(bad)} disagreeing")
    return 0 if not bad else 1


if __name__ == "__main__":
    if len(sys.argv) != 3 or sys.argv[1] not in ("make", "check"):
        print(__doc__)
        sys.exit(2)
    if sys.argv[1] == "make":
        make(sys.argv[2])
        sys.exit(0)
    sys.exit(check(sys.argv[2]))
