#!/usr/bin/env python3
"""Generated tables of records keyed by messy county names, for the Python
package's and Spark's benchmarks and tests.

Each row: id, county (a 2017 county written one of several ways: "Autauga
County", "Autauga Co.", "AUTAUGA", "autauga county"; about 1 row in 200 a
placeholder such as "Statewide" or an empty name), state (the state's FIPS
code without its leading zero, as spreadsheets keep it), year (2015-2019),
a and b (counts; about 1 value in 100 empty). The place names come from the
package's built-in 2017 counties; the figures are invented (fixed seed, so
the same rows every run).

Usage: generate.py OUT.csv ROWS [SEED]
"""
import sys

import numpy as np
import pandas as pd


def make(rows: int, seed: int = 2023) -> pd.DataFrame:
    import regionkey

    counties = regionkey.counties(2017)
    counties = counties[counties["description"] != ""]
    names = counties["name"].to_numpy(dtype=object)
    full = counties["full_name"].to_numpy(dtype=object)
    states = counties["parent"].astype(int).astype(str).to_numpy(dtype=object)
    forms = np.stack(
        [
            full,
            np.array([f"{n} Co." if f.endswith(" County") else f for n, f in zip(names, full)], dtype=object),
            np.array([n.upper() for n in names], dtype=object),
            np.array([f.lower() for f in full], dtype=object),
        ]
    )
    rng = np.random.default_rng(seed)
    unit = rng.integers(0, len(names), rows)
    form = rng.integers(0, forms.shape[0], rows)
    county = forms[form, unit]
    placeholder = rng.random(rows) < 0.005
    county[placeholder] = np.where(rng.random(placeholder.sum()) < 0.5, "Statewide", "")
    a = rng.poisson(200, rows).astype(float)
    b = a + rng.poisson(800, rows)
    a[rng.random(rows) < 0.01] = np.nan
    b[rng.random(rows) < 0.01] = np.nan
    return pd.DataFrame(
        {
            "id": np.arange(rows),
            "county": county,
            "state": states[unit],
            "year": rng.integers(2015, 2020, rows),
            "a": pd.array(a, dtype="Int64"),
            "b": pd.array(b, dtype="Int64"),
        }
    )


def write(path: str, rows: int, seed: int = 2023) -> None:
    make(rows, seed).to_csv(path, index=False)


if __name__ == "__main__":
    write(sys.argv[1], int(sys.argv[2]), int(sys.argv[3]) if len(sys.argv) > 3 else 2023)
