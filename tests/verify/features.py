"""Outside check of shared-model's signal features (shared_model::features), written from
the module's documentation with Python's exact integers, math.isqrt and numpy, sharing no
code with Linegate.

    python3 features.py CASES.jsonl

Each line: a signal (raw_min, raw_max, offset, window), one window of raw samples, the band's
bin k and coefficient, and Linegate's result for every feature. Checks:
- mean, RMS, min, max, peak-to-peak, absolute peak, standard deviation, zero crossings:
  exactly equal to Python's integers (math.isqrt for the square roots) and numpy's
  diff/count_nonzero for the crossings;
- the coefficient: round(2 cos(2 pi k / N) * 2**29);
- the band magnitude: exactly the documented integer steps (Python ints, floor shifts);
  Goertzel's recurrence as published (Goertzel 1958; Oppenheim & Schafer, Discrete-Time
  Signal Processing, the Goertzel algorithm section), in floats, against numpy's FFT bin;
  and Linegate's integer magnitude against numpy's |FFT[k]| within the bound the module
  derives (coefficient rounding + recurrence rounding + final product + floor).
Exit 0 all agree, 1 a mismatch (printed), 3 numpy missing.
"""
import json
import math
import sys

try:
    import numpy as np
except ImportError as e:
    print(f"missing: {e}", file=sys.stderr)
    sys.exit(3)


def goertzel_fixed(c, coeff):
    """The documented integer steps, in Python's unbounded ints (>> floors)."""
    s1 = s2 = 0
    for x in c:
        t = (coeff * s1 + (1 << 28)) >> 29
        s1, s2 = x + t - s2, s1
    t = (coeff * s1 + (1 << 28)) >> 29
    p = s1 * s1 + s2 * s2 - t * s2
    return math.isqrt(max(p, 0)), s2


def goertzel_float(c, w):
    """Goertzel's recurrence as published: v_n = x_n + 2cos(w) v_{n-1} - v_{n-2};
    |X(w)|^2 = v_{N-1}^2 + v_{N-2}^2 - 2cos(w) v_{N-1} v_{N-2}."""
    v1 = v2 = 0.0
    k = 2.0 * math.cos(w)
    for x in c:
        v1, v2 = x + k * v1 - v2, v1
    return math.sqrt(max(v1 * v1 + v2 * v2 - k * v1 * v2, 0.0))


def check(case):
    errs = []
    n = case["window"]
    s = case["samples"]
    c = [x - case["offset"] for x in s]
    got = case["results"]
    sq = sum(x * x for x in c)
    total = sum(c)
    d = np.array([n * x - total for x in c], dtype=np.int64)
    want = {
        "Mean": total,
        "Rms": math.isqrt(sq),
        "Min": min(c),
        "Max": max(c),
        "PeakToPeak": max(s) - min(s),
        "AbsPeak": max(abs(x) for x in c),
        "StdDev": math.isqrt(n * sq - total * total),
        "ZeroCrossings": int(np.count_nonzero(np.diff((d >= 0).astype(np.int8)))),
    }
    for name, w in want.items():
        if got[name] != w:
            errs.append(f"{name}: linegate {got[name]}, reference {w}")
    k = case["k"]
    wk = 2.0 * math.pi * k / n
    coeff = round(2.0 * math.cos(wk) * 2**29)
    if coeff != case["coeff"]:
        errs.append(f"coefficient for bin {k} of {n}: linegate {case['coeff']}, reference {coeff}")
    coeff = case["coeff"]
    fixed, s2 = goertzel_fixed(c, coeff)
    if got["Band"] != fixed:
        errs.append(f"Band: linegate {got['Band']}, documented steps {fixed}")
    fft = abs(np.fft.fft(np.array(c, dtype=np.float64))[k])
    # The published recurrence in floats agrees with the FFT to float rounding.
    flt = goertzel_float(c, wk)
    scale = float(sum(abs(x) for x in c)) + 1.0
    if abs(flt - fft) > 1e-9 * n * n * scale + 1e-6:
        errs.append(f"float Goertzel {flt} against FFT {fft}")
    # The derived bound on |integer magnitude - |X_k||.
    w1 = math.acos(coeff / 2**30)
    slope = sum(i * abs(x) for i, x in enumerate(c))
    e_coef = abs(w1 - wk) * slope
    sin_w = abs(math.sin(w1))
    u = [min(m + 1, 1.0 / sin_w) if sin_w > 0 else m + 1 for m in range(n)]
    e_round = 0.5 * (sum(u) + sum(u[: n - 1]))
    bound = e_coef + e_round + math.sqrt(abs(s2) / 2) + 1 + 1e-9 * fft + 1e-6
    if abs(got["Band"] - fft) > bound:
        errs.append(f"Band {got['Band']} is {abs(got['Band'] - fft):.3f} from |FFT[{k}]| = {fft:.3f}, bound {bound:.3f}")
    return errs, abs(got["Band"] - fft), bound


def main():
    cases = bad = 0
    worst = 0.0
    for line in open(sys.argv[1]):
        case = json.loads(line)
        cases += 1
        errs, off, bound = check(case)
        worst = max(worst, off / bound)
        if errs:
            bad += 1
            if bad <= 10:
                print(f"case {cases} (window {case['window']}, bin {case['k']}): " + "; ".join(errs))
    print(f"{cases} windows, {bad} disagreeing; band magnitude at most {worst:.3f} of its bound from the FFT")
    sys.exit(1 if bad else 0)


if __name__ == "__main__":
    main()
