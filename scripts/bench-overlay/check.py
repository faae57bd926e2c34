"""Checks a regionkey crosswalk made with --min-share 0 against the
independent GEOS overlay (geos_overlay.py) of the same layers.

1. Every pair with weight >= THRESHOLD on either side must agree within TOL.
2. Every source that the GEOS overlay finds fully covered (nothing outside
   every target, to 1e-12) must have pieces summing to 1 within COVER_TOL in
   regionkey's crosswalk, i.e. its pieces add up to its own area.

Sources left out: 51620 (Franklin city, VA), whose ring loops over itself in
the 2017 layer; GEOS repairs it with the even-odd rule, regionkey with the
non-zero rule (see fixtures/geometry/README.md).

Prints one line: pairs compared, largest difference, pairs off; sources
fully covered, largest deviation of their sums. Exits 1 when a check fails.

Run:  python3 scripts/bench-overlay/check.py OURS.csv GEOS.csv [THRESHOLD TOL COVER_TOL]
"""
import csv
import sys
from collections import defaultdict

LEFT_OUT = {"51620"}


def load(path):
    pairs, rest = {}, defaultdict(float)
    with open(path, newline="", encoding="utf-8") as f:
        for row in csv.DictReader(f):
            if row["from_code"] in LEFT_OUT:
                continue
            w = float(row["weight"])
            if row["to_code"]:
                pairs[(row["from_code"], row["to_code"])] = w
            else:
                rest[row["from_code"]] += w
    return pairs, rest


def main():
    ours, our_rest = load(sys.argv[1])
    ref, ref_rest = load(sys.argv[2])
    threshold = float(sys.argv[3]) if len(sys.argv) > 3 else 1e-4
    tol = float(sys.argv[4]) if len(sys.argv) > 4 else 1e-6
    cover_tol = float(sys.argv[5]) if len(sys.argv) > 5 else 1e-9
    keys = {k for k, w in ref.items() if w >= threshold} | {k for k, w in ours.items() if w >= threshold}
    worst, worst_key, off = 0.0, None, 0
    for k in sorted(keys):
        d = abs(ours.get(k, 0.0) - ref.get(k, 0.0))
        if d > worst:
            worst, worst_key = d, k
        if d > tol:
            off += 1
            if off <= 5:
                print(f"  off: {k} ours {ours.get(k)} geos {ref.get(k)}", file=sys.stderr)
    sums = defaultdict(float)
    for (s, _), w in ours.items():
        sums[s] += w
    sources = {s for (s, _) in ref}
    covered = [s for s in sources if ref_rest.get(s, 0.0) <= 1e-12]
    dev, dev_src, bad = 0.0, None, 0
    for s in covered:
        d = abs(sums.get(s, 0.0) - 1.0)
        if d > dev:
            dev, dev_src = d, s
        if d > cover_tol:
            bad += 1
    print(f"weights>={threshold}: {len(keys)} pairs, max diff {worst:.1e} ({off} over {tol}); "
          f"fully covered: {len(covered)} sources, max |sum-1| {dev:.1e} ({bad} over {cover_tol})")
    sys.exit(1 if off or bad else 0)


if __name__ == "__main__":
    main()
