//! `regionkey inspect`: checks a crosswalk file and summarizes it.

use std::path::PathBuf;

use super::Global;
use crate::core::crosswalk::SUM_TOLERANCE;
use crate::error::{Error, Location, Result};
use crate::io::crosswalk_file::read_file;

/// Arguments.
#[derive(Debug, clap::Args)]
#[command(after_help = "\
Checks: weights and target shares within 0..1; each source's weights (its \
row with an empty to_code included) sum to 1 within the tolerance; no pair \
twice; codes well-formed (no blanks, no lost leading zeros). Exits 1 when \
a check fails, listing the problems with their lines.")]
pub struct Args {
    /// The crosswalk (CSV or Parquet).
    pub file: PathBuf,
    /// How far a source's weights may be from summing to 1.
    #[arg(long, default_value_t = SUM_TOLERANCE)]
    pub tolerance: f64,
    /// How many of the largest changes to list.
    #[arg(long, default_value_t = 10)]
    pub top: usize,
}

/// Everything checked before the work.
#[derive(Debug, Clone)]
pub struct Config {
    /// The crosswalk file.
    pub file: PathBuf,
    /// How far a source's weights may be from summing to 1.
    pub tolerance: f64,
    /// How many of the largest changes to list.
    pub top: usize,
}

impl Config {
    /// Checks the arguments.
    pub fn from_args(args: &Args) -> Result<Config> {
        if !(args.tolerance >= 0.0 && args.tolerance < 1.0) {
            return Err(Error::Usage(format!(
                "--tolerance {} is out of range; give a small non-negative number such as 1e-6",
                args.tolerance
            )));
        }
        Ok(Config {
            file: args.file.clone(),
            tolerance: args.tolerance,
            top: args.top,
        })
    }
}

/// What the inspection found.
#[derive(Debug, Clone)]
pub struct Report {
    /// The shape of the crosswalk.
    pub summary: crate::core::crosswalk::Summary,
    /// The summary as printed.
    pub text: String,
    /// Problems, each as "FILE: line N: message" (or "FILE: source CODE:
    /// message"), by line; codes that lost their leading zero among them.
    pub problems: Vec<String>,
}

/// Reads and checks the crosswalk.
pub fn execute(config: &Config) -> Result<Report> {
    let file = read_file(&config.file)?;
    let cw = &file.crosswalk;
    let s = cw.summary(config.top);

    let mut out = String::new();
    out.push_str(&format!("{}\n", config.file.display()));
    out.push_str(&format!("  rows            {}\n", s.rows));
    out.push_str(&format!("  sources         {}\n", s.sources));
    out.push_str(&format!("  targets         {}\n", s.targets));
    out.push_str(&format!("  one-to-one      {}\n", s.one_to_one));
    out.push_str(&format!(
        "  splits          {} (sources in more than one target)\n",
        s.splits
    ));
    out.push_str(&format!(
        "  merges          {} (targets from more than one source)\n",
        s.merges
    ));
    out.push_str(&format!(
        "  uncovered       {} partly, {} entirely (outside every target)\n",
        s.partly_uncovered, s.entirely_uncovered
    ));
    if !s.largest_changes.is_empty() {
        out.push_str("  largest changes (share not in the largest target):\n");
        for (moved, text) in &s.largest_changes {
            out.push_str(&format!("    {:.4}  {text}\n", moved));
        }
    }
    let mut lines: Vec<(Option<usize>, String, String)> = file
        .repairs
        .iter()
        .map(|r| {
            (
                Some(r.row),
                r.side.to_string(),
                format!(
                    "{} {:?} is not written as the column's other codes are; read as {} ({}). Write codes as text so they keep their leading zeros",
                    r.side, r.written, r.code, r.repairs
                ),
            )
        })
        .collect();
    lines.extend(
        cw.validate(config.tolerance)
            .into_iter()
            .map(|p| (p.row, p.from_code, p.message)),
    );
    lines.sort_by_key(|(row, _, _)| row.map_or(usize::MAX, |r| r));
    let problems = lines
        .into_iter()
        .map(|(row, code, message)| match row {
            Some(r) => format!(
                "{}: line {}: {message}",
                config.file.display(),
                file.lines[r]
            ),
            None => format!("{}: source {code}: {message}", config.file.display()),
        })
        .collect();
    Ok(Report {
        summary: s,
        text: out,
        problems,
    })
}

/// Runs the command: the summary goes to standard output, problems to
/// standard error.
pub fn run(args: Args, _global: Global) -> Result<()> {
    let config = Config::from_args(&args)?;
    let report = execute(&config)?;
    crate::io::output::write_to(&crate::io::output::Target::Stdout, |w| {
        w.write_all(report.text.as_bytes())
    })?;
    if report.problems.is_empty() {
        return Ok(());
    }
    for p in report.problems.iter().take(50) {
        eprintln!("{p}");
    }
    if report.problems.len() > 50 {
        eprintln!("... and {} more", report.problems.len() - 50);
    }
    Err(Error::input(
        Location::file(&config.file),
        format!(
            "{} problems found; the crosswalk is not valid",
            report.problems.len()
        ),
    ))
}
