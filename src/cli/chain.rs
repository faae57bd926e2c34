//! `regionkey chain FIRST SECOND --output OUT`: compose two crosswalks
//! (x->y and y->z) into one (x->z). See [`crate::core::chain`] for how
//! weights, target shares and uncovered shares combine. Composition
//! multiplies small shares into many tiny pairs; the overlay's sliver rule
//! (`--min-share`) drops them and renormalizes, and the summary and the
//! sidecar say how much.
//!
//! The library entry is [`execute`] on a checked [`Config`].

use std::path::PathBuf;

use super::{say, Global};
use crate::core::chain::{compose, drop_slivers, ChainError, Trimmed};
use crate::core::crosswalk::Crosswalk;
use crate::core::overlay::DEFAULT_MIN_SHARE;
use crate::error::{Error, Result};
use crate::io::crosswalk_file;
use crate::io::output::{sidecar_path, Sidecar, SidecarInput, Staged, Target, Written, CAUTION};

/// Arguments.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// The first crosswalk (x->y).
    pub first: PathBuf,
    /// The second crosswalk (y->z); its sources are the first one's targets.
    pub second: PathBuf,
    /// Drop composed pieces below this share of both their source and their
    /// target (slivers), and renormalize the source; 0 keeps every piece.
    #[arg(long, value_name = "F", default_value_t = DEFAULT_MIN_SHARE)]
    pub min_share: f64,
    /// Where to write the composed crosswalk (x->z; .csv or .parquet); `-` for standard output (then no sidecar).
    #[arg(long, short)]
    pub output: String,
}

/// Everything checked before the work.
#[derive(Debug, Clone)]
pub struct Config {
    /// The first crosswalk file.
    pub first: PathBuf,
    /// The second crosswalk file.
    pub second: PathBuf,
    /// The sliver threshold.
    pub min_share: f64,
    /// Where the composed crosswalk goes.
    pub output: Target,
}

impl Config {
    /// Checks the arguments.
    pub fn from_args(args: &Args) -> Result<Config> {
        if !(0.0..0.5).contains(&args.min_share) {
            return Err(Error::Usage(format!(
                "--min-share {} is out of range; give a share from 0 (keep everything) up to below 0.5",
                args.min_share
            )));
        }
        for p in [&args.first, &args.second] {
            if !p.is_file() {
                return Err(Error::io(
                    p,
                    "cannot open input",
                    std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
                ));
            }
        }
        let output = Target::parse(&args.output);
        output.check_writable()?;
        Ok(Config {
            first: args.first.clone(),
            second: args.second.clone(),
            min_share: args.min_share,
            output,
        })
    }
}

/// What a run did.
#[derive(Debug, Clone)]
pub struct Report {
    /// Rows of the composed crosswalk.
    pub rows: usize,
    /// Its distinct sources.
    pub sources: usize,
    /// Sources that lost slivers, with what they lost.
    pub trimmed: Vec<Trimmed>,
    /// The crosswalk written.
    pub output: Written,
    /// The sidecar written, if any.
    pub sidecar: Option<PathBuf>,
}

impl Report {
    /// Pieces dropped as slivers.
    pub fn pieces_dropped(&self) -> usize {
        self.trimmed.iter().map(|t| t.pieces).sum()
    }

    /// The largest share a source lost as slivers.
    pub fn largest_share_dropped(&self) -> f64 {
        self.trimmed.iter().map(|t| t.share).fold(0.0, f64::max)
    }
}

/// Reads both crosswalks, composes them, drops slivers, and writes the
/// result (and its sidecar, last).
pub fn execute(config: &Config) -> Result<Report> {
    let first = crosswalk_file::read_file(&config.first)?;
    let second = crosswalk_file::read_file(&config.second)?;
    let mut composed = compose(&first.crosswalk, &second.crosswalk).map_err(|e| match &e {
        // Name the file, line and column of the row at fault.
        ChainError::Duplicate { table, .. }
        | ChainError::BadWeight { table, .. }
        | ChainError::Unbalanced { table, .. }
            if *table == "second" =>
        {
            second.locate(&config.second, &e, None)
        }
        _ => first.locate(&config.first, &e, Some(&config.second)),
    })?;
    let (first, second) = (first.crosswalk, second.crosswalk);
    let trimmed = drop_slivers(&mut composed, config.min_share);
    let mut staged = Staged::new();
    let parquet = matches!(&config.output, Target::File(p) if crosswalk_file::is_parquet_path(p));
    let output = staged.stage_target(&config.output, |w| {
        if parquet {
            crosswalk_file::write_parquet(w, &composed)
        } else {
            crosswalk_file::write_csv(w, &composed)
        }
    })?;
    let mut report = Report {
        rows: composed.rows.len(),
        sources: sources(&composed),
        trimmed,
        output,
        sidecar: None,
    };
    if let Target::File(path) = &config.output {
        let side = sidecar_path(path);
        let meta = sidecar(config, &first, &second, &report)?;
        staged.stage(&side, |w| meta.write(w))?;
        report.sidecar = Some(side);
    }
    staged.commit()?;
    Ok(report)
}

fn sources(cw: &Crosswalk) -> usize {
    cw.rows
        .iter()
        .map(|r| &r.from_code)
        .collect::<std::collections::BTreeSet<_>>()
        .len()
}

fn sidecar(config: &Config, first: &Crosswalk, second: &Crosswalk, r: &Report) -> Result<Sidecar> {
    use serde_json::json;
    let mut meta = Sidecar::new("chain", r.output.clone());
    meta.inputs.push(SidecarInput::file(
        "first",
        &config.first,
        Some(first.rows.len() as u64),
    )?);
    meta.inputs.push(SidecarInput::file(
        "second",
        &config.second,
        Some(second.rows.len() as u64),
    )?);
    meta.options = json!({ "min_share": config.min_share });
    let dropped: serde_json::Map<String, serde_json::Value> = r
        .trimmed
        .iter()
        .map(|t| (t.from_code.clone(), json!(t.share)))
        .collect();
    let d = &mut meta.details;
    d.insert("rows".into(), json!(r.rows));
    d.insert("method".into(), json!("weight(x,z) = sum over y of weight(x,y) * weight(y,z); target_share(x,z) = sum over y of target_share(x,y) * target_share(y,z), exact when each y lies wholly in one x or one z; uncovered shares carry through"));
    d.insert("sliver_rule".into(), json!("a piece below min_share of both its source and its target is dropped and the source's weights renormalized"));
    d.insert("pieces_dropped".into(), json!(r.pieces_dropped()));
    d.insert("dropped_share_by_source".into(), json!(dropped));
    Ok(meta)
}

/// The summary lines of a report.
pub fn summary_lines(config: &Config, r: &Report) -> Vec<String> {
    let mut out = vec![format!(
        "regionkey chain: {} rows, {} sources",
        r.rows, r.sources
    )];
    if config.min_share > 0.0 {
        out.push(format!(
            "  slivers below {} of source and target: {} pieces of {} sources dropped (largest share of a source {:.6}), sources renormalized",
            config.min_share,
            r.pieces_dropped(),
            r.trimmed.len(),
            r.largest_share_dropped()
        ));
    }
    out.push(format!("  {CAUTION}"));
    out
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = Config::from_args(&args)?;
    let report = execute(&config)?;
    for line in summary_lines(&config, &report) {
        say(global, line);
    }
    Ok(())
}
