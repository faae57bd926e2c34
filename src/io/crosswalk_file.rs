//! Crosswalk files: CSV with `from_code,to_code,weight,target_share,basis`,
//! sorted by codes, weights with 12 decimals so the bytes are stable.

use std::io::Write;
use std::path::Path;

use crate::core::chain::ChainError;
use crate::core::crosswalk::{CodeRepair, Crosswalk, CrosswalkRow};
use crate::core::fips::CodeForm;
use crate::error::{Error, Location, Result};
use crate::io::output::{fixed, write_csv_record};
use crate::io::table::{read_table, read_table_bytes, ReadOptions};

/// The column names of a crosswalk file, in order.
pub const COLUMNS: [&str; 5] = ["from_code", "to_code", "weight", "target_share", "basis"];

/// Decimals written for weights and shares.
pub const DECIMALS: usize = 12;

/// Writes a crosswalk as CSV (rows as given; call [`Crosswalk::sort`] first).
pub fn write_csv(w: &mut dyn Write, crosswalk: &Crosswalk) -> std::io::Result<()> {
    write_csv_record(w, &COLUMNS)?;
    for r in &crosswalk.rows {
        write_csv_record(
            w,
            &[
                r.from_code.as_str(),
                r.to_code.as_deref().unwrap_or(""),
                &fixed(r.weight, DECIMALS),
                &r.target_share.map_or(String::new(), |s| fixed(s, DECIMALS)),
                r.basis.as_str(),
            ],
        )?;
    }
    Ok(())
}

/// A crosswalk as read from a file, with where each row was and which codes
/// reading normalized.
#[derive(Debug, Clone)]
pub struct CrosswalkFile {
    /// The rows, codes normalized.
    pub crosswalk: Crosswalk,
    /// The line of each row in the file (the header is line 1).
    pub lines: Vec<u64>,
    /// The form of the source and of the target codes.
    pub forms: (CodeForm, CodeForm),
    /// Codes that were not written in their column's form ("2201" among
    /// five-digit codes), as read.
    pub repairs: Vec<CodeRepair>,
}

impl CrosswalkFile {
    /// Places a problem that [`crate::core::chain`] found in this
    /// crosswalk's rows at its line and column of `path`, in the project's
    /// words. `second` names the crosswalk whose sources an unlinked target
    /// code is missing from.
    pub fn locate(&self, path: &Path, e: &ChainError, second: Option<&Path>) -> Error {
        let rows = &self.crosswalk.rows;
        let lines_where = |f: &dyn Fn(&CrosswalkRow) -> bool| -> Vec<u64> {
            rows.iter()
                .zip(&self.lines)
                .filter(|(r, _)| f(r))
                .map(|(_, &l)| l)
                .collect()
        };
        let list = |lines: &[u64]| {
            let shown: Vec<String> = lines.iter().take(8).map(u64::to_string).collect();
            if lines.len() > 8 {
                format!("{}, ... ({} lines)", shown.join(", "), lines.len())
            } else {
                shown.join(", ")
            }
        };
        let at = |line: Option<&u64>, column: &str| {
            let l = Location::file(path).in_column(column);
            match line {
                Some(&n) => l.at_line(n),
                None => l,
            }
        };
        let to_text = |to: &str| {
            if to.is_empty() {
                "(outside every target)".to_string()
            } else {
                to.to_string()
            }
        };
        match e {
            ChainError::Duplicate { from, to, .. } => {
                let lines = lines_where(&|r| {
                    &r.from_code == from && r.to_code.as_deref().unwrap_or("") == to
                });
                Error::input(
                    at(lines.get(1), "to_code"),
                    format!(
                        "the pair {from} -> {} is on lines {}; each pair must appear once (add \
                         their weights into one row)",
                        to_text(to),
                        list(&lines)
                    ),
                )
            }
            ChainError::BadWeight {
                from, to, weight, ..
            } => {
                let lines = lines_where(&|r| {
                    &r.from_code == from
                        && r.to_code.as_deref().unwrap_or("") == to
                        && !(0.0..=1.0 + crate::core::chain::WEIGHT_SLACK).contains(&r.weight)
                });
                Error::input(
                    at(lines.first(), "weight"),
                    format!(
                        "the weight of {from} -> {} is {weight}; a weight is a share from 0 to 1",
                        to_text(to)
                    ),
                )
            }
            ChainError::Unbalanced { from, total, .. } => {
                let lines = lines_where(&|r| &r.from_code == from);
                Error::input(
                    at(lines.first(), "weight"),
                    format!(
                        "the weights of source {from} (line(s) {}) add up to {total:.9}, not 1; \
                         add the missing share as a row with an empty to_code (the part outside \
                         every target), or rebuild the crosswalk",
                        list(&lines)
                    ),
                )
            }
            ChainError::Unlinked { count, listed } => {
                let codes: Vec<&str> = listed.split(", ").collect();
                let lines =
                    lines_where(&|r| r.to_code.as_deref().is_some_and(|t| codes.contains(&t)));
                let second = second
                    .map(|p| format!(" ({})", p.display()))
                    .unwrap_or_default();
                Error::input(
                    at(lines.first(), "to_code"),
                    format!(
                        "{count} target code(s) of this crosswalk are not source codes of the \
                         second{second}, so their share cannot be carried on: {listed}; are the \
                         two tables of consecutive vintages (x->y and y->z)?"
                    ),
                )
            }
        }
    }
}

/// Reads a crosswalk CSV (or Parquet). Structural problems (missing column,
/// a weight that is not a number, an unknown basis) are errors naming line
/// and column. Codes are read through the one code parser, so a code that
/// lost its leading zero is restored (see [`read_file`] to learn which).
pub fn read_csv(path: &Path) -> Result<Crosswalk> {
    read_file(path).map(|f| f.crosswalk)
}

/// Reads a crosswalk file and notes which codes were normalized.
pub fn read_file(path: &Path) -> Result<CrosswalkFile> {
    from_table(read_table(path, ReadOptions::default())?)
}

/// Reads a crosswalk CSV held in memory (an embedded file); `label` names it
/// in messages.
pub fn read_csv_bytes(label: &Path, bytes: &[u8]) -> Result<Crosswalk> {
    from_table(read_table_bytes(label, bytes, ReadOptions::default())?).map(|f| f.crosswalk)
}

fn from_table(table: crate::io::table::Table) -> Result<CrosswalkFile> {
    let path = table.path.clone();
    let path = path.as_path();
    let cols: Vec<usize> = COLUMNS[..3]
        .iter()
        .map(|c| {
            table.column(c).map_err(|_| {
                Error::input(
                    Location::file(path).in_column(*c),
                    format!(
                        "not a crosswalk: no column {c:?} (the columns are: {}); a crosswalk has \
                         the columns from_code, to_code and weight, and may have target_share \
                         and basis",
                        table.headers.join(", ")
                    ),
                )
            })
        })
        .collect::<Result<_>>()?;
    let share = table.column("target_share").ok();
    let basis = table.column("basis").ok();
    let mut rows = Vec::with_capacity(table.len());
    for (i, r) in table.records.iter().enumerate() {
        let number = |c: usize| -> Result<f64> {
            let t = r[c].trim();
            t.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    Error::input(
                        table.location(i, c),
                        format!(
                            "{t:?} is not a number; {} is a share written as a decimal number \
                             (0.25 for a quarter)",
                            table.headers[c]
                        ),
                    )
                })
        };
        let from = r[cols[0]].trim();
        if from.is_empty() {
            return Err(Error::input(
                table.location(i, cols[0]),
                "the source code is empty; every row needs a from_code (an empty to_code is \
                 the share outside every target)",
            ));
        }
        let to = r[cols[1]].trim();
        rows.push(CrosswalkRow {
            from_code: from.to_string(),
            to_code: (!to.is_empty()).then(|| to.to_string()),
            weight: number(cols[2])?,
            target_share: match share {
                Some(c) if !r[c].trim().is_empty() => Some(number(c)?),
                _ => None,
            },
            basis: match basis {
                Some(c) if !r[c].trim().is_empty() => r[c]
                    .trim()
                    .parse()
                    .map_err(|m: String| Error::input(table.location(i, c), m))?,
                _ => crate::core::crosswalk::Basis::Area,
            },
        });
    }
    if rows.is_empty() {
        return Err(Error::input(
            Location::file(path),
            "the crosswalk has a header but no rows",
        ));
    }
    let mut crosswalk = Crosswalk { rows };
    let (from_form, to_form, repairs) = crosswalk.normalize_codes();
    Ok(CrosswalkFile {
        crosswalk,
        lines: table.lines.clone(),
        forms: (from_form, to_form),
        repairs,
    })
}

/// Writes a crosswalk as Parquet: the same columns, codes as text, weights
/// and shares as 64-bit floats (missing `to_code`/`target_share` as null).
pub fn write_parquet(w: &mut dyn Write, crosswalk: &Crosswalk) -> std::io::Result<()> {
    use polars::prelude::*;
    let rows = &crosswalk.rows;
    let from: Vec<&str> = rows.iter().map(|r| r.from_code.as_str()).collect();
    let to: Vec<Option<&str>> = rows.iter().map(|r| r.to_code.as_deref()).collect();
    let weight: Vec<f64> = rows.iter().map(|r| r.weight).collect();
    let share: Vec<Option<f64>> = rows.iter().map(|r| r.target_share).collect();
    let basis: Vec<&str> = rows.iter().map(|r| r.basis.as_str()).collect();
    let mut df = df!(
        COLUMNS[0] => from,
        COLUMNS[1] => to,
        COLUMNS[2] => weight,
        COLUMNS[3] => share,
        COLUMNS[4] => basis,
    )
    .map_err(std::io::Error::other)?;
    ParquetWriter::new(w)
        .finish(&mut df)
        .map_err(std::io::Error::other)?;
    Ok(())
}

/// True when a crosswalk output path asks for Parquet (`.parquet`).
pub fn is_parquet_path(path: &Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("parquet"))
}

pub use crate::io::output::{sidecar_path, CAUTION};

/// Writes sidecar metadata (a JSON value) with sorted keys and a final
/// newline, so the bytes are stable.
pub fn write_sidecar(w: &mut dyn Write, meta: &serde_json::Value) -> std::io::Result<()> {
    serde_json::to_writer_pretty(&mut *w, meta).map_err(std::io::Error::other)?;
    writeln!(w)
}
