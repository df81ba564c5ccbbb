#!/usr/bin/env python3
"""Outside checks of `linegate replay --form` and `linegate compare`.

Shares no code with the tool: the CSV is read by Python's csv module and by pandas, the
JSON Lines by Python's json module, the change list is rebuilt by a pandas join of two
`replay --form csv` outputs, the bounds by scipy.stats.beta (and statsmodels'
proportion_confint(method="beta") when installed), the margin shift by numpy.

    field.py forms DEVICE_TXT TEXT_TXT CSV JSONL
        one log replayed in the four forms: the text form's part before " # " is the
        device line, its unit=/time=/line= fields are the CSV's; every CSV row (csv module
        and pandas agree) and every JSON record says what the device line says (index,
        verdict, score or fault); the JSON's model line is the device's first line.
    field.py compare A_CSV B_CSV CHANGES_CSV COMPARE_JSON [MODEL_A_JSON MODEL_B_JSON LOG...]
        A_CSV and B_CSV are `replay --form csv` of the same logs by the two releases;
        a pandas join on unit_id must give exactly compare's changed units (file, line,
        both verdicts and scores), its counts per transition, Clopper-Pearson bounds as
        scipy's beta quantiles (Clopper and Pearson, Biometrika 26, 1934), and the margin
        shift (score / scale - threshold, B - A) as numpy's min, median and max. With the
        float models and the logs: the score / scale of every decided unit is the float
        model's score (README: sum w * (raw - offset) / half + bias) up to rounding.

Exit 0 all agree, 1 a disagreement (printed), 2 usage or input error, 3 pandas, numpy or
scipy missing.
"""

import csv
import json
import sys

try:
    import numpy as np
    import pandas as pd
    from scipy.stats import beta
except ImportError as e:
    print(f"missing: {e}", file=sys.stderr)
    sys.exit(3)

HEADER = ["file", "line", "index", "unit_id", "timestamp", "label", "agrees", "verdict",
          "score", "fault", "fault_name"]
problems = []


def bad(msg):
    problems.append(msg)
    if len(problems) <= 20:
        print("DISAGREE:", msg)


def device_fields(line):
    """(index, verdict, score or None, fault word or None) of a device line."""
    p = line.split(" ")
    if p[1] == "FAULT":
        return int(p[0]), "FAULT", None, p[2]
    return int(p[0]), p[1], int(p[2]), None


def text_fields(rest):
    """The key=value fields after " # ": a value is bare or a JSON string."""
    out = {}
    dec = json.JSONDecoder()
    i = 0
    while i < len(rest):
        if rest[i] == " ":
            i += 1
            continue
        eq = rest.index("=", i)
        key = rest[i:eq]
        if rest[eq + 1:eq + 2] == '"':
            val, end = dec.raw_decode(rest, eq + 1)
        else:
            end = rest.find(" ", eq + 1)
            end = len(rest) if end < 0 else end
            val = rest[eq + 1:end]
        out[key] = val
        i = end
    return out


def forms(device_txt, text_txt, csv_path, jsonl):
    dev = open(device_txt, encoding="utf-8").read().splitlines()
    txt = open(text_txt, encoding="utf-8").read().splitlines()
    # Python's csv module (RFC 4180 quoting), the rows as text.
    with open(csv_path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    if rows[0] != HEADER:
        bad(f"CSV header {rows[0]}")
    rows = [dict(zip(HEADER, r)) for r in rows[1:]]
    # pandas reads the same file to the same rows.
    df = pd.read_csv(csv_path, dtype=str, keep_default_na=False)
    if list(df.columns) != HEADER or len(df) != len(rows):
        bad(f"pandas reads {len(df)} rows, csv {len(rows)}")
    elif df.to_dict("records") != rows:
        bad("pandas and the csv module read different cells")
    recs = [json.loads(l) for l in open(jsonl, encoding="utf-8")]
    head, units = recs[0], recs[1:]
    if head.get("record") != "model" or head.get("model_line") != dev[0]:
        bad(f"JSON head {head} against model line {dev[0]}")
    if txt[0] != dev[0]:
        bad("text form's model line differs")
    n = len(dev) - 1
    if not (len(txt) - 1 == len(rows) == len(units) == n):
        bad(f"counts: device {n}, text {len(txt) - 1}, csv {len(rows)}, json {len(units)}")
    faults = ids = 0
    for k in range(min(n, len(rows), len(units), len(txt) - 1)):
        d, t, r, j = dev[k + 1], txt[k + 1], rows[k], units[k]
        idx, verdict, score, fault = device_fields(d)
        faults += fault is not None
        pre, sep, rest = t.partition(" # ")
        if pre != d or not sep:
            bad(f"text line {t!r} does not start with the device line {d!r}")
        tf = text_fields(rest)
        if tf.get("line") != r["line"] or tf.get("unit", "") != r["unit_id"] \
                or tf.get("time", "") != r["timestamp"]:
            bad(f"text fields {tf} against CSV {r}")
        if fault and r["fault_name"] and tf.get("channel", tf.get("signal")) != r["fault_name"]:
            bad(f"text fault name {tf} against CSV {r['fault_name']}")
        ids += r["unit_id"] != ""
        want = [str(idx), verdict, "" if score is None else str(score), fault or ""]
        got = [r["index"], r["verdict"], r["score"], r["fault"]]
        if want != got:
            bad(f"unit {k}: device {d!r}, CSV {got}")
        jwant = {"index": idx, "verdict": verdict, "score": score, "fault": fault,
                 "line": int(r["line"]), "unit_id": r["unit_id"] or None,
                 "timestamp": r["timestamp"] or None, "label": r["label"] or None,
                 "file": r["file"], "fault_name": r["fault_name"] or None,
                 "agrees": {"": None, "true": True, "false": False}[r["agrees"]]}
        jgot = {key: j.get(key) for key in jwant}
        if jgot != jwant or j.get("record") != "unit":
            bad(f"unit {k}: JSON {j} against {jwant}")
        # agrees: the verdict is the label (GO/NO-GO only).
        if r["label"] and verdict in ("GO", "NO-GO"):
            if r["agrees"] != ("true" if verdict == r["label"] else "false"):
                bad(f"unit {k}: agrees {r['agrees']} for {verdict} labelled {r['label']}")
        elif r["agrees"] != "":
            bad(f"unit {k}: agrees {r['agrees']!r} without a comparable label")
    print(f"forms: {n} units agree in four forms ({faults} FAULT units, {ids} with ids)")


def margin(df, side):
    return df["score"].astype(float) / side["scale"] - side["threshold"]


def float_scores(model_json, logs):
    """Per (file, line): the float model's score from the log's physical readings."""
    m = json.load(open(model_json))
    out = {}
    for log in logs:
        d = pd.read_csv(log)
        s = np.full(len(d), m["bias"])
        for c, w in zip(m["channels"], m["weights"]):
            q = (d[c["name"]].to_numpy(float) - c["zero"]) / c["lsb"]
            raw = np.sign(q) * np.floor(np.abs(q) + 0.5)  # halves away from zero (README)
            s = s + w * (raw - c["offset"]) / c["half"]
        for i, v in enumerate(s):
            out[(log, i + 2)] = v
    return out


def compare(a_csv, b_csv, changes_csv, compare_json, models=None, logs=()):
    c = json.load(open(compare_json))
    read = lambda p: pd.read_csv(p, dtype={"unit_id": str, "score": "Int64"},
                                 keep_default_na=False, na_values={"score": [""]})
    a, b = read(a_csv), read(b_csv)
    # pandas: the join on unit id is the reference change list.
    j = a.merge(b, on="unit_id", suffixes=("_a", "_b"), validate="one_to_one")
    if len(j) != len(a) or len(j) != len(b) or c["units"] != len(j):
        bad(f"join of {len(a)} and {len(b)} units gives {len(j)}; compare counted {c['units']}")
    changed = j[j["verdict_a"] != j["verdict_b"]]
    ch = pd.read_csv(changes_csv, dtype={"unit_id": str, "score_a": "Int64", "score_b": "Int64"},
                     keep_default_na=False, na_values={"score_a": [""], "score_b": [""]})
    key = lambda df, cols: sorted(tuple("" if pd.isna(v) else str(v) for v in r)
                                  for r in df[cols].itertuples(index=False))
    want = key(changed, ["file_a", "line_a", "unit_id", "verdict_a", "verdict_b", "score_a", "score_b"])
    got = key(ch, ["file", "line", "unit_id", "verdict_a", "verdict_b", "score_a", "score_b"])
    if want != got:
        bad(f"changed units: pandas {len(want)}, compare {len(got)}; first differences "
            f"{[w for w in want if w not in got][:3]} / {[g for g in got if g not in want][:3]}")
    if len(c["changes"]) != len(ch):
        bad(f"JSON lists {len(c['changes'])} changes, CSV {len(ch)}")
    # Counts per transition, and the exact bounds from scipy's beta quantiles.
    counts = changed.groupby(["verdict_a", "verdict_b"]).size().to_dict()
    got_counts = {(t["from"], t["to"]): t["rate"]["count"] for t in c["transitions"]}
    if counts != got_counts:
        bad(f"transition counts: pandas {counts}, compare {got_counts}")
    n = len(j)
    try:
        from statsmodels.stats.proportion import proportion_confint
    except ImportError:
        proportion_confint = None
        print("note: statsmodels missing, bounds checked against scipy.stats.beta only")
    checked = 0
    for r in [t["rate"] for t in c["transitions"]] + [c["changed"]]:
        k, conf = r["count"], r["confidence"]
        al = 1 - conf
        lo = 0.0 if k == 0 else beta.ppf(al / 2, k, n - k + 1)
        hi = 1.0 if k == n else beta.ppf(1 - al / 2, k + 1, n - k)
        up = 1.0 if k == n else beta.ppf(conf, k + 1, n - k)
        if r["of"] != n or max(abs(lo - r["low"]), abs(hi - r["high"]), abs(up - r["upper"])) > 1e-9:
            bad(f"bounds of {k}/{n}: scipy [{lo}, {hi}] upper {up}, compare {r}")
        if proportion_confint is not None:
            slo, shi = proportion_confint(k, n, alpha=al, method="beta")
            if max(abs(slo - r["low"]), abs(shi - r["high"])) > 1e-9:
                bad(f"bounds of {k}/{n}: statsmodels [{slo}, {shi}], compare {r}")
        checked += 1
    # Margin shift: numpy over the units both decided.
    both = j[j["score_a"].notna() & j["score_b"].notna()]
    ma = both["score_a"].astype(float) / c["a"]["scale"] - c["a"]["threshold"]
    mb = both["score_b"].astype(float) / c["b"]["scale"] - c["b"]["threshold"]
    s = (mb - ma).to_numpy()
    sh = c["shift"]
    ref = [len(s), np.min(s), np.median(s), np.max(s)]
    got_s = [sh["units"], sh["min"], sh["median"], sh["max"]]
    if ref[0] != got_s[0] or not np.allclose(ref[1:], got_s[1:], rtol=1e-12, atol=1e-15):
        bad(f"margin shift: numpy {ref}, compare {got_s}")
    gate = c["gate"]
    # The gate counts the units A stops (NO-GO, or FAULT, shown as NO-GO) that B passes.
    nogo_go = int(counts.get(("NO-GO", "GO"), 0)) + int(counts.get(("FAULT", "GO"), 0))
    if gate["recheck_to_go"] != int(counts.get(("RECHECK", "GO"), 0)):
        bad(f"gate {gate}: RECHECK→GO count")
    allowed = gate["allowed"]
    if gate["nogo_to_go"] != nogo_go or gate["passed"] != (allowed is None or nogo_go <= allowed):
        bad(f"gate {gate} with {nogo_go} NO-GO→GO changes")
    worst = None
    if models:
        # The margins' units: score / scale is the float model's score, up to rounding.
        for side, m, col in (("a", models[0], "score_a"), ("b", models[1], "score_b")):
            fs = float_scores(m, logs)
            d = j[j[col].notna()]
            got = d[col].astype(float) / c[side]["scale"]
            fsc = np.array([fs[(f, int(l))] for f, l in zip(d["file_a"], d["line_a"])])
            err = np.max(np.abs(got.to_numpy() - fsc))
            span = np.max(np.abs(fsc))
            worst = max(worst or 0, err / span)
            if err > 0.02 * span:
                bad(f"release {side}: score/scale is off the float score by {err} (span {span})")
    print(f"compare: {len(want)} changed units agree with the pandas join of {n} units; "
          f"{checked} Clopper-Pearson bounds as scipy; shift min/median/max as numpy"
          + (f"; score/scale within {worst:.2%} of the float scores' span" if worst is not None else ""))


def main():
    if len(sys.argv) < 2:
        print(__doc__, file=sys.stderr)
        sys.exit(2)
    cmd, args = sys.argv[1], sys.argv[2:]
    if cmd == "forms" and len(args) == 4:
        forms(*args)
    elif cmd == "compare" and len(args) == 4:
        compare(*args)
    elif cmd == "compare" and len(args) >= 7:
        compare(*args[:4], models=args[4:6], logs=args[6:])
    else:
        print(__doc__, file=sys.stderr)
        sys.exit(2)
    sys.exit(1 if problems else 0)


if __name__ == "__main__":
    main()
