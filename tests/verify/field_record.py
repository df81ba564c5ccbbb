"""Outside check of the field record (shared-model/FORMAT.md, "Field record"), written from
the document with Python's struct and zlib, sharing no code with Linegate.

    python3 field_record.py RECORD.bin UNITS.txt

RECORD.bin is a record the device (or the host) wrote; UNITS.txt has one line per unit of
the log, in order: `GO|NO-GO|RECHECK <score> <values...>` for a decided unit, or
`FAULT channel <i>` / `FAULT signal <k>` / `FAULT other`, as Linegate's kernel gave them;
nogo_max and go_min are on its first line (`# thresholds <nogo_max> <go_min>`). Checks:
- the layout: magic, version 1, length 288 + 20C + 4S, reserved bytes zero, and the CRC-32
  (zlib.crc32, the CRC-32/ISO-HDLC the document names) over every byte before it;
- every statistic recomputed from the units with Python's integers: counts per verdict and
  fault source, the histogram ((score - origin) >> shift, below, above), each channel's
  min, max and sum, and the two tabular CUSUMs from their published recursion (Page, 1954;
  Montgomery, Introduction to Statistical Quality Control, 6th ed., 9.1) with the unit of
  their first alarm.
Exit 0 all agree, 1 a mismatch (printed).
"""
import struct
import sys
import zlib


def main():
    record = open(sys.argv[1], "rb").read()
    lines = open(sys.argv[2]).read().splitlines()
    bad = []

    def check(name, got, want):
        if got != want:
            bad.append(f"{name}: record {got}, recomputed {want}")

    assert record[:4] == b"LGFR", "magic"
    version, C, S = struct.unpack_from("<HBB", record, 4)
    check("version", version, 1)
    check("length", len(record), 288 + 20 * C + 4 * S)
    body = len(record) - 4
    check("crc", struct.unpack_from("<I", record, body)[0], zlib.crc32(record[:body]))
    blob_id, origin, shift = struct.unpack_from("<IqB", record, 8)
    check("reserved 21..24", record[21:24], b"\0\0\0")
    plan = struct.unpack_from("<6q", record, 24)
    go_plan, nogo_plan = plan[:3], plan[3:]
    units, go, nogo, recheck, faults = struct.unpack_from("<5I", record, 72)
    saturated = record[92]
    check("reserved 93..96", record[93:96], b"\0\0\0")
    other, below, above = struct.unpack_from("<3I", record, 96)
    bins = list(struct.unpack_from("<32I", record, 108))
    cusums = [struct.unpack_from("<qqII", record, 236 + 24 * i) for i in range(2)]
    chans = [struct.unpack_from("<IiiQ", record, 284 + 20 * i) for i in range(C)]
    chans = [(f, lo, hi, s - (1 << 64) if s >= 1 << 63 else s) for f, lo, hi, s in chans]
    sigs = [struct.unpack_from("<I", record, 284 + 20 * C + 4 * k)[0] for k in range(S)]

    nogo_max, go_min = (int(v) for v in lines[0].split()[2:4])
    want = dict(units=0, go=0, nogo=0, recheck=0, faults=0, other=0, below=0, above=0)
    w_bins = [0] * 32
    w_chans = [[0, 2**31 - 1, -(2**31), 0] for _ in range(C)]
    w_sigs = [0] * S
    state = [[0, 0, 0, 0], [0, 0, 0, 0]]

    def cusum(i, p, m, unit):
        mu, k, h = p
        st = state[i]
        st[0] = max(0, st[0] + (m - mu) - k)
        st[1] = max(0, st[1] + (mu - m) - k)
        if st[2] == 0 and st[0] > h:
            st[2] = unit
        if st[3] == 0 and st[1] > h:
            st[3] = unit

    for line in lines[1:]:
        f = line.split()
        want["units"] += 1
        unit = want["units"]
        if f[0] == "FAULT":
            want["faults"] += 1
            if f[1] == "channel" and int(f[2]) < C:
                w_chans[int(f[2])][0] += 1
            elif f[1] == "signal" and int(f[2]) < S:
                w_sigs[int(f[2])] += 1
            else:
                want["other"] += 1
            continue
        score, values = int(f[1]), [int(v) for v in f[2:]]
        if f[0] == "GO":
            want["go"] += 1
            cusum(0, go_plan, score - go_min, unit)
        elif f[0] == "NO-GO":
            want["nogo"] += 1
            cusum(1, nogo_plan, nogo_max - score, unit)
        else:
            want["recheck"] += 1
        b = (score - origin) >> shift if score >= origin else -1
        if b < 0:
            want["below"] += 1
        elif b >= 32:
            want["above"] += 1
        else:
            w_bins[b] += 1
        for i, v in enumerate(values[:C]):
            c = w_chans[i]
            c[1], c[2], c[3] = min(c[1], v), max(c[2], v), c[3] + v

    got = dict(units=units, go=go, nogo=nogo, recheck=recheck, faults=faults, other=other,
               below=below, above=above)
    for k in want:
        check(k, got[k], want[k])
    check("saturated", saturated, 0)
    check("bins", bins, w_bins)
    check("cusum GO", list(cusums[0]), state[0])
    check("cusum NO-GO", list(cusums[1]), state[1])
    check("channels", [list(c) for c in chans], w_chans)
    check("signals", sigs, w_sigs)
    for b in bad:
        print(b)
    print(f"field record: {units} units, blob {blob_id:08x}, {len(bad)} mismatches")
    sys.exit(1 if bad else 0)


main()
