//! The review list of `regionkey match` and the decisions file read back.
//!
//! The review file is CSV with one row per (name, state) and run of years
//! that the matcher could not settle (status `review` or `unmatched`) or
//! that a decision settled:
//!
//! `name,state,years,status,rows,reason,candidate_1_code,candidate_1_name,candidate_1_score,...,candidate_5_score,chosen_code`
//!
//! `years` lists the years of the rows it covers as ranges joined by `;`
//! (`2000-2021;2023`). A user fills in `chosen_code` (a code, codes joined
//! by `+` for a unit made of several units, or [`NONE`] to leave the name
//! unmatched) and passes the file back with `--decisions`: each decision
//! applies to the years in its row's `years` (empty = every year; widen it
//! there). Any CSV or TSV with columns `name` and `chosen_code` (and
//! `state` when the input has a state column, `years` optionally) is a
//! decisions file; rows with an empty `chosen_code` are skipped.

use std::io::Write;
use std::path::Path;

pub use crate::core::decisions::{Choice, Decision, Decisions, Years, NONE};
pub use crate::core::match_table::ReviewItem;
use crate::error::{Error, Result};
use crate::io::output::{fixed, write_to, Target};
use crate::io::table::{read_table, ReadOptions};

/// Candidates written per review row.
pub const REVIEW_CANDIDATES: usize = 5;

/// The header of the review file.
pub fn review_headers() -> Vec<String> {
    let mut h: Vec<String> = ["name", "state", "years", "status", "rows", "reason"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    for k in 1..=REVIEW_CANDIDATES {
        h.push(format!("candidate_{k}_code"));
        h.push(format!("candidate_{k}_name"));
        h.push(format!("candidate_{k}_score"));
    }
    h.push("chosen_code".to_string());
    h
}

/// Writes the review list (CSV) atomically to `target`.
pub fn write_review(target: &Target, items: &[ReviewItem]) -> Result<()> {
    write_to(target, |w: &mut dyn Write| {
        let mut out = csv::Writer::from_writer(w);
        out.write_record(review_headers())?;
        for item in items {
            let mut row: Vec<String> = vec![
                item.name.clone(),
                item.state.clone(),
                item.years.to_string(),
                item.status.clone(),
                item.rows.to_string(),
                item.reason.clone(),
            ];
            for k in 0..REVIEW_CANDIDATES {
                match item.candidates.get(k) {
                    Some(c) => row.extend([c.code.clone(), c.name.clone(), fixed(c.score, 3)]),
                    None => row.extend([String::new(), String::new(), String::new()]),
                }
            }
            row.push(item.chosen.clone());
            out.write_record(&row)?;
        }
        out.flush()?;
        Ok(())
    })
}

/// Reads the decisions in `path`: every row with a non-empty `chosen_code`.
/// Two rows for the same (name, state) whose years overlap must agree; an
/// unreadable `years` or `chosen_code` is an error naming its line.
pub fn read_decisions(path: &Path) -> Result<Decisions> {
    let table = read_table(path, ReadOptions::default())?;
    let name = table.column("name")?;
    let chosen = table.column("chosen_code")?;
    let state = table.column("state").ok();
    let years = table.column("years").ok();
    let mut out: Vec<Decision> = Vec::new();
    for (row, record) in table.records.iter().enumerate() {
        let choice = match Choice::parse(&record[chosen]) {
            Ok(Some(c)) => c,
            Ok(None) => continue,
            Err(m) => return Err(Error::input(table.location(row, chosen), m)),
        };
        let years = match years {
            None => Years::all(),
            Some(y) => {
                Years::parse(&record[y]).map_err(|m| Error::input(table.location(row, y), m))?
            }
        };
        out.push(Decision {
            name: record[name].trim().to_string(),
            state: state.map_or(String::new(), |s| record[s].trim().to_string()),
            years,
            choice,
            location: table.location(row, chosen),
        });
    }
    Decisions::new(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::matcher::Candidate;

    #[test]
    fn a_written_review_file_reads_back_as_decisions() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("review.csv");
        let item = |name: &str, years: &str, chosen: &str| ReviewItem {
            name: name.into(),
            state: "MD".into(),
            years: Years::parse(years).unwrap(),
            status: "review".into(),
            rows: 3,
            reason: "2 units share this name, in Maryland".into(),
            candidates: vec![Candidate {
                code: "24005".into(),
                name: "Baltimore County".into(),
                score: 1.0,
            }],
            chosen: chosen.into(),
        };
        write_review(
            &Target::File(path.clone()),
            &[
                item("Baltimore", "2000-2021;2023", "24510"),
                item("Nowhere", "2020", ""),
                item("Total", "", "None"),
            ],
        )
        .unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(
            text.starts_with("name,state,years,status,rows,reason,candidate_1_code,"),
            "{text}"
        );
        assert!(
            text.contains("Baltimore,MD,2000-2021;2023,review,3,"),
            "{text}"
        );
        assert!(text.contains("24005,Baltimore County,1.000"), "{text}");
        let d = read_decisions(&path).unwrap();
        assert_eq!(d.len(), 2);
        let baltimore = d.find("Baltimore", "MD", 2010).unwrap();
        assert_eq!(baltimore.choice, Choice::Codes(vec!["24510".into()]));
        assert!(d.find("Baltimore", "MD", 2022).is_none());
        let total = d.find("Total", "MD", 1990).unwrap();
        assert_eq!(total.choice, Choice::NotAUnit);
        assert_eq!(total.location.line, Some(4));
    }

    #[test]
    fn two_different_decisions_for_one_name_are_refused_with_the_line() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("d.csv");
        std::fs::write(
            &path,
            "name,state,chosen_code\nBaltimore,MD,24510\nBaltimore,MD,24005\n",
        )
        .unwrap();
        let e = read_decisions(&path).unwrap_err().to_string();
        assert!(e.contains("line 3") && e.contains("chosen_code"), "{e}");
    }

    #[test]
    fn unreadable_years_or_codes_name_their_line_and_column() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("d.csv");
        std::fs::write(
            &path,
            "name,state,years,chosen_code\nHartford,CT,2022-2023,09110\nHartford,CT,from 2000,09003\n",
        )
        .unwrap();
        let e = read_decisions(&path).unwrap_err().to_string();
        assert!(e.contains("line 3") && e.contains("\"years\""), "{e}");
        std::fs::write(&path, "name,chosen_code\nNew York,36005++36047\n").unwrap();
        let e = read_decisions(&path).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("chosen_code"), "{e}");
    }
}
