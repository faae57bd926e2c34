"""apply, overlay, history and the references from Python agree with the
command (the reference), and keep its rules: missing is never zero, every
figure has its coverage."""

import csv
import math

import pandas as pd
import polars as pl
import pytest

import regionkey
from conftest import ROOT, run


def read_rows(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def test_apply_to_2023_gives_the_demos_figures(demo):
    matched = pd.read_csv(demo / "matched.csv", dtype=str, keep_default_na=False)
    out = regionkey.apply(
        matched, to_vintage=2023, code_column="code", period_column="year",
        sum=["households_eligible", "households_served", "meals"],
        ratio={"served_share": "households_served/households_eligible"},
        missing=["n/a"])
    expected = read_rows(demo / "harmonized-2023.csv")
    assert list(out.columns) == list(expected[0].keys())
    assert len(out) == len(expected)
    for row, want in zip(out.to_dict("records"), expected):
        for column, text in want.items():
            value = row[column]
            if column in ("code", "code_name", "year", "pooled_from"):
                assert str(value) == text
            elif text == "":
                assert value is None or (isinstance(value, float) and math.isnan(value))
            else:
                # The command writes figures with their digits and coverage
                # with 6 decimals.
                assert value == pytest.approx(float(text), rel=1e-12, abs=5e-7)


def test_apply_from_polars_returns_polars_and_the_report():
    data = pl.DataFrame({"fips": ["1001", "1003", "99999"], "pop": [10.0, None, 3.0]})
    cw = pl.DataFrame({"from_code": ["01001", "01003"], "to_code": ["T", "T"],
                       "weight": [1.0, 1.0], "target_share": [0.4, 0.6],
                       "basis": ["area", "area"]})
    out, report = regionkey.apply(data, cw, code_column="fips", sum=["pop"], report=True)
    assert isinstance(out, pl.DataFrame)
    # 01003 has no value: it is not summed as zero, it lowers the coverage.
    assert out.rows() == [("T", 10.0, 0.4)]
    assert "unmatched-code" in report["kind"].to_list()  # 99999 is reported, not dropped


def test_overlay_of_the_built_in_layers_matches_the_shipped_crosswalk():
    cw = regionkey.overlay("builtin:counties-2017", "builtin:counties-2023")
    shipped = pd.read_csv(ROOT / "crosswalks" / "us-counties-2017-2023.csv",
                          dtype={"from_code": str, "to_code": str})
    assert len(cw) == len(shipped)
    assert cw["from_code"].tolist() == shipped["from_code"].tolist()
    assert cw["weight"].to_numpy() == pytest.approx(shipped["weight"].to_numpy(), abs=1e-9)


def test_history_matches_the_commands_table(tmp_path):
    out = tmp_path / "h.csv"
    run("history", "09003", "--format", "csv", "--output", out)
    expected = read_rows(out)
    got = regionkey.history("09003")
    assert got.astype(str).to_dict("records") == expected
    assert "reorganized" in got["event"].tolist()  # Connecticut, 2022


def test_counties_of_2023_are_those_of_the_census_list():
    # 3,144 counties and equivalents in the 50 states and DC after
    # Connecticut's 2022 change, 78 municipios of Puerto Rico and 13 units of
    # the island areas (Census Bureau counts, from memory).
    c = regionkey.counties(2023)
    assert len(c) == 3144 + 78 + 13
    assert c["code"].is_unique
    states = c["parent"].str.len() == 2
    assert states.all()
    assert (c["code"].str[:2] == c["parent"]).all()
    assert not c["code"].isin(["09003"]).any()  # Hartford County, gone in 2022
    assert regionkey.counties(2017, as_polars=True).filter(pl.col("code") == "09003").height == 1


def test_states_include_dc_and_puerto_rico():
    s = regionkey.states()
    named = dict(zip(s["code"], s["name"]))
    # FIPS 11 District of Columbia, 72 Puerto Rico (FIPS PUB 5-2, from memory).
    assert named["11"] == "District of Columbia"
    assert named["72"] == "Puerto Rico"
