"""Whole-process references for the commands benchmark: what a user would run instead of
Linegate, each as its own process, started and timed by `commands.rs` like `linegate`.

    python3 whole.py polars-load LOG          # polars reads the CSV (nothing else)
    python3 whole.py sklearn-perceptron LOG   # pandas reads, scales, Perceptron fits
    python3 whole.py liblinear LOG            # polars reads, scales, liblinear's SVM fits

Channels are scaled from their [0, 1000] range to [-1, 1], as the generated log's channel
sheet does for Linegate. The liblinear run is the hard-margin job: the L1-loss (hinge) SVM
with C = 1000 and a bias feature (`-s 3 -c 1000 -B 1`); it prints its geometric margin
(min over units of y·(w·x + b)/‖w‖, negative if it misclassifies) for comparison with
Linegate's certified one. Exit status 3 means a library is missing.
"""
import sys

mode, path = sys.argv[1], sys.argv[2]
try:
    import numpy as np

    if mode == "polars-load":
        import polars as pl

        df = pl.read_csv(path)
        print(f"rows={df.height}")
    elif mode == "sklearn-perceptron":
        import pandas as pd
        from sklearn.linear_model import Perceptron

        df = pd.read_csv(path)
        cols = [c for c in df.columns if c.startswith("ch")]
        X = df[cols].to_numpy(dtype=np.float64) / 500.0 - 1.0
        y = np.where(df["label"].to_numpy() == "GO", 1, -1)
        p = Perceptron(max_iter=1000, random_state=1).fit(X, y)
        print(f"epochs={p.n_iter_}")
    elif mode == "liblinear":
        import polars as pl
        from liblinear import liblinearutil as ll

        df = pl.read_csv(path)
        cols = [c for c in df.columns if c.startswith("ch")]
        X = df.select(cols).to_numpy().astype(np.float64) / 500.0 - 1.0
        y = np.where(df["label"].to_numpy() == "GO", 1.0, -1.0)
        prob = ll.problem(y, X)
        m = ll.train(prob, ll.parameter("-s 3 -c 1000 -B 1 -q"))
        n = X.shape[1]
        wb = np.array([m.w[k] for k in range(n + 1)])
        # liblinear's first label decides the sign of its w.
        sign = 1.0 if m.get_labels()[0] == 1 else -1.0
        w, b = sign * wb[:n], sign * wb[n]
        margin = float(np.min(y * (X @ w + b)) / np.linalg.norm(w))
        print(f"margin={margin}")
    else:
        sys.exit(f"unknown mode {mode}")
except ImportError as e:
    print(f"missing: {e}", file=sys.stderr)
    sys.exit(3)
