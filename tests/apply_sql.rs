//! `regionkey apply --emit-sql` end to end: the query is written instead of
//! results, and bad requests are refused with the command's words. That the
//! query computes what `apply` computes is checked by running it in DuckDB
//! (python/tests/test_sql.py): this file checks the command-line side.

use std::path::{Path, PathBuf};

use predicates::prelude::*;

mod common;
use common::{regionkey, write};

fn inputs(dir: &Path) -> (PathBuf, PathBuf) {
    let data = write(dir, "data.csv", "fips,year,pop,jobless\n1001,2020,100,5\n");
    let cw = write(
        dir,
        "cw.csv",
        "from_code,to_code,weight,target_share,basis\n01001,01001,1,1,area\n",
    );
    (data, cw)
}

#[test]
fn emit_sql_writes_a_query_and_allocates_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let (data, cw) = inputs(dir.path());
    let out = dir.path().join("query.sql");
    regionkey()
        .arg("apply")
        .arg(&data)
        .arg("--crosswalk")
        .arg(&cw)
        .args(["--code-column", "fips", "--period-column", "year"])
        .args(["--sum", "pop", "--ratio", "rate=jobless/pop"])
        .args(["--emit-sql", "spark", "--sql-tables", "db.data,db.cw"])
        .arg("--output")
        .arg(&out)
        .assert()
        .success();
    let sql = std::fs::read_to_string(&out).unwrap();
    assert!(sql.contains("FROM db.data"), "{sql}");
    assert!(sql.contains("FROM db.cw"), "{sql}");
    for column in ["`pop`", "`pop_coverage`", "`rate`", "`rate_coverage`"] {
        assert!(sql.contains(column), "{column} missing from {sql}");
    }
    assert!(sql.contains("estimates"), "the caution is in the query");
    // No results and no sidecar: only the query.
    assert!(!dir.path().join("query.sql.json").exists());
}

#[test]
fn an_unknown_dialect_is_refused_naming_the_choices() {
    let dir = tempfile::tempdir().unwrap();
    let (data, cw) = inputs(dir.path());
    regionkey()
        .arg("apply")
        .arg(&data)
        .arg("--crosswalk")
        .arg(&cw)
        .args(["--code-column", "fips", "--sum", "pop"])
        .args(["--emit-sql", "oracle", "--output", "-"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("duckdb, spark or ansi"));
}

#[test]
fn emit_sql_needs_a_crosswalk_table() {
    let dir = tempfile::tempdir().unwrap();
    let (data, _) = inputs(dir.path());
    regionkey()
        .arg("apply")
        .arg(&data)
        .args([
            "--to-vintage",
            "2023",
            "--code-column",
            "fips",
            "--sum",
            "pop",
        ])
        .args(["--emit-sql", "duckdb", "--output", "-"])
        .assert()
        .code(2);
}
