#!/usr/bin/env python3
"""Outside check of `linegate drift`.

usage: drift.py AUDIT_JSON LINES_TXT DRIFT_JSON [LINES_TXT DRIFT_JSON ...]
       drift.py cancer DIR
       drift.py fisher TABLES_JSON

`cancer` writes scikit-learn's bundled breast-cancer set (load_breast_cancer; benign = GO)
as four bench logs in DIR: bc-train.csv (units 0, 1 mod 4), bc-audit.csv (2 mod 4),
bc-field.csv (3 mod 4) and bc-shifted.csv (the field units with every "worst" channel,
c20..c29, read 8 % high: a drifted sensor front end).

`fisher` reads TABLES_JSON, a list of [k1, n1, k2, n2, p] (Linegate's one-sided Fisher
p-value of k1 of n1 field units against k2 of n2 baseline units), and checks each p against
scipy.stats.fisher_exact([[k1, n1 - k1], [k2, n2 - k2]], alternative="greater") and
scipy.stats.hypergeom.sf(k1 - 1, n1 + n2, k1 + k2, n1) (Fisher, The Design of Experiments,
1935: the hypergeometric upper tail) to 1e-9 relative below 10^5 units and 1e-8 above
(scipy's own value is off by about 3e-10 at 2*10^6 units), and against the tail summed
with mpmath at 40 digits (log-gamma terms) to 1e-12 relative (1e-12 absolute near 1).

AUDIT_JSON is the release audit (its `baseline`), each LINES_TXT the device's lines of a field
log (`linegate replay`), each DRIFT_JSON `linegate drift --json` of the same log. Recomputed
here with general-purpose libraries, sharing no code with Linegate:
  - the two-sample Kolmogorov-Smirnov statistic D (Smirnov 1939) of every scored unit's
    score (GO, NO-GO and RECHECK; the baseline's `scores` and `recheck_scores`):
    scipy.stats.ks_2samp(method="asymp").statistic, exactly;
  - its asymptotic p-value Q(D*sqrt(n*m/(n+m))) (Kolmogorov's limiting distribution) with
    scipy.special.kolmogorov and scipy.stats.kstwobign.sf, to 1e-9 relative. scipy's own
    ks_2samp(method="asymp") p-value is kstwo.sf(D, round(n*m/(n+m))): the exact
    one-sample distribution at the rounded effective size, which the limit approaches as the
    sizes grow; it is printed beside ours, not compared;
  - the tabular CUSUM of each side's margins, written here from its published definition
    (Page, Biometrika 41, 1954; Montgomery, Introduction to Statistical Quality Control,
    section 9.1): C+_i = max(0, C+_{i-1} + x_i - mu0 - k), C-_i = max(0, C-_{i-1} + mu0 - k - x_i),
    alarm when a sum exceeds h, with mu0, k, h from the audit's plan; final sums and the
    1-based unit of each sum's first alarm;
  - the RECHECK and FAULT rates' Clopper-Pearson intervals (Clopper and Pearson, Biometrika
    26, 1934) at 1 - alpha with scipy.stats.beta.ppf, to 1e-9 relative, and their alarm's
    one-sided Fisher exact p-value with scipy.stats.fisher_exact(alternative="greater") and
    scipy.stats.hypergeom.sf, to 1e-9 relative; alarm exactly when p < alpha;
  - the plan's settings from the baseline's own figures: mu0 = round(mean),
    k = max(1, round(sd/2)), h = max(1, round(5 sd)) of each side's margins (round half away
    from zero), or no limit (i64::MAX) below two units.
Exit 0 all agree, 1 a disagreement (listed), 3 numpy or scipy missing.
"""
import json
import math
import sys

try:
    import numpy as np
    from scipy.special import kolmogorov
    from scipy.stats import beta, fisher_exact, hypergeom, ks_2samp, kstwobign
except ImportError as e:  # pragma: no cover
    print(f"reference libraries missing: {e}")
    sys.exit(3)

REL = 1e-9


def close(a, b, rel=REL):
    return abs(a - b) <= max(1e-15, rel * max(abs(a), abs(b)))


def round_half_away(x):
    """Rust's f64::round (Python's round goes half to even)."""
    return int(math.copysign(math.floor(abs(x) + 0.5), x))


def fisher_p(k1, n1, k2, n2):
    """One-sided Fisher p, two ways; they must agree with each other first."""
    a = float(fisher_exact([[k1, n1 - k1], [k2, n2 - k2]], alternative="greater")[1])
    b = float(hypergeom.sf(k1 - 1, n1 + n2, k1 + k2, n1))
    return a, b


def p_close(got, want, rel=REL):
    """Relative agreement; near 1 (where p is 1 - a small tail) 1e-12 absolute."""
    if want > 0.5:
        return abs(got - want) <= 1e-12
    return abs(got - want) <= rel * abs(want)


def mp_tail(k1, n1, k2, n2):
    """P(X >= k1), the hypergeometric terms summed at 40 digits (mpmath)."""
    import mpmath as mp

    mp.mp.dps = 40
    n, k = n1 + n2, k1 + k2

    def lc(a, b):
        return mp.loggamma(a + 1) - mp.loggamma(b + 1) - mp.loggamma(a - b + 1)

    lo = max(0, n1 - (n - k))
    if k1 <= lo:
        return 1.0
    return float(mp.fsum(mp.exp(lc(k, x) + lc(n - k, n1 - x) - lc(n, n1)) for x in range(k1, min(k, n1) + 1)))


def fisher(tables_path):
    errs = []
    tables = json.load(open(tables_path))
    try:
        import mpmath  # noqa: F401

        have_mp = True
    except ImportError:
        have_mp = False
        print("SKIPPED: mpmath missing: the 40-digit reference is not run (scipy only)")
    for k1, n1, k2, n2, p in tables:
        a, b = fisher_p(k1, n1, k2, n2)
        rel = 1e-9 if n1 + n2 < 100_000 else 1e-8
        ok = all(p_close(p, w, rel) for w in (a, b))
        m = mp_tail(k1, n1, k2, n2) if have_mp else None
        if m is not None and not p_close(p, m, 1e-12):
            ok = False
        print(f"{k1}/{n1} vs {k2}/{n2}: linegate {p:.15e}, fisher_exact {a:.15e}, hypergeom.sf {b:.15e}, mpmath {m}")
        if not ok:
            errs.append(f"{k1}/{n1} vs {k2}/{n2}: {p} != fisher_exact {a} / hypergeom.sf {b} / mpmath {m}")
    for e in errs:
        print("DISAGREE:", e)
    print(f"{len(tables)} tables: {len(errs)} disagreeing")
    return 1 if errs else 0


def read_lines(path):
    """The device's lines: (verdict, score or None) per unit, in order."""
    units = []
    with open(path) as f:
        first = f.readline()
        assert first.startswith("# model "), first
        for line in f:
            w = line.split()
            if not w:
                continue
            assert int(w[0]) == len(units), line
            units.append((w[1], None if w[1] == "FAULT" else int(w[2])))
    return units


def cusum(margins, mu0, k, h):
    """Page's tabular CUSUM over (unit number, margin) pairs: final C+, C-, first alarms."""
    up = down = 0
    alarm_up = alarm_down = 0
    for unit, x in margins:
        up = max(0, up + x - mu0 - k)
        down = max(0, down + mu0 - k - x)
        if alarm_up == 0 and up > h:
            alarm_up = unit
        if alarm_down == 0 and down > h:
            alarm_down = unit
    return up, down, alarm_up, alarm_down


def cp(k, n, conf):
    a = 1 - conf
    low = 0.0 if k == 0 else beta.ppf(a / 2, k, n - k + 1)
    high = 1.0 if k == n else beta.ppf(1 - a / 2, k + 1, n - k)
    return low, high


def main(audit_path, pairs):
    errs = []
    audit = json.load(open(audit_path))
    b = audit["baseline"]
    go_min, nogo_max = b["go_min"], b["nogo_max"]
    base = np.array(sorted(b["scores"] + b["recheck_scores"]), dtype=np.int64)
    # The plan from the baseline's figures: each side's mean and sample sd of its margins.
    for side in ("go", "nogo"):
        p = b["plan"][side]
        sd = p["sd"]
        if p["units"] >= 2:
            want = (round_half_away(p["mean"]), max(1, round_half_away(sd / 2)), max(1, round_half_away(5 * sd)))
        else:
            want = (round_half_away(p["mean"]), max(1, round_half_away(sd / 2)), 2**63 - 1)
        got = (p["target"], p["slack"], p["limit"])
        if want != got:
            errs.append(f"plan {side}: {got} != {want} (mu0, k = max(1, sd/2), h = max(1, 5 sd))")
    for lines_path, json_path in pairs:
        units = read_lines(lines_path)
        r = json.load(open(json_path))
        name = lines_path
        field = np.array(sorted(s for v, s in units if v != "FAULT"), dtype=np.int64)
        # KS: statistic exactly, p against Kolmogorov's distribution.
        ref = ks_2samp(base, field, method="asymp")
        n, m = len(base), len(field)
        en = n * m / (n + m)
        lam = ref.statistic * math.sqrt(en)
        p_k = float(kolmogorov(lam))
        p_b = float(kstwobign.sf(lam))
        ks = r["ks"]
        if not close(ks["d"], float(ref.statistic), 1e-12):
            errs.append(f"{name}: D {ks['d']} != scipy {ref.statistic}")
        if (ks["n"], ks["m"]) != (n, m):
            errs.append(f"{name}: sizes {(ks['n'], ks['m'])} != {(n, m)}")
        if not close(ks["p"], p_k) or not close(ks["p"], p_b):
            errs.append(f"{name}: p {ks['p']} != kolmogorov {p_k} / kstwobign.sf {p_b}")
        # The family-wise level alpha is split over the four p-value tests (Bonferroni).
        alpha = r["alpha"]
        level = r["test_alpha"]
        if not close(level, alpha / 4, 1e-15):
            errs.append(f"{name}: per-test level {level} != alpha/4 = {alpha / 4}")
        if (ks["p"] < level) != r["ks_alarm"]:
            errs.append(f"{name}: KS alarm {r['ks_alarm']} with p {ks['p']} at alpha/4 {level}")
        # CUSUM per side, over the units in order (unit numbers count every unit from 1).
        for side, verdict, margin in (
            ("go", "GO", lambda s: s - go_min),
            ("nogo", "NO-GO", lambda s: nogo_max - s),
        ):
            p = b["plan"][side]
            ms = [(i + 1, margin(s)) for i, (v, s) in enumerate(units) if v == verdict]
            want = cusum(ms, p["target"], p["slack"], p["limit"])
            c = r[f"cusum_{side}"]
            got = (c["up"], c["down"], c["alarm_up"], c["alarm_down"])
            if got != want:
                errs.append(f"{name}: CUSUM {side} {got} != Page/Montgomery {want}")
        # Rates: Clopper-Pearson at 1 - alpha, field and baseline.
        total = len(units)
        for key, count, bcount in (
            ("recheck_rate", sum(v == "RECHECK" for v, _ in units), b["recheck"]),
            ("fault_rate", sum(v == "FAULT" for v, _ in units), b["faults"]),
        ):
            x = r[key]
            for who, k, nn in (("field", count, total), ("baseline", bcount, b["units"])):
                low, high = cp(k, nn, 1 - alpha)
                got = x[who]
                if (got["count"], got["of"]) != (k, nn):
                    errs.append(f"{name}: {key} {who} {got['count']}/{got['of']} != {k}/{nn}")
                if not close(got["low"], low) or not close(got["high"], high):
                    errs.append(
                        f"{name}: {key} {who} [{got['low']}, {got['high']}] != beta.ppf [{low}, {high}]"
                    )
            fa, fb = fisher_p(count, total, bcount, b["units"])
            if not p_close(x["p"], fa) or not p_close(x["p"], fb):
                errs.append(f"{name}: {key} Fisher p {x['p']} != fisher_exact {fa} / hypergeom.sf {fb}")
            want_alarm = total > 0 and fa < level
            if x["alarm"] != want_alarm:
                errs.append(f"{name}: {key} alarm {x['alarm']} != {want_alarm} (Fisher p {fa}, alpha/4 {level})")
            print(f"{name}: {key} {count}/{total} vs {bcount}/{b['units']}: Fisher p {x['p']:.6e} (scipy {fa:.6e})")
        print(
            f"{name}: D {ks['d']:.6f} (scipy {ref.statistic:.6f}), p {ks['p']:.6e} "
            f"(kolmogorov {p_k:.6e}; scipy asymp kstwo(round(en)) {ref.pvalue:.6e}), "
            f"CUSUM alarms GO down {r['cusum_go']['alarm_down']} NO-GO down {r['cusum_nogo']['alarm_down']}"
        )
    for e in errs:
        print("DISAGREE:", e)
    print(f"{len(pairs)} field logs: {len(errs)} disagreeing")
    return 1 if errs else 0


def cancer(out):
    try:
        from sklearn.datasets import load_breast_cancer
    except ImportError as e:
        print(f"reference libraries missing: {e}")
        sys.exit(3)
    bc = load_breast_cancer()
    names = [f"c{k:02d}" for k in range(bc.data.shape[1])]
    parts = {"train": (0, 1), "audit": (2,), "field": (3,), "shifted": (3,)}
    for part, rest in parts.items():
        with open(f"{out}/bc-{part}.csv", "w") as f:
            f.write("unit_id,label," + ",".join(names) + "\n")
            for i, (row, t) in enumerate(zip(bc.data, bc.target)):
                if i % 4 not in rest:
                    continue
                row = [float(a) for a in row]
                if part == "shifted":
                    row = [a * 1.08 if k >= 20 else a for k, a in enumerate(row)]
                f.write(f"u{i:04d},{'GO' if t == 1 else 'NO-GO'}," + ",".join(repr(a) for a in row) + "\n")
    return 0


if __name__ == "__main__":
    a = sys.argv[1:]
    if len(a) == 2 and a[0] == "cancer":
        sys.exit(cancer(a[1]))
    if len(a) == 2 and a[0] == "fisher":
        sys.exit(fisher(a[1]))
    if len(a) < 3 or len(a) % 2 == 0:
        print(__doc__)
        sys.exit(2)
    sys.exit(main(a[0], list(zip(a[1::2], a[2::2]))))
