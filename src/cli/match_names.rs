//! `regionkey match`: gives every row of a table a code it can stand behind,
//! says how it got there, and lists what it cannot settle for review.
//!
//! Output: every input row, in input order, with all its columns, plus
//! `code`, `code_name`, `match_status`, `match_method`, `match_score`, `note`
//! and `candidates`. When the input already has a column of one of these
//! names, all seven added columns are prefixed with `rk_` (and if one of
//! those is taken too, the command stops with an error naming the column).

use std::collections::HashMap;

use rayon::prelude::*;
use std::io::Write;
use std::path::PathBuf;

use super::{say, warn, Global};
use crate::core::matcher::{CodeForm, Matcher, Method, Resolution, Status};
use crate::core::reference::Reference;
use crate::error::{Error, Location, Result};
use crate::io::builtin::{read_reference_file, us_counties, us_states};
use crate::io::output::{fixed, write_to, Target};
use crate::io::progress::Progress;
use crate::io::review::{read_decisions, write_review, Choice, Decision, ReviewItem, NONE};
use crate::io::table::{read_table, ReadOptions, Table};

/// The columns `regionkey match` adds, in order.
pub const ADDED_COLUMNS: [&str; 7] = [
    "code",
    "code_name",
    "match_status",
    "match_method",
    "match_score",
    "note",
    "candidates",
];

/// Prefix of the added columns when the input already uses one of their names.
pub const COLUMN_PREFIX: &str = "rk_";

/// The latest vintage the built-in references describe (reference/README.md).
pub const BUILTIN_LATEST_VINTAGE: u16 = 2023;

/// What the names are matched to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum LevelArg {
    /// Counties and equivalents (five-digit FIPS codes).
    County,
    /// States and equivalents (two-digit FIPS codes).
    State,
}

/// Arguments of `regionkey match`.
#[derive(Debug, clap::Args)]
#[command(after_help = "\
Every input row appears in the output, in input order. A name the matcher cannot settle gets
match_status `review` (several candidates, or a doubtful one) or `unmatched` (a placeholder, a
city that is not a county equivalent, nothing close). Write them out with --review FILE, fill in
the `chosen_code` column (a code, or `none` to leave a name unmatched), and pass the file back
with --decisions FILE: decisions win on every later run.")]
pub struct Args {
    /// Input table: CSV, TSV (delimiter detected) or Parquet; `-` reads standard input.
    pub input: PathBuf,

    /// Column holding the place names (or codes).
    #[arg(long, value_name = "COL")]
    pub name_column: String,

    /// Column holding the state: name, postal code, abbreviation or FIPS code.
    #[arg(long, value_name = "COL")]
    pub state_column: Option<String>,

    /// Boundary vintage whose units are matched (default: the latest in the reference).
    #[arg(long, value_name = "YEAR")]
    pub vintage: Option<u16>,

    /// Column holding each row's year: the row is matched against the units
    /// of that vintage (years after the latest vintage use the latest).
    /// Overrides --vintage.
    #[arg(long, value_name = "COL", conflicts_with = "vintage")]
    pub vintage_column: Option<String>,

    /// Match counties (default) or states.
    #[arg(long, value_enum)]
    pub level: Option<LevelArg>,

    /// Your own reference list (columns code, name; optional parent, description,
    /// valid_from, valid_to) instead of the built-in US one.
    #[arg(long, value_name = "FILE")]
    pub reference: Option<PathBuf>,

    /// Decisions from an earlier review (a filled-in review file); they win over the matcher.
    #[arg(long, value_name = "FILE")]
    pub decisions: Option<PathBuf>,

    /// Where to write the matched table; `-` is standard output.
    #[arg(long, short, value_name = "FILE", default_value = "-")]
    pub output: String,

    /// Where to write the review list (CSV), one row per distinct name that needs a decision.
    #[arg(long, value_name = "FILE")]
    pub review: Option<String>,

    /// Field delimiter of the input (a single character, or `tab`); detected when absent.
    #[arg(long, value_name = "C", value_parser = parse_delimiter)]
    pub delimiter: Option<u8>,
}

fn parse_delimiter(text: &str) -> std::result::Result<u8, String> {
    match text {
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        t if t.len() == 1 && t.is_ascii() => Ok(t.as_bytes()[0]),
        _ => Err(format!(
            "{text:?} is not a one-character delimiter (or `tab`)"
        )),
    }
}

/// Where the units come from.
enum Source {
    /// A built-in reference.
    Builtin(&'static Reference),
    /// The user's own list.
    File(Reference),
}

impl Source {
    fn get(&self) -> &Reference {
        match self {
            Source::Builtin(r) => r,
            Source::File(r) => r,
        }
    }
}

/// The checked configuration.
struct Config {
    source: Source,
    codes: CodeForm,
    vintage: u16,
    /// First and latest vintage the reference covers.
    span: (u16, u16),
    output: Target,
    review: Option<Target>,
}

fn configure(args: &Args) -> Result<Config> {
    let output = Target::parse(&args.output);
    output.check_writable()?;
    let review = args.review.as_deref().map(Target::parse);
    if let Some(r) = &review {
        r.check_writable()?;
        if *r == output {
            return Err(Error::Usage(
                "--review and --output name the same place; give the review list its own file"
                    .into(),
            ));
        }
    }
    let (source, codes) = match (&args.reference, args.level) {
        (Some(_), Some(_)) => {
            return Err(Error::Usage(
                "--level chooses a built-in reference; it cannot be combined with --reference"
                    .into(),
            ))
        }
        (Some(path), None) => (Source::File(read_reference_file(path)?), CodeForm::Plain),
        (None, Some(LevelArg::State)) => (Source::Builtin(us_states()?), CodeForm::State),
        (None, _) => (Source::Builtin(us_counties()?), CodeForm::County),
    };
    if codes == CodeForm::State && args.state_column.is_some() {
        return Err(Error::Usage(
            "--state-column has no meaning with --level state: the names are the states".into(),
        ));
    }
    let r = source.get();
    // The spans of the built-in reference end or start no later than 2022
    // (no change fell in 2023), so `latest_year` says 2022; the data cover
    // vintage 2023 (reference/README.md).
    let latest = match source {
        Source::Builtin(_) => r.latest_year().unwrap_or(0).max(BUILTIN_LATEST_VINTAGE),
        Source::File(_) => r.latest_year().unwrap_or(0),
    };
    let vintage = args.vintage.unwrap_or(latest);
    let first = r.units.iter().map(|u| u.valid.from).min().unwrap_or(0);
    if codes == CodeForm::County && (vintage < first || vintage > latest) {
        return Err(Error::Usage(format!(
            "--vintage {vintage}: the built-in county reference covers {first}-{latest}"
        )));
    }
    Ok(Config {
        source,
        codes,
        vintage,
        span: (first, latest),
        output,
        review,
    })
}

fn pair_key(buf: &mut String, name: &str, state: &str) {
    buf.clear();
    buf.push_str(name.trim());
    buf.push('\u{1f}');
    buf.push_str(state.trim());
}

/// The matchers of the vintages met so far, built on first use.
struct Matchers<'r> {
    reference: &'r Reference,
    codes: CodeForm,
    built: HashMap<u16, Matcher<'r>>,
}

impl<'r> Matchers<'r> {
    fn get(&mut self, vintage: u16) -> &Matcher<'r> {
        let (reference, codes) = (self.reference, self.codes);
        self.built
            .entry(vintage)
            .or_insert_with(|| Matcher::new(reference, vintage, codes))
    }
}

/// The decisions of `--decisions`, by (name, state) key.
fn load_decisions(args: &Args) -> Result<HashMap<String, Decision>> {
    let mut out = HashMap::new();
    let Some(path) = &args.decisions else {
        return Ok(out);
    };
    for d in read_decisions(path)? {
        let mut k = String::new();
        pair_key(&mut k, &d.name, &d.state);
        out.insert(k, d);
    }
    Ok(out)
}

/// The resolution a decision gives in `vintage`. With per-row vintages
/// (`any_vintage`), a code that is not a unit of that vintage but is one of
/// another vintage is accepted with a note, since one decision covers the
/// name in every year. Otherwise a code outside the vintage is an error
/// naming the decision's line and column.
fn decide(
    matchers: &mut Matchers<'_>,
    vintage: u16,
    d: &Decision,
    any_vintage: bool,
) -> Result<Resolution> {
    let code = match &d.choice {
        Choice::NotAUnit => None,
        Choice::Code(c) => Some(c.as_str()),
    };
    if let Some(r) = matchers.get(vintage).decided(code) {
        return Ok(r);
    }
    let Some(c) = code else {
        unreachable!("`none` always resolves")
    };
    let eras = if any_vintage {
        matchers.reference.eras(c)
    } else {
        Vec::new()
    };
    if let Some(era) = eras.first() {
        let valid = era.valid.from;
        if let Some(mut r) = matchers.get(valid).decided(Some(c)) {
            r.note = format!("decided code is a unit of another vintage (from {valid})");
            return Ok(r);
        }
    }
    Err(Error::input(
        d.location.clone(),
        format!(
            "{c:?} is not a unit in {vintage} (nor in another vintage of the reference); write a code of that vintage, or `{NONE}` to leave the name unmatched"
        ),
    ))
}

/// The year of a row's vintage column: the first four digits ("2015",
/// "2015.0", "2015-06-30"); years after the latest vintage use the latest.
fn row_vintage(table: &Table, row: usize, col: usize, span: (u16, u16)) -> Result<u16> {
    let text = table.records[row][col].trim();
    let digits: String = text.chars().take_while(|c| c.is_ascii_digit()).collect();
    let year = (digits.len() == 4)
        .then(|| digits.parse::<u16>().ok())
        .flatten();
    match year {
        Some(y) if y >= span.0 => Ok(y.min(span.1)),
        Some(y) => Err(Error::input(
            table.location(row, col),
            format!(
                "year {y} is before the reference's first vintage ({})",
                span.0
            ),
        )),
        None => Err(Error::input(
            table.location(row, col),
            format!("{text:?} is not a year (--vintage-column wants a four-digit year per row)"),
        )),
    }
}

/// The names of the added columns for this input.
fn added_columns(table: &Table) -> Result<Vec<String>> {
    let taken = |n: &str| table.headers.iter().any(|h| h == n);
    if !ADDED_COLUMNS.iter().any(|c| taken(c)) {
        return Ok(ADDED_COLUMNS.iter().map(|s| s.to_string()).collect());
    }
    let prefixed: Vec<String> = ADDED_COLUMNS
        .iter()
        .map(|c| format!("{COLUMN_PREFIX}{c}"))
        .collect();
    if let Some(c) = prefixed.iter().find(|c| taken(c)) {
        return Err(Error::input(
            Location::file(&table.path).at_line(1).in_column(c),
            format!(
                "the input already has columns named like the ones match adds ({} and {c}); rename them",
                c.trim_start_matches(COLUMN_PREFIX)
            ),
        ));
    }
    Ok(prefixed)
}

/// One distinct (name, state) of the input.
struct Distinct {
    name: String,
    state: String,
    rows: u64,
    resolution: Resolution,
    /// What the matcher said without the decision (for the review file).
    matcher: Option<Resolution>,
    decided: bool,
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = configure(&args)?;
    let reference = config.source.get();
    let mut matchers = Matchers {
        reference,
        codes: config.codes,
        built: HashMap::new(),
    };
    let decisions = load_decisions(&args)?;
    // Without a vintage column, every decision is checked now, before the
    // long work starts.
    if args.vintage_column.is_none() {
        for d in decisions.values() {
            decide(&mut matchers, config.vintage, d, false)?;
        }
    }

    let table = read_table(
        &args.input,
        ReadOptions {
            delimiter: args.delimiter,
        },
    )?;
    for w in &table.warnings {
        warn(w);
    }
    let name_col = table.column(&args.name_column)?;
    let state_col = args
        .state_column
        .as_deref()
        .map(|c| table.column(c))
        .transpose()?;
    let vintage_col = args
        .vintage_column
        .as_deref()
        .map(|c| table.column(c))
        .transpose()?;
    if state_col.is_some() && !matchers.get(config.vintage).has_parents() {
        return Err(Error::Usage(format!(
            "--state-column: the reference {} has no parent units to read a state against",
            reference.label
        )));
    }
    let added = added_columns(&table)?;

    // Collect each distinct (name, state[, vintage]) once, in input order.
    struct Pending<'t> {
        name: &'t str,
        state: &'t str,
        vintage: u16,
        rows: u64,
    }
    let progress = Progress::new(table.len() as u64, "matching", global.quiet);
    let mut index: HashMap<String, u32> = HashMap::new();
    let mut pending: Vec<Pending> = Vec::new();
    let mut row_of: Vec<u32> = Vec::with_capacity(table.len());
    let mut k = String::new();
    for (i, record) in table.records.iter().enumerate() {
        let name = &record[name_col];
        let state = state_col.map_or("", |c| &record[c]);
        let vintage = match vintage_col {
            Some(c) => row_vintage(&table, i, c, config.span)?,
            None => config.vintage,
        };
        pair_key(&mut k, name, state);
        if vintage_col.is_some() {
            k.push('\u{1f}');
            k.push_str(&vintage.to_string());
        }
        let id = match index.get(k.as_str()) {
            Some(&id) => id,
            None => {
                let id = pending.len() as u32;
                pending.push(Pending {
                    name,
                    state,
                    vintage,
                    rows: 0,
                });
                index.insert(k.clone(), id);
                id
            }
        };
        pending[id as usize].rows += 1;
        row_of.push(id);
    }

    // Resolve the distinct names on every core; the result does not depend
    // on the thread count (each name is resolved alone, results kept in
    // input order).
    let vintages: std::collections::BTreeSet<u16> = pending.iter().map(|p| p.vintage).collect();
    for v in vintages {
        matchers.get(v);
    }
    let ready = &matchers.built;
    let found: Vec<Resolution> = pending
        .par_iter()
        .map(|p| {
            let r = ready[&p.vintage].resolve(p.name, state_col.map(|_| p.state));
            progress.inc(p.rows);
            r
        })
        .collect();
    progress.finish();

    // Decisions win over what the matcher said.
    let mut distinct: Vec<Distinct> = Vec::with_capacity(pending.len());
    for (p, found) in pending.iter().zip(found) {
        pair_key(&mut k, p.name, p.state);
        let (resolution, matcher_said, decided) = match decisions.get(k.as_str()) {
            Some(d) => (
                decide(&mut matchers, p.vintage, d, vintage_col.is_some())?,
                Some(found),
                true,
            ),
            None => (found, None, false),
        };
        distinct.push(Distinct {
            name: p.name.trim().to_string(),
            state: p.state.trim().to_string(),
            rows: p.rows,
            resolution,
            matcher: matcher_said,
            decided,
        });
    }

    // The added fields of each distinct pair, formatted once.
    let fields: Vec<[String; 7]> = distinct
        .iter()
        .map(|d| added_fields(&d.resolution))
        .collect();
    write_to(&config.output, |w: &mut dyn Write| {
        let mut out = csv::WriterBuilder::new()
            .delimiter(table.delimiter)
            .from_writer(w);
        out.write_record(
            table
                .headers
                .iter()
                .map(String::as_str)
                .chain(added.iter().map(String::as_str)),
        )?;
        for (record, &id) in table.records.iter().zip(&row_of) {
            out.write_record(
                record
                    .iter()
                    .chain(fields[id as usize].iter().map(String::as_str)),
            )?;
        }
        out.flush()?;
        Ok(())
    })?;

    if let Some(target) = &config.review {
        write_review(target, &review_items(&distinct))?;
    }
    summarize(
        global,
        &distinct,
        table.len(),
        decisions.len(),
        config.review.is_some(),
    );
    Ok(())
}

fn added_fields(r: &Resolution) -> [String; 7] {
    let candidates: Vec<&str> = r.candidates.iter().map(|c| c.code.as_str()).collect();
    [
        r.code.clone().unwrap_or_default(),
        r.name.clone().unwrap_or_default(),
        r.status.as_str().to_string(),
        r.method.map_or(String::new(), |m| m.as_str().to_string()),
        fixed(r.score, 3),
        r.note.clone(),
        candidates.join(";"),
    ]
}

/// Review rows: what the matcher could not settle, and what a decision
/// settled (so a review file passed back as decisions keeps them). Review
/// before unmatched, then most rows first, then input order.
fn review_items(distinct: &[Distinct]) -> Vec<ReviewItem> {
    let mut items: Vec<(Status, u64, usize, ReviewItem)> = Vec::new();
    // With per-row vintages one (name, state) may need review in several
    // vintages: it gets one review row (the first vintage's reason and
    // candidates) covering all its rows, since a decision covers them all.
    let mut seen: HashMap<(&str, &str), usize> = HashMap::new();
    for (order, d) in distinct.iter().enumerate() {
        let said = d.matcher.as_ref().unwrap_or(&d.resolution);
        if said.status == Status::Matched && !d.decided {
            continue;
        }
        if let Some(&i) = seen.get(&(d.name.as_str(), d.state.as_str())) {
            items[i].1 += d.rows;
            items[i].3.rows += d.rows;
            continue;
        }
        seen.insert((d.name.as_str(), d.state.as_str()), items.len());
        let chosen = if d.decided {
            d.resolution
                .code
                .clone()
                .unwrap_or_else(|| NONE.to_string())
        } else {
            String::new()
        };
        items.push((
            said.status,
            d.rows,
            order,
            ReviewItem {
                name: d.name.clone(),
                state: d.state.clone(),
                status: said.status.as_str().to_string(),
                rows: d.rows,
                reason: said.note.clone(),
                candidates: said.candidates.clone(),
                chosen,
            },
        ));
    }
    items.sort_by(|a, b| a.0.cmp(&b.0).then(b.1.cmp(&a.1)).then(a.2.cmp(&b.2)));
    items.into_iter().map(|x| x.3).collect()
}

fn summarize(
    global: Global,
    distinct: &[Distinct],
    rows: usize,
    decisions: usize,
    review_written: bool,
) {
    let mut by_status: HashMap<Status, u64> = HashMap::new();
    let mut by_method: std::collections::BTreeMap<Method, u64> = std::collections::BTreeMap::new();
    // Counted by (name, state): with per-row vintages a name appears once
    // per vintage in `distinct`.
    let mut names: std::collections::HashSet<(&str, &str)> = std::collections::HashSet::new();
    let mut open: std::collections::HashSet<(&str, &str)> = std::collections::HashSet::new();
    let mut used: std::collections::HashSet<(&str, &str)> = std::collections::HashSet::new();
    for d in distinct {
        let key = (d.name.as_str(), d.state.as_str());
        names.insert(key);
        *by_status.entry(d.resolution.status).or_default() += d.rows;
        if d.resolution.status == Status::Matched {
            if let Some(m) = d.resolution.method {
                *by_method.entry(m).or_default() += d.rows;
            }
        }
        if d.resolution.status != Status::Matched && !d.decided {
            open.insert(key);
        }
        if d.decided {
            used.insert(key);
        }
    }
    let (open, used) = (open.len(), used.len());
    let n = |s| by_status.get(&s).copied().unwrap_or(0);
    let methods: Vec<String> = by_method
        .iter()
        .map(|(m, c)| format!("{} {c}", m.as_str()))
        .collect();
    say(
        global,
        format!(
            "regionkey match: {rows} rows, {} distinct names",
            names.len()
        ),
    );
    say(
        global,
        format!(
            "  matched   {} ({})",
            n(Status::Matched),
            methods.join(", ")
        ),
    );
    say(global, format!("  review    {}", n(Status::Review)));
    say(global, format!("  unmatched {}", n(Status::Unmatched)));
    if decisions > 0 {
        say(global, format!("  decisions used: {used} of {decisions}"));
    }
    if open > 0 && !review_written {
        say(
            global,
            format!("  {open} distinct names need a decision; write them out with --review FILE"),
        );
    }
}
