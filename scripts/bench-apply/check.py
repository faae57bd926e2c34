#!/usr/bin/env python3
"""Checks that apply's output and the DuckDB peer's agree: the same rows
(target and period), each figure within 1e-9 relative, coverage within the
rounding of apply's output. Prints the number of figures compared.

Usage: check.py APPLY_OUTPUT PEER_OUTPUT CODE_COLUMN PERIOD_COLUMN
"""
import csv
import math
import sys

ours, peer, code, period = sys.argv[1:5]


def rows(path):
    with open(path, newline="") as f:
        return {(r[code], r[period]): r for r in csv.DictReader(f)}


a, b = rows(ours), rows(peer)
if set(a) != set(b):
    sys.exit(f"different rows: {len(a)} in apply's output, {len(b)} in the peer's")
figures = 0
for key, r in a.items():
    s = b[key]
    for column, text in r.items():
        if column in (code, period):
            continue
        other = s.get(column)
        if text == "" or other in ("", None):
            if (text == "") != (other in ("", None)):
                sys.exit(f"{key} {column}: {text!r} vs {other!r}")
            continue
        x, y = float(text), float(other)
        if not math.isclose(x, y, rel_tol=1e-9, abs_tol=5e-7 if column.endswith("_coverage") else 0):
            sys.exit(f"{key} {column}: {x} vs {y}")
        figures += 1
print(f"{figures} figures agree")
