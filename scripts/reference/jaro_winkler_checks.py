#!/usr/bin/env python3
"""Writes fixtures/match/jaro-winkler-jellyfish.csv: Jaro-Winkler similarities
computed by jellyfish (an independent implementation), for the Rust test that
checks strsim::jaro_winkler against it.

Pairs: Winkler's worked examples (MARTHA/MARHTA, DWAYNE/DUANE,
DIXON/DICKSONX) and pairs of normalized county-name keys of the kind the
matcher compares (typos, near neighbours, unrelated names below the 0.7
boost threshold).

Run from the repository root: python3 scripts/reference/jaro_winkler_checks.py
Needs the Python package jellyfish (1.3.0 was used).
"""
import csv
import importlib.metadata
import jellyfish

PAIRS = [
    ("MARTHA", "MARHTA"),
    ("DWAYNE", "DUANE"),
    ("DIXON", "DICKSONX"),
    ("montgomry", "montgomery"),
    ("tuscalosa", "tuscaloosa"),
    ("losangles", "losangeles"),
    ("baltimor", "baltimore"),
    ("dallas", "dallam"),
    ("jeffersonparrish", "jeffersondavis"),
    ("jeffersonparrish", "jefferson"),
    ("boston", "bristol"),
    ("chicago", "champaign"),
    ("pensylvania", "pennsylvania"),
    ("pennsylvannia", "pennsylvania"),
    ("missisippi", "mississippi"),
    ("abc", "xyz"),
    ("a", "a"),
    ("", "cook"),
]

with open("fixtures/match/jaro-winkler-jellyfish.csv", "w", newline="") as f:
    w = csv.writer(f, lineterminator="\n")
    w.writerow(["a", "b", "jellyfish_jaro_winkler", "jellyfish_version"])
    version = importlib.metadata.version("jellyfish")
    for a, b in PAIRS:
        w.writerow([a, b, repr(jellyfish.jaro_winkler_similarity(a, b)), version])
