#!/usr/bin/env python3
"""Times the Spark path in local mode against the command, in the same run.

    python spark.py ROWS BIN [CORES]

Generates ROWS rows (generate.py beside this script), then times
- the command: `regionkey match` (vintage 2017) then `regionkey apply`
  through the shipped 2017->2023 county crosswalk (release binary BIN);
- Spark in local mode on CORES cores (default 2): read the CSV in 8
  partitions, match the distinct names through the package and broadcast
  them back, allocate with the SQL of `apply --emit-sql spark`, write the
  result as CSV.
and checks that both give the same figures (1e-9 relative).
"""
import csv
import importlib.util
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import regionkey.spark

ROOT = Path(__file__).resolve().parents[2]
SHIPPED = ROOT / "crosswalks" / "us-counties-2017-2023.csv"


def main():
    rows, binary = int(sys.argv[1]), sys.argv[2]
    cores = int(sys.argv[3]) if len(sys.argv) > 3 else 2
    work = Path(os.environ.get("WORK") or tempfile.mkdtemp(prefix="regionkey-bench-spark-"))
    work.mkdir(parents=True, exist_ok=True)
    source = work / f"records-{rows}.csv"
    if not source.exists():
        spec = importlib.util.spec_from_file_location("generate", Path(__file__).with_name("generate.py"))
        gen = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(gen)
        gen.write(str(source), rows)

    t = time.perf_counter()
    subprocess.run([binary, "match", source, "--name-column", "county", "--state-column", "state",
                    "--vintage", "2017", "--output", work / "matched.csv", "--quiet"], check=True)
    t_match = time.perf_counter() - t
    subprocess.run([binary, "apply", work / "matched.csv", "--crosswalk", SHIPPED,
                    "--code-column", "code", "--period-column", "year", "--sum", "a",
                    "--ratio", "ab=a/b", "--output", work / "command.csv", "--quiet"], check=True)
    t_command = time.perf_counter() - t

    from pyspark.sql import SparkSession

    t = time.perf_counter()
    spark = (SparkSession.builder.master(f"local[{cores}]").appName("regionkey-bench")
             .config("spark.sql.shuffle.partitions", "8")
             .config("spark.ui.enabled", "false")
             .config("spark.ui.showConsoleProgress", "false")
             .config("spark.driver.memory", "6g").getOrCreate())
    spark.sparkContext.setLogLevel("ERROR")
    t_start = time.perf_counter() - t

    t = time.perf_counter()
    df = spark.read.csv(str(source), header=True).repartition(8)
    matched, _ = regionkey.spark.match_names(df, name_column="county", state_column="state", vintage=2017)
    crosswalk = spark.read.csv(str(SHIPPED), header=True)
    result = regionkey.spark.allocate(matched, crosswalk, code_column="code", period_column="year",
                                      sum=["a"], ratio={"ab": "a/b"})
    result.coalesce(1).write.mode("overwrite").csv(str(work / "spark-out"), header=True)
    t_spark = time.perf_counter() - t

    got = {(r["code"], r["year"]): r for r in result.collect()}
    spark.stop()
    with open(work / "command.csv", newline="") as f:
        expected = list(csv.DictReader(f))
    assert len(got) == len(expected), (len(got), len(expected))
    for want in expected:
        row = got[(want["code"], want["year"])]
        for c in ("a", "ab"):
            if want[c] == "":
                assert row[c] is None
            else:
                assert math.isclose(row[c], float(want[c]), rel_tol=1e-9), (want, row)
    print(f"rows: {rows}; results: {len(expected)} (code, year) rows, the same in both")
    print(f"command, match + apply:        {t_command:7.1f} s (match {t_match:.1f} s)")
    print(f"Spark local[{cores}], 8 partitions: {t_spark:7.1f} s (+ {t_start:.1f} s to start the session)")


if __name__ == "__main__":
    main()
