#!/usr/bin/env python3
"""Outside check of drift counted in parts (host-trainer's field::run_part).

usage: drift_parts.py CASES_JSON

CASES_JSON is a list of cases written by tests/tests/all/drift_parts.rs. Each case holds a
plan (per side mu0, k, h), the thresholds (nogo_max, go_min), the bins (origin, shift), the
field units in order ({"score": s} or {"fault": true}), where the log was cut into parts,
and what Linegate's parts gave once merged ("merged": counts, bins, and each side's CUSUM:
final sums and the 1-based unit of each sum's first alarm, 0 never).

Recomputed here with Python's integers from the definitions, sharing no code with Linegate
and never cutting the log (one plain pass):
  - each unit's verdict from the thresholds: GO at score >= go_min, NO-GO at
    score <= nogo_max, RECHECK between;
  - the score bin: (score - origin) >> shift, below when negative, above past 32 bins;
  - the tabular CUSUM of each side's margins (Page, Biometrika 41, 1954; Montgomery,
    Introduction to Statistical Quality Control, section 9.1):
    C+_i = max(0, C+_{i-1} + x_i - (mu0 + k)), C-_i = max(0, C-_{i-1} + (mu0 - k) - x_i),
    x the margin (GO units: score - go_min; NO-GO units: nogo_max - score), an alarm when a
    sum exceeds h, unit numbers counting every field unit (FAULT and RECHECK included).
The cases' values stay far inside i64, so the device's saturating steps equal these exact
ones. Exit 0 all agree, 1 a disagreement (listed).
"""
import json
import sys

BINS = 32


def cusum(plan, margins):
    """Final (up, down) and first-alarm units (0 never) over (unit, margin) pairs."""
    mu0, k, h = plan["target"], plan["slack"], plan["limit"]
    up = down = 0
    alarm_up = alarm_down = 0
    for unit, x in margins:
        up = max(0, up + x - (mu0 + k))
        down = max(0, down + (mu0 - k) - x)
        if alarm_up == 0 and up > h:
            alarm_up = unit
        if alarm_down == 0 and down > h:
            alarm_down = unit
    return {"up": up, "down": down, "alarm_up": alarm_up, "alarm_down": alarm_down}


def expected(case):
    t = case["thresholds"]
    go_min, nogo_max = t["go_min"], t["nogo_max"]
    origin, shift = case["origin"], case["shift"]
    counts = {"units": 0, "go": 0, "nogo": 0, "recheck": 0, "faults": 0, "below": 0, "above": 0}
    bins = [0] * BINS
    go_m, nogo_m = [], []
    for i, u in enumerate(case["units"], start=1):
        counts["units"] += 1
        if u.get("fault"):
            counts["faults"] += 1
            continue
        s = u["score"]
        if s >= go_min:
            counts["go"] += 1
            go_m.append((i, s - go_min))
        elif s <= nogo_max:
            counts["nogo"] += 1
            nogo_m.append((i, nogo_max - s))
        else:
            counts["recheck"] += 1
        d = s - origin
        if d < 0:
            counts["below"] += 1
        elif (d >> shift) >= BINS:
            counts["above"] += 1
        else:
            bins[d >> shift] += 1
    return {
        **counts,
        "bins": bins,
        "cusum_go": cusum(case["plan"]["go"], go_m),
        "cusum_nogo": cusum(case["plan"]["nogo"], nogo_m),
    }


def main():
    cases = json.load(open(sys.argv[1]))
    bad = []
    alarms = crossing = 0
    for n, case in enumerate(cases):
        want = expected(case)
        got = case["merged"]
        for key, w in want.items():
            if got.get(key) != w:
                bad.append(f"case {n} (cuts {case['cuts']}): {key}: linegate {got.get(key)}, reference {w}")
        for side in ("cusum_go", "cusum_nogo"):
            for a in ("alarm_up", "alarm_down"):
                u = want[side][a]
                if u:
                    alarms += 1
                    if any(0 < c < u for c in case["cuts"]):
                        crossing += 1
    print(f"{len(cases)} cases, {alarms} first alarms ({crossing} after a cut), {len(bad)} disagreements")
    for b in bad[:40]:
        print("  " + b)
    sys.exit(1 if bad else 0)


if __name__ == "__main__":
    main()
