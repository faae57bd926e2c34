//! `regionkey history CODE|NAME`: a unit's story in plain words or as a
//! table: what it was called when, what it absorbed or split into, with
//! years and sources. Codes go through the one code parser
//! ([`CodeForm::County`]), names through the matcher's normalization
//! ("Dona Ana" is Doña Ana, "Saint Louis City" St. Louis city). The library
//! entry is [`execute`].

use std::collections::BTreeSet;
use std::io::Write;

use super::Global;
use crate::core::fips::CodeForm;
use crate::core::history::{lineage, LineageEvent};
use crate::core::normalize::key;
use crate::core::reference::Reference;
use crate::error::{Error, Result};
use crate::io::builtin::us_counties;
use crate::io::output::{write_csv_record, write_to, Target};

/// How to print the story.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Format {
    /// Plain sentences.
    Text,
    /// A CSV table: year, event, code, text, source.
    Csv,
}

/// Arguments.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// A county code ("02270", "2270") or name ("Wade Hampton", "Shannon County").
    pub unit: String,
    /// Output form.
    #[arg(long, value_enum, default_value = "text")]
    pub format: Format,
    /// Where to write (`-` for standard output).
    #[arg(long, short, default_value = "-")]
    pub output: String,
}

/// Codes whose name (with or without description, in any era) is `query`,
/// compared as the matcher compares names.
fn codes_named(reference: &Reference, query: &str) -> BTreeSet<String> {
    let q = key(query);
    if q.is_empty() {
        return BTreeSet::new();
    }
    reference
        .units
        .iter()
        .filter(|u| key(&u.name) == q || key(&u.full_name()) == q)
        .map(|u| u.code.clone())
        .collect()
}

/// Everything checked before the work.
#[derive(Debug, Clone)]
pub struct Config {
    /// A county code or name.
    pub unit: String,
    /// Output form.
    pub format: Format,
    /// Where to write.
    pub output: Target,
}

impl Config {
    /// Checks the arguments.
    pub fn from_args(args: &Args) -> Result<Config> {
        let output = Target::parse(&args.output);
        output.check_writable()?;
        Ok(Config {
            unit: args.unit.clone(),
            format: args.format,
            output,
        })
    }
}

/// The stories found: each code with its events.
#[derive(Debug, Clone)]
pub struct Report {
    /// (code, events), by code.
    pub stories: Vec<(String, Vec<LineageEvent>)>,
}

/// Finds the unit (by code, else by name) and writes its story.
pub fn execute(config: &Config) -> Result<Report> {
    let reference = us_counties()?;
    let codes: BTreeSet<String> = match CodeForm::County.parse(&config.unit) {
        Ok(code) => [code.into_string()].into(),
        Err(_) => codes_named(reference, &config.unit),
    };
    let stories: Vec<(String, Vec<LineageEvent>)> = codes
        .into_iter()
        .map(|c| {
            let events = lineage(reference, &c);
            (c, events)
        })
        .filter(|(_, e)| !e.is_empty())
        .collect();
    if stories.is_empty() {
        return Err(Error::Usage(format!(
            "{:?} is not a county code or county name of any vintage since 1970 in the built-in reference",
            config.unit
        )));
    }
    write_to(&config.output, |w| match config.format {
        Format::Text => write_text(w, &stories),
        Format::Csv => write_csv(w, &stories),
    })?;
    Ok(Report { stories })
}

/// Runs the command.
pub fn run(args: Args, _global: Global) -> Result<()> {
    execute(&Config::from_args(&args)?).map(|_| ())
}

fn write_text(w: &mut dyn Write, stories: &[(String, Vec<LineageEvent>)]) -> std::io::Result<()> {
    for (i, (code, events)) in stories.iter().enumerate() {
        if i > 0 {
            writeln!(w)?;
        }
        writeln!(w, "{code}")?;
        let mut sources = BTreeSet::new();
        for e in events {
            writeln!(w, "  {}", e.text)?;
            if !e.source.is_empty() {
                sources.insert(e.source.as_str());
            }
        }
        for s in sources {
            writeln!(w, "  source: {s}")?;
        }
    }
    Ok(())
}

fn write_csv(w: &mut dyn Write, stories: &[(String, Vec<LineageEvent>)]) -> std::io::Result<()> {
    write_csv_record(w, &["year", "event", "code", "text", "source"])?;
    for (_, events) in stories {
        for e in events {
            write_csv_record(
                w,
                &[
                    e.year.to_string().as_str(),
                    &e.event,
                    &e.code,
                    &e.text,
                    &e.source,
                ],
            )?;
        }
    }
    Ok(())
}
