//! Matching a whole table in memory: columns of names, states and years
//! in; one resolution per distinct (name, state, year), the row -> result
//! map, and the review list out. The command `regionkey match` and the
//! Python package both call [`match_rows`].
//!
//! Each distinct (name, state, year) is resolved once, against the units of
//! its own vintage (a year after the reference's latest vintage uses the
//! latest). Decisions win over the matcher in the years they cover
//! ([`crate::core::decisions`]). The review list has one row per (name,
//! state) and run of years that resolved alike, so a name that needs a
//! person in 2022-2023 but not before is listed for 2022-2023 only.

use std::collections::{BTreeMap, BTreeSet, HashMap, HashSet};

use rayon::prelude::*;

use crate::core::composite;
use crate::core::decisions::{Choice, Decision, Decisions, Years, NONE};
use crate::core::fips;
use crate::core::matcher::{Candidate, CodeForm, Matcher, Method, Resolution, Status};
use crate::core::reference::Reference;
use crate::error::{Error, Location, Result};

/// The columns `regionkey match` adds to every row, in order.
pub const ADDED_COLUMNS: [&str; 7] = [
    "code",
    "code_name",
    "match_status",
    "match_method",
    "match_score",
    "note",
    "candidates",
];

/// The added fields of one resolution, in the order of [`ADDED_COLUMNS`]
/// (the score with three decimals; candidates joined by `;`).
pub fn added_fields(r: &Resolution) -> [String; 7] {
    let candidates: Vec<&str> = r.candidates.iter().map(|c| c.code.as_str()).collect();
    [
        r.code.clone().unwrap_or_default(),
        r.name.clone().unwrap_or_default(),
        r.status.as_str().to_string(),
        r.method.map_or(String::new(), |m| m.as_str().to_string()),
        // Scores lie in 0..=1, so no negative zero can appear.
        format!("{:.3}", r.score),
        r.note.clone(),
        candidates.join(";"),
    ]
}

/// What the rows are matched against.
#[derive(Debug, Clone, Copy)]
pub struct Settings {
    /// How numbers in the name column are read.
    pub codes: CodeForm,
    /// The vintage of rows without a year of their own.
    pub vintage: u16,
    /// First and latest vintage the reference covers; row years after the
    /// latest use the latest, years before the first are refused.
    pub span: (u16, u16),
}

/// Hashing for the index of distinct keys, looked up once per input row:
/// a multiply-rotate hash over eight bytes at a time (the one rustc uses
/// for its own tables), several times faster than the standard library's
/// SipHash on short names. The order of the keys never depends on it.
#[derive(Debug, Clone, Copy, Default)]
struct KeyHashing;

impl std::hash::BuildHasher for KeyHashing {
    type Hasher = KeyHasher;
    fn build_hasher(&self) -> KeyHasher {
        KeyHasher(0)
    }
}

/// The hasher of [`KeyHashing`].
#[derive(Debug, Clone, Copy)]
struct KeyHasher(u64);

impl KeyHasher {
    fn add(&mut self, word: u64) {
        self.0 = (self.0.rotate_left(5) ^ word).wrapping_mul(0x51_7c_c1_b7_27_22_0a_95);
    }
}

impl std::hash::Hasher for KeyHasher {
    fn write(&mut self, bytes: &[u8]) {
        let mut words = bytes.chunks_exact(8);
        for w in &mut words {
            self.add(w.try_into().map_or(0, u64::from_le_bytes));
        }
        let rest = words.remainder();
        if !rest.is_empty() {
            let mut last = [0u8; 8];
            last[..rest.len()].copy_from_slice(rest);
            self.add(u64::from_le_bytes(last));
        }
    }

    fn write_u8(&mut self, i: u8) {
        self.add(u64::from(i));
    }

    fn write_u16(&mut self, i: u16) {
        self.add(u64::from(i));
    }

    fn write_usize(&mut self, i: usize) {
        self.add(i as u64);
    }

    fn finish(&self) -> u64 {
        // The table picks buckets by the low bits, which the last multiply
        // leaves least mixed: rotate the well-mixed high bits down.
        self.0.rotate_left(26)
    }
}

/// The matchers of the vintages met so far, built on first use.
pub struct Matchers<'r> {
    reference: &'r Reference,
    codes: CodeForm,
    built: HashMap<u16, Matcher<'r>>,
}

impl<'r> Matchers<'r> {
    /// No matcher built yet.
    pub fn new(reference: &'r Reference, codes: CodeForm) -> Self {
        Matchers {
            reference,
            codes,
            built: HashMap::new(),
        }
    }

    /// The matchers with one already built (of its own vintage).
    pub fn starting_with(reference: &'r Reference, codes: CodeForm, built: Matcher<'r>) -> Self {
        let mut m = Matchers::new(reference, codes);
        m.built.insert(built.vintage(), built);
        m
    }

    /// The matcher of `vintage`.
    pub fn get(&mut self, vintage: u16) -> &Matcher<'r> {
        let (reference, codes) = (self.reference, self.codes);
        self.built
            .entry(vintage)
            .or_insert_with(|| Matcher::new(reference, vintage, codes))
    }

    /// The resolution a decision gives in `vintage`. With per-row years
    /// (`any_vintage`), a code that is no unit of that vintage but is one of
    /// another is accepted with a note. Otherwise a code outside the
    /// vintage is an error naming the decision's line and column.
    pub fn decide(&mut self, vintage: u16, d: &Decision, any_vintage: bool) -> Result<Resolution> {
        let codes = match &d.choice {
            Choice::NotAUnit => return Ok(self.get(vintage).decided(None).expect("none resolves")),
            Choice::Codes(codes) => codes,
        };
        if let [code] = codes.as_slice() {
            return self.decide_one(vintage, code, d, any_vintage);
        }
        // A unit made of several units (core::composite writes it).
        composite::decided(self.get(vintage), codes)
            .map_err(|code| self.not_a_unit(vintage, &code, d))
    }

    fn not_a_unit(&self, vintage: u16, code: &str, d: &Decision) -> Error {
        let years = if d.years.is_all() {
            String::new()
        } else {
            format!(" (the decision's years: {})", d.years)
        };
        Error::input(
            d.location.clone(),
            format!(
                "{code:?} is not a unit in {vintage}{years} (nor in another vintage of the reference); write a code of that vintage, or `{NONE}` to leave the name unmatched, or narrow the decision's years"
            ),
        )
    }

    fn decide_one(
        &mut self,
        vintage: u16,
        code: &str,
        d: &Decision,
        any_vintage: bool,
    ) -> Result<Resolution> {
        if let Some(r) = self.get(vintage).decided(Some(code)) {
            return Ok(r);
        }
        if any_vintage {
            let normalized = normalize_code(self.codes, code);
            let first = self
                .reference
                .eras(&normalized)
                .first()
                .map(|e| e.valid.from);
            if let Some(valid) = first {
                if let Some(mut r) = self.get(valid).decided(Some(code)) {
                    r.note = format!("decided code is a unit of another vintage (from {valid})");
                    return Ok(r);
                }
            }
        }
        Err(self.not_a_unit(vintage, code, d))
    }
}

/// A code as the reference writes it: FIPS codes get their lost leading
/// zero back ("2066" is 02066); a user's own codes stay as written.
pub fn normalize_code(codes: CodeForm, text: &str) -> String {
    let form = match codes {
        CodeForm::County => fips::CodeForm::County,
        CodeForm::State => fips::CodeForm::State,
        CodeForm::Plain => fips::CodeForm::Plain,
    };
    form.parse(text)
        .map_or_else(|_| text.trim().to_string(), fips::Code::into_string)
}

/// One distinct (name, state, year) of the input, with its result.
#[derive(Debug, Clone)]
pub struct Key {
    /// The name as written (untrimmed, as in the input).
    pub name: String,
    /// The state as written (empty without a state column).
    pub state: String,
    /// The row's year (per-row years) or `None` (one vintage for all rows).
    pub year: Option<u16>,
    /// The vintage it was matched against.
    pub vintage: u16,
    /// How many input rows carry it.
    pub rows: u64,
    /// What the rows get: the decision where one applies, else the matcher's.
    pub resolution: Resolution,
    /// What the matcher said (equal to `resolution` when not decided).
    pub matcher: Resolution,
    /// The decision that applied, if any.
    pub decision: Option<Decision>,
}

/// One row of the review list: a (name, state) and the years in which it
/// resolved alike, what the matcher said, and the decision if one is taken.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewItem {
    /// The name as written in the input (trimmed).
    pub name: String,
    /// The state as written (trimmed; empty without a state column).
    pub state: String,
    /// The years of the rows it covers (the vintage when rows have no year
    /// of their own); for a decided item, the decision's own years (empty =
    /// every year), so the file fed back keeps the decision as taken.
    pub years: Years,
    /// `review` or `unmatched` (what the matcher said), or `matched` when
    /// only a decision brought the row here.
    pub status: String,
    /// How many input rows it covers.
    pub rows: u64,
    /// Why it needs a decision.
    pub reason: String,
    /// Ranked candidates.
    pub candidates: Vec<Candidate>,
    /// The decision already taken (a code, codes joined by `+`, or
    /// [`NONE`]), or empty.
    pub chosen: String,
}

/// The result of matching a table.
#[derive(Debug, Clone, Default)]
pub struct Matched {
    /// Distinct (name, state, year), in order of first appearance.
    pub keys: Vec<Key>,
    /// For each input row, the index of its key.
    pub row_key: Vec<u32>,
    /// The review list.
    pub review: Vec<ReviewItem>,
    /// Decisions given.
    pub decisions: usize,
}

/// Counts for the summary.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Tally {
    /// Input rows.
    pub rows: u64,
    /// Distinct (name, state) pairs.
    pub names: usize,
    /// Rows by status.
    pub by_status: BTreeMap<Status, u64>,
    /// Matched rows by method.
    pub by_method: BTreeMap<Method, u64>,
    /// Distinct (name, state) with rows still needing a person.
    pub open: usize,
    /// Distinct decisions that applied to some row.
    pub decisions_used: usize,
    /// Decisions given.
    pub decisions: usize,
}

impl Matched {
    /// Counts by status and method, names, open names and decisions used.
    pub fn tally(&self) -> Tally {
        let mut t = Tally {
            rows: self.row_key.len() as u64,
            decisions: self.decisions,
            ..Tally::default()
        };
        let mut names: BTreeSet<(&str, &str)> = BTreeSet::new();
        let mut open: BTreeSet<(&str, &str)> = BTreeSet::new();
        let mut used: BTreeSet<String> = BTreeSet::new();
        for k in &self.keys {
            let key = (k.name.trim(), k.state.trim());
            names.insert(key);
            *t.by_status.entry(k.resolution.status).or_default() += k.rows;
            if k.resolution.status == Status::Matched {
                if let Some(m) = k.resolution.method {
                    *t.by_method.entry(m).or_default() += k.rows;
                }
            }
            match &k.decision {
                Some(d) => {
                    used.insert(d.location.to_string());
                }
                None if k.resolution.status != Status::Matched => {
                    open.insert(key);
                }
                None => {}
            }
        }
        t.names = names.len();
        t.open = open.len();
        t.decisions_used = used.len();
        t
    }
}

/// The vintage of a row's year: the year itself, the latest vintage for
/// later years; `None` before the first.
pub fn vintage_of(year: u16, span: (u16, u16)) -> Option<u16> {
    (year >= span.0).then_some(year.min(span.1))
}

/// The key columns of a table that a check can point at.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum KeyColumn {
    /// The column of names (or codes).
    Name,
    /// The column of states.
    State,
    /// The column of years.
    Year,
}

/// Where row `row` (0-based) of a key column sits, for messages: a file's
/// line, or a DataFrame's row.
pub type Locate<'a> = dyn Fn(usize, KeyColumn) -> Location + Sync + 'a;

/// The key columns of a table as text, each as long as `names`.
#[derive(Debug)]
pub struct Columns<'a, S> {
    /// Names (or codes).
    pub names: &'a [S],
    /// States, if the table has a state column.
    pub states: Option<&'a [S]>,
    /// Each row's year as written, if the rows carry their own year.
    pub years: Option<&'a [S]>,
}

impl<S> Clone for Columns<'_, S> {
    fn clone(&self) -> Self {
        *self
    }
}

impl<S> Copy for Columns<'_, S> {}

/// The year of a row's vintage value: its first four digits ("2015",
/// "2015.0", "2015-06-30"), no earlier than the reference's first vintage.
/// Otherwise what is wrong, to be said at the row's place.
pub fn year_of(text: &str, span: (u16, u16)) -> std::result::Result<u16, String> {
    let text = text.trim();
    let digits = text.bytes().take_while(u8::is_ascii_digit).count();
    let year = (digits == 4)
        .then(|| text[..4].parse::<u16>().ok())
        .flatten();
    match year {
        Some(y) if y >= span.0 => Ok(y),
        Some(y) => Err(format!(
            "year {y} is before the reference's first vintage ({})",
            span.0
        )),
        None => Err(format!(
            "{text:?} is not a year (--vintage-column wants a four-digit year per row)"
        )),
    }
}

/// Each row's year ([`year_of`]); the first that is none is an error at
/// its place.
pub fn row_years<S: AsRef<str>>(
    texts: &[S],
    span: (u16, u16),
    at: &Locate<'_>,
) -> Result<Vec<u16>> {
    texts
        .iter()
        .enumerate()
        .map(|(row, t)| {
            year_of(t.as_ref(), span).map_err(|m| Error::input(at(row, KeyColumn::Year), m))
        })
        .collect()
}

/// Rows looked at by the column checks: enough to tell a column of years
/// from a column of states, cheap on a table of millions.
pub const CHECKED_ROWS: usize = 20_000;

/// Distinct non-empty values (trimmed) among the first [`CHECKED_ROWS`]
/// rows, in input order, with the row of their first appearance.
pub fn distinct_values<'a>(values: impl Iterator<Item = &'a str>) -> Vec<(&'a str, usize)> {
    let mut seen: HashSet<&str> = HashSet::new();
    let mut out = Vec::new();
    for (row, v) in values.take(CHECKED_ROWS).enumerate() {
        let v = v.trim();
        if !v.is_empty() && seen.insert(v) {
            out.push((v, row));
        }
    }
    out
}

/// How many of `values` name a state (a parent) of the matcher's
/// reference.
pub fn states_among(matcher: &Matcher<'_>, values: &[(&str, usize)]) -> usize {
    values
        .iter()
        .filter(|(v, _)| matcher.parent_of(v).is_some())
        .count()
}

/// True for a value made of digits (with separators, a sign or decimals).
fn is_number(text: &str) -> bool {
    text.bytes().any(|b| b.is_ascii_digit())
        && text
            .bytes()
            .all(|b| b.is_ascii_digit() || matches!(b, b'.' | b',' | b'-' | b'+' | b' '))
}

/// Options that would run and succeed while matching nothing: a state
/// column of years (fewer than one value in ten is a state), a name column
/// of numbers most of which are no codes. Stops with an error naming the
/// column, the row and an example value; the command and the Python
/// package both check their columns here.
pub fn check_columns<S: AsRef<str>>(
    matcher: &Matcher<'_>,
    reference: &Reference,
    settings: Settings,
    columns: Columns<'_, S>,
    at: &Locate<'_>,
) -> Result<()> {
    if let Some(states) = columns.states {
        let values = distinct_values(states.iter().map(AsRef::as_ref));
        let found = states_among(matcher, &values);
        if !values.is_empty() && found * 10 < values.len() {
            let (example, row) = values
                .iter()
                .find(|(v, _)| matcher.parent_of(v).is_none())
                .copied()
                .unwrap_or(values[0]);
            let hint = match (settings.codes, reference.parents.first()) {
                (CodeForm::Plain, Some(p)) => format!(
                    " (its parents are written like {:?}{}; a parent_name column in the reference lets the state column use names)",
                    p.code,
                    if p.name != p.code { format!(" or {:?}", p.name) } else { String::new() }
                ),
                _ => String::new(),
            };
            return Err(Error::input(
                at(row, KeyColumn::State),
                format!(
                    "--state-column names a column whose values are not states of {}{hint} (e.g. {example:?}; {found} of {} distinct values is one: a name, postal code, abbreviation or code); name the column that holds the state",
                    reference.label,
                    values.len()
                ),
            ));
        }
    }
    let values = distinct_values(columns.names.iter().map(AsRef::as_ref));
    if !values.is_empty() && values.iter().all(|(v, _)| is_number(v)) {
        let sample = &values[..values.len().min(1000)];
        let state_of = |row: usize| columns.states.map(|c| c[row].as_ref().trim());
        let unmatched = |(v, row): &(&str, usize)| {
            matcher.resolve(v, state_of(*row)).status == Status::Unmatched
        };
        let codes = sample.iter().filter(|v| !unmatched(v)).count();
        if codes * 2 < sample.len() {
            let (example, row) = sample
                .iter()
                .find(|v| unmatched(v))
                .copied()
                .unwrap_or(sample[0]);
            return Err(Error::input(
                at(row, KeyColumn::Name),
                format!(
                    "--name-column names a column of numbers, and most are no code of {} (e.g. {example:?}; {codes} of {} are); name the column that holds the place names or codes",
                    reference.label,
                    sample.len()
                ),
            ));
        }
    }
    Ok(())
}

/// Matches a table given as its key columns of text: the library entry of
/// `regionkey match` and of the Python package. Checks the columns first
/// ([`check_columns`]; a state column against a reference without parents
/// is an error too), reads each row's year where the rows carry one, then
/// [`match_rows`]. `at` says where a row is, for messages.
pub fn match_columns<S: AsRef<str> + Sync>(
    reference: &Reference,
    settings: Settings,
    columns: Columns<'_, S>,
    decisions: &Decisions,
    at: &Locate<'_>,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Matched> {
    let matcher = Matcher::new(reference, settings.vintage, settings.codes);
    if columns.states.is_some() && !matcher.has_parents() {
        return Err(Error::Usage(format!(
            "--state-column: the reference {} has no parent units to read a state against",
            reference.label
        )));
    }
    check_columns(&matcher, reference, settings, columns, at)?;
    let years = columns
        .years
        .map(|y| row_years(y, settings.span, at))
        .transpose()?;
    match_rows_with(
        Matchers::starting_with(reference, settings.codes, matcher),
        settings,
        columns.names,
        columns.states,
        years.as_deref(),
        decisions,
        progress,
    )
}

/// Matches the rows given as columns: `names`, optionally `states` and
/// `years` (each as long as `names`). Decisions apply in their years;
/// `progress` is told how many rows each resolved key covers. Distinct keys
/// are resolved in parallel; the result does not depend on the thread
/// count.
///
/// Errors: a year before the reference's first vintage (naming the row,
/// 1-based), a decision naming a code that is no unit where it applies.
pub fn match_rows<S: AsRef<str> + Sync>(
    reference: &Reference,
    settings: Settings,
    names: &[S],
    states: Option<&[S]>,
    years: Option<&[u16]>,
    decisions: &Decisions,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Matched> {
    match_rows_with(
        Matchers::new(reference, settings.codes),
        settings,
        names,
        states,
        years,
        decisions,
        progress,
    )
}

/// [`match_rows`] with the matchers built so far.
fn match_rows_with<S: AsRef<str> + Sync>(
    mut matchers: Matchers<'_>,
    settings: Settings,
    names: &[S],
    states: Option<&[S]>,
    years: Option<&[u16]>,
    decisions: &Decisions,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Matched> {
    let n = names.len();
    if states.is_some_and(|s| s.len() != n) || years.is_some_and(|y| y.len() != n) {
        return Err(Error::Usage(format!(
            "the columns of names, states and years differ in length ({n}, {}, {})",
            states.map_or(n, <[S]>::len),
            years.map_or(n, <[u16]>::len)
        )));
    }
    let any_vintage = years.is_some();
    // With one vintage for all rows, the decisions that apply to it are
    // checked before the long work starts.
    if !any_vintage {
        for d in decisions.iter() {
            if d.years.contains(settings.vintage) {
                matchers.decide(settings.vintage, d, false)?;
            }
        }
    }

    // Each distinct (name, state, year) once, in order of first use: each
    // block of rows is indexed on its own (in parallel), then the blocks'
    // keys are merged in row order, so the order is the same whatever the
    // thread count.
    type Pending<'a> = (&'a str, &'a str, Option<u16>, u16, u64);
    const BLOCK: usize = 1 << 16;
    let blocks: Vec<std::ops::Range<usize>> = (0..n)
        .step_by(BLOCK)
        .map(|start| start..(start + BLOCK).min(n))
        .collect();
    let indexed: Vec<Result<(Vec<Pending>, Vec<u32>)>> = blocks
        .par_iter()
        .map(|rows| {
            let mut index: HashMap<(&str, &str, Option<u16>), u32, KeyHashing> =
                HashMap::with_hasher(KeyHashing);
            let mut pending: Vec<Pending> = Vec::new();
            let mut ids: Vec<u32> = Vec::with_capacity(rows.len());
            for i in rows.clone() {
                let name = names[i].as_ref();
                let state = states.map_or("", |s| s[i].as_ref());
                let year = years.map(|y| y[i]);
                let vintage = match year {
                    None => settings.vintage,
                    Some(y) => vintage_of(y, settings.span).ok_or_else(|| {
                        Error::Usage(format!(
                            "row {}: year {y} is before the reference's first vintage ({})",
                            i + 1,
                            settings.span.0
                        ))
                    })?,
                };
                let id = *index.entry((name, state, year)).or_insert_with(|| {
                    pending.push((name, state, year, vintage, 0));
                    (pending.len() - 1) as u32
                });
                pending[id as usize].4 += 1;
                ids.push(id);
            }
            Ok((pending, ids))
        })
        .collect();
    let mut index: HashMap<(&str, &str, Option<u16>), u32, KeyHashing> =
        HashMap::with_hasher(KeyHashing);
    let mut pending: Vec<Pending> = Vec::new();
    let mut block_ids: Vec<(Vec<u32>, Vec<u32>)> = Vec::with_capacity(indexed.len());
    for block in indexed {
        let (local, ids) = block?;
        let global: Vec<u32> = local
            .into_iter()
            .map(|(name, state, year, vintage, rows)| {
                let id = *index.entry((name, state, year)).or_insert_with(|| {
                    pending.push((name, state, year, vintage, 0));
                    (pending.len() - 1) as u32
                });
                pending[id as usize].4 += rows;
                id
            })
            .collect();
        block_ids.push((ids, global));
    }
    let row_key: Vec<u32> = block_ids
        .par_iter()
        .flat_map_iter(|(ids, global)| ids.iter().map(|&l| global[l as usize]))
        .collect();

    let vintages: BTreeSet<u16> = pending.iter().map(|p| p.3).collect();
    for v in vintages {
        matchers.get(v);
    }
    let ready = &matchers.built;
    let has_states = states.is_some();
    let found: Vec<Resolution> = pending
        .par_iter()
        .map(|&(name, state, _, vintage, rows)| {
            let r = ready[&vintage].resolve(name, has_states.then_some(state));
            progress(rows);
            r
        })
        .collect();

    let mut keys: Vec<Key> = Vec::with_capacity(pending.len());
    for (&(name, state, year, vintage, rows), matcher) in pending.iter().zip(found) {
        let decision = decisions
            .find(name, state, year.unwrap_or(settings.vintage))
            .cloned();
        let resolution = match &decision {
            Some(d) => matchers.decide(vintage, d, any_vintage)?,
            None => matcher.clone(),
        };
        keys.push(Key {
            name: name.to_string(),
            state: state.to_string(),
            year,
            vintage,
            rows,
            resolution,
            matcher,
            decision,
        });
    }
    let review = review_items(&keys, settings.vintage);
    Ok(Matched {
        keys,
        row_key,
        review,
        decisions: decisions.len(),
    })
}

/// The review list: what the matcher could not settle, and what a decision
/// settled (so the file fed back as decisions keeps them). One row per
/// (name, state) and outcome (the matcher's status and candidates, or the
/// decision taken), covering the years in which the name came out so.
/// Review before unmatched, then most rows first, then input order.
pub fn review_items(keys: &[Key], vintage: u16) -> Vec<ReviewItem> {
    // (name, state, status, candidate codes, decision) -> item index.
    type Alike = (String, String, Status, Vec<String>, Option<(Choice, Years)>);
    let mut groups: HashMap<Alike, usize> = HashMap::new();
    let mut items: Vec<(Status, usize, ReviewItem, BTreeSet<u16>)> = Vec::new();
    for (order, k) in keys.iter().enumerate() {
        let said = &k.matcher;
        if said.status == Status::Matched && k.decision.is_none() {
            continue;
        }
        let alike: Alike = (
            k.name.trim().to_string(),
            k.state.trim().to_string(),
            said.status,
            said.candidates.iter().map(|c| c.code.clone()).collect(),
            k.decision
                .as_ref()
                .map(|d| (d.choice.clone(), d.years.clone())),
        );
        let year = k.year.unwrap_or(vintage);
        if let Some(&i) = groups.get(&alike) {
            items[i].2.rows += k.rows;
            items[i].3.insert(year);
            continue;
        }
        groups.insert(alike, items.len());
        let chosen = k
            .decision
            .as_ref()
            .map_or(String::new(), |d| d.choice.to_string());
        // A decided item keeps its decision's own years.
        let years = k
            .decision
            .as_ref()
            .map_or(Years::all(), |d| d.years.clone());
        items.push((
            said.status,
            order,
            ReviewItem {
                name: k.name.trim().to_string(),
                state: k.state.trim().to_string(),
                years,
                status: said.status.as_str().to_string(),
                rows: k.rows,
                reason: said.note.clone(),
                candidates: said.candidates.clone(),
                chosen,
            },
            BTreeSet::from([year]),
        ));
    }
    for (_, _, item, years) in items.iter_mut() {
        if item.chosen.is_empty() {
            item.years = Years::from_years(years.iter().copied());
        }
    }
    items.sort_by(|a, b| {
        a.0.cmp(&b.0)
            .then(b.2.rows.cmp(&a.2.rows))
            .then(a.1.cmp(&b.1))
    });
    items.into_iter().map(|x| x.2).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::reference::{Parent, Unit, YearSpan};

    /// Two units of one name in one state, and a unit that is renamed: a
    /// made-up reference for the mechanics (the matcher's rules are tested
    /// in its own module).
    fn reference() -> Reference {
        let unit = |code: &str, name: &str, desc: &str, from: u16, to: Option<u16>| Unit {
            code: code.into(),
            name: name.into(),
            description: desc.into(),
            parent: Some("01".into()),
            valid: YearSpan { from, to },
        };
        Reference {
            label: "test".into(),
            parents: vec![Parent {
                code: "01".into(),
                name: "Alpha".into(),
                short: Some("AL".into()),
                abbreviations: Vec::new(),
                kind: "state".into(),
            }],
            units: vec![
                unit("01001", "Baker", "County", 2000, None),
                unit("01002", "Baker", "city", 2000, None),
                unit("01003", "Cedar", "County", 2000, Some(2021)),
                unit("01004", "Cedar Valley", "Region", 2022, None),
            ],
            changes: Vec::new(),
            aliases: Vec::new(),
        }
    }

    fn settings() -> Settings {
        Settings {
            codes: CodeForm::County,
            vintage: 2023,
            span: (2000, 2023),
        }
    }

    fn decision(name: &str, years: &str, chosen: &str) -> Decision {
        Decision {
            name: name.into(),
            state: "AL".into(),
            years: Years::parse(years).unwrap(),
            choice: Choice::parse(chosen).unwrap().unwrap(),
            location: Location::file("d.csv").at_line(2),
        }
    }

    /// `match_rows` on the test reference with the test settings.
    fn run(
        names: &[&str],
        states: Option<&[&str]>,
        years: Option<&[u16]>,
        decisions: &Decisions,
    ) -> Result<Matched> {
        match_rows(
            &reference(),
            settings(),
            names,
            states,
            years,
            decisions,
            &|_| {},
        )
    }

    #[test]
    fn each_distinct_name_state_and_year_is_resolved_once_and_every_row_is_mapped() {
        let names = ["Baker County", "Baker County", "Baker", "Baker County"];
        let states = ["AL", "AL", "AL", "AL"];
        let years = [2020, 2020, 2020, 2021];
        let m = run(&names, Some(&states), Some(&years), &Decisions::default()).unwrap();
        assert_eq!(m.keys.len(), 3);
        assert_eq!(m.row_key, [0, 0, 1, 2]);
        assert_eq!(m.keys[0].rows, 2);
        assert_eq!(m.keys[0].resolution.code.as_deref(), Some("01001"));
        assert_eq!(m.keys[1].resolution.status, Status::Review);
        let t = m.tally();
        assert_eq!(t.rows, 4);
        assert_eq!(t.names, 2);
        assert_eq!(t.open, 1);
    }

    #[test]
    fn keys_are_numbered_in_order_of_first_use_across_blocks_of_rows() {
        // More rows than one indexing block (65,536), with names first used
        // in the second and third blocks, indexed with 1 and with 3 threads.
        let n = 150_000;
        let names: Vec<&str> = (0..n)
            .map(|i| match i {
                70_000 => "Baker",
                140_000.. if i % 2 == 0 => "Autauga",
                _ if i % 3 == 0 => "Baldwin",
                _ => "Barbour",
            })
            .collect();
        let states = vec!["AL"; n];
        let on = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| run(&names, Some(&states), None, &Decisions::default()).unwrap())
        };
        let (one, three) = (on(1), on(3));
        assert_eq!(one.row_key, three.row_key);
        let order: Vec<&str> = one.keys.iter().map(|k| k.name.as_str()).collect();
        assert_eq!(order, ["Baldwin", "Barbour", "Baker", "Autauga"]);
        let rows: Vec<u64> = one.keys.iter().map(|k| k.rows).collect();
        // Baldwin: multiples of 3 outside the Autauga rows, and not 70,000.
        let autauga = (140_000..n).filter(|i| i % 2 == 0).count() as u64;
        let baldwin = (0..n)
            .filter(|&i| i != 70_000 && !(i >= 140_000 && i % 2 == 0) && i % 3 == 0)
            .count() as u64;
        assert_eq!(
            rows,
            [baldwin, n as u64 - baldwin - 1 - autauga, 1, autauga]
        );
        for (i, &k) in one.row_key.iter().enumerate() {
            assert_eq!(one.keys[k as usize].name, names[i], "row {i}");
        }
    }

    #[test]
    fn review_rows_cover_the_years_that_resolved_alike() {
        let names = ["Baker"; 5];
        let states = ["AL"; 5];
        let years = [2001, 2002, 2003, 2010, 2030];
        let m = run(&names, Some(&states), Some(&years), &Decisions::default()).unwrap();
        assert_eq!(m.review.len(), 1);
        assert_eq!(m.review[0].years.to_string(), "2001-2003;2010;2030");
        assert_eq!(m.review[0].rows, 5);
    }

    #[test]
    fn a_decision_applies_only_in_its_years_and_the_other_years_stay_open() {
        let names = ["Baker"; 4];
        let states = ["AL"; 4];
        let years = [2020, 2021, 2022, 2023];
        let decisions = Decisions::new(vec![decision("Baker", "2022-2023", "1002")]).unwrap();
        let m = run(&names, Some(&states), Some(&years), &decisions).unwrap();
        let codes: Vec<Option<&str>> = m
            .keys
            .iter()
            .map(|k| k.resolution.code.as_deref())
            .collect();
        // The lost leading zero of "1002" is read as the code 01002.
        assert_eq!(codes, [None, None, Some("01002"), Some("01002")]);
        assert_eq!(m.review.len(), 2);
        let open = m.review.iter().find(|r| r.chosen.is_empty()).unwrap();
        assert_eq!(open.years.to_string(), "2020-2021");
        let decided = m.review.iter().find(|r| !r.chosen.is_empty()).unwrap();
        assert_eq!(
            (decided.chosen.as_str(), decided.years.to_string()),
            ("1002", "2022-2023".into())
        );
        let t = m.tally();
        assert_eq!((t.open, t.decisions_used), (1, 1));
    }

    #[test]
    fn several_chosen_codes_make_one_unit_of_several_in_code_order() {
        let decisions = Decisions::new(vec![decision("Baker", "", "01002+01001")]).unwrap();
        let m = run(&["Baker"], Some(&["AL"][..]), None, &decisions).unwrap();
        let r = &m.keys[0].resolution;
        assert_eq!(r.code.as_deref(), Some("01001+01002"));
        assert_eq!(r.status, Status::Matched);
        assert!(r.note.contains("Baker County (01001)"), "{}", r.note);
    }

    #[test]
    fn with_one_vintage_a_decision_of_another_vintage_is_an_error_only_where_it_applies() {
        let d = Decisions::new(vec![decision("Cedar", "2023", "01003")]).unwrap();
        let e = run(&["Cedar"], Some(&["AL"][..]), None, &d)
            .unwrap_err()
            .to_string();
        assert!(e.contains("d.csv: line 2") && e.contains("01003"), "{e}");
        // Tied to 2021, the same decision is simply not used in 2023.
        let d = Decisions::new(vec![decision("Cedar", "2021", "01003")]).unwrap();
        let m = run(&["Cedar"], Some(&["AL"][..]), None, &d).unwrap();
        assert!(m.keys[0].decision.is_none());
    }

    #[test]
    fn a_year_before_the_first_vintage_names_its_row() {
        let e = run(
            &["Baker", "Baker"],
            None,
            Some(&[2000, 1990][..]),
            &Decisions::default(),
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("row 2") && e.contains("1990"), "{e}");
    }
}
