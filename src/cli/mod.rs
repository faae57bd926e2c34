//! The command line: one module per subcommand, each with its clap-derive
//! arguments and a `run`. Arguments are turned into a checked configuration
//! before any long work starts.

use std::process::ExitCode;

use clap::{Parser, Subcommand};

use crate::error::Error;

pub mod apply;
pub mod audit;
pub mod chain;
pub mod demo;
pub mod group;
pub mod history;
pub mod inspect;
pub mod map;
pub mod match_names;
pub mod overlay;
pub mod review_page;

const EXIT_CODES: &str = "\
Exit codes:
  0  finished (rows needing review are listed in the review file, not errors)
  1  bad input or options: the message names the file, line and column
  2  the command line could not be parsed
  3  `audit --strict` found something off

Allocated figures are estimates: they assume a value is spread evenly by area
or by population within each unit. Where figures feed legal or funding
decisions, official relationship files and local practice take precedence.";

/// regionkey: match place names to FIPS codes, build crosswalks between
/// boundary vintages, and carry data across them with its coverage.
#[derive(Debug, Parser)]
#[command(name = "regionkey", version, about, after_help = EXIT_CODES)]
pub struct Cli {
    /// Print nothing on standard error but errors and warnings.
    #[arg(long, short, global = true)]
    pub quiet: bool,

    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
#[allow(clippy::large_enum_variant)] // parsed once; boxing would change every `run` signature
pub enum Command {
    /// Match free-text place names to FIPS codes; write a crosswalk table and a review list.
    Match(match_names::Args),
    /// Build a crosswalk between two boundary layers by polygon overlay.
    Overlay(overlay::Args),
    /// Check a crosswalk file and summarize it.
    Inspect(inspect::Args),
    /// Carry data through a crosswalk onto target units, with coverage.
    Apply(apply::Args),
    /// Compose two crosswalks (x->y, y->z) into one (x->z).
    Chain(chain::Args),
    /// Show a unit's history: names, codes, what it absorbed or split into.
    History(history::Args),
    /// Draw a map of which units of a layer a table joined to, and how fully.
    Map(map::Args),
    /// Write an offline HTML page to settle the names of a review file.
    ReviewPage(review_page::Args),
    /// Check a table's codes against a boundary layer before drawing it.
    Audit(audit::Args),
    /// Build crosswalks both ways between counties and groups of counties from a membership list.
    Group(group::Args),
    /// Run the whole pipeline on built-in demo data.
    Demo(demo::Args),
}

/// Options every command sees.
#[derive(Debug, Clone, Copy)]
pub struct Global {
    /// Suppress progress and summaries.
    pub quiet: bool,
}

/// Parses the command line, runs the command, and maps errors to exit codes.
pub fn main() -> ExitCode {
    let cli = Cli::parse();
    let global = Global { quiet: cli.quiet };
    let result = match cli.command {
        Command::Match(a) => match_names::run(a, global),
        Command::Overlay(a) => overlay::run(a, global),
        Command::Inspect(a) => inspect::run(a, global),
        Command::Apply(a) => apply::run(a, global),
        Command::Chain(a) => chain::run(a, global),
        Command::History(a) => history::run(a, global),
        Command::Map(a) => map::run(a, global),
        Command::Group(a) => group::run(a, global),
        Command::Demo(a) => demo::run(a, global),
        Command::ReviewPage(a) => review_page::run(a, global),
        Command::Audit(a) => match audit::run(a, global) {
            Ok(audit::Verdict::Failed) => return ExitCode::from(3),
            other => other.map(|_| ()),
        },
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) if e.is_broken_pipe() => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("regionkey: error: {e}");
            ExitCode::from(1)
        }
    }
}

/// Prints a line on standard error unless quiet.
pub fn say(global: Global, line: impl AsRef<str>) {
    if !global.quiet {
        eprintln!("{}", line.as_ref());
    }
}

/// Prints a warning on standard error (always).
pub fn warn(line: impl AsRef<str>) {
    eprintln!("regionkey: warning: {}", line.as_ref());
}

/// An error for a command that is not built yet.
pub fn not_built(command: &str) -> Error {
    Error::Usage(format!("`regionkey {command}` is not built yet"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn the_command_line_definition_is_consistent() {
        Cli::command().debug_assert();
    }
}
