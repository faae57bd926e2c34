"""`regionkey apply --emit-sql` computes in DuckDB what `regionkey apply`
computes natively: the same rows, figures within 1e-9 relative, the same
coverage (the command writes coverage with 6 decimals, so it is compared
to that rounding).

Data: the demo's matched table (invented figures on real counties) through
the shipped 2017->2023 county crosswalk, and the apply benchmark's generated
table (scripts/bench-apply/generate.py) at a smaller number of periods."""

import csv
import math
import subprocess
import sys
from pathlib import Path

import duckdb
import pytest

from conftest import ROOT, run

SHIPPED = ROOT / "crosswalks" / "us-counties-2017-2023.csv"


def native(data, crosswalk, options, out: Path):
    run("apply", data, "--crosswalk", crosswalk, *options, "--decimals", "12",
        "--output", out, "--quiet")
    with open(out, newline="") as f:
        return list(csv.DictReader(f))


def in_duckdb(data, crosswalk, options, dialect, nulls, tmp: Path):
    query = tmp / f"query-{dialect}.sql"
    run("apply", data, "--crosswalk", crosswalk, *options, "--emit-sql", dialect,
        "--output", query, "--quiet")
    con = duckdb.connect()
    nullstr = ", ".join(f"'{n}'" for n in nulls)
    con.execute(f"CREATE TABLE data AS SELECT * FROM read_csv('{data}', all_varchar=true, nullstr=[{nullstr}])")
    con.execute(f"CREATE TABLE crosswalk AS SELECT * FROM read_csv('{crosswalk}', all_varchar=true, nullstr=[''])")
    cursor = con.execute(query.read_text())
    names = [d[0] for d in cursor.description]
    return [dict(zip(names, row)) for row in cursor.fetchall()]


def same(engine_rows, native_rows, keys):
    """Asserts the rows agree; returns the number of figures compared."""
    def key(r):
        return tuple(str(r[k]) for k in keys)

    assert len(engine_rows) == len(native_rows)
    by_key = {key(r): r for r in engine_rows}
    assert len(by_key) == len(engine_rows), "one row per target and period"
    figures = 0
    for n in native_rows:
        e = by_key[key(n)]
        assert set(e) == set(n), "the same columns"
        for column, text in n.items():
            if column in keys:
                continue
            value = e[column]
            if column.endswith("_weighting"):
                assert value == text
                continue
            if text == "":
                assert value is None, (key(n), column, value)
                continue
            assert value is not None, (key(n), column, text)
            x = float(text)
            if column.endswith("_coverage"):
                assert abs(value - x) <= 5e-7 + 1e-12, (key(n), column, value, x)
            else:
                assert math.isclose(value, x, rel_tol=1e-9, abs_tol=1e-9), (key(n), column, value, x)
            figures += 1
    return figures


def without_pooled_reports(demo, tmp: Path) -> Path:
    """The demo's matched table less its pooled report ("Bristol Bay + Lake
    and Peninsula", code `02060+02164`): the emitted query does not split
    pooled reports among their members (`apply` does), so both sides are fed
    the same single-unit rows."""
    out = tmp / "matched-single-units.csv"
    with open(demo / "matched.csv", newline="") as f, open(out, "w", newline="") as g:
        rows = csv.DictReader(f)
        w = csv.DictWriter(g, fieldnames=rows.fieldnames)
        w.writeheader()
        kept = dropped = 0
        for r in rows:
            if "+" in r["code"]:
                dropped += 1
                continue
            w.writerow(r)
            kept += 1
    assert dropped > 0 and kept > 300, (kept, dropped)
    return out


DEMO_OPTIONS = ["--code-column", "code", "--period-column", "year",
                "--sum", "households_eligible,households_served",
                "--ratio", "served_share=households_served/households_eligible",
                "--mean", "meals", "--missing", "n/a"]


@pytest.mark.parametrize("dialect", ["duckdb", "ansi"])
def test_the_demo_through_the_shipped_crosswalk_agrees(demo, tmp_path, dialect):
    data = without_pooled_reports(demo, tmp_path)
    expected = native(data, SHIPPED, DEMO_OPTIONS, tmp_path / "native.csv")
    got = in_duckdb(data, SHIPPED, DEMO_OPTIONS, dialect, ["n/a", "NA", ""], tmp_path)
    figures = same(got, expected, ("code", "year"))
    # Not a comparison of empty tables: the demo's counties carry figures.
    assert figures > 1000
    partial = [r for r in expected if 0 < float(r["households_served_coverage"]) < 1]
    assert partial, "some targets are only partly covered"


def test_a_minimum_coverage_empties_the_same_figures(demo, tmp_path):
    data = without_pooled_reports(demo, tmp_path)
    options = DEMO_OPTIONS + ["--min-coverage", "0.5"]
    expected = native(data, SHIPPED, options, tmp_path / "native.csv")
    got = in_duckdb(data, SHIPPED, options, "duckdb", ["n/a", "NA", ""], tmp_path)
    same(got, expected, ("code", "year"))
    emptied = [r for r in expected
               if r["households_served"] == "" and 0 < float(r["households_served_coverage"]) < 0.5]
    assert emptied, "the threshold empties some figures"


def test_the_benchmark_table_agrees(tmp_path):
    gen = tmp_path / "bench"
    subprocess.run([sys.executable, str(ROOT / "scripts/bench-apply/generate.py"), str(gen), "20"],
                   check=True)
    options = ["--code-column", "code", "--period-column", "period", "--sum", "a",
               "--ratio", "ab=a/b", "--mean", "c:b"]
    data, cw = gen / "data.csv", gen / "crosswalk.csv"
    expected = native(data, cw, options, tmp_path / "native.csv")
    got = in_duckdb(data, cw, options, "duckdb", ["NA", ""], tmp_path)
    assert same(got, expected, ("code", "period")) > 3000 * 20


def test_codes_that_lost_their_leading_zero_are_restored_in_the_query(tmp_path):
    # "1001" and "1001.0" are 01001 (Autauga County, AL) to the command;
    # the query must read them the same way. Hand-made rows.
    data = tmp_path / "data.csv"
    data.write_text("fips,pop\n1001,10\n1001.0,5\n01 003,7\nabc,1\n")
    cw = tmp_path / "cw.csv"
    cw.write_text("from_code,to_code,weight,target_share,basis\n"
                  "01001,A,1,0.5,area\n01003,A,1,0.5,area\n")
    options = ["--code-column", "fips", "--sum", "pop"]
    expected = native(data, cw, options, tmp_path / "native.csv")
    got = in_duckdb(data, cw, options, "duckdb", [""], tmp_path)
    same(got, expected, ("fips",))
    assert float(expected[0]["pop"]) == 22.0
