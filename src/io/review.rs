//! The review list of `regionkey match` and the decisions file read back.
//!
//! The review file is CSV with one row per distinct (name, state) that the
//! matcher could not settle (status `review` or `unmatched`) or that a
//! decision settled:
//!
//! `name,state,status,rows,reason,candidate_1_code,candidate_1_name,candidate_1_score,...,candidate_5_score,chosen_code`
//!
//! A user fills in `chosen_code` (a code of the vintage, or [`NONE`] to leave
//! the name unmatched) and passes the file back with `--decisions`. Any CSV
//! or TSV with columns `name` and `chosen_code` (and `state` when the input
//! has a state column) is a decisions file; rows with an empty
//! `chosen_code` are skipped.

use std::io::Write;
use std::path::Path;

use crate::core::matcher::Candidate;
use crate::error::{Error, Location, Result};
use crate::io::output::{fixed, write_to, Target};
use crate::io::table::{read_table, ReadOptions};

/// Candidates written per review row.
pub const REVIEW_CANDIDATES: usize = 5;

/// The word in `chosen_code` that means "not a unit; leave unmatched".
pub const NONE: &str = "none";

/// One row of the review list.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewItem {
    /// The name as written in the input (trimmed).
    pub name: String,
    /// The state as written in the input (trimmed; empty without a state column).
    pub state: String,
    /// `review` or `unmatched` (what the matcher said), or `matched` when
    /// only a decision brought the row here.
    pub status: String,
    /// How many input rows carry this (name, state).
    pub rows: u64,
    /// Why it needs a decision.
    pub reason: String,
    /// Ranked candidates (at most [`REVIEW_CANDIDATES`] are written).
    pub candidates: Vec<Candidate>,
    /// The decision already taken, if any (a code or [`NONE`]).
    pub chosen: String,
}

/// The header of the review file.
pub fn review_headers() -> Vec<String> {
    let mut h: Vec<String> = ["name", "state", "status", "rows", "reason"]
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

/// What a decision says.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Choice {
    /// This code (as written; checked against the vintage by the caller).
    Code(String),
    /// Not a unit: leave unmatched.
    NotAUnit,
}

/// One filled-in row of a decisions file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Decision {
    /// The name as written in the input (trimmed).
    pub name: String,
    /// The state as written (trimmed; empty when the file has no `state`).
    pub state: String,
    /// The decision.
    pub choice: Choice,
    /// Where `chosen_code` of this row is (for messages).
    pub location: Location,
}

/// Reads the decisions in `path`: every row with a non-empty `chosen_code`.
/// Two rows for the same (name, state) with different choices are an error
/// naming the second.
pub fn read_decisions(path: &Path) -> Result<Vec<Decision>> {
    let table = read_table(path, ReadOptions::default())?;
    let name = table.column("name")?;
    let chosen = table.column("chosen_code")?;
    let state = table.column("state").ok();
    let mut out: Vec<Decision> = Vec::new();
    let mut seen: std::collections::HashMap<(String, String), usize> =
        std::collections::HashMap::new();
    for (row, record) in table.records.iter().enumerate() {
        let text = record[chosen].trim();
        if text.is_empty() {
            continue;
        }
        let choice = if text.eq_ignore_ascii_case(NONE) {
            Choice::NotAUnit
        } else {
            Choice::Code(text.to_string())
        };
        let d = Decision {
            name: record[name].trim().to_string(),
            state: state.map_or(String::new(), |s| record[s].trim().to_string()),
            choice,
            location: table.location(row, chosen),
        };
        let k = (d.name.clone(), d.state.clone());
        if let Some(&first) = seen.get(&k) {
            if out[first].choice != d.choice {
                return Err(Error::input(
                    d.location,
                    format!(
                        "a second, different decision for {:?}{} (the first is at {}); keep one",
                        d.name,
                        if d.state.is_empty() {
                            String::new()
                        } else {
                            format!(" in {:?}", d.state)
                        },
                        out[first].location
                    ),
                ));
            }
            continue;
        }
        seen.insert(k, out.len());
        out.push(d);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_written_review_file_reads_back_as_decisions() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("review.csv");
        let item = |name: &str, chosen: &str| ReviewItem {
            name: name.into(),
            state: "MD".into(),
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
                item("Baltimore", "24510"),
                item("Nowhere", ""),
                item("Total", "None"),
            ],
        )
        .unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(
            text.starts_with("name,state,status,rows,reason,candidate_1_code,"),
            "{text}"
        );
        assert!(text.contains("24005,Baltimore County,1.000"), "{text}");
        let d = read_decisions(&path).unwrap();
        assert_eq!(d.len(), 2);
        assert_eq!(d[0].choice, Choice::Code("24510".into()));
        assert_eq!(d[1].choice, Choice::NotAUnit);
        assert_eq!(d[1].location.line, Some(4));
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
}
