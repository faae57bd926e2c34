"""Errors raise `regionkey.RegionkeyError` with the command's message."""

import pandas as pd
import pytest

import regionkey
from conftest import run


def command_message(*args) -> str:
    done = run(*args, check=False)
    assert done.returncode == 1, done.stderr
    line = done.stderr.strip().splitlines()[-1]
    assert line.startswith("regionkey: error: ")
    return line[len("regionkey: error: "):]


def test_a_missing_column_names_the_columns_there_are():
    df = pd.DataFrame({"name": ["Cook"], "st": ["IL"]})
    with pytest.raises(regionkey.RegionkeyError, match='no column "county"; the columns are: name, st'):
        regionkey.match(df, name_column="county")


def test_a_row_whose_year_is_not_a_year_is_named_like_the_command_names_it(tmp_path):
    csv = tmp_path / "in.csv"
    csv.write_text("county,year\nCook County IL,2015\nCook County IL,soon\n")
    expected = command_message("match", csv, "--name-column", "county",
                               "--vintage-column", "year", "--output", tmp_path / "o.csv")
    df = pd.read_csv(csv, dtype=str)
    with pytest.raises(regionkey.RegionkeyError) as e:
        regionkey.match(df, name_column="county", vintage_column="year")
    # The same words; the place is the DataFrame instead of the file.
    assert str(e.value) == expected.replace(str(csv), "the DataFrame")


def test_a_vintage_outside_the_reference_is_refused_as_by_the_command(tmp_path):
    csv = tmp_path / "in.csv"
    csv.write_text("county\nCook County IL\n")
    expected = command_message("match", csv, "--name-column", "county", "--vintage", "1900")
    with pytest.raises(regionkey.RegionkeyError) as e:
        regionkey.match(pd.DataFrame({"county": ["Cook County IL"]}),
                        name_column="county", vintage=1900)
    assert str(e.value) == expected


def test_a_decision_for_a_code_that_is_no_unit_names_its_file_line_and_column(tmp_path):
    decisions = tmp_path / "decisions.csv"
    decisions.write_text("name,state,chosen_code\nBaltimore,MD,99999\n")
    csv = tmp_path / "in.csv"
    csv.write_text("county,state\nBaltimore,MD\n")
    expected = command_message("match", csv, "--name-column", "county", "--state-column",
                               "state", "--decisions", decisions)
    with pytest.raises(regionkey.RegionkeyError) as e:
        regionkey.match(pd.read_csv(csv, dtype=str), name_column="county",
                        state_column="state", decisions=decisions)
    assert str(e.value) == expected
    assert "line 2" in expected


def test_a_state_column_of_years_is_refused_with_the_commands_message(tmp_path):
    csv = tmp_path / "in.csv"
    csv.write_text("name,year,state\nCook,2015,IL\nCook,2016,IL\nLoving,2017,TX\n")
    expected = command_message("match", csv, "--name-column", "name", "--state-column",
                               "year", "--output", tmp_path / "o.csv")
    df = pd.read_csv(csv, dtype=str)
    with pytest.raises(regionkey.RegionkeyError) as e:
        regionkey.match(df, name_column="name", state_column="year")
    assert str(e.value) == expected.replace(str(csv), "the DataFrame")
    # The message names the row and the value, as the command's does.
    assert 'line 2: column "year"' in str(e.value) and '"2015"' in str(e.value)


def test_a_name_column_of_numbers_that_are_no_codes_is_refused_with_the_commands_message(tmp_path):
    csv = tmp_path / "in.csv"
    csv.write_text("county,year\n" + "".join(f"Cook,{y}\n" for y in range(2000, 2024)))
    expected = command_message("match", csv, "--name-column", "year",
                               "--output", tmp_path / "o.csv")
    df = pd.read_csv(csv, dtype=str)
    with pytest.raises(regionkey.RegionkeyError) as e:
        regionkey.match(df, name_column="year")
    assert str(e.value) == expected.replace(str(csv), "the DataFrame")
    assert 'column "year"' in str(e.value) and '"2000"' in str(e.value)


def test_a_column_of_codes_that_lost_their_leading_zero_is_no_error():
    # 01001 Autauga County, AL and 06037 Los Angeles County, CA (Census
    # Bureau county list, from memory).
    df = pd.DataFrame({"fips": ["1001", "6037", "6037.0"]})
    matched, _ = regionkey.match(df, name_column="fips")
    assert matched["code"].tolist() == ["01001", "06037", "06037"]


def test_apply_refuses_an_order_statistic_with_the_commands_explanation():
    df = pd.DataFrame({"code": ["01001"], "median_income": [50000.0]})
    cw = pd.DataFrame({"from_code": ["01001"], "to_code": ["01001"], "weight": [1.0],
                       "target_share": [1.0], "basis": ["area"]})
    with pytest.raises(regionkey.RegionkeyError, match="looks like an order statistic"):
        regionkey.apply(df, cw, sum=["median_income"])


def test_history_of_an_unknown_name_is_an_error():
    with pytest.raises(regionkey.RegionkeyError, match="is not a county code or county name"):
        regionkey.history("Atlantis")


def test_something_that_is_not_a_dataframe_is_a_type_error():
    with pytest.raises(TypeError, match="pandas or polars"):
        regionkey.match([["Cook"]], name_column="county")


def test_overlay_options_are_refused_with_the_commands_words():
    # The package builds overlay's configuration itself (no command line):
    # its refusals must still be the command's.
    done = run("overlay", "builtin:counties-2017", "builtin:counties-2023",
               "--weight", "population", "--output", "-", check=False)
    assert done.returncode != 0
    with pytest.raises(regionkey.RegionkeyError) as e:
        regionkey.overlay("builtin:counties-2017", "builtin:counties-2023", weight="population")
    assert str(e.value) in done.stderr
    done = run("overlay", "builtin:counties-2017", "builtin:counties-2023",
               "--min-share", "0.7", "--output", "-", check=False)
    with pytest.raises(regionkey.RegionkeyError) as e:
        regionkey.overlay("builtin:counties-2017", "builtin:counties-2023", min_share=0.7)
    assert str(e.value) in done.stderr
