//! `regionkey history CODE|NAME`: a unit's story in plain words or as a
//! table: what it was called when, what it absorbed or split into, with
//! years and sources.

use std::collections::BTreeSet;
use std::io::Write;

use super::Global;
use crate::core::fips::CountyFips;
use crate::core::history::{lineage, LineageEvent};
use crate::core::reference::Reference;
use crate::error::{Error, Result};
use crate::io::builtin::us_counties;
use crate::io::output::{write_to, Target};

/// How to print the story.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Format {
    /// Plain sentences.
    Text,
    /// A CSV table: year, event, code, text, source.
    Csv,
}

/// Arguments.
#[derive(Debug, clap::Args)]
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

fn squash(text: &str) -> String {
    text.chars()
        .filter(|c| c.is_alphanumeric())
        .flat_map(char::to_lowercase)
        .collect()
}

/// Codes whose name (with or without description, in any era) is `query`.
fn codes_named(reference: &Reference, query: &str) -> BTreeSet<String> {
    let q = squash(query);
    reference
        .units
        .iter()
        .filter(|u| squash(&u.name) == q || squash(&u.full_name()) == q)
        .map(|u| u.code.clone())
        .collect()
}

/// Runs the command.
pub fn run(args: Args, _global: Global) -> Result<()> {
    let reference = us_counties()?;
    let codes: BTreeSet<String> = match args.unit.parse::<CountyFips>() {
        Ok(code) => [code.to_string()].into(),
        Err(_) => codes_named(reference, &args.unit),
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
            args.unit
        )));
    }
    let target = Target::parse(&args.output);
    target.check_writable()?;
    write_to(&target, |w| match args.format {
        Format::Text => write_text(w, &stories),
        Format::Csv => write_csv(w, &stories),
    })
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
    let mut out = csv::Writer::from_writer(w);
    out.write_record(["year", "event", "code", "text", "source"])?;
    for (_, events) in stories {
        for e in events {
            out.write_record([
                e.year.to_string().as_str(),
                &e.event,
                &e.code,
                &e.text,
                &e.source,
            ])?;
        }
    }
    out.flush()
}
