"""The Spark path gives what the single-machine command gives.

2,000,000 generated rows (scripts/bench-python/generate.py: messy names of
real 2017 counties, invented figures) in 8 partitions, Spark in local mode
on 2 cores: distinct names matched through the package and broadcast back
(`regionkey.spark.match_names`), then allocated through the shipped
2017->2023 county crosswalk by the SQL of `apply --emit-sql spark`
(`regionkey.spark.allocate`). The reference is the command: `regionkey
match` and `regionkey apply` on the same rows."""

import csv
import importlib.util
import math
import shutil

import pytest

from conftest import ROOT, run

pyspark = pytest.importorskip("pyspark")
if shutil.which("java") is None:
    pytest.skip("Spark needs a Java runtime (java not found)", allow_module_level=True)

import regionkey.spark  # noqa: E402

ROWS = 2_000_000
SHIPPED = ROOT / "crosswalks" / "us-counties-2017-2023.csv"


def generator():
    spec = importlib.util.spec_from_file_location(
        "generate", ROOT / "scripts" / "bench-python" / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def spark():
    from pyspark.sql import SparkSession

    session = (SparkSession.builder.master("local[2]").appName("regionkey-tests")
               .config("spark.sql.shuffle.partitions", "8")
               .config("spark.ui.enabled", "false")
               .config("spark.ui.showConsoleProgress", "false")
               .config("spark.driver.memory", "2g")
               .getOrCreate())
    session.sparkContext.setLogLevel("ERROR")
    yield session
    session.stop()


def test_two_million_rows_in_eight_partitions_give_the_commands_results(spark, tmp_path):
    source = tmp_path / "records.csv"
    generator().write(str(source), ROWS)

    # The single-machine command.
    matched_csv, out_csv = tmp_path / "matched.csv", tmp_path / "out.csv"
    run("match", source, "--name-column", "county", "--state-column", "state",
        "--vintage", "2017", "--output", matched_csv, "--quiet")
    run("apply", matched_csv, "--crosswalk", SHIPPED, "--code-column", "code",
        "--period-column", "year", "--sum", "a", "--ratio", "ab=a/b",
        "--decimals", "12", "--output", out_csv, "--quiet")

    # Spark: the rows in 8 partitions, names matched once per distinct key.
    df = spark.read.csv(str(source), header=True).repartition(8)
    assert df.rdd.getNumPartitions() == 8
    matched, review = regionkey.spark.match_names(
        df, name_column="county", state_column="state", vintage=2017)

    # Every row has the code the command gave it.
    command = spark.read.csv(str(matched_csv), header=True).select("id", "code", "match_status")
    pairs = matched.select("id", "code", "match_status").alias("s").join(
        command.alias("c"), on="id", how="full_outer")
    assert pairs.count() == ROWS
    from pyspark.sql import functions as F
    # Spark reads the command's empty fields as nulls.
    def text(c):
        return F.coalesce(F.col(c), F.lit(""))
    differ = pairs.filter((text("s.code") != text("c.code"))
                          | (text("s.match_status") != text("c.match_status")))
    assert differ.count() == 0
    assert len(review) > 0  # ambiguous names such as "BALTIMORE" wait for a decision

    crosswalk = spark.read.csv(str(SHIPPED), header=True)
    result = regionkey.spark.allocate(
        matched, crosswalk, code_column="code", period_column="year",
        sum=["a"], ratio={"ab": "a/b"})
    got = {(r["code"], r["year"]): r for r in result.collect()}

    with open(out_csv, newline="") as f:
        expected = list(csv.DictReader(f))
    assert len(got) == len(expected)
    figures = 0
    for want in expected:
        row = got[(want["code"], want["year"])]
        for column in ("a", "a_coverage", "ab", "ab_coverage"):
            text, value = want[column], row[column]
            if text == "":
                assert value is None, (want["code"], column)
                continue
            if column.endswith("_coverage"):
                assert abs(value - float(text)) <= 5e-7 + 1e-12
            else:
                assert math.isclose(value, float(text), rel_tol=1e-9), (want["code"], column)
                figures += 1
    assert figures > 10_000
