//! Crosswalk files: CSV with `from_code,to_code,weight,target_share,basis`,
//! sorted by codes, weights with 12 decimals so the bytes are stable.

use std::io::Write;
use std::path::Path;

use crate::core::crosswalk::{Crosswalk, CrosswalkRow};
use crate::error::{Error, Location, Result};
use crate::io::output::fixed;
use crate::io::table::{read_table, ReadOptions};

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
    let table = read_table(path, ReadOptions::default())?;
    let cols: Vec<usize> = COLUMNS[..3]
        .iter()
        .map(|c| table.column(c))
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
                .ok_or_else(|| Error::input(table.location(i, c), format!("{t:?} is not a number")))
        };
        let from = r[cols[0]].trim();
        if from.is_empty() {
            return Err(Error::input(
                table.location(i, cols[0]),
                "empty source code",
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
            "the crosswalk has no rows",
        ));
    }
    Ok(Crosswalk { rows })
}
