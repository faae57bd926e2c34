//! The native part of the `regionkey` Python package: thin calls into the
//! regionkey library. Columns cross the boundary as Arrow buffers (offsets
//! and bytes of a large-string array) copied once, never row by row; the
//! Python side (`regionkey/__init__.py`) turns DataFrames into those
//! buffers and the results back into DataFrames.
//!
//! Errors become `regionkey.RegionkeyError` carrying the command's message.
//!
//! The functions are registered by hand (no `#[pyfunction]` macros): pyo3's
//! macros would turn on features of `syn` that the command's build does not
//! use, and the wheel could then not reuse the dependencies `cargo build`
//! compiled. Python calls them with positional arguments only
//! (`regionkey/__init__.py` does).

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::path::PathBuf;

use pyo3::conversion::FromPyObjectOwned;
use pyo3::create_exception;
use pyo3::exceptions::PyException;
use pyo3::prelude::*;
use pyo3::types::{PyBytes, PyCFunction, PyDict, PyTuple};
use rayon::prelude::*;

use regionkey::core::fips::CountyFips;
use regionkey::core::history::lineage;
use regionkey::core::matcher::{CodeForm, Matcher, Method, Resolution, Status};
use regionkey::core::reference::Reference;
use regionkey::error::{Error, Location};
use regionkey::io::builtin::{read_reference_file, us_counties, us_states};
use regionkey::io::output::fixed;
use regionkey::io::review::{
    read_decisions, Choice, Decision, ReviewItem, NONE, REVIEW_CANDIDATES,
};

create_exception!(
    regionkey,
    RegionkeyError,
    PyException,
    "Bad input or options; the message is the one the command prints."
);

fn py_err(e: Error) -> PyErr {
    RegionkeyError::new_err(e.to_string())
}

/// A string column as Arrow lays it out: i64 offsets, UTF-8 bytes, and the
/// array's offset and length within them. Nulls arrive as empty strings.
struct Column {
    offsets: Vec<i64>,
    data: Vec<u8>,
    start: usize,
    len: usize,
}

impl Column {
    fn from_py(t: &Bound<'_, PyAny>, what: &str) -> PyResult<Column> {
        let (offsets, data, start, len): (Bound<'_, PyBytes>, Bound<'_, PyBytes>, usize, usize) =
            t.extract()?;
        let raw = offsets.as_bytes();
        if raw.len() % 8 != 0 || raw.len() / 8 < start + len + 1 {
            return Err(RegionkeyError::new_err(format!(
                "{what}: malformed column buffers"
            )));
        }
        let offsets: Vec<i64> = raw
            .chunks_exact(8)
            .map(|c| i64::from_le_bytes(c.try_into().unwrap_or([0; 8])))
            .collect();
        let data = data.as_bytes().to_vec();
        let last = offsets[start + len];
        if last < 0 || last as usize > data.len() || std::str::from_utf8(&data).is_err() {
            return Err(RegionkeyError::new_err(format!(
                "{what}: malformed column buffers"
            )));
        }
        Ok(Column {
            offsets,
            data,
            start,
            len,
        })
    }

    fn get(&self, i: usize) -> &str {
        let (a, b) = (
            self.offsets[self.start + i] as usize,
            self.offsets[self.start + i + 1] as usize,
        );
        // Checked as UTF-8 as a whole; offsets of an Arrow string array
        // fall on character boundaries.
        std::str::from_utf8(&self.data[a..b]).unwrap_or("")
    }
}

/// Where the units come from.
enum Source {
    Builtin(&'static Reference),
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

/// The latest vintage the built-in references describe (reference/README.md).
const BUILTIN_LATEST_VINTAGE: u16 = 2023;

fn pair_key(buf: &mut String, name: &str, state: &str) {
    buf.clear();
    buf.push_str(name.trim());
    buf.push('\u{1f}');
    buf.push_str(state.trim());
}

/// The year of a row's vintage value, as `regionkey match --vintage-column`
/// reads it: the first four digits; years after the latest vintage use the
/// latest.
fn row_vintage(text: &str, span: (u16, u16), location: Location) -> Result<u16, Error> {
    let text = text.trim();
    let digits: String = text.chars().take_while(|c| c.is_ascii_digit()).collect();
    let year = (digits.len() == 4)
        .then(|| digits.parse::<u16>().ok())
        .flatten();
    match year {
        Some(y) if y >= span.0 => Ok(y.min(span.1)),
        Some(y) => Err(Error::input(
            location,
            format!(
                "year {y} is before the reference's first vintage ({})",
                span.0
            ),
        )),
        None => Err(Error::input(
            location,
            format!("{text:?} is not a year (--vintage-column wants a four-digit year per row)"),
        )),
    }
}

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

fn decide(
    matchers: &mut Matchers<'_>,
    vintage: u16,
    d: &Decision,
    any_vintage: bool,
) -> Result<Resolution, Error> {
    let code = match &d.choice {
        Choice::NotAUnit => None,
        Choice::Code(c) => Some(c.as_str()),
    };
    if let Some(r) = matchers.get(vintage).decided(code) {
        return Ok(r);
    }
    let c = code.unwrap_or_default();
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

struct Distinct {
    name: String,
    state: String,
    rows: u64,
    resolution: Resolution,
    matcher: Option<Resolution>,
    decided: bool,
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

fn review_items(distinct: &[Distinct]) -> Vec<ReviewItem> {
    let mut items: Vec<(Status, u64, usize, ReviewItem)> = Vec::new();
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

/// What `match_columns` hands back before it becomes Python objects.
struct Matched {
    row_of: Vec<u32>,
    fields: Vec<[String; 7]>,
    review: Vec<ReviewItem>,
    summary: BTreeMap<String, u64>,
}

#[allow(clippy::too_many_arguments)]
fn match_rows(
    names: &Column,
    states: Option<&Column>,
    years: Option<&Column>,
    vintage: Option<u16>,
    level: Option<&str>,
    reference: Option<PathBuf>,
    decisions: Option<PathBuf>,
    source_label: &str,
    state_column: Option<&str>,
    vintage_column: Option<&str>,
) -> Result<Matched, Error> {
    let (source, codes) = match (&reference, level) {
        (Some(_), Some(_)) => {
            return Err(Error::Usage(
                "--level chooses a built-in reference; it cannot be combined with --reference"
                    .into(),
            ))
        }
        (Some(path), None) => (Source::File(read_reference_file(path)?), CodeForm::Plain),
        (None, Some("state")) => (Source::Builtin(us_states()?), CodeForm::State),
        (None, None) | (None, Some("county")) => {
            (Source::Builtin(us_counties()?), CodeForm::County)
        }
        (None, Some(other)) => {
            return Err(Error::Usage(format!(
                "level {other:?}: choose \"county\" or \"state\""
            )))
        }
    };
    if codes == CodeForm::State && states.is_some() {
        return Err(Error::Usage(
            "--state-column has no meaning with --level state: the names are the states".into(),
        ));
    }
    let r = source.get();
    let latest = match source {
        Source::Builtin(_) => r.latest_year().unwrap_or(0).max(BUILTIN_LATEST_VINTAGE),
        Source::File(_) => r.latest_year().unwrap_or(0),
    };
    let config_vintage = vintage.unwrap_or(latest);
    let first = r.units.iter().map(|u| u.valid.from).min().unwrap_or(0);
    if codes == CodeForm::County && (config_vintage < first || config_vintage > latest) {
        return Err(Error::Usage(format!(
            "--vintage {config_vintage}: the built-in county reference covers {first}-{latest}"
        )));
    }
    let span = (first, latest);
    let mut matchers = Matchers {
        reference: r,
        codes,
        built: HashMap::new(),
    };
    let mut decided: HashMap<String, Decision> = HashMap::new();
    if let Some(path) = &decisions {
        for d in read_decisions(path)? {
            let mut k = String::new();
            pair_key(&mut k, &d.name, &d.state);
            decided.insert(k, d);
        }
    }
    if years.is_none() {
        for d in decided.values() {
            decide(&mut matchers, config_vintage, d, false)?;
        }
    }
    if states.is_some() && !matchers.get(config_vintage).has_parents() {
        return Err(Error::Usage(format!(
            "--state-column: the reference {} has no parent units to read a state against",
            r.label
        )));
    }

    struct Pending<'t> {
        name: &'t str,
        state: &'t str,
        vintage: u16,
        rows: u64,
    }
    let n = names.len;
    let mut index: HashMap<String, u32> = HashMap::new();
    let mut pending: Vec<Pending> = Vec::new();
    let mut row_of: Vec<u32> = Vec::with_capacity(n);
    let mut k = String::new();
    for i in 0..n {
        let name = names.get(i);
        let state = states.map_or("", |c| c.get(i));
        let vintage = match years {
            Some(c) => row_vintage(
                c.get(i),
                span,
                Location::file(source_label)
                    .at_line(i as u64 + 2)
                    .in_column(vintage_column.unwrap_or("vintage")),
            )?,
            None => config_vintage,
        };
        pair_key(&mut k, name, state);
        if years.is_some() {
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
    let vintages: BTreeSet<u16> = pending.iter().map(|p| p.vintage).collect();
    for v in vintages {
        matchers.get(v);
    }
    let ready = &matchers.built;
    let found: Vec<Resolution> = pending
        .par_iter()
        .map(|p| ready[&p.vintage].resolve(p.name, states.map(|_| p.state)))
        .collect();
    let mut distinct: Vec<Distinct> = Vec::with_capacity(pending.len());
    for (p, found) in pending.iter().zip(found) {
        pair_key(&mut k, p.name, p.state);
        let (resolution, said, was_decided) = match decided.get(k.as_str()) {
            Some(d) => (
                decide(&mut matchers, p.vintage, d, years.is_some())?,
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
            matcher: said,
            decided: was_decided,
        });
    }
    let fields: Vec<[String; 7]> = distinct
        .par_iter()
        .map(|d| added_fields(&d.resolution))
        .collect();
    let review = review_items(&distinct);
    let mut summary: BTreeMap<String, u64> = BTreeMap::new();
    summary.insert("rows".into(), n as u64);
    let names_seen: BTreeSet<(&str, &str)> = distinct
        .iter()
        .map(|d| (d.name.as_str(), d.state.as_str()))
        .collect();
    summary.insert("distinct_names".into(), names_seen.len() as u64);
    for d in &distinct {
        *summary
            .entry(d.resolution.status.as_str().to_string())
            .or_default() += d.rows;
        if d.resolution.status == Status::Matched {
            if let Some(m) = d.resolution.method {
                *summary.entry(format!("method:{}", m.as_str())).or_default() += d.rows;
            }
        }
    }
    for s in [Status::Matched, Status::Review, Status::Unmatched] {
        summary.entry(s.as_str().to_string()).or_default();
    }
    let _ = (state_column, Method::Decision);
    Ok(Matched {
        row_of,
        fields,
        review,
        summary,
    })
}

/// The `i`th positional argument.
fn arg<'py, T: FromPyObjectOwned<'py>>(args: &Bound<'py, PyTuple>, i: usize) -> PyResult<T> {
    args.get_item(i)?.extract::<T>().map_err(Into::into)
}

/// `match_columns(names, states, years, vintage, level, reference,
/// decisions, source_label, state_column, vintage_column)`: matches name
/// columns; returns a dict with the row ids (little-endian u32 bytes), the
/// seven added fields of each distinct name (as columns), the review table
/// (as columns) and summary counts.
fn match_columns<'py>(args: &Bound<'py, PyTuple>) -> PyResult<Bound<'py, PyDict>> {
    let py = args.py();
    let column = |i: usize, what: &str| -> PyResult<Option<Column>> {
        let a = args.get_item(i)?;
        if a.is_none() {
            Ok(None)
        } else {
            Column::from_py(&a, what).map(Some)
        }
    };
    let names =
        column(0, "names")?.ok_or_else(|| RegionkeyError::new_err("a name column is required"))?;
    let states = column(1, "states")?;
    let years = column(2, "years")?;
    let vintage: Option<u16> = arg(args, 3)?;
    let level: Option<String> = arg(args, 4)?;
    let reference: Option<PathBuf> = arg(args, 5)?;
    let decisions: Option<PathBuf> = arg(args, 6)?;
    let label: String = arg(args, 7)?;
    let state_column: Option<String> = arg(args, 8)?;
    let vintage_column: Option<String> = arg(args, 9)?;
    if states.as_ref().is_some_and(|s| s.len != names.len)
        || years.as_ref().is_some_and(|s| s.len != names.len)
    {
        return Err(RegionkeyError::new_err(
            "the name, state and year columns differ in length",
        ));
    }
    let result = py
        .detach(|| {
            match_rows(
                &names,
                states.as_ref(),
                years.as_ref(),
                vintage,
                level.as_deref(),
                reference,
                decisions,
                &label,
                state_column.as_deref(),
                vintage_column.as_deref(),
            )
        })
        .map_err(py_err)?;
    let out = PyDict::new(py);
    let ids: Vec<u8> = result.row_of.iter().flat_map(|i| i.to_le_bytes()).collect();
    out.set_item("row_ids", PyBytes::new(py, &ids))?;
    let mut columns: Vec<Vec<&str>> = vec![Vec::with_capacity(result.fields.len()); 7];
    for f in &result.fields {
        for (c, v) in columns.iter_mut().zip(f.iter()) {
            c.push(v.as_str());
        }
    }
    out.set_item("distinct", columns)?;
    out.set_item("review", review_columns(py, &result.review)?)?;
    out.set_item("summary", result.summary)?;
    Ok(out)
}

/// The review items as columns, in the review file's column order.
fn review_columns<'py>(py: Python<'py>, items: &[ReviewItem]) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    d.set_item("name", items.iter().map(|i| &i.name).collect::<Vec<_>>())?;
    d.set_item("state", items.iter().map(|i| &i.state).collect::<Vec<_>>())?;
    d.set_item(
        "status",
        items.iter().map(|i| &i.status).collect::<Vec<_>>(),
    )?;
    d.set_item(
        "rows",
        items.iter().map(|i| i.rows.to_string()).collect::<Vec<_>>(),
    )?;
    d.set_item(
        "reason",
        items.iter().map(|i| &i.reason).collect::<Vec<_>>(),
    )?;
    for k in 0..REVIEW_CANDIDATES {
        let get = |f: &dyn Fn(&regionkey::core::matcher::Candidate) -> String| {
            items
                .iter()
                .map(|i| i.candidates.get(k).map_or(String::new(), f))
                .collect::<Vec<_>>()
        };
        d.set_item(
            format!("candidate_{}_code", k + 1),
            get(&|c| c.code.clone()),
        )?;
        d.set_item(
            format!("candidate_{}_name", k + 1),
            get(&|c| c.name.clone()),
        )?;
        d.set_item(
            format!("candidate_{}_score", k + 1),
            get(&|c| fixed(c.score, 3)),
        )?;
    }
    d.set_item(
        "chosen_code",
        items.iter().map(|i| &i.chosen).collect::<Vec<_>>(),
    )?;
    Ok(d)
}

/// `history(unit)`: a unit's story as columns year, event, code, text, source.
fn history<'py>(args: &Bound<'py, PyTuple>) -> PyResult<Bound<'py, PyDict>> {
    let py = args.py();
    let unit: String = arg(args, 0)?;
    let unit = unit.as_str();
    let reference = us_counties().map_err(py_err)?;
    let codes: BTreeSet<String> = match unit.parse::<CountyFips>() {
        Ok(code) => [code.to_string()].into(),
        Err(_) => {
            let squash = |t: &str| -> String {
                t.chars()
                    .filter(|c| c.is_alphanumeric())
                    .flat_map(char::to_lowercase)
                    .collect()
            };
            let q = squash(unit);
            reference
                .units
                .iter()
                .filter(|u| squash(&u.name) == q || squash(&u.full_name()) == q)
                .map(|u| u.code.clone())
                .collect()
        }
    };
    let events: Vec<_> = codes.iter().flat_map(|c| lineage(reference, c)).collect();
    if events.is_empty() {
        return Err(py_err(Error::Usage(format!(
            "{unit:?} is not a county code or county name of any vintage since 1970 in the built-in reference"
        ))));
    }
    let d = PyDict::new(py);
    d.set_item("year", events.iter().map(|e| e.year).collect::<Vec<_>>())?;
    d.set_item("event", events.iter().map(|e| &e.event).collect::<Vec<_>>())?;
    d.set_item("code", events.iter().map(|e| &e.code).collect::<Vec<_>>())?;
    d.set_item("text", events.iter().map(|e| &e.text).collect::<Vec<_>>())?;
    d.set_item(
        "source",
        events.iter().map(|e| &e.source).collect::<Vec<_>>(),
    )?;
    Ok(d)
}

/// `reference_table(level, vintage)`: a built-in reference as columns
/// code, name, description, full_name, parent, valid_from, valid_to (None
/// while still valid). With a vintage, only the units of that year.
fn reference_table<'py>(args: &Bound<'py, PyTuple>) -> PyResult<Bound<'py, PyDict>> {
    let py = args.py();
    let level: String = arg(args, 0)?;
    let level = level.as_str();
    let vintage: Option<u16> = arg(args, 1)?;
    let r = match level {
        "county" => us_counties(),
        "state" => us_states(),
        other => Err(Error::Usage(format!(
            "level {other:?}: choose \"county\" or \"state\""
        ))),
    }
    .map_err(py_err)?;
    let units: Vec<_> = match vintage {
        Some(y) => r.units_in(y).collect(),
        None => r.units.iter().collect(),
    };
    if units.is_empty() {
        return Err(py_err(Error::Usage(format!(
            "vintage {}: the built-in {level} reference has no units for that year",
            vintage.unwrap_or(0)
        ))));
    }
    let d = PyDict::new(py);
    d.set_item("code", units.iter().map(|u| &u.code).collect::<Vec<_>>())?;
    d.set_item("name", units.iter().map(|u| &u.name).collect::<Vec<_>>())?;
    d.set_item(
        "description",
        units.iter().map(|u| &u.description).collect::<Vec<_>>(),
    )?;
    d.set_item(
        "full_name",
        units.iter().map(|u| u.full_name()).collect::<Vec<_>>(),
    )?;
    d.set_item(
        "parent",
        units.iter().map(|u| u.parent.clone()).collect::<Vec<_>>(),
    )?;
    d.set_item(
        "valid_from",
        units.iter().map(|u| u.valid.from).collect::<Vec<_>>(),
    )?;
    d.set_item(
        "valid_to",
        units.iter().map(|u| u.valid.to).collect::<Vec<_>>(),
    )?;
    Ok(d)
}

/// `run_command(args)`: runs `regionkey apply` or `regionkey overlay` on
/// files (`args` as the command line would give them, without the program
/// name), until these steps have an in-memory library entry.
fn run_command(args: &Bound<'_, PyTuple>) -> PyResult<()> {
    use clap::Parser;
    let py = args.py();
    let args: Vec<String> = arg(args, 0)?;
    let argv = std::iter::once("regionkey".to_string()).chain(args);
    let cli = regionkey::cli::Cli::try_parse_from(argv)
        .map_err(|e| RegionkeyError::new_err(e.to_string()))?;
    let global = regionkey::cli::Global { quiet: true };
    py.detach(|| {
        use regionkey::cli::{apply, overlay, Command};
        match cli.command {
            Command::Apply(a) => apply::run(a, global),
            Command::Overlay(a) => overlay::run(a, global),
            _ => Err(Error::Usage(
                "only apply and overlay run through run_command".into(),
            )),
        }
    })
    .map_err(py_err)
}

/// `sql_query(dialect, data_table, crosswalk_table, has_origin, code_column,
/// state_column, period_column, codes, variables, min_coverage)`: the query
/// of `apply --emit-sql` (see `regionkey::core::sql`). `codes` is "county",
/// "state" or "text"; `variables` is a list of (kind, name, first column,
/// second column or None) with kind "sum", "ratio" or "mean".
fn sql_query(args: &Bound<'_, PyTuple>) -> PyResult<String> {
    use regionkey::core::sql::{CodeForm as Codes, Dialect, Query, Variable};
    let dialect: String = arg(args, 0)?;
    let dialect: Dialect = dialect
        .parse()
        .map_err(|e: String| RegionkeyError::new_err(format!("--emit-sql: {e}")))?;
    let codes: String = arg(args, 7)?;
    let codes = match codes.as_str() {
        "county" => Codes::County,
        "state" => Codes::State,
        "text" => Codes::Text,
        other => {
            return Err(RegionkeyError::new_err(format!(
                "codes {other:?}: choose \"county\", \"state\" or \"text\""
            )))
        }
    };
    let raw: Vec<(String, String, String, Option<String>)> = arg(args, 8)?;
    let mut variables = Vec::new();
    for (kind, name, first, second) in raw {
        variables.push(match (kind.as_str(), second) {
            ("sum", _) => Variable::Count(first),
            ("ratio", Some(denominator)) => Variable::Ratio {
                name,
                numerator: first,
                denominator,
            },
            ("mean", weight) => Variable::Mean {
                column: first,
                weight,
            },
            _ => {
                return Err(RegionkeyError::new_err(format!(
                    "variable {name:?}: expected a sum, a ratio NAME=NUM/DEN or a mean"
                )))
            }
        });
    }
    if variables.is_empty() {
        return Err(RegionkeyError::new_err(
            "nothing to carry: name at least one variable with --sum COL, --ratio NAME=NUM/DEN or --mean COL[:WEIGHT]",
        ));
    }
    let query = Query {
        dialect,
        data_table: arg(args, 1)?,
        crosswalk_table: arg(args, 2)?,
        crosswalk_has_origin: arg(args, 3)?,
        code_column: arg(args, 4)?,
        state_column: arg(args, 5)?,
        period_column: arg(args, 6)?,
        codes,
        variables,
        min_coverage: arg(args, 9)?,
    };
    Ok(query.render())
}

/// Adds a function taking positional arguments to the module.
fn add<F, R>(m: &Bound<'_, PyModule>, name: &'static std::ffi::CStr, f: F) -> PyResult<()>
where
    F: Fn(&Bound<'_, PyTuple>) -> PyResult<R> + Send + Sync + 'static,
    for<'p> PyResult<R>: pyo3::impl_::callback::IntoPyCallbackOutput<'p, *mut pyo3::ffi::PyObject>,
{
    let function = PyCFunction::new_closure(
        m.py(),
        Some(name),
        None,
        move |args: &Bound<'_, PyTuple>, _kwargs: Option<&Bound<'_, PyDict>>| f(args),
    )?;
    m.add(name.to_str().unwrap_or("function"), function)
}

/// The module's definition (single-phase initialization).
static mut MODULE_DEF: pyo3::ffi::PyModuleDef = pyo3::ffi::PyModuleDef {
    m_base: pyo3::ffi::PyModuleDef_HEAD_INIT,
    m_name: c"regionkey._regionkey".as_ptr(),
    m_doc: std::ptr::null(),
    m_size: -1,
    m_methods: std::ptr::null_mut(),
    m_slots: std::ptr::null_mut(),
    m_traverse: None,
    m_clear: None,
    m_free: None,
};

fn module(py: Python<'_>) -> PyResult<Bound<'_, PyModule>> {
    // SAFETY: the definition is static and handed to Python once, on import.
    let m = unsafe {
        Bound::from_owned_ptr_or_err(py, pyo3::ffi::PyModule_Create(&raw mut MODULE_DEF))?
    };
    let m = m.cast_into::<PyModule>()?;
    m.add("RegionkeyError", py.get_type::<RegionkeyError>())?;
    add(&m, c"match_columns", |a| {
        match_columns(a).map(|d| d.unbind())
    })?;
    add(&m, c"history", |a| history(a).map(|d| d.unbind()))?;
    add(&m, c"reference_table", |a| {
        reference_table(a).map(|d| d.unbind())
    })?;
    add(&m, c"run_command", run_command)?;
    add(&m, c"sql_query", sql_query)?;
    m.add("CAUTION", regionkey::cli::apply::CAUTION)?;
    Ok(m)
}

/// The module's entry point, called by Python on `import`.
///
/// # Safety
/// Called by the Python interpreter only, with the interpreter initialized.
#[no_mangle]
pub unsafe extern "C" fn PyInit__regionkey() -> *mut pyo3::ffi::PyObject {
    Python::attach(|py| match module(py) {
        Ok(m) => m.into_ptr(),
        Err(e) => {
            e.restore(py);
            std::ptr::null_mut()
        }
    })
}
