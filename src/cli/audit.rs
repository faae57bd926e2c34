//! `regionkey audit TABLE --code-column COL`: the checks to run before
//! drawing a table on a boundary layer. Codes of the table not on the layer
//! (with what the change history says of each), units of the layer with no
//! row in each period, duplicate (code, period) rows, codes that lost their
//! leading zero, and counts per state: a summary on the terminal, the
//! findings in a CSV, and with `--strict` an exit status a script can test.

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use super::{say, Global};
use crate::core::audit::{audit, Audit, AuditLayer, AuditRow, Check, CodeKind};
use crate::core::fips::CountyFips;
use crate::error::{Error, Result};
use crate::io::builtin::us_counties;
use crate::io::geo::{read_layer, LayerRequest};
use crate::io::output::{write_to, Target};
use crate::io::table::{read_table, ReadOptions};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The table (CSV, TSV or Parquet).
    pub table: PathBuf,
    /// Column holding the unit code.
    #[arg(long, value_name = "COL")]
    pub code_column: String,
    /// Column holding the period (year); units with no row are then listed per period.
    #[arg(long, value_name = "COL")]
    pub period_column: Option<String>,
    /// Boundary layer: `builtin:counties-2023`, `builtin:counties-2017`, or a
    /// GeoJSON, TopoJSON or Shapefile.
    #[arg(long, default_value = "builtin:counties-2023", value_name = "LAYER")]
    pub layer: String,
    /// Key field of a layer file (default: the feature id).
    #[arg(long, value_name = "FIELD")]
    pub key: Option<String>,
    /// TopoJSON object of a layer file.
    #[arg(long, value_name = "NAME")]
    pub object: Option<String>,
    /// Vintage year of a layer file whose keys are county FIPS codes, so the
    /// change history can explain codes not on it (the built-in layers know theirs).
    #[arg(long, value_name = "YEAR")]
    pub vintage: Option<u16>,
    /// Count units with no row only in states that have at least one row.
    #[arg(long = "states-in-data")]
    pub states_in_data: bool,
    /// Write every finding to this CSV (`-` for standard output).
    #[arg(long, short, value_name = "FILE")]
    pub output: Option<String>,
    /// Write the counts per state to this CSV.
    #[arg(long, value_name = "FILE")]
    pub states_output: Option<String>,
    /// Exit with status 3 when anything is off (any finding at all).
    #[arg(long)]
    pub strict: bool,
}

/// A checked configuration.
#[derive(Debug, Clone)]
pub struct AuditConfig {
    /// The table.
    pub table: PathBuf,
    /// Code column.
    pub code_column: String,
    /// Period column, if any.
    pub period_column: Option<String>,
    /// The layer request.
    pub layer: LayerRequest,
    /// Vintage year for the change history, if known.
    pub vintage: Option<u16>,
    /// Count units with no row only in states with rows.
    pub states_in_data: bool,
}

/// What the audit found, with the context to report it.
#[derive(Debug, Clone)]
pub struct AuditReport {
    /// The audit.
    pub audit: Audit,
    /// How codes were read.
    pub kind: CodeKind,
    /// The vintage year used for the change history, if any.
    pub vintage: Option<u16>,
}

/// How the command ended, for the exit status.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verdict {
    /// Nothing is off, or `--strict` was not given.
    Done,
    /// `--strict` and something is off.
    Failed,
}

fn builtin_year(spec: &str) -> Option<u16> {
    spec.strip_prefix("builtin:counties-")
        .and_then(|y| y.parse().ok())
}

/// Turns arguments into a checked configuration.
pub fn configure(args: &Args) -> Result<AuditConfig> {
    if !args.table.exists() {
        return Err(Error::io(
            &args.table,
            "cannot open table",
            std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
        ));
    }
    for out in [&args.output, &args.states_output].into_iter().flatten() {
        Target::parse(out).check_writable()?;
    }
    Ok(AuditConfig {
        table: args.table.clone(),
        code_column: args.code_column.clone(),
        period_column: args.period_column.clone(),
        layer: LayerRequest {
            spec: args.layer.clone(),
            key: args.key.clone(),
            object: args.object.clone(),
            key_option: "--key",
            object_option: "--object",
        },
        vintage: args.vintage.or_else(|| builtin_year(&args.layer)),
        states_in_data: args.states_in_data,
    })
}

/// Runs the audit (the library entry).
pub fn execute(config: &AuditConfig) -> Result<AuditReport> {
    let table = read_table(&config.table, ReadOptions::default())?;
    let code = table.column(&config.code_column)?;
    let period = config
        .period_column
        .as_deref()
        .map(|c| table.column(c))
        .transpose()?;
    let layer = read_layer(&config.layer)?;
    let codes: BTreeSet<String> = layer.features.iter().map(|f| f.key.clone()).collect();
    let kind = if !codes.is_empty()
        && codes
            .iter()
            .all(|c| c.len() == 5 && c.parse::<CountyFips>().is_ok())
    {
        CodeKind::County
    } else {
        CodeKind::Plain
    };
    let rows: Vec<AuditRow> = table
        .records
        .iter()
        .enumerate()
        .map(|(i, r)| AuditRow {
            line: table.lines[i],
            code: r[code].to_string(),
            period: period.map_or(String::new(), |p| r[p].to_string()),
        })
        .collect();
    let history = match (kind, config.vintage) {
        (CodeKind::County, Some(year)) => Some((us_counties()?, year)),
        _ => None,
    };
    let audit = audit(
        &rows,
        AuditLayer {
            codes: &codes,
            kind,
            history,
            states_in_data: config.states_in_data,
        },
    );
    Ok(AuditReport {
        audit,
        kind,
        vintage: config.vintage,
    })
}

fn lines_text(lines: &[u64]) -> String {
    let shown: Vec<String> = lines.iter().take(20).map(u64::to_string).collect();
    let more = if lines.len() > shown.len() {
        ";..."
    } else {
        ""
    };
    format!("{}{more}", shown.join(";"))
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<Verdict> {
    let config = configure(&args)?;
    let report = execute(&config)?;
    let a = &report.audit;
    if let Some(out) = &args.output {
        write_to(&Target::parse(out), |w| {
            let mut c = csv::Writer::from_writer(w);
            c.write_record([
                "check", "code", "period", "state", "rows", "lines", "detail",
            ])?;
            for f in &a.findings {
                let state = match report.kind {
                    CodeKind::County if f.check != Check::NotACode => {
                        f.code.get(..2).unwrap_or("").to_string()
                    }
                    _ => String::new(),
                };
                c.write_record([
                    f.check.as_str(),
                    &f.code,
                    &f.period,
                    &state,
                    &f.lines.len().to_string(),
                    &lines_text(&f.lines),
                    &f.detail,
                ])?;
            }
            c.flush()
        })?;
    }
    let state_names: BTreeMap<&str, &str> = match report.kind {
        CodeKind::County => us_counties()?
            .parents
            .iter()
            .map(|p| (p.code.as_str(), p.name.as_str()))
            .collect(),
        CodeKind::Plain => BTreeMap::new(),
    };
    if let Some(out) = &args.states_output {
        write_to(&Target::parse(out), |w| {
            let mut c = csv::Writer::from_writer(w);
            c.write_record([
                "state",
                "state_name",
                "layer_units",
                "units_with_rows",
                "missing_unit_periods",
                "rows",
                "codes_not_on_layer",
                "duplicates",
            ])?;
            for (s, n) in &a.states {
                c.write_record([
                    s.as_str(),
                    state_names.get(s.as_str()).copied().unwrap_or(""),
                    &n.layer_units.to_string(),
                    &n.units_with_rows.to_string(),
                    &n.missing_unit_periods.to_string(),
                    &n.rows.to_string(),
                    &n.codes_not_on_layer.to_string(),
                    &n.duplicates.to_string(),
                ])?;
            }
            c.flush()
        })?;
    }
    say(global, summary(&report, &args.layer, &state_names));
    Ok(if args.strict && !a.is_clean() {
        Verdict::Failed
    } else {
        Verdict::Done
    })
}

fn rows(n: usize) -> String {
    if n == 1 {
        "1 row".into()
    } else {
        format!("{n} rows")
    }
}

/// The terminal summary.
pub fn summary(report: &AuditReport, layer: &str, state_names: &BTreeMap<&str, &str>) -> String {
    let a = &report.audit;
    let mut s = String::new();
    let periods = match a.periods.as_slice() {
        [one] if one.is_empty() => "no period column".to_string(),
        [one] => format!("1 period ({one})"),
        [first, .., last] => format!("{} periods ({first} to {last})", a.periods.len()),
        [] => "no rows".to_string(),
    };
    s.push_str(&format!(
        "audit: {} rows, {periods}; layer {layer} with {} units\n",
        a.rows, a.layer_units
    ));
    let distinct = |c: Check| a.of(c).count();
    let not_on = distinct(Check::NotOnLayer);
    s.push_str(&format!(
        "  codes not on the layer: {not_on} ({})\n",
        rows(a.rows_of(Check::NotOnLayer))
    ));
    for f in a.of(Check::NotOnLayer).take(15) {
        s.push_str(&format!(
            "    {} ({}): {}\n",
            f.code,
            rows(f.lines.len()),
            f.detail
        ));
    }
    if not_on > 15 {
        s.push_str(&format!("    ... and {} more\n", not_on - 15));
    }
    let mut missing: BTreeMap<&str, usize> = BTreeMap::new();
    for f in a.of(Check::NoRow) {
        *missing.entry(f.period.as_str()).or_default() += 1;
    }
    let per_period: Vec<String> = a
        .periods
        .iter()
        .map(|p| {
            let n = missing.get(p.as_str()).copied().unwrap_or(0);
            if p.is_empty() {
                n.to_string()
            } else {
                format!("{p}: {n}")
            }
        })
        .collect();
    s.push_str(&format!(
        "  units of the layer with no row: {}\n",
        per_period.join(", ")
    ));
    s.push_str(&format!(
        "  duplicate (code, period) pairs: {} ({})\n",
        distinct(Check::Duplicate),
        rows(a.rows_of(Check::Duplicate))
    ));
    for (check, words) in [
        (Check::LostLeadingZero, "codes that lost their leading zero"),
        (Check::Reformatted, "codes written in another form"),
        (Check::NotACode, "texts that are not codes"),
        (Check::EmptyCode, "rows with no code"),
    ] {
        let n = rows(a.rows_of(check));
        let example = a
            .of(check)
            .next()
            .map(|f| {
                format!(
                    " (e.g. line {}: {})",
                    f.lines.first().copied().unwrap_or(0),
                    f.detail
                )
            })
            .unwrap_or_default();
        s.push_str(&format!("  {words}: {n}{example}\n"));
    }
    if !a.states.is_empty() {
        s.push_str("  by state (units with a row / units of the layer; rows; codes not on the layer; duplicates):\n");
        for (code, n) in a.states.iter().filter(|(_, n)| n.rows > 0) {
            s.push_str(&format!(
                "    {code} {}: {}/{}; {}; {}; {}\n",
                state_names.get(code.as_str()).copied().unwrap_or(""),
                n.units_with_rows,
                n.layer_units,
                rows(n.rows),
                n.codes_not_on_layer,
                n.duplicates
            ));
        }
    }
    if a.is_clean() {
        s.push_str("  nothing is off");
    } else {
        s.push_str(&format!("  {} findings", a.findings.len()));
    }
    s
}
