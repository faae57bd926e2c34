"""Compares a regionkey crosswalk (made with --min-share 0) with the
reference weights from reference_weights.py.

Every reference pair with weight >= THRESHOLD must be in the crosswalk with
a weight within TOL, and every crosswalk pair >= THRESHOLD in the reference.
Prints the largest difference and exits 1 when a pair is off.

Run:  python3 scripts/geometry/compare_weights.py CROSSWALK.csv REFERENCE.csv [THRESHOLD] [TOL]
"""
import csv
import sys


def load(path, skip_empty_to=True):
    out = {}
    with open(path, newline="", encoding="utf-8") as f:
        for row in csv.DictReader(r for r in f if not r.startswith("#")):
            if skip_empty_to and not row["to_code"]:
                continue
            out[(row["from_code"], row["to_code"])] = float(row["weight"])
    return out


def main():
    ours, ref = load(sys.argv[1]), load(sys.argv[2])
    threshold = float(sys.argv[3]) if len(sys.argv) > 3 else 1e-4
    tol = float(sys.argv[4]) if len(sys.argv) > 4 else 1e-6
    worst, worst_key, bad = 0.0, None, 0
    keys = {k for k, w in ref.items() if w >= threshold} | {k for k, w in ours.items() if w >= threshold}
    for k in sorted(keys):
        d = abs(ours.get(k, 0.0) - ref.get(k, 0.0))
        if d > worst:
            worst, worst_key = d, k
        if d > tol:
            bad += 1
            if bad <= 10:
                print(f"off: {k} ours {ours.get(k)} reference {ref.get(k)}")
    print(f"pairs compared (weight >= {threshold}): {len(keys)}; largest difference {worst:.3e} at {worst_key}; "
          f"over {tol}: {bad}")
    sys.exit(1 if bad else 0)


if __name__ == "__main__":
    main()
