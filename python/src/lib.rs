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

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use pyo3::conversion::FromPyObjectOwned;
use pyo3::create_exception;
use pyo3::exceptions::PyException;
use pyo3::prelude::*;
use pyo3::types::{PyBytes, PyCFunction, PyDict, PyTuple};
use rayon::prelude::*;

use regionkey::cli::match_names::{prepare, LevelArg};
use regionkey::core::decisions::Decisions;
use regionkey::core::fips::CountyFips;
use regionkey::core::history::lineage;
use regionkey::core::match_table::{self, added_fields, Columns, KeyColumn, ReviewItem};
use regionkey::core::matcher::Status;
use regionkey::error::{Error, Location};
use regionkey::io::builtin::{us_counties, us_states};
use regionkey::io::output::fixed;
use regionkey::io::review::{read_decisions, REVIEW_CANDIDATES};

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

/// What `match_columns` hands back before it becomes Python objects.
struct Result7 {
    row_of: Vec<u32>,
    fields: Vec<[String; 7]>,
    review: Vec<ReviewItem>,
    summary: BTreeMap<String, u64>,
}

/// Matches the columns as `regionkey match` does: the same checks of the
/// options and columns, the same matching (the library's
/// `match_names::prepare` and `match_table::match_columns`). Rows are named
/// in messages as lines of `source_label` (the header is line 1).
#[allow(clippy::too_many_arguments)]
fn match_table(
    names: &Column,
    states: Option<&Column>,
    years: Option<&Column>,
    vintage: Option<u16>,
    level: Option<&str>,
    reference: Option<PathBuf>,
    composites: Option<PathBuf>,
    decisions: Option<PathBuf>,
    source_label: &str,
    column_names: [&str; 3],
) -> Result<Result7, Error> {
    let level = match level {
        None => None,
        Some("county") => Some(LevelArg::County),
        Some("state") => Some(LevelArg::State),
        Some(other) => {
            return Err(Error::Usage(format!(
                "level {other:?}: choose \"county\" or \"state\""
            )))
        }
    };
    let (source, settings) = prepare(
        level,
        reference.as_deref(),
        composites.as_deref(),
        vintage,
        states.is_some(),
    )?;
    let decisions = match &decisions {
        Some(path) => read_decisions(path)?,
        None => Decisions::default(),
    };
    fn texts(c: &Column) -> Vec<&str> {
        (0..c.len).map(|i| c.get(i)).collect()
    }
    let name_texts = texts(names);
    let state_texts = states.map(texts);
    let year_texts = years.map(texts);
    let at = |row: usize, key: KeyColumn| {
        let column = match key {
            KeyColumn::Name => column_names[0],
            KeyColumn::State => column_names[1],
            KeyColumn::Year => column_names[2],
        };
        Location::file(source_label)
            .at_line(row as u64 + 2)
            .in_column(column)
    };
    let matched = match_table::match_columns(
        source.get(),
        settings,
        Columns {
            names: &name_texts,
            states: state_texts.as_deref(),
            years: year_texts.as_deref(),
        },
        &decisions,
        &at,
        &|_| {},
    )?;
    let fields: Vec<[String; 7]> = matched
        .keys
        .par_iter()
        .map(|k| added_fields(&k.resolution))
        .collect();
    let tally = matched.tally();
    let mut summary: BTreeMap<String, u64> = BTreeMap::new();
    summary.insert("rows".into(), tally.rows);
    summary.insert("distinct_names".into(), tally.names as u64);
    for s in [Status::Matched, Status::Review, Status::Unmatched] {
        summary.insert(
            s.as_str().to_string(),
            tally.by_status.get(&s).copied().unwrap_or(0),
        );
    }
    for (m, rows) in &tally.by_method {
        summary.insert(format!("method:{}", m.as_str()), *rows);
    }
    summary.insert("decisions_used".into(), tally.decisions_used as u64);
    Ok(Result7 {
        row_of: matched.row_key,
        fields,
        review: matched.review,
        summary,
    })
}

/// The `i`th positional argument.
fn arg<'py, T: FromPyObjectOwned<'py>>(args: &Bound<'py, PyTuple>, i: usize) -> PyResult<T> {
    args.get_item(i)?.extract::<T>().map_err(Into::into)
}

/// `match_columns(names, states, years, vintage, level, reference,
/// composites, decisions, source_label, name_column, state_column,
/// vintage_column)`: matches name columns; returns a dict with the row ids
/// (little-endian u32 bytes), the seven added fields of each distinct name
/// (as columns), the review table (as columns) and summary counts.
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
    let composites: Option<PathBuf> = arg(args, 6)?;
    let decisions: Option<PathBuf> = arg(args, 7)?;
    let label: String = arg(args, 8)?;
    let name_column: String = arg(args, 9)?;
    let state_column: Option<String> = arg(args, 10)?;
    let vintage_column: Option<String> = arg(args, 11)?;
    if states.as_ref().is_some_and(|s| s.len != names.len)
        || years.as_ref().is_some_and(|s| s.len != names.len)
    {
        return Err(RegionkeyError::new_err(
            "the name, state and year columns differ in length",
        ));
    }
    let result = py
        .detach(|| {
            match_table(
                &names,
                states.as_ref(),
                years.as_ref(),
                vintage,
                level.as_deref(),
                reference,
                composites,
                decisions,
                &label,
                [
                    &name_column,
                    state_column.as_deref().unwrap_or(""),
                    vintage_column.as_deref().unwrap_or(""),
                ],
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
        "years",
        items
            .iter()
            .map(|i| i.years.to_string())
            .collect::<Vec<_>>(),
    )?;
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

/// `apply_files(data, crosswalk, to_vintage, code_column, state_column,
/// period_column, sums, ratios, means, min_coverage, decimals, missing,
/// all_units, output, report)`: `regionkey apply` through the library: its
/// checked configuration ([`apply::Config::from_args`]) and [`apply::execute`],
/// on a data file and a crosswalk file (or `None` with `to_vintage`),
/// writing the results (and the report, if a path is given). Returns the
/// rows read and allocated.
fn apply_files(args: &Bound<'_, PyTuple>) -> PyResult<(u64, u64)> {
    use regionkey::cli::{apply, group::WeightBy};
    let a = apply::Args {
        data: PathBuf::from(arg::<String>(args, 0)?),
        crosswalk: arg::<Option<String>>(args, 1)?.map(PathBuf::from),
        to_vintage: arg(args, 2)?,
        code_column: arg(args, 3)?,
        state_column: arg(args, 4)?,
        period_column: arg(args, 5)?,
        sums: arg(args, 6)?,
        ratios: arg(args, 7)?,
        means: arg(args, 8)?,
        min_coverage: arg(args, 9)?,
        decimals: arg(args, 10)?,
        separator: None,
        missing: arg(args, 11)?,
        allow_name: Vec::new(),
        all_units: arg(args, 12)?,
        skip_unweighted: false,
        output: arg(args, 13)?,
        report: arg::<Option<String>>(args, 14)?.map(PathBuf::from),
        emit_sql: None,
        sql_tables: "data,crosswalk".into(),
        split_by: WeightBy::Area,
        population: None,
    };
    let report = args
        .py()
        .detach(|| apply::Config::from_args(&a).and_then(|c| apply::execute(&c)))
        .map_err(py_err)?;
    Ok((report.rows, report.rows_allocated))
}

/// `overlay_layers(from, to, from_key, to_key, from_object, to_object,
/// weight, population, population_field, min_share, output)`: `regionkey
/// overlay` through the library: a [`overlay::Config`] made here (the
/// checks of the command's options repeated) and [`overlay::execute`],
/// which writes the crosswalk file and its sidecar to `output`. Returns the
/// crosswalk's columns (from_code, to_code, weight, target_share, basis)
/// from memory, unrounded.
fn overlay_layers<'py>(args: &Bound<'py, PyTuple>) -> PyResult<Bound<'py, PyDict>> {
    use regionkey::cli::overlay;
    use regionkey::io::geo::{LayerRequest, RepeatedKeys};
    use regionkey::io::output::Target;
    let py = args.py();
    let from: String = arg(args, 0)?;
    let to: String = arg(args, 1)?;
    let weight: String = arg(args, 6)?;
    let population: Option<String> = arg(args, 7)?;
    let field: Option<String> = arg(args, 8)?;
    let min_share: Option<f64> = arg(args, 9)?;
    let min_share = min_share.unwrap_or(regionkey::core::overlay::DEFAULT_MIN_SHARE);
    if !(0.0..0.5).contains(&min_share) {
        return Err(RegionkeyError::new_err(format!(
            "--min-share {min_share} is out of range; give a share from 0 (keep everything) up to below 0.5"
        )));
    }
    let population = match (weight.as_str(), population, field) {
        ("population", Some(p), Some(f)) => Some((p, f)),
        ("population", None, _) => {
            return Err(RegionkeyError::new_err(
                "--weight population needs --population LAYER and --population-field FIELD",
            ))
        }
        ("population", Some(_), None) => {
            return Err(RegionkeyError::new_err(
                "--population needs --population-field FIELD (the count column)",
            ))
        }
        ("area", None, None) => None,
        ("area", _, _) => {
            return Err(RegionkeyError::new_err(
                "--population is used only with --weight population",
            ))
        }
        (other, _, _) => {
            return Err(RegionkeyError::new_err(format!(
                "weight {other:?}: choose \"area\" or \"population\""
            )))
        }
    };
    let label = |spec: &str| -> String {
        match spec.strip_prefix("builtin:") {
            Some(b) => b.to_string(),
            None => std::path::Path::new(spec)
                .file_stem()
                .map(|n| {
                    n.to_string_lossy()
                        .split('.')
                        .next()
                        .unwrap_or("")
                        .to_string()
                })
                .unwrap_or_default(),
        }
    };
    let config = overlay::Config {
        from_label: label(&from),
        to_label: label(&to),
        from: LayerRequest {
            spec: from,
            key: arg(args, 2)?,
            object: arg(args, 4)?,
            key_option: "--from-key",
            object_option: "--from-object",
        },
        to: LayerRequest {
            spec: to,
            key: arg(args, 3)?,
            object: arg(args, 5)?,
            key_option: "--to-key",
            object_option: "--to-object",
        },
        population,
        min_share,
        parent_digits: None,
        repeated: RepeatedKeys::Merge,
        quiet: true,
        output: Target::File(PathBuf::from(arg::<String>(args, 10)?)),
        report: None,
    };
    let report = py.detach(|| overlay::execute(&config)).map_err(py_err)?;
    let rows = &report.crosswalk.rows;
    let d = PyDict::new(py);
    d.set_item(
        "from_code",
        rows.iter()
            .map(|r| r.from_code.as_str())
            .collect::<Vec<_>>(),
    )?;
    d.set_item(
        "to_code",
        rows.iter()
            .map(|r| r.to_code.as_deref())
            .collect::<Vec<_>>(),
    )?;
    d.set_item("weight", rows.iter().map(|r| r.weight).collect::<Vec<_>>())?;
    d.set_item(
        "target_share",
        rows.iter().map(|r| r.target_share).collect::<Vec<_>>(),
    )?;
    d.set_item(
        "basis",
        rows.iter().map(|r| r.basis.as_str()).collect::<Vec<_>>(),
    )?;
    Ok(d)
}

/// `sql_query(dialect, data_table, crosswalk_table, has_origin, code_column,
/// state_column, period_column, codes, variables, min_coverage)`: the query
/// of `apply --emit-sql` (see `regionkey::core::sql`). `codes` is "county",
/// "state", "digits:WIDTH" or "text"; `variables` is a list of (kind, name, first column,
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
        digits if digits.starts_with("digits:") => {
            Codes::Digits(digits["digits:".len()..].parse().map_err(|_| {
                RegionkeyError::new_err(format!("codes {digits:?}: expected digits:WIDTH"))
            })?)
        }
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
        columns: Vec::new(),
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
    add(&m, c"apply_files", apply_files)?;
    add(&m, c"overlay_layers", |a| {
        overlay_layers(a).map(|d| d.unbind())
    })?;
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
