#!/usr/bin/env python3
"""Times `regionkey.match` on a table already in memory against the
command on the same rows (CSV in, CSV out), in the same run.

    python match.py INPUT.csv BIN [REPEATS]

INPUT.csv is the match benchmark's input (scripts/bench-match/generate.py;
columns county_name and state); BIN the release binary. The package must be
installed from a release wheel (scripts/bench-python/run.sh does both).
Prints the best of REPEATS (default 3) wall times for: the command; match on
a polars DataFrame; on a pandas DataFrame; and the whole Python round trip
(read the CSV with pyarrow, match, write the CSV). Checks that the Python
result written as CSV has the command's bytes.
"""
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd
import polars as pl
import pyarrow.csv as pacsv

import regionkey


def best(f, repeats):
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        out = f()
        times.append(time.perf_counter() - t)
    return min(times), out


def main():
    source, binary = sys.argv[1], sys.argv[2]
    repeats = int(sys.argv[3]) if len(sys.argv) > 3 else 3
    work = Path(tempfile.mkdtemp(prefix="regionkey-bench-python-"))
    out = work / "command.csv"

    def command():
        subprocess.run([binary, "match", source, "--name-column", "county_name",
                        "--state-column", "state", "--output", str(out), "--quiet"], check=True)

    t_command, _ = best(command, repeats)
    with open(source, encoding="utf-8") as f:
        header = f.readline().strip().split(",")
    frame_pl = pl.read_csv(source, infer_schema=False)
    frame_pd = pd.read_csv(source, dtype=str, keep_default_na=False)
    args = dict(name_column="county_name", state_column="state")
    t_polars, (m_pl, _) = best(lambda: regionkey.match(frame_pl, **args), repeats)
    t_pandas, (m_pd, _) = best(lambda: regionkey.match(frame_pd, **args), repeats)

    def round_trip():
        t = pacsv.read_csv(source, convert_options=pacsv.ConvertOptions(
            column_types={c: "string" for c in header}, strings_can_be_null=False))
        m, _ = regionkey.match(t, **args)
        pacsv.write_csv(m, work / "python.csv")

    t_trip, _ = best(round_trip, repeats)
    same = m_pd.to_csv(index=False, lineterminator="\n").encode() == out.read_bytes()
    rows = len(frame_pd)
    print(f"rows: {rows}")
    print(f"command (CSV in, CSV out):          {t_command:6.2f} s")
    print(f"regionkey.match, polars in memory:  {t_polars:6.2f} s  ({t_polars / t_command:.2f}x the command)")
    print(f"regionkey.match, pandas in memory:  {t_pandas:6.2f} s  ({t_pandas / t_command:.2f}x the command)")
    print(f"pyarrow read + match + write:       {t_trip:6.2f} s  ({t_trip / t_command:.2f}x the command)")
    print(f"pandas result written as CSV has the command's bytes: {same}")
    if not same:
        sys.exit(1)


if __name__ == "__main__":
    main()
