#!/usr/bin/env python3
"""Outside check of Linegate's exact binomial bounds.

Reads JSON lines {k, n, confidence, low, high, upper, needed_rate, needed} written by the
Rust test and recomputes every figure with general-purpose libraries, sharing no code with
Linegate:
  - the two-sided Clopper-Pearson interval with statsmodels'
    proportion_confint(k, n, alpha, method="beta") and with scipy.stats.beta.ppf
    (low = beta.ppf(alpha/2, k, n-k+1), high = beta.ppf(1-alpha/2, k+1, n-k));
  - the one-sided upper bound with scipy.stats.beta.ppf(confidence, k+1, n-k), and with
    its defining property, scipy.stats.binom.cdf(k, n, upper) = 1 - confidence;
  - the fewest units a zero-failure log needs for an upper bound <= rate, from the closed
    form 1 - (1-c)^(1/n) <= rate evaluated with numpy's log1p/expm1.
Exit 0 all agree, 1 a disagreement (listed), 3 scipy or statsmodels missing.
"""
import json
import sys

try:
    import numpy as np
    from scipy.stats import beta, binom
    from statsmodels.stats.proportion import proportion_confint
except ImportError as e:  # pragma: no cover
    print(f"reference libraries missing: {e}")
    sys.exit(3)

REL = 1e-9  # relative agreement demanded of every bound
ABS = 1e-15  # below this the bounds are 0 for any purpose


def close(a, b):
    return abs(a - b) <= max(ABS, REL * max(abs(a), abs(b)))


def main(path):
    errs, cases = [], 0
    with open(path) as f:
        for line in f:
            c = json.loads(line)
            k, n, conf = c["k"], c["n"], c["confidence"]
            alpha = 1.0 - conf
            cases += 1
            sm_low, sm_high = proportion_confint(k, n, alpha=alpha, method="beta")
            sp_low = 0.0 if k == 0 else beta.ppf(alpha / 2, k, n - k + 1)
            sp_high = 1.0 if k == n else beta.ppf(1 - alpha / 2, k + 1, n - k)
            sp_up = 1.0 if k == n else beta.ppf(conf, k + 1, n - k)
            for name, ours, refs in [
                ("low", c["low"], [sm_low, sp_low]),
                ("high", c["high"], [sm_high, sp_high]),
                ("upper", c["upper"], [sp_up]),
            ]:
                for r in refs:
                    if not close(ours, float(r)):
                        errs.append(f"k={k} n={n} c={conf}: {name} linegate {ours!r}, reference {float(r)!r}")
            if k < n and not abs(binom.cdf(k, n, c["upper"]) - alpha) <= 1e-9:
                errs.append(f"k={k} n={n}: P(X<={k} | upper) = {binom.cdf(k, n, c['upper'])}, not {alpha}")
            if c.get("needed") is not None:
                r, m = c["needed_rate"], c["needed"]
                up = lambda n: -np.expm1(np.log(alpha) / n)
                if not (up(m) <= r * (1 + 1e-12) and (m == 1 or up(m - 1) > r * (1 - 1e-12))):
                    errs.append(f"needed for {r} at {conf}: linegate {m}; bound at m {up(m)}, at m-1 {up(m - 1)}")
    for e in errs[:40]:
        print(e)
    print(f"{cases} cases, {len(errs)} disagreeing")
    sys.exit(1 if errs else 0)


if __name__ == "__main__":
    main(sys.argv[1])
