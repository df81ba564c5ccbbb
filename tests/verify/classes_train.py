"""Outside check of Linegate's training of models of several classes (`train --class`),
against cvxpy and scikit-learn, sharing no code with Linegate.

    python3 classes_train.py LINEGATE_BINARY TMPDIR

Sources:
  - cvxpy (a general convex solver, here with its default conic solver), on the objective
    Linegate's joint rule states it solves, over standard scores z (mean and population
    std of the training units' device-scaled inputs) with a constant 1 appended and
    penalised:
        min 1/2 sum_k (|w_k|^2 + b_k^2)
            + C sum_i max(0, max_{k != y_i} (1 + w_k.z_i + b_k - w_{y_i}.z_i - b_{y_i}));
  - sklearn.svm.LinearSVC(multi_class='ovr') and LinearSVC(multi_class='crammer_singer')
    at their default C = 1 (liblinear; R.-E. Fan et al., JMLR 2008), each on the raw
    readings and piped through sklearn.preprocessing.StandardScaler;
  - sklearn.model_selection.train_test_split(..., test_size=0.3, stratify=y,
    random_state=s) for s = 0..4;
  - the data sets bundled with scikit-learn (no downloads): wine (load_wine) and Fisher's
    iris (load_iris), three classes each, named GO, SHORT, CRACK (classes 0, 1, 2).

Checks:
  1. objective: `train --class-rule joint --c C --folds 0 --no-operating-point` on the
     whole set and on four seeded random subsets of each (C = 1, and 0.1 on the
     subsets): the objective recomputed here from the written rows (times the recorded
     scale, back to standard scores) equals the recorded one (1e-9 relative); it is within
     1e-6 relative of cvxpy's optimum, and not below it by more than cvxpy's tolerance;
  2. accuracy: on each 70/30 split, `train --no-operating-point` by both rules, with the
     default --c auto (5 folds) and with --c 1; the float rule (argmax of the rows on the
     device-scaled inputs of the held-out 30 %) against the four LinearSVC variants. Per
     seed every accuracy is printed; asserted: the mean of Linegate's joint rule at C = 1
     is at least the mean of LinearSVC(crammer_singer) at its default, on raw readings and
     through StandardScaler. The other pairs are printed, not asserted.
Exit 0 all agree, 1 a disagreement (listed), 3 numpy, scikit-learn or cvxpy missing.
"""
import json
import os
import subprocess
import sys
import warnings

try:
    import numpy as np
    from sklearn.datasets import load_iris, load_wine
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.model_selection import train_test_split
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.svm import LinearSVC
except ImportError as e:
    print(f"SKIPPED: {e} (pip install numpy scikit-learn)")
    sys.exit(3)
try:
    import cvxpy as cp
except ImportError as e:
    print(f"SKIPPED: {e} (pip install cvxpy)")
    sys.exit(3)

NAMES = ["GO", "SHORT", "CRACK"]
CLASS_FLAGS = ["--class", "GO=go", "--class", "SHORT=short", "--class", "CRACK=crack"]
OBJ_TOL = 1e-6


def datasets():
    wine, iris = load_wine(), load_iris()
    return [("wine", wine.data, wine.target), ("iris", iris.data, iris.target)]


def write_log(path, v, y):
    with open(path, "w", newline="") as f:
        f.write("unit,label," + ",".join(f"c{k:02d}" for k in range(v.shape[1])) + "\n")
        for i, (row, t) in enumerate(zip(v, y)):
            f.write(f"u{i:04d},{NAMES[t].lower()}," + ",".join(repr(float(a)) for a in row) + "\n")


def linegate(binary, args):
    p = subprocess.run([binary, *args], capture_output=True, text=True)
    if p.returncode != 0:
        raise RuntimeError(f"linegate {' '.join(args)} exited {p.returncode}:\n{p.stdout}{p.stderr}")
    return p.stdout


def round_half_away(t):
    r = np.trunc(t)
    return r + np.sign(t) * (np.abs(t - r) >= 0.5)


def device_x(model, v):
    ch = model["channels"]
    lsb = np.array([c["lsb"] for c in ch])
    zero = np.array([c["zero"] for c in ch])
    off = np.array([c["offset"] for c in ch], dtype=float)
    half = np.array([c["half"] for c in ch], dtype=float)
    return (round_half_away((v - zero) / lsb) - off) / half


def rows_of(model):
    r = model["classes"]["rows"]
    return np.array([a["weights"] for a in r]), np.array([a["bias"] for a in r])


def objective(W, b, z, y, c):
    s = z @ W.T + b
    own = s[np.arange(len(y)), y]
    other = s + 1.0
    other[np.arange(len(y)), y] = -np.inf
    loss = np.maximum(0.0, other.max(axis=1) - own)
    return 0.5 * (np.sum(W * W) + np.sum(b * b)) + c * loss.sum()


def cvxpy_optimum(z, y, k, c):
    n, d = z.shape
    W = cp.Variable((k, d))
    b = cp.Variable(k)
    s = z @ W.T + np.ones((n, 1)) @ cp.reshape(b, (1, k), order="C")
    Y = np.zeros((n, k))
    Y[np.arange(n), y] = 1.0
    own = cp.sum(cp.multiply(s, Y), axis=1)
    # max over k != y of 1 + s_k - own, and 0: the k = y term is exactly 0 (1 - 1 + own - own).
    margin = s + (1.0 - Y) - cp.reshape(own, (n, 1), order="C") @ np.ones((1, k))
    loss = cp.max(margin, axis=1)
    prob = cp.Problem(cp.Minimize(0.5 * (cp.sum_squares(W) + cp.sum_squares(b)) + c * cp.sum(loss)))
    prob.solve(solver=cp.CLARABEL, tol_gap_abs=1e-10, tol_gap_rel=1e-10, tol_feas=1e-10)
    return prob.value


class Report:
    def __init__(self):
        self.checks = 0
        self.errs = []

    def check(self, ok, what):
        self.checks += 1
        if not ok:
            self.errs.append(what)
            print(f"DISAGREE: {what}")


def objective_checks(binary, tmp, rep, name, v, y, worst):
    rng = np.random.default_rng(7)
    cases = [("all", np.arange(len(y)), 1.0)]
    for s in range(4):
        keep = np.sort(rng.choice(len(y), size=int(0.6 * len(y)), replace=False))
        cases.append((f"subset{s}", keep, 0.1 if s % 2 else 1.0))
    for label, keep, c in cases:
        log = os.path.join(tmp, f"{name}-{label}.csv")
        out = os.path.join(tmp, f"{name}-{label}.json")
        write_log(log, v[keep], y[keep])
        linegate(binary, ["train", log, *CLASS_FLAGS, "--class-rule", "joint", "--c", repr(c),
                          "--folds", "0", "--no-operating-point", "-o", out, "--force", "-q"])
        m = json.load(open(out))
        j = m["summary"]["classes"]["joint"]
        x = device_x(m, v[keep])
        mean, std = np.array(j["spread"]["mean"]), np.array(j["spread"]["std"])
        z = (x - mean) / std
        W, b = rows_of(m)
        W, b = W * j["scale"], b * j["scale"]
        Wz, bz = W * std, b + W @ mean
        ours = objective(Wz, bz, z, y[keep], c)
        ref = cvxpy_optimum(z, y[keep], 3, c)
        rel_own = abs(ours - j["objective"]) / max(1.0, abs(j["objective"]))
        rel = (ours - ref) / max(1.0, abs(ref))
        worst[0] = max(worst[0], abs(rel))
        print(f"objective {name} {label} C={c}: linegate {ours:.10g} (recorded {j['objective']:.10g}), "
              f"cvxpy {ref:.10g}, relative {rel:+.2e}")
        rep.check(rel_own <= 1e-9, f"{name} {label}: recorded objective {j['objective']} vs rows' {ours}")
        rep.check(abs(rel) <= OBJ_TOL, f"{name} {label}: objective {ours} vs cvxpy {ref} ({rel:+.2e})")
        rep.check(rel >= -1e-8, f"{name} {label}: below cvxpy's optimum ({rel:+.2e})")


def accuracy_checks(binary, tmp, rep, name, v, y):
    refs = {
        "LinearSVC ovr (raw)": lambda: LinearSVC(multi_class="ovr", random_state=0),
        "LinearSVC crammer_singer (raw)": lambda: LinearSVC(multi_class="crammer_singer", random_state=0),
        "LinearSVC ovr (StandardScaler)": lambda: make_pipeline(StandardScaler(), LinearSVC(multi_class="ovr", random_state=0)),
        "LinearSVC crammer_singer (StandardScaler)": lambda: make_pipeline(
            StandardScaler(), LinearSVC(multi_class="crammer_singer", random_state=0)),
    }
    runs = [("one-vs-rest", [], "linegate one-vs-rest (C auto)"),
            ("joint", [], "linegate joint (C auto)"),
            ("one-vs-rest", ["--c", "1"], "linegate one-vs-rest (C 1)"),
            ("joint", ["--c", "1"], "linegate joint (C 1)")]
    ours = [r[2] for r in runs]
    acc = {k: [] for k in ours + list(refs)}
    for s in range(5):
        itr, ite = train_test_split(np.arange(len(y)), test_size=0.3, stratify=y, random_state=s)
        itr, ite = np.sort(itr), np.sort(ite)
        log = os.path.join(tmp, f"{name}-split{s}.csv")
        write_log(log, v[itr], y[itr])
        for rule, extra, key in runs:
            out = os.path.join(tmp, f"{name}-split{s}-{rule}.json")
            linegate(binary, ["train", log, *CLASS_FLAGS, "--class-rule", rule, "--seed", "1",
                              "--no-operating-point", "-o", out, "--force", "-q", *extra])
            m = json.load(open(out))
            W, b = rows_of(m)
            pred = np.argmax(device_x(m, v[ite]) @ W.T + b, axis=1)
            acc[key].append(float(np.mean(pred == y[ite])))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            for key, make in refs.items():
                acc[key].append(float(make().fit(v[itr], y[itr]).score(v[ite], y[ite])))
        print(f"{name} seed {s}: " + "; ".join(f"{k} {acc[k][-1]:.4f}" for k in acc))
    means = {k: float(np.mean(a)) for k, a in acc.items()}
    print(f"{name} mean over seeds 0-4: " + "; ".join(f"{k} {means[k]:.4f}" for k in means))
    # Asserted: the joint rule at LinearSVC's default C against LinearSVC's joint rule
    # (crammer_singer) at its default, on raw readings and on standard scores. Printed
    # only: every other pair (one-vs-rest solves the hinge with a free bias on standard
    # scores, LinearSVC's ovr the squared hinge with a penalised bias).
    for r in ["LinearSVC crammer_singer (raw)", "LinearSVC crammer_singer (StandardScaler)"]:
        o = "linegate joint (C 1)"
        rep.check(means[o] >= means[r] - 0.0, f"{name}: {o} mean {means[o]:.4f} below {r} {means[r]:.4f}")
    return means


def main(binary, tmp):
    rep = Report()
    worst = [0.0]
    for name, v, y in datasets():
        objective_checks(binary, tmp, rep, name, v, y, worst)
    for name, v, y in datasets():
        accuracy_checks(binary, tmp, rep, name, v, y)
    print(f"objective: largest |linegate - cvxpy| / max(1, cvxpy) {worst[0]:.3g}")
    print(f"{rep.checks} checks, {len(rep.errs)} disagreeing")
    return 0 if not rep.errs else 1


if __name__ == "__main__":
    if len(sys.argv) != 3:
        print(__doc__)
        sys.exit(2)
    sys.exit(main(sys.argv[1], sys.argv[2]))
