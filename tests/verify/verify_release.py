#!/usr/bin/env python3
"""Independent check of a Linegate release.

Written from shared-model/FORMAT.md (blob layout, kernel semantics) and from the audit
report's stated definitions (README "Release gates", audit.md "Method"); it shares no
code with the tool. Given the blob, the model file, the audit report and the audited logs,
it decodes the blob, recomputes every unit's device verdict, the per-log counts, the
smallest margins, the rounding bound and the guarantee, and compares them with the report.

usage: verify_release.py BLOB MODEL_JSON AUDIT_JSON LOG [LOG ...]
       (the logs in the order of the report's "sets")
exit:  0 every figure agrees; 1 some figure disagrees (each printed); 2 usage or input error
"""

import csv
import hashlib
import json
import math
import sys
import zlib

# Default label column names and tokens, as the README documents them.
LABEL_NAMES = ["label", "verdict", "result", "status"]
GO = {"go", "pass", "ok", "good"}
NOGO = {"nogo", "no-go", "no_go", "fail", "ng", "bad", "reject"}

problems = []


def check(what, mine, theirs):
    if mine != theirs:
        problems.append(f"{what}: recomputed {mine!r}, report says {theirs!r}")


def close(what, mine, theirs, rel=1e-9):
    if not (abs(mine - theirs) <= rel * max(1.0, abs(mine), abs(theirs))):
        problems.append(f"{what}: recomputed {mine!r}, report says {theirs!r}")


class Reader:
    """Postcard as FORMAT.md describes it: u8 as one byte, other integers as LEB128
    varints, signed ones zig-zag encoded; strings and sequences with a varint length."""

    def __init__(self, b):
        self.b, self.i = b, 0

    def byte(self):
        v = self.b[self.i]
        self.i += 1
        return v

    def varint(self):
        v, s = 0, 0
        while True:
            x = self.byte()
            v |= (x & 0x7F) << s
            s += 7
            if x < 0x80:
                return v

    def signed(self):
        v = self.varint()
        return (v >> 1) ^ -(v & 1)

    def take(self, n):
        out = self.b[self.i : self.i + n]
        self.i += n
        return out


def decode(blob):
    """A version-1 blob (FORMAT.md)."""
    m, r, n, count = read_model(blob, 1)
    if r.i != n or len(m["channels"]) != count:
        raise ValueError("payload length")
    return m


def read_model(blob, want):
    """Header, CRC and the model of a blob of format version `want`: the model, the payload
    reader (left after the model), the payload length and the header's channel count."""
    if blob[:4] != b"LGMB":
        raise ValueError("bad magic")
    version = int.from_bytes(blob[4:6], "little")
    if version != want:
        raise ValueError(f"version {version}, expected {want}")
    count = blob[6]
    n = int.from_bytes(blob[7:9], "little")
    if len(blob) != 9 + n + 4:
        raise ValueError("length")
    stored = int.from_bytes(blob[9 + n :], "little")
    # CRC-32/ISO-HDLC is the CRC of zip: Python's zlib.crc32.
    if zlib.crc32(blob[: 9 + n]) != stored:
        raise ValueError("CRC")
    r = Reader(blob[9 : 9 + n])
    m = {"model_id": r.take(16).hex(), "audit": r.varint()}
    for k in ["input_bits", "weight_bits", "weight_frac_bits", "acc_bits"]:
        m[k] = r.byte()
    for k in ["bias", "nogo_max", "go_min"]:
        m[k] = r.signed()
    chans = []
    for _ in range(r.varint()):
        c = {"name": r.take(r.varint()).decode("utf-8")}
        for k in ["raw_min", "raw_max", "offset", "multiplier"]:
            c[k] = r.signed()
        c["shift"] = r.byte()
        c["weight"] = r.signed()
        chans.append(c)
    m["channels"] = chans
    m["blob_id"] = f"{stored:08x}"
    return m, r, n, count


def kernel(m, raw):
    """FORMAT.md "Semantics": (verdict, score) or ("FAULT", channel)."""
    score = m["bias"]
    for k, (c, r) in enumerate(zip(m["channels"], raw)):
        if not (c["raw_min"] <= r <= c["raw_max"]):
            return "FAULT", k
        t = (r - c["offset"]) * c["multiplier"]
        s = c["shift"]
        x = (t + (1 << (s - 1))) >> s if s > 0 else t  # >> floors, as the spec's ⌊⌋
        score += c["weight"] * x
    if score >= m["go_min"]:
        return "GO", score
    if score <= m["nogo_max"]:
        return "NO-GO", score
    return "RECHECK", score


def to_raw(physical, ch):
    """raw = round((physical − zero)/lsb), halves away from zero, saturated to 32 bits."""
    x = (physical - ch["zero"]) / ch["lsb"]
    r = math.floor(x)
    f = x - r
    if f > 0.5 or (f == 0.5 and x >= 0):
        r += 1
    return max(-(2**31), min(2**31 - 1, r))


def read_log(path, fm):
    with open(path, newline="", encoding="utf-8-sig") as f:
        rows = list(csv.reader(f))
    header = [h.strip() for h in rows[0]]
    lower = [h.lower() for h in header]
    label = next(lower.index(n) for n in LABEL_NAMES if n in lower)
    # A channel is read from its "column" where the model file names one (README, model file).
    cols = [lower.index(c.get("column", c["name"]).lower()) for c in fm["channels"]]
    units = []
    for line, row in enumerate(rows[1:], start=2):
        if not row or all(not c.strip() for c in row):
            continue
        tok = row[label].strip().lower()
        y = 1 if tok in GO else -1 if tok in NOGO else None
        if y is None:
            raise ValueError(f"{path}:{line}: label {tok!r}")
        raw = [to_raw(float(row[k]), ch) for k, ch in zip(cols, fm["channels"])]
        units.append((line, raw, y))
    return units


def limit_allows(rule, n, units):
    """README "Release gates": a count, a rate of the units the gate counts among, or a
    one-sided Clopper-Pearson upper bound at a confidence level. The bound is checked by
    its definition, not by a quantile: upper <= rate exactly when a binomial(units, rate)
    count is at most n with probability <= 1 - confidence."""
    if "Count" in rule:
        return n <= rule["Count"]
    if "Rate" in rule:
        return n <= rule["Rate"] * units
    r, conf = rule["Upper"]["rate"], rule["Upper"]["confidence"]
    if n >= units:
        return r >= 1.0
    if r <= 0.0:
        return False
    if r >= 1.0:
        return True
    cdf = sum(
        math.exp(math.lgamma(units + 1) - math.lgamma(i + 1) - math.lgamma(units - i + 1)
                 + i * math.log(r) + (units - i) * math.log1p(-r))
        for i in range(n + 1)
    )
    return cdf <= 1.0 - conf


def main(argv):
    if len(argv) < 5:
        print(__doc__, file=sys.stderr)
        return 2
    blob_path, model_path, report_path, logs = argv[1], argv[2], argv[3], argv[4:]
    blob = open(blob_path, "rb").read()
    fm = json.load(open(model_path, encoding="utf-8"))
    rep = json.load(open(report_path, encoding="utf-8"))
    rep = rep.get("audit", rep)
    m = decode(blob)
    check("model id", m["model_id"], rep["model_id"])
    check("model id (model file)", m["model_id"], fm["model_id"])
    check("blob id", m["blob_id"], rep["blob_id"])
    check("blob SHA-256", hashlib.sha256(blob).hexdigest(), rep["blob_sha256"])
    check("channel names (model file)", [c["name"] for c in m["channels"]], [c["name"] for c in fm["channels"]])
    check("integer weights", [c["weight"] for c in m["channels"]], rep["weights"])
    check("bias", m["bias"], rep["bias"])
    check("thresholds", (m["nogo_max"], m["go_min"]), (rep["nogo_max"], rep["go_min"]))
    sets = rep["sets"]
    if len(sets) != len(logs):
        print(f"the report audits {len(sets)} logs, {len(logs)} given", file=sys.stderr)
        return 2

    # The rounding bound, from the report's A and the stated definitions.
    a = rep["scale"]
    w_float, b_float, t = fm["weights"], fm["bias"], fm["threshold"]
    kappa = [c["multiplier"] / 2.0 ** c["shift"] for c in m["channels"]]
    ideal = [a * w / (ch["half"] * k) for w, ch, k in zip(w_float, fm["channels"], kappa)]
    ideal_b = a * b_float
    for i, (x, y) in enumerate(zip(ideal, rep["ideal_weights"])):
        close(f"ideal weight {i}", x, y)
    xmax = [
        k * max(abs(c["raw_max"] - c["offset"]), abs(c["offset"] - c["raw_min"]))
        for c, k in zip(m["channels"], kappa)
    ]
    bound = (
        0.5 * sum(abs(c["weight"]) for c in m["channels"])
        + sum(abs(c["weight"] - w) * x for c, w, x in zip(m["channels"], ideal, xmax))
        + abs(m["bias"] - ideal_b)
    )
    close("rounding bound", bound, rep["bound"]["total"])
    t_acc = a * t
    close("A·t", t_acc, rep["threshold_acc"])
    go_past = max(0.0, m["go_min"] - 1 - math.floor(t_acc))
    nogo_past = max(0.0, math.floor(t_acc) - m["nogo_max"])

    total = 0
    all_within = 0
    for s, path in zip(sets, logs):
        name = s["name"]
        check(f"{name}: log SHA-256", hashlib.sha256(open(path, "rb").read()).hexdigest(), s["sha256"])
        if s["skipped_rows"]:
            print(f"{name}: the audit skipped rows; this check reads whole logs only", file=sys.stderr)
            return 2
        units = read_log(path, fm)
        c = dict(units=0, go_units=0, nogo_units=0, false_go=0, false_nogo=0, recheck=0, recheck_go=0, faults=0, flips=0, float_correct=0, within_bound=0)
        min_margin = None
        for line, raw, y in units:
            c["units"] += 1
            c["go_units"] += y > 0
            c["nogo_units"] += y < 0
            verdict, score = kernel(m, raw)
            if verdict == "FAULT":
                c["faults"] += 1
                c["false_nogo"] += y > 0
                continue
            f = b_float + sum(w * (r - ch["offset"]) / ch["half"] for w, r, ch in zip(w_float, raw, fm["channels"]))
            float_go = f > t
            float_ok = float_go == (y > 0)
            c["float_correct"] += float_ok
            c["recheck"] += verdict == "RECHECK"
            c["recheck_go"] += verdict == "RECHECK" and y > 0
            c["false_go"] += verdict == "GO" and y < 0
            c["false_nogo"] += verdict == "NO-GO" and y > 0
            decided = verdict != "RECHECK"
            if decided and (verdict == "GO") != float_go:
                c["flips"] += 1
            if float_ok and decided:
                margin = score - (m["go_min"] - 0.5) if y > 0 else (m["nogo_max"] + 0.5) - score
                min_margin = margin if min_margin is None else min(min_margin, margin)
                past = go_past if y > 0 else nogo_past
                c["within_bound"] += margin + past <= bound * (1 + 1e-12)
        for k, v in c.items():
            check(f"{name}: {k}", v, s[k])
        check(f"{name}: smallest margin (LSB)", min_margin, s["min_margin_lsb"])
        for g in rep["gates"]:
            # Each rate among the units it can happen to (README "Release gates").
            key, among = {"false GO": ("false_go", "nogo_units"), "false NO-GO": ("false_nogo", "go_units"),
                          "RECHECK": ("recheck", "units")}.get(g["gate"], (None, None))
            if g["log"] == name and key:
                check(f"{name}: {g['gate']} gate", limit_allows(g["rule"], c[key], c[among]), g["passed"])
        total += c["units"]
        all_within += c["within_bound"]
    check("guaranteed", all_within == 0, rep["guaranteed"])

    if problems:
        for p in problems:
            print("DISAGREE", p)
        return 1
    print(f"agree: {total} units in {len(logs)} logs; bound {bound:.3f} LSB; blob {m['blob_id']}")
    return 0


if __name__ == "__main__":
    try:
        sys.exit(main(sys.argv))
    except (OSError, ValueError, KeyError, StopIteration) as e:
        print(f"verify_release: {e!r}", file=sys.stderr)
        sys.exit(2)
