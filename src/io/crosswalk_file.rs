//! Crosswalk files: CSV with `from_code,to_code,weight,target_share,basis`,
//! sorted by codes, weights with 12 decimals so the bytes are stable.

use std::io::Write;
use std::path::Path;

use crate::core::crosswalk::{Crosswalk, CrosswalkRow};
use crate::error::{Error, Location, Result};
use crate::io::output::fixed;
use crate::io::table::{read_table, read_table_bytes, ReadOptions};

/// The column names of a crosswalk file, in order.
pub const COLUMNS: [&str; 5] = ["from_code", "to_code", "weight", "target_share", "basis"];

/// Decimals written for weights and shares.
pub const DECIMALS: usize = 12;

/// Writes a crosswalk as CSV (rows as given; call [`Crosswalk::sort`] first).
pub fn write_csv(w: &mut dyn Write, crosswalk: &Crosswalk) -> std::io::Result<()> {
    writeln!(w, "{}", COLUMNS.join(","))?;
    for r in &crosswalk.rows {
        writeln!(
            w,
            "{},{},{},{},{}",
            r.from_code,
            r.to_code.as_deref().unwrap_or(""),
            fixed(r.weight, DECIMALS),
            r.target_share.map_or(String::new(), |s| fixed(s, DECIMALS)),
            r.basis.as_str()
        )?;
    }
    Ok(())
}

/// Reads a crosswalk CSV. Structural problems (missing column, a weight that
/// is not a number, an unknown basis) are errors naming line and column.
pub fn read_csv(path: &Path) -> Result<Crosswalk> {
    from_table(read_table(path, ReadOptions::default())?)
}

/// Reads a crosswalk CSV held in memory (an embedded file); `label` names it
/// in messages.
pub fn read_csv_bytes(label: &Path, bytes: &[u8]) -> Result<Crosswalk> {
    from_table(read_table_bytes(label, bytes, ReadOptions::default())?)
}

fn from_table(table: crate::io::table::Table) -> Result<Crosswalk> {
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
    Ok(Crosswalk { rows })
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

/// The sidecar metadata path: the crosswalk path with `.json` appended.
pub fn sidecar_path(path: &Path) -> std::path::PathBuf {
    let mut s = path.as_os_str().to_owned();
    s.push(".json");
    s.into()
}

/// The caution carried in every sidecar.
pub const CAUTION: &str =
    "Figures allocated with this crosswalk are estimates: they assume a value \
is spread evenly (by area or by population) within each source unit. For legal or funding uses, \
official relationship files and local practice prevail.";

/// Writes sidecar metadata (a JSON value) with sorted keys and a final
/// newline, so the bytes are stable.
pub fn write_sidecar(w: &mut dyn Write, meta: &serde_json::Value) -> std::io::Result<()> {
    serde_json::to_writer_pretty(&mut *w, meta).map_err(std::io::Error::other)?;
    writeln!(w)
}
