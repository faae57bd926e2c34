"""Reference class breaks and counts from numpy, for src/core/classify.rs.

Writes fixtures/classify/numpy-breaks.csv. Run from the repository root:

    python3 scripts/classify/numpy_breaks.py

numpy 2.4.6 (pip). Quantile breaks: np.quantile(x, [i/k for i in 1..k-1])
(default method "linear"); equal intervals: min + (max - min) * i / k.
Counts: np.bincount(np.digitize(x, breaks, right=True)), i.e. classes closed
on the right. Data: the `rate` column of vega-datasets' unemployment table
(fixtures/apply/unemployment.tsv) and the squares 1..50 (a skewed series
made here).
"""
import csv

import numpy as np

unemployment = []
with open("fixtures/apply/unemployment.tsv") as f:
    for row in csv.DictReader(f, delimiter="\t"):
        unemployment.append(float(row["rate"]))
datasets = {
    "unemployment": np.array(unemployment),
    "squares": np.array([float(i * i) for i in range(1, 51)]),
}

with open("fixtures/classify/numpy-breaks.csv", "w", newline="") as out:
    w = csv.writer(out, lineterminator="\n")
    w.writerow(["dataset", "method", "k", "breaks", "counts"])
    for name, x in datasets.items():
        for method, ks in (("quantiles", (3, 4, 5, 7)), ("equal", (4, 5))):
            for k in ks:
                if method == "quantiles":
                    breaks = np.quantile(x, [i / k for i in range(1, k)])
                else:
                    lo, hi = x.min(), x.max()
                    breaks = np.array([lo + (hi - lo) * i / k for i in range(1, k)])
                breaks = np.unique(breaks)
                counts = np.bincount(np.digitize(x, breaks, right=True), minlength=len(breaks) + 1)
                w.writerow([
                    name, method, k,
                    ";".join(repr(float(b)) for b in breaks),
                    ";".join(str(int(c)) for c in counts),
                ])
print("numpy", np.__version__)
