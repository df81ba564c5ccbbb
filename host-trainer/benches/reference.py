"""Reference timings for the Linegate pipeline benchmark: the same job with pandas + scikit-learn.

Reads the generated log, scales every channel from its [0, 1000] range to [-1, 1] (as the
channel sheet does), fits Perceptron (50-epoch cap) and LinearSVC, and prints timings and the
LinearSVC geometric margin (min over units of y·(w·x + b)/‖w‖; negative if it misclassifies).
"""
import sys
import time

import numpy as np
import pandas as pd
from sklearn.linear_model import Perceptron
from sklearn.svm import LinearSVC

path = sys.argv[1]
t = time.perf_counter()
df = pd.read_csv(path)
load = time.perf_counter() - t
cols = [c for c in df.columns if c.startswith("ch")]
X = df[cols].to_numpy(dtype=np.float64) / 500.0 - 1.0
y = np.where(df["label"].to_numpy() == "GO", 1, -1)
t = time.perf_counter()
Perceptron(max_iter=50, random_state=1).fit(X, y)
pfit = time.perf_counter() - t
t = time.perf_counter()
svm = LinearSVC(C=1000.0, loss="hinge", dual=True, max_iter=1000, random_state=1).fit(X, y)
sfit = time.perf_counter() - t
w, b = svm.coef_.ravel(), svm.intercept_[0]
margin = float(np.min(y * (X @ w + b)) / np.linalg.norm(w))
print(f"load_s={load}\nperceptron_s={pfit}\nsvm_s={sfit}\nsvm_margin={margin}")
