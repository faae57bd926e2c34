"""`regionkey.match` gives what `regionkey match` gives.

The reference here is the command itself, run on the demo's input (an
invented table of messy county names of 2012-2023, real geography): a CSV
written from the DataFrame must have the command's bytes, for pandas and
polars alike. Facts of geography checked below come from the Census
Bureau's county lists (codes recalled from memory, marked so)."""

import io

import pandas as pd
import polars as pl
import pytest

import regionkey
from conftest import run


def pandas_csv(df: pd.DataFrame) -> bytes:
    return df.to_csv(index=False, lineterminator="\n").encode()


def polars_csv(df: pl.DataFrame) -> bytes:
    # polars quotes an empty string ("") to tell it from a null; a CSV has
    # no nulls, so empty strings are written as empty fields, as the command
    # (and pandas) write them.
    empty_as_null = pl.col(pl.String).replace("", None)
    return df.with_columns(empty_as_null).write_csv().encode()


def read_text_pandas(path) -> pd.DataFrame:
    return pd.read_csv(path, dtype=str, keep_default_na=False)


def read_text_polars(path) -> pl.DataFrame:
    return pl.read_csv(path, infer_schema=False)


@pytest.mark.parametrize("decided", [False, True])
def test_the_demo_matches_byte_for_byte_from_pandas(demo, tmp_path, decided):
    source = demo / "input" / "food-bank-reports.csv"
    decisions = demo / "input" / "decisions.csv" if decided else None
    out, review = tmp_path / "matched.csv", tmp_path / "review.csv"
    args = ["match", source, "--name-column", "county", "--state-column", "state",
            "--vintage-column", "year", "--output", out, "--review", review, "--quiet"]
    if decided:
        args += ["--decisions", decisions]
    run(*args)
    df = read_text_pandas(source)
    matched, rev = regionkey.match(df, name_column="county", state_column="state",
                                   vintage_column="year", decisions=decisions)
    assert pandas_csv(matched) == out.read_bytes()
    assert pandas_csv(rev) == review.read_bytes()
    assert len(matched) == len(df), "every input row comes out"


def test_the_demo_matches_byte_for_byte_from_polars(demo):
    source = demo / "input" / "food-bank-reports.csv"
    df = read_text_polars(source)
    matched, review = regionkey.match(df, name_column="county", state_column="state",
                                      vintage_column="year",
                                      decisions=demo / "input" / "decisions.csv")
    assert isinstance(matched, pl.DataFrame) and isinstance(review, pl.DataFrame)
    assert polars_csv(matched) == (demo / "matched.csv").read_bytes()
    assert polars_csv(review) == (demo / "review.csv").read_bytes()


def test_decisions_can_be_a_filled_in_review_dataframe(demo):
    source = demo / "input" / "food-bank-reports.csv"
    df = read_text_pandas(source)
    _, review = regionkey.match(df, name_column="county", state_column="state",
                                vintage_column="year")
    # The analyst's file, as a DataFrame instead of a path.
    decisions = read_text_pandas(demo / "input" / "decisions.csv")
    matched, _ = regionkey.match(df, name_column="county", state_column="state",
                                 vintage_column="year", decisions=decisions)
    assert pandas_csv(matched) == (demo / "matched.csv").read_bytes()
    assert len(review) > 0


def test_well_known_names_land_on_their_codes():
    # Codes from the Census Bureau's county list (from memory): St. Louis
    # city 29510, Dona Ana County 35013, Kusilvak (formerly Wade Hampton)
    # 02158, Fairfax city 51600, Fairfax County 51059.
    df = pd.DataFrame({"county": ["St Louis City", "Dona Ana", "Wade Hampton",
                                  "Fairfax city", "Fairfax County"],
                       "state": ["MO", "NM", "AK", "VA", "VA"]})
    matched, review = regionkey.match(df, name_column="county", state_column="state")
    assert matched["code"].tolist() == ["29510", "35013", "02158", "51600", "51059"]
    assert len(review) == 0


def test_an_input_that_already_has_a_code_column_gets_prefixed_columns():
    df = pd.DataFrame({"code": ["x"], "county": ["Cook County, IL"]})
    matched, _ = regionkey.match(df, name_column="county")
    assert list(matched.columns) == ["code", "county"] + [
        "rk_" + c for c in regionkey.ADDED_COLUMNS]
    assert matched["rk_code"].tolist() == ["17031"]  # Cook County, IL (from memory)


def test_nulls_and_non_string_columns_are_read_as_text():
    df = pd.DataFrame({"county": ["Montgomery", None, "6037"],
                       "state": ["MD", "MD", None]})
    matched, _ = regionkey.match(df, name_column="county", state_column="state")
    assert matched["match_status"].tolist()[1] == "unmatched"  # an empty name
    assert matched["code"].tolist()[2] == "06037"  # a code that lost its zero


def test_a_pandas_column_of_text_and_numbers_is_read_as_text():
    # Cook County, IL 17031 and Los Angeles County, CA 06037 (Census Bureau
    # county list, from memory); the other columns come back as they went in.
    df = pd.DataFrame({"county": ["Cook County, IL", None, 6037], "n": [1, 2, 3]},
                      index=[10, 11, 12])
    matched, _ = regionkey.match(df, name_column="county")
    assert matched["code"].tolist() == ["17031", "", "06037"]
    assert matched["n"].tolist() == [1, 2, 3] and str(matched["n"].dtype) == "int64"
    assert list(matched.index) == [0, 1, 2]
