//! `regionkey group` end to end, and its crosswalks through `apply`. The
//! district figures are hand-computed (the arithmetic is in the comments);
//! the populations are the 2020 census counts of the counties as recalled
//! (from memory; the checks are on the arithmetic, not on the counts), and
//! the case figures are made up for the arithmetic.

use std::path::{Path, PathBuf};

use predicates::prelude::*;

mod common;
use common::{close, find, num, read_rows, regionkey, write};

/// A district of two Kansas counties (Brown 20013, Nemaha 20131) and one
/// of a single county (Jackson 20085), weighted by population.
const MEMBERS: &str = "unit,group\n20013,D1\n20131,D1\n20085,D2\n";
/// 2020 census populations, from memory.
const POPULATION: &str = "code,population\n20013,9508\n20131,10273\n20085,13232\n";

fn build_district(dir: &Path) -> (PathBuf, PathBuf) {
    let members = write(dir, "members.csv", MEMBERS);
    let pop = write(dir, "pop.csv", POPULATION);
    let to_groups = dir.join("to-groups.csv");
    let to_units = dir.join("to-units.csv");
    regionkey()
        .arg("group")
        .arg(&members)
        .args(["--weight", "population", "--population"])
        .arg(&pop)
        .arg("--to-groups")
        .arg(&to_groups)
        .arg("--to-units")
        .arg(&to_units)
        .assert()
        .success()
        .stderr(predicate::str::contains("2 groups of 3 counties"));
    (to_groups, to_units)
}

#[test]
fn a_district_with_one_member_missing_a_year_has_the_reported_share_as_coverage() {
    let dir = tempfile::tempdir().unwrap();
    let (to_groups, _) = build_district(dir.path());
    let rows = read_rows(&to_groups);
    // Brown's part of D1: 9508 / (9508 + 10273) = 9508 / 19781 = 0.480663.
    let brown = rows.iter().find(|r| r["from_code"] == "20013").unwrap();
    assert_eq!(brown["to_code"], "D1");
    assert!(close(num(brown, "weight"), 1.0, 1e-12));
    assert!(close(num(brown, "target_share"), 9508.0 / 19781.0, 1e-12));
    assert_eq!(brown["basis"], "population");

    // Cases and population by county and year; Nemaha has no row in 2022.
    let data = write(
        dir.path(),
        "cases.csv",
        "fips,year,cases,pop\n20013,2021,10,9508\n20131,2021,30,10273\n20085,2021,7,13232\n\
         20013,2022,12,9508\n20085,2022,8,13232\n",
    );
    let out = dir.path().join("districts.csv");
    regionkey()
        .arg("apply")
        .arg(&data)
        .arg("--crosswalk")
        .arg(&to_groups)
        .args(["--code-column", "fips", "--period-column", "year"])
        .args(["--sum", "cases", "--ratio", "rate=cases/pop"])
        .arg("--output")
        .arg(&out)
        .assert()
        .success();
    let rows = read_rows(&out);
    // 2021: D1 = 10 + 30 = 40, everything reported: coverage 1.
    //       rate = (10 + 30) / (9508 + 10273) = 40 / 19781 = 0.00202214.
    let d1 = find(&rows, "D1", Some("2021"));
    assert!(close(num(d1, "cases"), 40.0, 1e-6), "{d1:?}");
    assert!(close(num(d1, "cases_coverage"), 1.0, 1e-6));
    assert!(close(num(d1, "rate"), 40.0 / 19781.0, 1e-6));
    // 2022: only Brown reported: D1 = 12 (Nemaha's cases are missing, not
    //       zero), coverage = Brown's part of D1 = 9508 / 19781 = 0.480663;
    //       rate = 12 / 9508 = 0.00126209 (the reporting member's own rate,
    //       not 12 / 19781).
    let d1 = find(&rows, "D1", Some("2022"));
    assert!(close(num(d1, "cases"), 12.0, 1e-6), "{d1:?}");
    assert!(close(num(d1, "cases_coverage"), 0.480663, 1e-6), "{d1:?}");
    assert!(close(num(d1, "rate"), 12.0 / 9508.0, 1e-6));
    // D2 is Jackson alone: 8 in 2022, coverage 1.
    let d2 = find(&rows, "D2", Some("2022"));
    assert!(close(num(d2, "cases"), 8.0, 1e-6));
    assert!(close(num(d2, "cases_coverage"), 1.0, 1e-6));
}

#[test]
fn a_district_figure_is_spread_over_its_counties_by_population() {
    let dir = tempfile::tempdir().unwrap();
    let (_, to_units) = build_district(dir.path());
    let data = write(
        dir.path(),
        "districts.csv",
        "district,cases,rate\nD1,40,0.5\nD2,7,0.25\n",
    );
    let out = dir.path().join("counties.csv");
    regionkey()
        .arg("apply")
        .arg(&data)
        .arg("--crosswalk")
        .arg(&to_units)
        .args(["--code-column", "district", "--sum", "cases"])
        .args(["--mean", "rate"])
        .arg("--output")
        .arg(&out)
        .assert()
        .success();
    let rows = read_rows(&out);
    // Brown: 40 · 9508 / 19781 = 19.226530; Nemaha: 40 · 10273 / 19781 = 20.773470.
    let brown = find(&rows, "20013", None);
    let nemaha = find(&rows, "20131", None);
    assert!(close(num(brown, "cases"), 40.0 * 9508.0 / 19781.0, 1e-6));
    assert!(close(num(nemaha, "cases"), 40.0 * 10273.0 / 19781.0, 1e-6));
    assert!(close(
        num(brown, "cases") + num(nemaha, "cases"),
        40.0,
        1e-6
    ));
    // A rate of the district is the rate of each of its counties (a mean,
    // never split).
    assert!(close(num(brown, "rate"), 0.5, 1e-9));
    assert!(close(num(find(&rows, "20085", None), "rate"), 0.25, 1e-9));
}

#[test]
fn a_county_in_two_groups_without_shares_is_refused_naming_the_lines() {
    let dir = tempfile::tempdir().unwrap();
    let members = write(
        dir.path(),
        "members.csv",
        "unit,group\n20013,D1\n20131,D1\n20013,D2\n",
    );
    regionkey()
        .arg("group")
        .arg(&members)
        .arg("--to-groups")
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "members.csv: line 4: column \"unit\"",
        ))
        .stderr(predicate::str::contains(
            "unit 20013 is in several groups (lines 2, 4) without a share",
        ));
    assert!(!dir.path().join("x.csv").exists());
}

#[test]
fn shares_split_a_county_between_groups() {
    let dir = tempfile::tempdir().unwrap();
    let members = write(
        dir.path(),
        "members.csv",
        "unit,group,share\n20013,D1,1\n20131,D1,0.25\n20131,D2,0.75\n",
    );
    let pop = write(dir.path(), "pop.csv", POPULATION);
    let to_groups = dir.path().join("g.csv");
    regionkey()
        .arg("group")
        .arg(&members)
        .args(["--weight", "population", "--population"])
        .arg(&pop)
        .arg("--to-groups")
        .arg(&to_groups)
        .assert()
        .success()
        .stderr(predicate::str::contains("2 county pieces lie only partly"));
    let rows = read_rows(&to_groups);
    // D1 = Brown 9508 + a quarter of Nemaha 10273 / 4 = 2568.25 -> 12076.25.
    let nemaha_d1 = rows
        .iter()
        .find(|r| r["from_code"] == "20131" && r["to_code"] == "D1")
        .unwrap();
    assert!(close(num(nemaha_d1, "weight"), 0.25, 1e-12));
    assert!(close(
        num(nemaha_d1, "target_share"),
        2568.25 / 12076.25,
        1e-12
    ));
    // D2 is three quarters of Nemaha only: all of D2.
    let nemaha_d2 = rows
        .iter()
        .find(|r| r["from_code"] == "20131" && r["to_code"] == "D2")
        .unwrap();
    assert!(close(num(nemaha_d2, "target_share"), 1.0, 1e-12));
}

#[test]
fn codes_of_other_vintages_are_carried_and_unknown_codes_leave_a_group_empty() {
    let dir = tempfile::tempdir().unwrap();
    // 02270 Wade Hampton Census Area was renamed Kusilvak (02158) in 2015;
    // 51515 Bedford city was absorbed into Bedford County (51019) in 2013
    // (the built-in change history, from the Census Bureau's list).
    let members = write(
        dir.path(),
        "members.csv",
        "unit,group\n2270,AK1\n02050,AK1\n51515,VA1\n51003,VA2\n",
    );
    let out = dir.path().join("g.csv");
    regionkey()
        .arg("group")
        .arg(&members)
        .arg("--to-groups")
        .arg(&out)
        .assert()
        .success()
        .stderr(predicate::str::contains(
            "2 code(s) of other vintages carried",
        ))
        .stderr(predicate::str::contains("2270 carried to 02158"));
    let rows = read_rows(&out);
    assert!(rows
        .iter()
        .any(|r| r["from_code"] == "02158" && r["to_code"] == "AK1"));
    assert!(rows
        .iter()
        .any(|r| r["from_code"] == "51019" && r["to_code"] == "VA1"));
    // The same county twice in one group after carrying is refused.
    let members = write(
        dir.path(),
        "members.csv",
        "unit,group\n51515,VA1\n51019,VA1\n",
    );
    regionkey()
        .arg("group")
        .arg(&members)
        .arg("--to-groups")
        .arg(&out)
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "unit 51019 is listed twice in group VA1",
        ));
    // A code of no vintage is left out (and said); a group left with no
    // county is an error naming its line.
    let members = write(
        dir.path(),
        "members.csv",
        "unit,group\n20013,D1\n99999,GHOST\n",
    );
    regionkey()
        .arg("group")
        .arg(&members)
        .arg("--to-groups")
        .arg(&out)
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "members.csv: line 3: column \"group\": group GHOST has no member",
        ));
}

#[test]
fn a_divided_county_asks_for_its_successors() {
    let dir = tempfile::tempdir().unwrap();
    // Valdez-Cordova (02261) was split in 2019 into Chugach (02063) and
    // Copper River (02066).
    let members = write(dir.path(), "members.csv", "unit,group\n02261,AK1\n");
    regionkey()
        .arg("group")
        .arg(&members)
        .arg("--to-groups")
        .arg(dir.path().join("g.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains("line 2: column \"unit\""))
        .stderr(predicate::str::contains("02063, 02066"));
}

#[test]
fn by_area_new_york_citys_counties_weigh_by_their_built_in_area() {
    let dir = tempfile::tempdir().unwrap();
    let members = write(
        dir.path(),
        "members.csv",
        "unit,group\n36005,NYC\n36047,NYC\n36061,NYC\n36081,NYC\n36085,NYC\n",
    );
    let out = dir.path().join("g.csv");
    regionkey()
        .arg("group")
        .arg(&members)
        .arg("--to-groups")
        .arg(&out)
        .assert()
        .success();
    let rows = read_rows(&out);
    let share = |c: &str| {
        num(
            rows.iter().find(|r| r["from_code"] == c).unwrap(),
            "target_share",
        )
    };
    let total: f64 = ["36005", "36047", "36061", "36081", "36085"]
        .iter()
        .map(|c| share(c))
        .sum();
    assert!(close(total, 1.0, 1e-9));
    // Land areas in the Census Bureau's 2020 gazetteer, as recalled (from
    // memory, square miles): Bronx 42.1, Kings 69.4, New York 22.7, Queens
    // 108.5, Richmond 57.5; total 300.2. The built-in 1:10m shoreline
    // geometry follows land closely enough that each share is within 0.05
    // of the land-area share (the largest gap seen is New York County,
    // 0.101 against 0.076), and the order of sizes is the same.
    for (code, land) in [
        ("36005", 42.1),
        ("36047", 69.4),
        ("36061", 22.7),
        ("36081", 108.5),
        ("36085", 57.5),
    ] {
        let expected = land / 300.2;
        assert!(
            close(share(code), expected, 0.05),
            "{code}: {} vs land share {expected}",
            share(code)
        );
    }
    assert!(share("36081") > share("36047") && share("36047") > share("36085"));
    assert!(share("36085") > share("36005") && share("36005") > share("36061"));
    let meta: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("g.csv.json")).unwrap()).unwrap();
    assert_eq!(meta["weight"]["basis"], "area");
    assert!(meta["caution"].as_str().unwrap().contains("estimates"));
}

#[test]
fn options_are_checked_before_any_work() {
    let dir = tempfile::tempdir().unwrap();
    let members = write(dir.path(), "members.csv", MEMBERS);
    regionkey()
        .arg("group")
        .arg(&members)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("--to-groups FILE"));
    regionkey()
        .arg("group")
        .arg(&members)
        .args(["--weight", "population", "--to-groups", "x.csv"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("--population FILE"));
    let bad = write(dir.path(), "bad.csv", "unit,group\n20013,North District\n");
    regionkey()
        .arg("group")
        .arg(&bad)
        .arg("--to-groups")
        .arg(dir.path().join("g.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains("line 2: column \"group\""))
        .stderr(predicate::str::contains("North_District"));
}

#[test]
fn the_demo_splits_its_pooled_report_and_gathers_it_back_into_its_service_area() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("demo");
    regionkey()
        .arg("demo")
        .arg("--out")
        .arg(&dir)
        .assert()
        .success();
    let input = read_rows(&dir.join("input/food-bank-reports.csv"));
    let reported = |year: &str| -> f64 {
        num(
            input
                .iter()
                .find(|r| r["county"] == "Bristol Bay + Lake and Peninsula" && r["year"] == year)
                .unwrap(),
            "households_eligible",
        )
    };
    // The pooled report is split by area onto its two boroughs ...
    let counties = read_rows(&dir.join("harmonized-2023.csv"));
    let at = |code: &str, year: &str| {
        counties
            .iter()
            .find(|r| r["code"] == code && r["year"] == year)
            .unwrap()
            .clone()
    };
    let (bb, lp) = (at("02060", "2015"), at("02164", "2015"));
    assert_eq!(bb["pooled_from"], "02060+02164 by area");
    let split = num(&bb, "households_eligible") + num(&lp, "households_eligible");
    assert!(close(split, reported("2015"), 1e-6), "{split}");
    // ... and the service area made of exactly those two boroughs gets the
    // reported figure back, fully covered.
    let areas = read_rows(&dir.join("service-areas.csv"));
    let sw = areas
        .iter()
        .find(|r| r["code"] == "AK-SOUTHWEST" && r["year"] == "2015")
        .unwrap();
    assert!(close(
        num(sw, "households_eligible"),
        reported("2015"),
        1e-6
    ));
    assert!(close(num(sw, "households_eligible_coverage"), 1.0, 1e-12));
    // Copper River (02066) has no report in 2021: its service area is only
    // partly covered that year, by the part of its land the others make up.
    let sc = areas
        .iter()
        .find(|r| r["code"] == "AK-SOUTHCENTRAL" && r["year"] == "2021")
        .unwrap();
    let cov = num(sc, "households_eligible_coverage");
    assert!(cov > 0.0 && cov < 1.0, "{cov}");
    let summary = std::fs::read_to_string(dir.join("SUMMARY.txt")).unwrap();
    assert!(
        summary.contains("Pooled report 02060+02164 by area"),
        "{summary}"
    );
    assert!(summary.contains("Service areas"), "{summary}");
}
