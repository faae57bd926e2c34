#!/usr/bin/env python3
"""Generate benchmark inputs for `regionkey apply`.

Writes into OUTDIR:
  data.csv       code,period,a,b,c: every 2017 county code (fixtures/reference/
                 atlas-2017-ids.csv, 3,231 codes) x PERIODS periods (default
                 3,095, so 3,231 x 3,095 = 10,000,000 rows); three count
                 columns of pseudo-random integers (fixed seed, so the same
                 bytes every run); about 1 in 1,000 values left empty.
  crosswalk.csv  a stand-in for the shipped 2017 -> 2023 county crosswalk:
                 identity rows for every code, except every 40th code, which is
                 split 0.7 / 0.3 between itself and the next code (target shares
                 made up, not from geometry).

Usage: generate.py OUTDIR [PERIODS]
"""
import csv
import os
import random
import sys

here = os.path.dirname(os.path.abspath(__file__))
root = os.path.dirname(os.path.dirname(here))
outdir = sys.argv[1]
periods = int(sys.argv[2]) if len(sys.argv) > 2 else 3095
os.makedirs(outdir, exist_ok=True)
with open(os.path.join(root, "fixtures/reference/atlas-2017-ids.csv"), newline="") as f:
    codes = sorted(r["id"] for r in csv.DictReader(f))

with open(os.path.join(outdir, "crosswalk.csv"), "w") as f:
    f.write("from_code,to_code,weight,target_share,basis\n")
    for i, c in enumerate(codes):
        if i % 40 == 0 and i + 1 < len(codes):
            f.write(f"{c},{c},0.700000000000,0.900000000000,area\n")
            f.write(f"{c},{codes[i + 1]},0.300000000000,0.100000000000,area\n")
        else:
            f.write(f"{c},{c},1.000000000000,{'0.900000000000' if i % 40 == 1 else '1.000000000000'},area\n")

rng = random.Random(2023)
with open(os.path.join(outdir, "data.csv"), "w") as f:
    f.write("code,period,a,b,c\n")
    lines = []
    for p in range(periods):
        period = 100000 + p
        for c in codes:
            a = rng.randrange(100000)
            b = "" if rng.random() < 0.001 else rng.randrange(1000)
            lines.append(f"{c},{period},{a},{b},{a % 977}\n")
        if len(lines) > 200000:
            f.writelines(lines)
            lines = []
    f.writelines(lines)
print(f"{len(codes)} codes x {periods} periods = {len(codes) * periods} rows in {outdir}")
