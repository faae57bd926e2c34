//! `regionkey apply` end to end, in a temporary folder. Hand-made tables
//! carry their arithmetic in comments; the real open dataset is
//! `fixtures/apply/unemployment.tsv` (vega-datasets 3.2.1, county
//! unemployment rates from BLS LAUS; see fixtures/apply/README.md).

use std::collections::BTreeMap;
use std::path::Path;

use predicates::prelude::*;

mod common;
use common::{num, read_rows, regionkey, write, Row};

fn find<'a>(
    rows: &'a [BTreeMap<String, String>],
    code: &str,
    period: Option<&str>,
) -> &'a BTreeMap<String, String> {
    rows.iter()
        // The code and period columns keep the data's names ("code" or
        // "id", "year").
        .find(|r| {
            r.get("code").or_else(|| r.get("id")).map(String::as_str) == Some(code)
                && period.is_none_or(|p| r["year"] == p)
        })
        .unwrap_or_else(|| panic!("no row for {code} {period:?}"))
}

/// Sources A, B, C onto X and Y (hand-made):
/// A: 0.6 in X (75% of X), 0.4 in Y (20% of Y); B wholly in Y (80% of Y);
/// C wholly in X (25% of X).
const CROSSWALK: &str = "from_code,to_code,weight,target_share,basis
A,X,0.6,0.75,area
A,Y,0.4,0.2,area
B,Y,1,0.8,area
C,X,1,0.25,area
";

#[test]
fn counts_rates_and_coverage_come_out_as_computed_by_hand() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    // 2020: all known. 2021: C absent, B's unemployed empty.
    let data = write(
        dir.path(),
        "data.csv",
        "code,year,unemployed,labor_force
A,2020,10,100
B,2020,90,300
C,2020,5,50
A,2021,20,100
B,2021,,300
",
    );
    let out = dir.path().join("out.csv");
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "--crosswalk",
            cw.to_str().unwrap(),
        ])
        .args([
            "--code-column",
            "code",
            "--period-column",
            "year",
            "--sum",
            "unemployed,labor_force",
        ])
        .args([
            "--ratio",
            "rate=unemployed/labor_force",
            "--output",
            out.to_str().unwrap(),
        ])
        .assert()
        .success()
        .stderr(predicate::str::contains("estimates"));
    let rows = read_rows(&out);
    assert_eq!(rows.len(), 4, "2 targets x 2 periods");
    // 2020, X: unemployed 10 * 0.6 + 5 * 1 = 11; labour force 100 * 0.6 + 50 = 110;
    // rate 11 / 110 = 0.1; coverage 1.
    let x = find(&rows, "X", Some("2020"));
    assert_eq!(num(x, "unemployed"), 11.0);
    assert_eq!(num(x, "labor_force"), 110.0);
    assert_eq!(num(x, "rate"), 0.1);
    assert_eq!(num(x, "rate_coverage"), 1.0);
    // 2020, Y: unemployed 10 * 0.4 + 90 = 94; labour force 40 + 300 = 340; rate 94 / 340.
    let y = find(&rows, "Y", Some("2020"));
    assert_eq!(num(y, "unemployed"), 94.0);
    assert!((num(y, "rate") - 94.0 / 340.0).abs() < 1e-6);
    // 2021, X: only A known (C absent): unemployed 20 * 0.6 = 12, coverage 0.75.
    let x = find(&rows, "X", Some("2021"));
    assert_eq!(num(x, "unemployed"), 12.0);
    assert_eq!(num(x, "unemployed_coverage"), 0.75);
    // 2021, Y: unemployed from A only (B empty): 20 * 0.4 = 8, coverage 0.2;
    // labour force from both: 40 + 300 = 340, coverage 1;
    // rate only where both are known (A): 8 / 40 = 0.2, coverage 0.2.
    let y = find(&rows, "Y", Some("2021"));
    assert_eq!(num(y, "unemployed"), 8.0);
    assert_eq!(num(y, "unemployed_coverage"), 0.2);
    assert_eq!(num(y, "labor_force"), 340.0);
    assert_eq!(num(y, "labor_force_coverage"), 1.0);
    assert_eq!(num(y, "rate"), 0.2);
    assert_eq!(num(y, "rate_coverage"), 0.2);
    // The sidecar names the inputs and carries the caution.
    let meta: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out.csv.json")).unwrap())
            .unwrap();
    assert_eq!(meta["inputs"][0]["rows"], 5);
    assert_eq!(meta["inputs"][0]["sha256"].as_str().unwrap().len(), 64);
    assert!(meta["caution"].as_str().unwrap().contains("estimates"));
}

#[test]
fn min_coverage_empties_thin_estimates_but_keeps_their_coverage() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,n\nA,100\n");
    let out = dir.path().join("out.csv");
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "-c",
            cw.to_str().unwrap(),
            "--sum",
            "n",
        ])
        .args(["--min-coverage", "0.5", "-o", out.to_str().unwrap(), "-q"])
        .assert()
        .success();
    let rows = read_rows(&out);
    // X: A is 0.75 of X >= 0.5: value 100 * 0.6 = 60. Y: A is 0.2 of Y < 0.5: empty.
    assert_eq!(num(find(&rows, "X", None), "n"), 60.0);
    let y = find(&rows, "Y", None);
    assert_eq!(y["n"], "");
    assert_eq!(num(y, "n_coverage"), 0.2);
}

#[test]
fn unmatched_codes_duplicates_and_absent_sources_are_reported_not_dropped() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    // Line 3 and 4 repeat A; Z is not in the crosswalk (line 5); C is absent.
    let data = write(dir.path(), "data.csv", "code,n\nA,1\nA,2\nB,4\nZ,8\n");
    let out = dir.path().join("out.csv");
    let report = dir.path().join("report.csv");
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "-c",
            cw.to_str().unwrap(),
            "--sum",
            "n",
        ])
        .args([
            "-o",
            out.to_str().unwrap(),
            "--report",
            report.to_str().unwrap(),
        ])
        .assert()
        .success()
        .stderr(predicate::str::contains("unmatched-code: 1 (1 rows)"))
        .stderr(predicate::str::contains("duplicate: 1 (2 rows)"));
    let items = read_rows(&report);
    let kinds: Vec<(&str, &str, &str, &str)> = items
        .iter()
        .map(|r| {
            (
                r["kind"].as_str(),
                r["code"].as_str(),
                r["rows"].as_str(),
                r["first_line"].as_str(),
            )
        })
        .collect();
    assert_eq!(
        kinds,
        [
            ("absent-source", "C", "0", ""),
            ("duplicate", "A", "2", "2"),
            ("unmatched-code", "Z", "1", "5")
        ]
    );
    // The duplicates were added: A = 3; X = 3 * 0.6 = 1.8.
    let rows = read_rows(&out);
    assert_eq!(num(find(&rows, "X", None), "n"), 1.8);
}

#[test]
fn a_value_that_is_not_a_number_names_its_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,n\nA,1\nB,lots\n");
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "-c",
            cw.to_str().unwrap(),
            "--sum",
            "n",
            "-o",
        ])
        .arg(dir.path().join("out.csv"))
        .assert()
        .failure()
        .stderr(predicate::str::contains("line 3"))
        .stderr(predicate::str::contains("column \"n\""))
        .stderr(predicate::str::contains("\"lots\""));
    assert!(!dir.path().join("out.csv").exists());
}

#[test]
fn a_missing_column_is_named_with_the_columns_present_before_any_work() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,n\nA,1\n");
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "-c",
            cw.to_str().unwrap(),
            "--sum",
            "people",
            "-o",
        ])
        .arg(dir.path().join("out.csv"))
        .assert()
        .failure()
        .stderr(predicate::str::contains("no column \"people\""))
        .stderr(predicate::str::contains("code, n"));
}

#[test]
fn options_are_checked_before_reading_the_data() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,n,median_income\nA,1,5\n");
    let out = dir.path().join("out.csv");
    let run = |extra: &[&str]| {
        regionkey()
            .args([
                "apply",
                data.to_str().unwrap(),
                "-c",
                cw.to_str().unwrap(),
                "-o",
                out.to_str().unwrap(),
            ])
            .args(extra)
            .assert()
            .failure()
    };
    run(&["--ratio", "rate=n"]).stderr(predicate::str::contains("NAME=NUMERATOR/DENOMINATOR"));
    run(&["--mean", "median_income"]).stderr(predicate::str::contains("order statistic"));
    run(&["--sum", "n", "--min-coverage", "2"]).stderr(predicate::str::contains("between 0 and 1"));
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "-c",
            cw.to_str().unwrap(),
            "--sum",
            "n",
        ])
        .args(["-o", "/no/such/folder/out.csv"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("folder does not exist"));
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "--sum",
            "n",
            "-o",
            out.to_str().unwrap(),
        ])
        .assert()
        .failure()
        .stderr(predicate::str::contains(
            "--crosswalk FILE, or --to-vintage YEAR",
        ));
}

#[test]
fn the_same_inputs_give_the_same_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let mut text = String::from("code,year,n\n");
    for year in 2000..2040 {
        for (i, code) in ["A", "B", "C"].iter().enumerate() {
            text.push_str(&format!("{code},{year},{}\n", (year * 7 + i * 13) % 101));
        }
    }
    let data = write(dir.path(), "data.csv", &text);
    let mut outputs = Vec::new();
    for (name, threads) in [("one.csv", "1"), ("two.csv", "2")] {
        let out = dir.path().join(name);
        regionkey()
            .env("RAYON_NUM_THREADS", threads)
            .env("POLARS_MAX_THREADS", threads)
            .args([
                "apply",
                data.to_str().unwrap(),
                "-c",
                cw.to_str().unwrap(),
                "--period-column",
                "year",
            ])
            .args(["--sum", "n", "-q", "-o", out.to_str().unwrap()])
            .assert()
            .success();
        outputs.push(std::fs::read(&out).unwrap());
    }
    assert_eq!(outputs[0], outputs[1]);
    assert!(outputs[0].starts_with(b"code,year,n,n_coverage\nX,2000,"));
}

/// Runs apply on the unemployment file carried to the 2023 counties and
/// returns (results, report).
fn unemployment_to_2023(extra: &[&str]) -> (Vec<Row>, Vec<Row>, serde_json::Value) {
    let dir = tempfile::tempdir().unwrap();
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/apply/unemployment.tsv");
    let out = dir.path().join("out.csv");
    let report = dir.path().join("report.csv");
    regionkey()
        .arg("apply")
        .arg(&fixture)
        .args([
            "--code-column",
            "id",
            "--to-vintage",
            "2023",
            "--all-units",
            "--mean",
            "rate",
        ])
        .args([
            "-o",
            out.to_str().unwrap(),
            "--report",
            report.to_str().unwrap(),
            "-q",
        ])
        .args(extra)
        .assert()
        .success();
    let meta =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out.csv.json")).unwrap())
            .unwrap();
    (read_rows(&out), read_rows(&report), meta)
}

#[test]
fn the_unemployment_file_needs_weights_for_the_units_divided_since() {
    // Without weights for divided units, the run stops and names them all.
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/apply/unemployment.tsv");
    let dir = tempfile::tempdir().unwrap();
    regionkey()
        .arg("apply")
        .arg(&fixture)
        .args([
            "--code-column",
            "id",
            "--to-vintage",
            "2018",
            "--mean",
            "rate",
            "-o",
        ])
        .arg(dir.path().join("out.csv"))
        .assert()
        .failure()
        .stderr(predicate::str::contains("02201"))
        .stderr(predicate::str::contains("02232"))
        .stderr(predicate::str::contains("02280"))
        .stderr(predicate::str::contains("--crosswalk FILE"));
}

#[test]
fn the_unemployment_file_is_carried_onto_2023_counties_through_the_history() {
    let (rows, report, meta) = unemployment_to_2023(&["--skip-unweighted"]);
    let kind_of = |code: &str| -> Vec<&str> {
        report
            .iter()
            .filter(|r| r["code"] == code)
            .map(|r| r["kind"].as_str())
            .collect()
    };
    // Renamed one to one (Census Bureau change list): Wade Hampton -> Kusilvak,
    // Shannon -> Oglala Lakota; Bedford city absorbed into Bedford County.
    assert_eq!(kind_of("02270"), ["carried"]);
    assert_eq!(kind_of("46113"), ["carried"]);
    assert_eq!(kind_of("51515"), ["carried"]);
    // The renamed units' rates land unchanged on the new codes.
    let fixture = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/apply/unemployment.tsv"),
    )
    .unwrap();
    let rate_of = |id: &str| -> f64 {
        fixture
            .lines()
            .find_map(|l| l.strip_prefix(&format!("{id}\t")))
            .unwrap()
            .parse()
            .unwrap()
    };
    let kusilvak = find(&rows, "02158", None);
    assert_eq!(kusilvak["code_name"], "Kusilvak Census Area");
    assert!((num(kusilvak, "rate") - rate_of("2270")).abs() < 1e-9);
    assert_eq!(num(kusilvak, "rate_coverage"), 1.0);
    assert!((num(find(&rows, "46102", None), "rate") - rate_of("46113")).abs() < 1e-9);
    // Bedford County keeps its own rate: the city's share of the county is unknown,
    // so a target-share mean leaves the city out (and says so in the report).
    assert!((num(find(&rows, "51019", None), "rate") - rate_of("51019")).abs() < 1e-9);
    // Divided since the file's vintage, with no weights at hand: reported, rows left out.
    for code in ["02201", "02232", "02280"] {
        assert_eq!(kind_of(code), ["divided-without-weights"], "{code}");
    }
    // Connecticut's counties and Valdez-Cordova are divided too; whether they
    // have weights depends on the shipped 2017 -> 2023 crosswalk being present.
    let shipped = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("crosswalks/us-counties-2017-2023.csv")
        .exists();
    // Middlesex (09007) lies wholly in one planning region (09130): carried, not divided.
    assert_eq!(kind_of("09007"), ["carried"]);
    for code in [
        "02261", "09001", "09003", "09005", "09009", "09011", "09013", "09015",
    ] {
        let expected = if shipped {
            "divided"
        } else {
            "divided-without-weights"
        };
        assert_eq!(kind_of(code), [expected], "{code}");
    }
    // Every 2023 county is in the output; those no data reaches have coverage 0 and no value.
    // Kalawao (15005) is absent from the file itself.
    let kalawao = find(&rows, "15005", None);
    assert_eq!(kalawao["rate"], "");
    assert_eq!(num(kalawao, "rate_coverage"), 0.0);
    // Hoonah-Angoon (02105) and Skagway (02230) came from 02232, which has no weights here.
    assert_eq!(num(find(&rows, "02105", None), "rate_coverage"), 0.0);
    assert_eq!(num(find(&rows, "02230", None), "rate_coverage"), 0.0);
    // An ordinary county is carried as it is.
    assert!((num(find(&rows, "01001", None), "rate") - rate_of("1001")).abs() < 1e-9);
    // Every data row is accounted for: allocated, or reported as left out.
    let left_out: u64 = report
        .iter()
        .filter(|r| {
            [
                "divided-without-weights",
                "unknown-code",
                "unreadable-code",
                "unmatched-code",
            ]
            .contains(&r["kind"].as_str())
        })
        .map(|r| r["rows"].parse::<u64>().unwrap())
        .sum();
    assert_eq!(meta["counts"]["data_rows"], 3218);
    assert_eq!(
        meta["counts"]["rows_allocated"].as_u64().unwrap() + left_out,
        3218
    );
}

#[test]
fn a_table_whose_periods_use_two_vintages_is_harmonized_in_one_call() {
    // Connecticut: 2020 on the old counties, 2022 on the planning regions.
    // Weights for Fairfield (09001) rounded from the change table's notes
    // ("about 22% of the county and 98% of the region", ...); those for New
    // Haven (09009) made up by hand.
    let dir = tempfile::tempdir().unwrap();
    let cw = write(
        dir.path(),
        "ct.csv",
        "from_code,to_code,weight,target_share,basis
09001,09120,0.22,0.98,area
09001,09140,0.06,0.08,area
09001,09190,0.72,0.85,area
09009,09140,0.6,0.5,area
09009,09170,0.4,1.0,area
",
    );
    let data = write(
        dir.path(),
        "data.csv",
        "year,code,n\n2020,9001,1000\n2022,09120,300\n2022,09140,200\n2022,09190,700\n",
    );
    let out = dir.path().join("out.csv");
    let report = dir.path().join("report.csv");
    regionkey()
        .args([
            "apply",
            data.to_str().unwrap(),
            "--to-vintage",
            "2023",
            "--all-units",
            "-c",
            cw.to_str().unwrap(),
        ])
        .args([
            "--period-column",
            "year",
            "--sum",
            "n",
            "-q",
            "-o",
            out.to_str().unwrap(),
        ])
        .args(["--report", report.to_str().unwrap()])
        .assert()
        .success();
    let rows = read_rows(&out);
    // 2020, Greater Bridgeport (09120): 1000 * 0.22 = 220; its only old-vintage
    // source in the table is 09001 (share 0.98 of 0.98): coverage 1.
    let r = find(&rows, "09120", Some("2020"));
    assert_eq!((num(r, "n"), num(r, "n_coverage")), (220.0, 1.0));
    // 2020, Naugatuck Valley (09140): 1000 * 0.06 = 60. Its other pieces have
    // no data: 09009 from the given crosswalk (share 0.5) and the pieces of
    // the other old counties from the shipped 2017 -> 2023 crosswalk (their
    // target shares read from crosswalks/us-counties-2017-2023.csv here), so
    // coverage = 0.08 / (0.08 + 0.5 + those shares).
    let shipped = std::fs::read_to_string("crosswalks/us-counties-2017-2023.csv").unwrap();
    let others: f64 = shipped
        .lines()
        .map(|l| l.split(',').collect::<Vec<_>>())
        .filter(|f| f[1] == "09140" && f[0] != "09001" && f[0] != "09009")
        .map(|f| f[3].parse::<f64>().unwrap())
        .sum();
    assert!(
        others > 0.0,
        "Naugatuck Valley takes in parts of other old counties"
    );
    let r = find(&rows, "09140", Some("2020"));
    assert_eq!(num(r, "n"), 60.0);
    assert!(
        (num(r, "n_coverage") - 0.08 / (0.58 + others)).abs() < 1e-6,
        "{}",
        r["n_coverage"]
    );
    // 2020, South Central (09170): made only of 09009, absent: empty, coverage 0.
    let r = find(&rows, "09170", Some("2020"));
    assert_eq!((r["n"].as_str(), num(r, "n_coverage")), ("", 0.0));
    // 2022 on the regions themselves: carried as they are, coverage 1.
    let r = find(&rows, "09140", Some("2022"));
    assert_eq!((num(r, "n"), num(r, "n_coverage")), (200.0, 1.0));
    // A county outside Connecticut has no data in either year.
    assert_eq!(num(find(&rows, "01001", Some("2022")), "n_coverage"), 0.0);
    let report = read_rows(&report);
    assert!(report
        .iter()
        .any(|r| r["kind"] == "from-crosswalk" && r["code"] == "09001"));
    assert!(report
        .iter()
        .any(|r| r["kind"] == "absent-source" && r["code"] == "09009" && r["period"].is_empty()));
}

/// `num / den` written exactly to `sig` significant digits (rounded half
/// up), trailing zeros dropped: an exact rational computation to check the
/// written figures against.
fn exact_decimal(num: i128, den: i128, sig: usize) -> String {
    assert!(num > 0 && den > 0);
    // Digits of num/den, with the position of the decimal point.
    let int = num / den;
    let mut rem = num % den;
    let mut digits: Vec<u8> = int.to_string().bytes().map(|b| b - b'0').collect();
    let mut point = digits.len();
    if int == 0 {
        digits.clear();
        point = 0;
        // Leading zeros after the point are not significant.
        while rem * 10 < den {
            rem *= 10;
            digits.push(0);
        }
    }
    let lead = digits.iter().position(|&d| d != 0).unwrap_or(digits.len());
    while digits.len() < lead + sig + 1 {
        rem *= 10;
        digits.push((rem / den) as u8);
        rem %= den;
    }
    let up = digits[lead + sig] >= 5;
    digits.truncate(lead + sig);
    if up {
        let mut i = digits.len();
        loop {
            if i == 0 {
                digits.insert(0, 1);
                point += 1;
                break;
            }
            i -= 1;
            if digits[i] == 9 {
                digits[i] = 0;
            } else {
                digits[i] += 1;
                break;
            }
        }
    }
    while digits.len() < point {
        digits.push(0);
    }
    let text = |d: &[u8]| d.iter().map(|d| (b'0' + d) as char).collect::<String>();
    let int_part = text(&digits[..point]);
    let int_part = int_part.trim_start_matches('0');
    let frac = text(&digits[point..]);
    let frac = frac.trim_end_matches('0');
    let int_part = if int_part.is_empty() { "0" } else { int_part };
    if frac.is_empty() {
        int_part.to_string()
    } else {
        format!("{int_part}.{frac}")
    }
}

#[test]
fn figures_keep_their_digits_as_an_exact_rational_computation_gives_them() {
    // Guards: a rate of 0.0010547 written as 0.001055, counts written as
    // 315.000000, and every rate turned into 0.00 by --decimals 2.
    // A: 0.3 in X, 0.7 in Y; B wholly in X; C wholly in Z.
    let dir = tempfile::tempdir().unwrap();
    let cw = write(
        dir.path(),
        "cw.csv",
        "from_code,to_code,weight,target_share,basis\nA,X,0.3,0.5,area\nA,Y,0.7,1,area\nB,X,1,0.5,area\nC,Z,1,1,area\n",
    );
    let data = write(
        dir.path(),
        "data.csv",
        "code,n,d\nA,10547,10000000\nB,1,3\nC,315,1000\n",
    );
    let run = |extra: &[&str], name: &str| -> Vec<Row> {
        let out = dir.path().join(name);
        regionkey()
            .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
            .args(["--sum", "n,d", "--ratio", "rate=n/d", "-q", "-o"])
            .arg(&out)
            .args(extra)
            .assert()
            .success();
        read_rows(&out)
    };
    let rows = run(&[], "out.csv");
    // Exact rationals (weights 3/10 and 7/10):
    // X: n = 3/10 * 10547 + 1 = 31651/10; d = 3/10 * 10^7 + 3 = 3000003;
    //    rate = 31651 / 30000030.
    // Y: n = 7/10 * 10547 = 73829/10; d = 7 * 10^6; rate = 73829 / 7e7 = 10547 / 1e7.
    // Z: n = 315, d = 1000, rate = 315 / 1000.
    let x = find(&rows, "X", None);
    assert_eq!(x["n"], exact_decimal(31651, 10, 15));
    assert_eq!(x["d"], "3000003");
    assert_eq!(x["rate"], exact_decimal(31651, 30000030, 15));
    let y = find(&rows, "Y", None);
    assert_eq!(y["n"], exact_decimal(73829, 10, 15));
    assert_eq!(y["rate"], exact_decimal(10547, 10_000_000, 15));
    assert_eq!(y["rate"], "0.0010547");
    let z = find(&rows, "Z", None);
    assert_eq!((z["n"].as_str(), z["rate"].as_str()), ("315", "0.315"));
    // A fixed format is still there when asked for.
    let fixed = run(&["--decimals", "2"], "fixed.csv");
    let z = find(&fixed, "Z", None);
    assert_eq!((z["n"].as_str(), z["rate"].as_str()), ("315.00", "0.32"));
    assert_eq!(find(&fixed, "Y", None)["rate"], "0.00");
}

#[test]
fn the_exact_decimal_helper_rounds_as_written_by_hand() {
    assert_eq!(exact_decimal(1, 3, 15), "0.333333333333333");
    assert_eq!(exact_decimal(2, 3, 15), "0.666666666666667");
    assert_eq!(exact_decimal(31651, 10, 15), "3165.1");
    // 999999999999999.9 rounds up to sixteen digits.
    assert_eq!(
        exact_decimal(9_999_999_999_999_999, 10, 15),
        "1000000000000000"
    );
}

#[test]
fn summing_a_column_named_like_a_rate_is_refused_unless_allowed() {
    // Guards: --sum on rate, pct, share... was accepted and added rates up.
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,unemployment_rate\nA,5\nB,7\n");
    let base = |extra: &[&str]| {
        let mut c = regionkey();
        c.args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
            .args(["--sum", "unemployment_rate", "-q", "-o"])
            .arg(dir.path().join("out.csv"))
            .args(extra);
        c
    };
    base(&[])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("looks like a rate"))
        .stderr(predicate::str::contains("--ratio"))
        .stderr(predicate::str::contains("--allow-name unemployment_rate"));
    base(&["--allow-name", "unemployment_rate"])
        .assert()
        .success();
}

#[test]
fn a_missing_marker_is_added_to_na_not_put_in_its_place() {
    // Guards: --missing X replaced the default NA, so NA became "not a number".
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,n\nA,NA\nB,-\nC,5\n");
    let out = dir.path().join("out.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
        .args(["--sum", "n", "--missing", "-", "-q", "-o"])
        .arg(&out)
        .assert()
        .success();
    let rows = read_rows(&out);
    // X = C's 5 (A unknown), coverage 0.25 (C's share of X); Y: nothing known.
    let x = find(&rows, "X", None);
    assert_eq!((num(x, "n"), num(x, "n_coverage")), (5.0, 0.25));
    assert_eq!(find(&rows, "Y", None)["n"], "");
}

#[test]
fn the_share_outside_every_target_is_reported_and_every_count_balances() {
    // Guards: 1,571 cases in became 1,503.9 out with an empty report.
    // A: 0.8 in X, 0.2 outside every target; B wholly in X; Q is unknown.
    let dir = tempfile::tempdir().unwrap();
    let cw = write(
        dir.path(),
        "cw.csv",
        "from_code,to_code,weight,target_share,basis\nA,X,0.8,0.6,area\nA,,0.2,,area\nB,X,1,0.4,area\n",
    );
    let data = write(
        dir.path(),
        "data.csv",
        "code,year,cases\nA,2020,1000\nB,2020,571\nQ,2020,50\nA,2021,10\nB,2021,1\n",
    );
    let out = dir.path().join("out.csv");
    let report = dir.path().join("report.csv");
    // 2020: in 1621 = allocated 800 + 571 + outside 200 + not allocated (Q) 50.
    // 2021: in 11 = allocated 8 + 1 + outside 2.
    // Whole run: in 1632 = allocated 1380 + outside 202 + not allocated 50.
    regionkey()
        .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
        .args(["--period-column", "year", "--sum", "cases", "-o"])
        .arg(&out)
        .arg("--report")
        .arg(&report)
        .assert()
        .success()
        .stderr(predicate::str::contains(
            "cases: in 1632 = allocated 1380 + outside every target 202 + not allocated 50",
        ));
    let items = read_rows(&report);
    let outside: Vec<(&str, &str)> = items
        .iter()
        .filter(|r| r["kind"] == "outside")
        .map(|r| (r["period"].as_str(), r["detail"].as_str()))
        .collect();
    assert_eq!(outside.len(), 2, "{items:?}");
    assert_eq!(outside[0].0, "2020");
    assert!(
        outside[0].1.starts_with("cases: 200 of 1571 (12.73 %)"),
        "{}",
        outside[0].1
    );
    assert!(
        outside[1].1.starts_with("cases: 2 of 11"),
        "{}",
        outside[1].1
    );
    let meta: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out.csv.json")).unwrap())
            .unwrap();
    assert_eq!(meta["balance"]["cases"]["outside_every_target"], 202.0);
    assert_eq!(meta["balance"]["cases"]["not_allocated"], 50.0);
}

#[test]
fn a_users_crosswalk_of_another_vintage_does_not_make_shipped_sources_count_as_missing() {
    // Guards: merged with the shipped 2017 -> 2023 table, a user's table from
    // 2000s Alaska codes counted the shipped file's 2017 sources of the same
    // land as missing (coverage 0.45-0.49 for units whose land all has data).
    // 02280 Wrangell-Petersburg (2000s) became 02275 Wrangell and 02195
    // Petersburg (Census Bureau change list); the weights are made up, the
    // target shares say each new unit is wholly made of 02280.
    let shipped = std::fs::read_to_string("crosswalks/us-counties-2017-2023.csv").unwrap();
    assert!(
        shipped.lines().any(|l| l.starts_with("02275,02275,")),
        "the shipped table has 02275 as a 2017 source"
    );
    let dir = tempfile::tempdir().unwrap();
    let cw = write(
        dir.path(),
        "ak.csv",
        "from_code,to_code,weight,target_share,basis\n02280,02195,0.6,1,area\n02280,02275,0.4,1,area\n",
    );
    let data = write(dir.path(), "data.csv", "code,n\n02280,100\n");
    let out = dir.path().join("out.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "--to-vintage", "2023"])
        .args(["-c", cw.to_str().unwrap(), "--sum", "n", "-q", "-o"])
        .arg(&out)
        .assert()
        .success();
    let rows = read_rows(&out);
    for (code, n) in [("02195", 60.0), ("02275", 40.0)] {
        let r = find(&rows, code, None);
        assert_eq!((num(r, "n"), num(r, "n_coverage")), (n, 1.0), "{code}");
    }
}

#[test]
fn report_lines_agree_with_the_figures_beside_them() {
    // Guards: "absent-source ... coverage is lower" for a unit whose
    // coverage is 1, and "codes carried: 8" when 2 were.
    // Connecticut: 2020 on the old county 09001 (Fairfield), 2022 on the
    // planning regions it became (Census Bureau, 2022 change); weights as in
    // the two-vintage test above.
    let dir = tempfile::tempdir().unwrap();
    let cw = write(
        dir.path(),
        "ct.csv",
        "from_code,to_code,weight,target_share,basis
09001,09120,0.22,0.98,area
09001,09140,0.06,0.08,area
09001,09190,0.72,0.85,area
",
    );
    let data = write(
        dir.path(),
        "data.csv",
        "year,code,n\n2020,9001,1000\n2022,09120,300\n2022,09140,200\n2022,09190,700\n",
    );
    let out = dir.path().join("out.csv");
    let report = dir.path().join("report.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "--to-vintage", "2023"])
        .args(["-c", cw.to_str().unwrap(), "--period-column", "year"])
        .args(["--sum", "n", "-o"])
        .arg(&out)
        .arg("--report")
        .arg(&report)
        .assert()
        .success()
        // Only 09001 was carried; the other sources of the tables hold no data.
        .stderr(predicate::str::contains(
            "codes of the data carried from earlier vintages: 1",
        ));
    let rows = read_rows(&out);
    let items = read_rows(&report);
    // 09001 has no row in 2022, but the regions it became have theirs.
    let line = items
        .iter()
        .find(|r| r["kind"] == "absent-source" && r["code"] == "09001" && r["period"] == "2022")
        .expect("09001 is absent in 2022");
    assert!(line["detail"].contains("no coverage is lower"), "{line:?}");
    for t in ["09120", "09140", "09190"] {
        assert_eq!(num(find(&rows, t, Some("2022")), "n_coverage"), 1.0, "{t}");
    }
    // Where an absent source does lower coverage, the line names the unit.
    for r in items.iter().filter(|r| r["kind"] == "absent-source") {
        if let Some(list) = r["detail"].split("the coverage of ").nth(1) {
            for t in list.trim_end_matches(" is lower").split(", ") {
                let p = (!r["period"].is_empty()).then_some(r["period"].as_str());
                let rows_of_t: Vec<&Row> = rows
                    .iter()
                    .filter(|x| x["code"] == t && p.is_none_or(|p| x["year"] == p))
                    .collect();
                assert!(
                    rows_of_t.iter().any(|x| num(x, "n_coverage") < 1.0),
                    "{r:?} but {t} is fully covered"
                );
            }
        }
    }
}

#[test]
fn rows_whose_code_came_from_a_decision_are_counted_and_named_as_such() {
    // Guards: rows a decision matched to no unit were reported as
    // "missing-code: rows with an empty code", and rows whose code came
    // from a decision were not named at all. The table is shaped as
    // `regionkey match` writes it (match_status, match_method); the
    // decided codes are those of the demo's decisions (24005 Baltimore
    // County, 51760 Richmond city), 46113 Shannon County SD is carried
    // (renamed Oglala Lakota County, 46102, in 2015: Census Bureau list of
    // county changes, from memory).
    let dir = tempfile::tempdir().unwrap();
    let data = write(
        dir.path(),
        "matched.csv",
        "county,year,n,code,match_status,match_method
Baltimore,2020,5,24005,matched,decision
Baltimore,2021,6,24005,matched,decision
Richmond,2021,7,51760,matched,decision
Shannon,2014,8,46113,matched,decision
Chicago,2020,100,,unmatched,decision
Chicago,2021,101,,unmatched,decision
Nowhere,2020,9,,unmatched,
Autauga,2020,3,01001,matched,exact
",
    );
    let out = dir.path().join("out.csv");
    let report = dir.path().join("report.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "--to-vintage", "2023"])
        .args(["--code-column", "code", "--period-column", "year"])
        .args(["--sum", "n", "-o"])
        .arg(&out)
        .arg("--report")
        .arg(&report)
        .assert()
        .success()
        .stderr(predicate::str::contains("decided: 3 (4 rows)"))
        .stderr(predicate::str::contains("decided-none: 1 (2 rows)"))
        .stderr(predicate::str::contains("missing-code: 1 (1 rows)"))
        // 201 of the decided-none rows and 9 of the plain missing row.
        .stderr(predicate::str::contains("not allocated 210"));
    let items = read_rows(&report);
    let kind = |k: &str| -> Vec<&Row> { items.iter().filter(|r| r["kind"] == k).collect() };
    let decided: Vec<(&str, &str, &str)> = kind("decided")
        .iter()
        .map(|r| {
            (
                r["code"].as_str(),
                r["rows"].as_str(),
                r["first_line"].as_str(),
            )
        })
        .collect();
    assert_eq!(
        decided,
        vec![
            ("24005", "2", "2"),
            ("46113", "1", "5"),
            ("51760", "1", "4")
        ]
    );
    let none = kind("decided-none");
    assert_eq!(none.len(), 1);
    assert_eq!(
        (none[0]["rows"].as_str(), none[0]["first_line"].as_str()),
        ("2", "6")
    );
    assert!(none[0]["detail"].contains("decision"), "{:?}", none[0]);
    let missing = kind("missing-code");
    assert_eq!(missing.len(), 1);
    assert_eq!(
        (
            missing[0]["rows"].as_str(),
            missing[0]["first_line"].as_str()
        ),
        ("1", "8")
    );
    // A decided code keeps its other lines: 46113 is still reported carried.
    assert!(kind("carried").iter().any(|r| r["code"] == "46113"));
    // The sidecar counts them too.
    let meta: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out.csv.json")).unwrap())
            .unwrap();
    let counts = &meta["counts"];
    assert_eq!(counts["rows_with_decided_codes"], 4, "{meta}");
    assert_eq!(counts["codes_decided"], 3);
    assert_eq!(counts["rows_decided_none"], 2);
    // The figures of decided codes are allocated like any other: 5 + 6 + 7
    // + 8 + 3 of the 239 in are allocated.
    let rows = read_rows(&out);
    let total: f64 = rows.iter().filter_map(|r| r["n"].parse::<f64>().ok()).sum();
    assert_eq!(total, 29.0);
}

#[test]
fn a_code_column_of_names_or_a_state_column_of_years_is_refused_naming_it() {
    // Guards: both exited 0 with every row unmatched.
    let dir = tempfile::tempdir().unwrap();
    let data = write(
        dir.path(),
        "data.csv",
        "county,year,fips,n\nCook County,2020,17031,5\nKing County,2020,53033,7\n",
    );
    let out = dir.path().join("out.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "--to-vintage", "2023"])
        .args(["--code-column", "county", "--sum", "n", "-o"])
        .arg(&out)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("line 2"))
        .stderr(predicate::str::contains("column \"county\""))
        .stderr(predicate::str::contains("\"Cook County\""));
    regionkey()
        .args(["apply", data.to_str().unwrap(), "--to-vintage", "2023"])
        .args(["--code-column", "fips", "--state-column", "year"])
        .args(["--sum", "n", "-o"])
        .arg(&out)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("column \"year\""))
        .stderr(predicate::str::contains("\"2020\""));
    // With a crosswalk of the user's own keys: no code is one of its sources.
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    regionkey()
        .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
        .args(["--code-column", "county", "--sum", "n", "-o"])
        .arg(&out)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("column \"county\""))
        .stderr(predicate::str::contains("\"Cook County\""));
    assert!(!out.exists());
}

#[test]
fn the_output_format_follows_the_extension_and_keeps_the_users_column_names() {
    // Guards: -o out.parquet wrote CSV text; a TSV input gave a TSV ".csv";
    // the period column "Year" came out as "period".
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(
        dir.path(),
        "data.tsv",
        "code\tYear\tn\nA\t2020\t10\nB\t2020\t20\nC\t2020\t30\n",
    );
    let run = |name: &str| {
        let out = dir.path().join(name);
        let a = regionkey()
            .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
            .args(["--period-column", "Year", "--sum", "n", "-q", "-o"])
            .arg(&out)
            .assert();
        (out, a)
    };
    let (csv, a) = run("out.csv");
    a.success();
    let text = std::fs::read_to_string(&csv).unwrap();
    // X = 10 * 0.6 + 30 = 36; Y = 10 * 0.4 + 20 = 24.
    assert_eq!(
        text,
        "code,Year,n,n_coverage\nX,2020,36,1.000000\nY,2020,24,1.000000\n"
    );
    let (tsv, a) = run("out.tsv");
    a.success();
    assert_eq!(
        std::fs::read_to_string(&tsv).unwrap(),
        text.replace(',', "\t")
    );
    let (parquet, a) = run("out.parquet");
    a.success();
    let t = regionkey::io::table::read_table(&parquet, Default::default()).unwrap();
    assert_eq!(t.headers, ["code", "Year", "n", "n_coverage"]);
    assert_eq!(&t.records[0][0], "X");
    assert_eq!(t.records[0][2].parse::<f64>().unwrap(), 36.0);
    let (bad, a) = run("out.xlsx");
    a.code(1)
        .stderr(predicate::str::contains(".xlsx"))
        .stderr(predicate::str::contains(".csv, .tsv or .parquet"));
    assert!(!bad.exists());
}

#[test]
fn an_added_column_that_collides_with_a_users_name_is_the_only_one_renamed() {
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,n,n_coverage\nA,1,2\n");
    let out = dir.path().join("out.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
        .args(["--sum", "n,n_coverage", "-q", "-o"])
        .arg(&out)
        .assert()
        .success();
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(
        text.lines().next().unwrap(),
        "code,n,rk_n_coverage,n_coverage,n_coverage_coverage"
    );
}

#[test]
fn the_sidecar_names_the_hash_of_its_output_and_stale_temporary_files_are_removed() {
    // Guards: a killed run left a new CSV beside the old sidecar, and hidden
    // temporary files that later runs never cleaned.
    use sha2::Digest;
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let data = write(dir.path(), "data.csv", "code,n\nA,1\nB,2\n");
    // A process id above the kernel's limit (4194304) is never running.
    let stale = write(dir.path(), ".regionkey-4999999-a1b2c3.tmp", "half a file");
    let out = dir.path().join("out.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
        .args(["--sum", "n", "-q", "-o"])
        .arg(&out)
        .arg("--report")
        .arg(dir.path().join("report.csv"))
        .assert()
        .success();
    if cfg!(target_os = "linux") {
        assert!(!stale.exists());
    }
    let meta: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out.csv.json")).unwrap())
            .unwrap();
    let bytes = std::fs::read(&out).unwrap();
    let sha: String = sha2::Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert_eq!(meta["output"]["sha256"], sha);
    assert_eq!(meta["output"]["bytes"], bytes.len());
    // Nothing else is left in the folder.
    let mut names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "cw.csv",
            "data.csv",
            "out.csv",
            "out.csv.json",
            "report.csv"
        ]
    );
}

#[test]
fn a_crosswalk_whose_codes_lost_their_leading_zero_still_carries_the_data() {
    // Guards: an overlay of integer keys wrote 2201 for 02201, and apply
    // --to-vintage --crosswalk then said "no crosswalk gives their weights:
    // 02201" while the file held them. 02201 Prince of Wales-Outer
    // Ketchikan was divided (Census Bureau change list) into 02198 and
    // 02130; the weights are made up.
    let dir = tempfile::tempdir().unwrap();
    let cw = write(
        dir.path(),
        "ak.csv",
        "from_code,to_code,weight,target_share,basis\n2201,2198,0.75,1,area\n2201,2130,0.25,0.1,area\n",
    );
    let data = write(dir.path(), "data.csv", "code,n\n02201,400\n");
    let out = dir.path().join("out.csv");
    regionkey()
        .args(["apply", data.to_str().unwrap(), "--to-vintage", "2023"])
        .args(["-c", cw.to_str().unwrap(), "--sum", "n", "-q", "-o"])
        .arg(&out)
        .assert()
        .success();
    let rows = read_rows(&out);
    assert_eq!(num(find(&rows, "02198", None), "n"), 300.0);
    assert_eq!(num(find(&rows, "02130", None), "n"), 100.0);
}

#[test]
fn the_data_is_read_as_every_table_is_read() {
    // Guards: the data reader disagreed with the table reader on line
    // numbers after quoted line breaks and with CRLF, on Latin-1, on blank
    // lines and on column-name case, and let NUL bytes through.
    let dir = tempfile::tempdir().unwrap();
    let cw = write(dir.path(), "cw.csv", CROSSWALK);
    let out = dir.path().join("out.csv");
    let run = |name: &str, bytes: &[u8], column: &str| {
        let data = dir.path().join(name);
        std::fs::write(&data, bytes).unwrap();
        regionkey()
            .args(["apply", data.to_str().unwrap(), "-c", cw.to_str().unwrap()])
            .args(["--period-column", column, "--sum", "n", "-q", "-o"])
            .arg(&out)
            .assert()
    };
    // A quoted line break (lines 2-3), CRLF endings and a blank line (5):
    // the bad value is on line 6.
    run(
        "crlf.csv",
        b"code,Year,n,note\r\nA,2020,1,\"two\r\nlines\"\r\nB,2020,2,x\r\n\r\nC,2020,lots,y\r\n",
        "year",
    )
    .code(1)
    .stderr(predicate::str::contains("line 6"))
    .stderr(predicate::str::contains("column \"n\""));
    // The same without the bad value: blank lines are not rows, and
    // --period-column year finds "Year" and keeps its name.
    run(
        "ok.csv",
        b"code,Year,n,note\r\nA,2020,1,\"two\r\nlines\"\r\nB,2020,2,x\r\n\r\nC,2020,3,y\r\n",
        "year",
    )
    .success();
    let rows = read_rows(&out);
    assert_eq!(rows.len(), 2);
    let x = rows.iter().find(|r| r["code"] == "X").unwrap();
    // X = 1 * 0.6 + 3 = 3.6, under the file's own "Year".
    assert_eq!((x["Year"].as_str(), num(x, "n")), ("2020", 3.6));
    // Latin-1 periods are decoded as the table reader decodes them.
    run("latin1.csv", b"code,period,n\nA,Ene\xf1o,1\n", "period")
        .success()
        .stderr(predicate::str::contains("Latin-1"));
    assert!(std::fs::read_to_string(&out)
        .unwrap()
        .contains("Ene\u{f1}o"));
    // NUL bytes: an error naming line and column.
    run(
        "nul.csv",
        b"code,period,n\nA,2020,1\nB,2020,\x002\n",
        "period",
    )
    .code(1)
    .stderr(predicate::str::contains("line 3"))
    .stderr(predicate::str::contains("column \"n\""))
    .stderr(predicate::str::contains("NUL"));
}
