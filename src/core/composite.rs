//! Units made of several units ("composites"): a figure reported once for
//! several counties, such as a combined health district ("Dukes and
//! Nantucket"), small areas pooled for privacy ("Bristol Bay + Lake and
//! Peninsula") or a city reported as a whole ("New York City").
//!
//! **Reading names.** A name made of several unit names joined by `and`,
//! `&`, `/`, `+`, `,` or a hyphen is read as a composite only when no
//! single unit has that name (Valdez-Cordova, Lake and Peninsula,
//! Yukon-Koyukuk and Matanuska-Susitna are single units and stay so) and
//! every part resolves on its own under the matcher's usual rules. The
//! cutting that needs the fewest parts wins ("Bristol Bay + Lake and
//! Peninsula" is two parts, not three); two different cuttings with the
//! same number of parts go to review. A part that is ambiguous sends the
//! whole name to review, with each part's candidates. A state written
//! after a last comma ("Dukes and Nantucket, MA") holds for every part.
//!
//! **Named composites** the trade uses (New York City's five counties) are
//! built in with their source (`reference/us/composites.csv`); users add
//! their own from a membership file.
//!
//! **Codes.** A composite's code is its members' codes in code order joined
//! by [`CODE_SEPARATOR`] (`36005+36047+36061+36081+36085`), one cell that
//! `apply` reads back as one pooled source.
//!
//! **Splitting a pooled figure.** [`shares`] gives each member its share of
//! the composite by a size (area from the built-in geometry, or a
//! population the user gives); [`spread`] moves a pooled source's values
//! onto its members before allocation: counts (and the counts of ratios
//! and mean weights) are split by the shares, intensive values (the values
//! of means) are copied, so a rate rebuilt at a member is the pooled rate.
//! Split figures are estimates: they assume the figure is spread evenly by
//! area or by population over the members.

use std::collections::{BTreeMap, BTreeSet, HashMap};

use crate::core::allocate::SourceValues;
use crate::core::matcher::{Candidate, Matcher, Method, Resolution, Status, ACCEPT_SCORE};
use crate::core::normalize::key;
use crate::core::reference::Alias;

/// The separator between member codes in one cell.
pub const CODE_SEPARATOR: char = '+';

/// Most cuts tried in one name: a name with more separators than this is
/// not read as a composite (2^k cuttings would be tried).
pub const MAX_SEPARATORS: usize = 10;

/// What composite reading needs from a matcher: one part resolved under the
/// usual rules, a written state read, and a unit's name.
pub trait PartResolver {
    /// Resolves one part (a single unit's name) under the usual rules.
    fn resolve_part(&self, text: &str, state: Option<&str>) -> Resolution;
    /// The parent (state) code for a written state form, if it is one.
    fn state_code(&self, text: &str) -> Option<String>;
    /// The unit valid in the vintage for a code as written ("1001" too):
    /// (code, full name).
    fn unit(&self, code: &str) -> Option<(String, String)>;
}

impl PartResolver for Matcher<'_> {
    fn resolve_part(&self, text: &str, state: Option<&str>) -> Resolution {
        self.resolve_single(text, state)
    }

    fn state_code(&self, text: &str) -> Option<String> {
        self.parent_of(text)
    }

    fn unit(&self, code: &str) -> Option<(String, String)> {
        self.unit_for_code(code)
            .map(|(c, n)| (c.to_string(), n.to_string()))
    }
}

/// True when the matcher's answer for the whole name says a unit has that
/// name: matched, or in review among units of exactly that name or its
/// successors, or near enough one unit's name to be it misspelled (a
/// candidate scoring at least [`ACCEPT_SCORE`]: "Winston-Salem city" is
/// not Winston + Salem). Then the name is never read as a composite.
/// Unmatched names and distant near misses may still be composites.
pub fn names_a_unit(whole: &Resolution) -> bool {
    match whole.status {
        Status::Matched => true,
        Status::Review => whole.candidates.iter().any(|c| c.score >= ACCEPT_SCORE),
        Status::Unmatched => false,
    }
}

/// A composite the trade uses, or one of a user's membership file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NamedComposite {
    /// The name it is written as ("New York City").
    pub name: String,
    /// The parent (state) code it lies in, when one ("36").
    pub state: Option<String>,
    /// Member codes, sorted, distinct.
    pub members: Vec<String>,
    /// Where the membership comes from.
    pub source: String,
}

/// Named composites by name key, for lookup.
#[derive(Debug, Clone, Default)]
pub struct NamedComposites {
    items: Vec<NamedComposite>,
    by_key: HashMap<String, Vec<usize>>,
}

impl NamedComposites {
    /// Indexes `items` by the normalized key of their names. Members are
    /// sorted and made distinct.
    pub fn new(items: Vec<NamedComposite>) -> NamedComposites {
        let mut out = NamedComposites::default();
        for mut item in items {
            item.members.sort();
            item.members.dedup();
            out.by_key
                .entry(key(&item.name))
                .or_default()
                .push(out.items.len());
            out.items.push(item);
        }
        out
    }

    /// Adds more (a user's own after the built-in ones).
    pub fn extend(&mut self, more: NamedComposites) {
        let mut items = std::mem::take(&mut self.items);
        items.extend(more.items);
        *self = NamedComposites::new(items);
    }

    /// Every named composite.
    pub fn items(&self) -> &[NamedComposite] {
        &self.items
    }

    /// True when there are none.
    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }

    /// The composites named `name` that agree with `state` (a parent code,
    /// or none).
    fn find(&self, name: &str, state: Option<&str>) -> Vec<&NamedComposite> {
        self.by_key.get(&key(name)).map_or_else(Vec::new, |v| {
            v.iter()
                .map(|&i| &self.items[i])
                .filter(|c| match (state, &c.state) {
                    (Some(s), Some(cs)) => s == cs,
                    _ => true,
                })
                .collect()
        })
    }
}

/// Named composites from a reference's aliases: an alias whose code is
/// several codes joined by [`CODE_SEPARATOR`] names a composite (this is
/// how the built-in table and a user's `--composites` file reach the
/// matcher). Its state is its members' common parent (`parent_of`), if
/// they share one.
pub fn from_aliases(
    aliases: &[Alias],
    parent_of: impl Fn(&str) -> Option<String>,
) -> NamedComposites {
    let mut items = Vec::new();
    for a in aliases.iter().filter(|a| a.code.contains(CODE_SEPARATOR)) {
        let members: Vec<String> = a
            .code
            .split(CODE_SEPARATOR)
            .map(|c| c.trim().to_string())
            .filter(|c| !c.is_empty())
            .collect();
        let parents: BTreeSet<Option<String>> = members.iter().map(|m| parent_of(m)).collect();
        let state = match parents.into_iter().collect::<Vec<_>>().as_slice() {
            [Some(p)] => Some(p.clone()),
            _ => None,
        };
        items.push(NamedComposite {
            name: a.alias.clone(),
            state,
            members,
            source: a.note.clone(),
        });
    }
    NamedComposites::new(items)
}

/// Joins member codes into one composite code, in code order.
pub fn join_codes(members: &[String]) -> String {
    let mut m: Vec<&str> = members.iter().map(String::as_str).collect();
    m.sort_unstable();
    m.dedup();
    m.join(&CODE_SEPARATOR.to_string())
}

/// Reads a composite code cell ("36005+36047", "1001 + 1003"): `Ok(None)`
/// when the text has no [`CODE_SEPARATOR`]; otherwise every member read by
/// `normalize`, sorted. A member that cannot be read, an empty member, a
/// member written twice, or a single member is an error saying which.
pub fn parse_code(
    text: &str,
    normalize: impl Fn(&str) -> Result<String, String>,
) -> Result<Option<Vec<String>>, String> {
    if !text.contains(CODE_SEPARATOR) {
        return Ok(None);
    }
    let mut members: Vec<String> = Vec::new();
    for part in text.split(CODE_SEPARATOR) {
        let part = part.trim();
        if part.is_empty() {
            return Err(format!(
                "{text:?} has an empty member (codes are joined by {CODE_SEPARATOR:?})"
            ));
        }
        let code = normalize(part).map_err(|why| format!("member {part:?}: {why}"))?;
        if members.contains(&code) {
            return Err(format!("{text:?} names member {code} twice"));
        }
        members.push(code);
    }
    if members.len() < 2 {
        return Err(format!("{text:?} names only one member"));
    }
    members.sort();
    Ok(Some(members))
}

/// A matched composite: members (with their full names), as a resolution.
fn matched(members: &[(String, String)], score: f64, note: String) -> Resolution {
    let mut m: Vec<&(String, String)> = members.iter().collect();
    m.sort();
    Resolution {
        status: Status::Matched,
        code: Some(
            m.iter()
                .map(|(c, _)| c.as_str())
                .collect::<Vec<_>>()
                .join(&CODE_SEPARATOR.to_string()),
        ),
        name: Some(
            m.iter()
                .map(|(_, n)| n.as_str())
                .collect::<Vec<_>>()
                .join(" + "),
        ),
        method: Some(Method::Composite),
        score,
        note,
        candidates: Vec::new(),
    }
}

fn listing(members: &[(String, String)]) -> String {
    let mut m: Vec<&(String, String)> = members.iter().collect();
    m.sort();
    m.iter()
        .map(|(c, n)| format!("{n} ({c})"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The resolution of a decision that chose several codes: every code must be
/// a unit of the vintage (else `Err` with the code that is not).
pub fn decided(resolver: &dyn PartResolver, codes: &[String]) -> Result<Resolution, String> {
    let mut members: Vec<(String, String)> = Vec::new();
    for c in codes {
        let Some(u) = resolver.unit(c) else {
            return Err(c.clone());
        };
        if !members.iter().any(|(m, _)| *m == u.0) {
            members.push(u);
        }
    }
    let note = format!(
        "decided: composite of {} units: {}",
        members.len(),
        listing(&members)
    );
    let mut r = matched(&members, 1.0, note);
    r.method = Some(Method::Decision);
    Ok(r)
}

/// A named composite as a resolution in the resolver's vintage: matched when
/// every member is a unit of it, otherwise review naming the members that
/// are not.
fn named(resolver: &dyn PartResolver, c: &NamedComposite) -> Resolution {
    let mut members: Vec<(String, String)> = Vec::new();
    let mut missing: Vec<&str> = Vec::new();
    for m in &c.members {
        match resolver.unit(m) {
            Some(u) => members.push(u),
            None => missing.push(m),
        }
    }
    if missing.is_empty() {
        let mut note = format!(
            "{}: composite of {} units: {}",
            c.name,
            members.len(),
            listing(&members)
        );
        if !c.source.is_empty() {
            note.push_str(&format!(" (source: {})", c.source));
        }
        return matched(&members, 1.0, note);
    }
    Resolution {
        status: Status::Review,
        code: None,
        name: None,
        method: None,
        score: 1.0,
        note: format!(
            "{} is a composite whose member(s) {} are not units of this vintage",
            c.name,
            missing.join(", ")
        ),
        candidates: members
            .iter()
            .map(|(code, name)| Candidate {
                code: code.clone(),
                name: name.clone(),
                score: 1.0,
            })
            .collect(),
    }
}

/// True for characters that join the names of a composite.
fn is_separator_char(c: char) -> bool {
    matches!(
        c,
        '&' | '/' | '+' | ',' | '-' | '\u{2010}'..='\u{2015}' | '\u{2212}'
    )
}

/// The segments of a name between separators (byte ranges, trimmed,
/// non-empty), and for each gap between two segments whether it holds a
/// comma.
fn segments(text: &str) -> (Vec<(usize, usize)>, Vec<bool>) {
    // Cut regions: (start, end, comma).
    let mut cuts: Vec<(usize, usize, bool)> = Vec::new();
    let chars: Vec<(usize, char)> = text.char_indices().collect();
    let mut k = 0;
    while k < chars.len() {
        let (i, c) = chars[k];
        if is_separator_char(c) {
            cuts.push((i, i + c.len_utf8(), c == ','));
            k += 1;
            continue;
        }
        // The word "and", alone.
        let starts_word = k == 0 || !chars[k - 1].1.is_alphanumeric();
        if starts_word && c.eq_ignore_ascii_case(&'a') && k + 3 <= chars.len() {
            let word: String = chars[k..k + 3].iter().map(|x| x.1).collect();
            let ends_word = chars.get(k + 3).is_none_or(|x| !x.1.is_alphanumeric());
            if word.eq_ignore_ascii_case("and") && ends_word {
                let end = chars.get(k + 3).map_or(text.len(), |x| x.0);
                cuts.push((i, end, false));
                k += 3;
                continue;
            }
        }
        k += 1;
    }
    let mut segs: Vec<(usize, usize)> = Vec::new();
    let mut gaps: Vec<bool> = Vec::new();
    let mut start = 0;
    let mut comma = false;
    let trim = |a: usize, b: usize| -> Option<(usize, usize)> {
        let s = &text[a..b];
        let lead = s.len() - s.trim_start().len();
        let t = s.trim();
        (t.chars().any(char::is_alphanumeric)).then(|| (a + lead, a + lead + t.len()))
    };
    for (a, b, is_comma) in cuts.into_iter().chain([(text.len(), text.len(), false)]) {
        match trim(start, a) {
            Some(seg) => {
                if !segs.is_empty() {
                    gaps.push(comma);
                }
                segs.push(seg);
                comma = is_comma;
            }
            // Two separators in a row (", and"): one gap.
            None => comma |= is_comma,
        }
        start = b;
    }
    (segs, gaps)
}

/// Reads `name` as a composite when the matcher's answer for the whole name
/// (`whole`) says no unit has that name. `None` means "not a composite":
/// keep `whole`. `state` is the state column's value as written.
pub fn read(
    resolver: &dyn PartResolver,
    named: &NamedComposites,
    name: &str,
    state: Option<&str>,
    whole: &Resolution,
) -> Option<Resolution> {
    if names_a_unit(whole) {
        return None;
    }
    let state = state.map(str::trim).filter(|s| !s.is_empty());
    let column_state = match state {
        Some(s) => Some(resolver.state_code(s)?),
        None => None,
    };
    if let Some(r) = read_named(resolver, named, name, column_state.as_deref()) {
        return Some(r);
    }
    // "Dukes and Nantucket Counties": the plural description is each part's.
    if let Some((head, singular)) = plural_description(name) {
        let described = ReadWith {
            inner: resolver,
            suffix: singular,
        };
        if let Some(r) = read_cut(&described, head, state, column_state.as_deref()) {
            return Some(r);
        }
    }
    read_cut(resolver, name, state, column_state.as_deref())
}

/// Plural descriptions written once after several names (common practice
/// in US agency tables), with the singular each part takes.
const PLURAL_DESCRIPTIONS: &[(&str, &str)] = &[
    ("counties", "County"),
    ("cos", "County"),
    ("boroughs", "Borough"),
    ("parishes", "Parish"),
    ("census areas", "Census Area"),
    ("municipalities", "Municipality"),
    ("municipios", "Municipio"),
];

/// The name without a trailing plural description, and the singular.
fn plural_description(name: &str) -> Option<(&str, &'static str)> {
    let t = name.trim_end().trim_end_matches('.');
    let lower = t.to_lowercase();
    PLURAL_DESCRIPTIONS.iter().find_map(|(plural, singular)| {
        let head = lower.strip_suffix(plural)?;
        // A whole word, after at least one name.
        (head.ends_with(' ') && !head.trim().is_empty())
            .then(|| (t[..head.len()].trim_end(), *singular))
    })
}

/// A resolver that adds a description to every part it is asked.
struct ReadWith<'a> {
    inner: &'a dyn PartResolver,
    suffix: &'static str,
}

impl PartResolver for ReadWith<'_> {
    fn resolve_part(&self, text: &str, state: Option<&str>) -> Resolution {
        self.inner
            .resolve_part(&format!("{text} {}", self.suffix), state)
    }

    fn state_code(&self, text: &str) -> Option<String> {
        self.inner.state_code(text)
    }

    fn unit(&self, code: &str) -> Option<(String, String)> {
        self.inner.unit(code)
    }
}

/// Cuts `name` at its separators and reads the parts.
fn read_cut(
    resolver: &dyn PartResolver,
    name: &str,
    state: Option<&str>,
    column_state: Option<&str>,
) -> Option<Resolution> {
    let (segs, gaps) = segments(name);
    if segs.len() < 2 {
        return None;
    }
    // A state after a last comma holds for every part.
    if segs.len() >= 3 && gaps.last() == Some(&true) {
        let (a, b) = segs[segs.len() - 1];
        if let Some(code) = resolver.state_code(&name[a..b]) {
            if column_state.is_none_or(|c| c == code) {
                let n = segs.len() - 1;
                if let Some(r) = read_parts(resolver, name, &segs[..n], Some(&code)) {
                    return Some(r);
                }
            }
        }
    }
    read_parts(resolver, name, &segs, state)
}

fn read_named(
    resolver: &dyn PartResolver,
    named: &NamedComposites,
    name: &str,
    column_state: Option<&str>,
) -> Option<Resolution> {
    if named.is_empty() {
        return None;
    }
    let mut found = named.find(name, column_state);
    if found.is_empty() {
        // "New York City, NY": the state after the last comma.
        if let Some((head, tail)) = name.rsplit_once(',') {
            if let Some(code) = resolver.state_code(tail.trim()) {
                if column_state.is_none_or(|c| c == code) {
                    found = named.find(head, Some(&code));
                }
            }
        }
    }
    match found.as_slice() {
        [] => None,
        [one] => Some(named_resolution(resolver, one)),
        several => Some(Resolution {
            status: Status::Review,
            code: None,
            name: None,
            method: None,
            score: 1.0,
            note: format!(
                "{} composites have this name; give a state or decide",
                several.len()
            ),
            candidates: several
                .iter()
                .map(|c| Candidate {
                    code: join_codes(&c.members),
                    name: c.name.clone(),
                    score: 1.0,
                })
                .collect(),
        }),
    }
}

fn named_resolution(resolver: &dyn PartResolver, c: &NamedComposite) -> Resolution {
    named(resolver, c)
}

/// Tries every cutting of the segments into at least two parts, fewest
/// parts first.
fn read_parts(
    resolver: &dyn PartResolver,
    name: &str,
    segs: &[(usize, usize)],
    state: Option<&str>,
) -> Option<Resolution> {
    let n = segs.len();
    if n < 2 || n - 1 > MAX_SEPARATORS {
        return None;
    }
    let mut cache: HashMap<(usize, usize), Resolution> = HashMap::new();
    let mut part = |i: usize, j: usize| -> Resolution {
        cache
            .entry((i, j))
            .or_insert_with(|| resolver.resolve_part(&name[segs[i].0..segs[j].1], state))
            .clone()
    };
    // Masks over the n - 1 gaps: bit g set = cut at gap g.
    let gaps = n - 1;
    let mut masks: Vec<u32> = (1..(1u32 << gaps)).collect();
    masks.sort_by_key(|m| (m.count_ones(), *m));
    let ranges = |mask: u32| -> Vec<(usize, usize)> {
        let mut out = Vec::new();
        let mut start = 0;
        for g in 0..gaps {
            if mask & (1 << g) != 0 {
                out.push((start, g));
                start = g + 1;
            }
        }
        out.push((start, n - 1));
        out
    };
    // Fully matched cuttings at the fewest parts.
    let mut found: Vec<(u32, Vec<(String, Resolution)>)> = Vec::new();
    let mut first_review: Option<Vec<(String, Resolution)>> = None;
    let mut level = 0;
    for &mask in &masks {
        let parts = mask.count_ones() + 1;
        if !found.is_empty() && parts > level {
            break;
        }
        let mut resolved: Vec<(String, Resolution)> = Vec::new();
        let mut all_matched = true;
        let mut any_unmatched = false;
        for (i, j) in ranges(mask) {
            let r = part(i, j);
            match r.status {
                Status::Matched => {}
                // Ambiguous among units of that name: the whole needs a
                // person. Near misses only: the part is no unit's name.
                Status::Review if names_a_unit(&r) => all_matched = false,
                Status::Review | Status::Unmatched => {
                    any_unmatched = true;
                    break;
                }
            }
            resolved.push((name[segs[i].0..segs[j].1].to_string(), r));
        }
        if any_unmatched {
            continue;
        }
        if all_matched {
            let codes: BTreeSet<&str> = resolved
                .iter()
                .filter_map(|(_, r)| r.code.as_deref())
                .collect();
            // Members are distinct units, each a single unit.
            if codes.len() == resolved.len() && codes.iter().all(|c| !c.contains(CODE_SEPARATOR)) {
                level = parts;
                found.push((mask, resolved));
            }
        } else if first_review.is_none() {
            first_review = Some(resolved);
        }
    }
    let mut distinct: BTreeMap<Vec<String>, Vec<(String, Resolution)>> = BTreeMap::new();
    for (_, parts) in found {
        let mut codes: Vec<String> = parts.iter().filter_map(|(_, r)| r.code.clone()).collect();
        codes.sort();
        distinct.entry(codes).or_insert(parts);
    }
    match distinct.len() {
        0 => first_review.map(|parts| review_of_parts(&parts)),
        1 => {
            let parts = distinct.into_values().next().expect("one reading");
            let members: Vec<(String, String)> = parts
                .iter()
                .map(|(_, r)| {
                    (
                        r.code.clone().unwrap_or_default(),
                        r.name.clone().unwrap_or_default(),
                    )
                })
                .collect();
            let score = parts.iter().map(|(_, r)| r.score).fold(1.0, f64::min);
            let mut note = format!(
                "composite of {} units: {}",
                members.len(),
                listing(&members)
            );
            for (text, r) in &parts {
                if !r.note.is_empty() {
                    note.push_str(&format!("; {text:?}: {}", r.note));
                }
                if r.method == Some(Method::Fuzzy) {
                    note.push_str(&format!(
                        "; {text:?} read as {} by similarity",
                        r.name.as_deref().unwrap_or("")
                    ));
                }
            }
            Some(matched(&members, score, note))
        }
        _ => {
            let mut candidates: Vec<Candidate> = Vec::new();
            for (codes, parts) in &distinct {
                let names: Vec<String> = parts.iter().filter_map(|(_, r)| r.name.clone()).collect();
                candidates.push(Candidate {
                    code: join_codes(codes),
                    name: names.join(" + "),
                    score: 1.0,
                });
            }
            Some(Resolution {
                status: Status::Review,
                code: None,
                name: None,
                method: None,
                score: 1.0,
                note: format!(
                    "the name reads as {} different composites",
                    candidates.len()
                ),
                candidates,
            })
        }
    }
}

/// Review for a cutting whose parts all resolve but some ambiguously: each
/// part's answer in the note, every part's candidates listed.
fn review_of_parts(parts: &[(String, Resolution)]) -> Resolution {
    let mut said: Vec<String> = Vec::new();
    let mut candidates: Vec<Candidate> = Vec::new();
    for (text, r) in parts {
        match r.status {
            Status::Matched => {
                let code = r.code.clone().unwrap_or_default();
                let name = r.name.clone().unwrap_or_default();
                said.push(format!("{text:?} is {code} {name}"));
                candidates.push(Candidate {
                    code,
                    name: format!("{name} (part {text:?})"),
                    score: r.score,
                });
            }
            _ => {
                let codes: Vec<&str> = r.candidates.iter().map(|c| c.code.as_str()).collect();
                said.push(format!(
                    "{text:?} needs a decision ({}; candidates {})",
                    r.note,
                    codes.join(", ")
                ));
                candidates.extend(r.candidates.iter().map(|c| Candidate {
                    code: c.code.clone(),
                    name: format!("{} (part {text:?})", c.name),
                    score: c.score,
                }));
            }
        }
    }
    Resolution {
        status: Status::Review,
        code: None,
        name: None,
        method: None,
        score: candidates.iter().map(|c| c.score).fold(0.0, f64::max),
        note: format!(
            "composite of {} parts, not all settled: {}; decide with the member codes joined by {CODE_SEPARATOR:?}",
            parts.len(),
            said.join("; ")
        ),
        candidates,
    }
}

/// How a pooled figure is split among its members.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum SplitBasis {
    /// By each member's area (the built-in geometry).
    Area,
    /// By each member's population (a table the user gives).
    Population,
}

impl SplitBasis {
    /// The word written beside split figures.
    pub fn as_str(self) -> &'static str {
        match self {
            SplitBasis::Area => "area",
            SplitBasis::Population => "population",
        }
    }
}

/// Each member's share of the composite: its size over the members' total.
/// `Err` names the members with no size, or says the total is not positive.
pub fn shares(members: &[String], size: impl Fn(&str) -> Option<f64>) -> Result<Vec<f64>, String> {
    let mut sizes: Vec<f64> = Vec::with_capacity(members.len());
    let mut missing: Vec<&str> = Vec::new();
    for m in members {
        match size(m) {
            Some(s) if s.is_finite() && s >= 0.0 => sizes.push(s),
            _ => missing.push(m),
        }
    }
    if !missing.is_empty() {
        return Err(format!("no size for member(s) {}", missing.join(", ")));
    }
    let total: f64 = sizes.iter().sum();
    if total <= 0.0 {
        return Err("the members' sizes add up to zero".into());
    }
    Ok(sizes.iter().map(|s| s / total).collect())
}

/// A pooled source: its members (as source indices of the plan) and their
/// shares.
#[derive(Debug, Clone, PartialEq)]
pub struct Pooled {
    /// The composite code ("36005+36047+...").
    pub code: String,
    /// (member source index, share), shares summing to one.
    pub members: Vec<(usize, f64)>,
    /// What the shares measure.
    pub basis: SplitBasis,
}

/// A member's value that came from a pooled report in a period.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub struct PooledCell {
    /// The member's source index.
    pub source: usize,
    /// The period index.
    pub period: usize,
    /// Index into the `pooled` list given to [`spread`].
    pub pooled: usize,
    /// True when the member also had its own value in that period (the
    /// pooled share was added to it: the same land reported twice).
    pub overlap: bool,
}

/// Moves the values of pooled sources onto their members. `values` holds
/// `sources` plan sources followed by one source per entry of `pooled` (in
/// that order); the result holds the plan sources only. Counts are split by
/// the shares; columns marked `intensive` (values of means) are copied to
/// every member. Returns the member cells that received a pooled value.
pub fn spread(
    values: &SourceValues,
    sources: usize,
    pooled: &[Pooled],
    intensive: &[bool],
) -> (SourceValues, Vec<PooledCell>) {
    let periods = values.periods();
    let columns = intensive.len();
    let mut out = SourceValues::new(periods, sources, columns);
    for s in 0..sources {
        for p in 0..periods {
            for c in 0..columns {
                if let Some(v) = values.get(p, s, c) {
                    out.add(p, s, c, v);
                }
            }
        }
    }
    let mut cells: Vec<PooledCell> = Vec::new();
    for (k, pool) in pooled.iter().enumerate() {
        let src = sources + k;
        for p in 0..periods {
            let known: Vec<(usize, f64)> = (0..columns)
                .filter_map(|c| values.get(p, src, c).map(|v| (c, v)))
                .collect();
            if known.is_empty() {
                continue;
            }
            for &(m, share) in &pool.members {
                let overlap = (0..columns).any(|c| values.get(p, m, c).is_some());
                for &(c, v) in &known {
                    let x = if intensive[c] { v } else { v * share };
                    out.add(p, m, c, x);
                }
                cells.push(PooledCell {
                    source: m,
                    period: p,
                    pooled: k,
                    overlap,
                });
            }
        }
    }
    cells.sort();
    (out, cells)
}

/// Composites that cannot be split: (code, why).
pub type Refused = Vec<(String, String)>;

/// Prepares the pooled sources of a table for [`spread`]: each composite
/// (code, members) gets its members' source indices (`source_index`) and
/// shares by `size`. A composite with a member that is no source, or with
/// no size for a member, is returned in the second list with the reason
/// (its rows are then reported, not allocated).
pub fn prepare_pooled(
    composites: &[(String, Vec<String>)],
    source_index: impl Fn(&str) -> Option<usize>,
    size: impl Fn(&str) -> Option<f64>,
    basis: SplitBasis,
) -> (Vec<Pooled>, Refused) {
    let mut ok = Vec::new();
    let mut refused = Vec::new();
    for (code, members) in composites {
        let missing: Vec<&str> = members
            .iter()
            .filter(|m| source_index(m).is_none())
            .map(String::as_str)
            .collect();
        if !missing.is_empty() {
            refused.push((
                code.clone(),
                format!(
                    "member(s) {} are not sources of the crosswalk; rows left out",
                    missing.join(", ")
                ),
            ));
            continue;
        }
        match shares(members, &size) {
            Ok(sh) => ok.push(Pooled {
                code: code.clone(),
                members: members
                    .iter()
                    .zip(sh)
                    .map(|(m, s)| (source_index(m).expect("checked above"), s))
                    .collect(),
                basis,
            }),
            Err(why) => refused.push((
                code.clone(),
                format!("cannot split by {}: {why}; rows left out", basis.as_str()),
            )),
        }
    }
    (ok, refused)
}

/// What each output row (target, period) received from pooled reports: the
/// composites whose values reached the target through a member, as
/// "CODE by BASIS" joined by "; ". `links` gives the source indices that
/// feed a target.
pub fn pooled_labels(
    targets: usize,
    links: impl Fn(usize) -> Vec<usize>,
    cells: &[PooledCell],
    pooled: &[Pooled],
) -> BTreeMap<(usize, usize), String> {
    let mut by_source: BTreeMap<usize, BTreeMap<usize, BTreeSet<usize>>> = BTreeMap::new();
    for c in cells {
        by_source
            .entry(c.source)
            .or_default()
            .entry(c.period)
            .or_default()
            .insert(c.pooled);
    }
    let mut out = BTreeMap::new();
    if by_source.is_empty() {
        return out;
    }
    for t in 0..targets {
        let mut per_period: BTreeMap<usize, BTreeSet<usize>> = BTreeMap::new();
        for s in links(t) {
            if let Some(periods) = by_source.get(&s) {
                for (p, ks) in periods {
                    per_period.entry(*p).or_default().extend(ks);
                }
            }
        }
        for (p, ks) in per_period {
            let text: Vec<String> = ks
                .iter()
                .map(|&k| format!("{} by {}", pooled[k].code, pooled[k].basis.as_str()))
                .collect();
            out.insert((t, p), text.join("; "));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::matcher::CodeForm;
    use crate::core::reference::{Parent, Reference, Unit, YearSpan};

    fn unit(code: &str, name: &str, description: &str, from: u16) -> Unit {
        Unit {
            code: code.into(),
            name: name.into(),
            description: description.into(),
            parent: Some(code[..2].into()),
            valid: YearSpan { from, to: None },
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

    /// Real units (codes and names as in `reference/us/counties.csv`).
    fn sample() -> Reference {
        Reference {
            label: "sample".into(),
            parents: vec![
                parent("02", "AK", "Alaska"),
                parent("25", "MA", "Massachusetts"),
                parent("36", "NY", "New York"),
                parent("20", "KS", "Kansas"),
                parent("30", "MT", "Montana"),
                parent("19", "IA", "Iowa"),
            ],
            units: vec![
                unit("02060", "Bristol Bay", "Borough", 1970),
                unit("02164", "Lake and Peninsula", "Borough", 1989),
                unit("02170", "Matanuska-Susitna", "Borough", 1970),
                unit("02290", "Yukon-Koyukuk", "Census Area", 1970),
                unit("25007", "Dukes", "County", 1970),
                unit("25019", "Nantucket", "County", 1970),
                unit("36005", "Bronx", "County", 1970),
                unit("36047", "Kings", "County", 1970),
                unit("36061", "New York", "County", 1970),
                unit("36081", "Queens", "County", 1970),
                unit("36085", "Richmond", "County", 1970),
                unit("20013", "Brown", "County", 1970),
                unit("20131", "Nemaha", "County", 1970),
                unit("30049", "Lewis and Clark", "County", 1970),
                unit("30007", "Broadwater", "County", 1970),
                unit("19013", "Black Hawk", "County", 1970),
                unit("19131", "Mitchell", "County", 1970),
                unit("20123", "Mitchell", "County", 1970),
            ],
            changes: Vec::new(),
            aliases: Vec::new(),
        }
    }

    fn nyc() -> NamedComposites {
        NamedComposites::new(vec![NamedComposite {
            name: "New York City".into(),
            state: Some("36".into()),
            members: ["36085", "36005", "36047", "36061", "36081"]
                .map(String::from)
                .to_vec(),
            source: "test".into(),
        }])
    }

    fn resolve(
        m: &Matcher,
        named: &NamedComposites,
        name: &str,
        state: Option<&str>,
    ) -> Resolution {
        let whole = m.resolve(name, state);
        read(m, named, name, state, &whole).unwrap_or(whole)
    }

    #[test]
    fn names_joined_by_and_are_a_composite_when_no_unit_has_the_name() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let none = NamedComposites::default();
        for (name, state) in [
            ("Dukes and Nantucket", Some("MA")),
            ("Dukes & Nantucket", None),
            ("Nantucket/Dukes", Some("25")),
            ("Dukes and Nantucket, MA", None),
            ("Dukes County + Nantucket County", None),
        ] {
            let res = resolve(&m, &none, name, state);
            assert_eq!(res.status, Status::Matched, "{name}: {res:?}");
            assert_eq!(res.method, Some(Method::Composite), "{name}");
            assert_eq!(res.code.as_deref(), Some("25007+25019"), "{name}");
            assert!(
                res.note.contains("Dukes County (25007)")
                    && res.note.contains("Nantucket County (25019)"),
                "{}",
                res.note
            );
        }
    }

    #[test]
    fn single_units_with_joining_words_in_their_names_stay_single() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let none = NamedComposites::default();
        for (name, code) in [
            ("Lake and Peninsula", "02164"),
            ("Matanuska-Susitna", "02170"),
            ("Yukon-Koyukuk", "02290"),
            ("Lewis and Clark", "30049"),
        ] {
            let res = resolve(&m, &none, name, None);
            assert_eq!(res.code.as_deref(), Some(code), "{name}: {res:?}");
            assert_ne!(res.method, Some(Method::Composite));
        }
    }

    #[test]
    fn the_cutting_with_fewest_parts_wins() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let none = NamedComposites::default();
        let res = resolve(&m, &none, "Bristol Bay + Lake and Peninsula", Some("AK"));
        assert_eq!(res.code.as_deref(), Some("02060+02164"), "{res:?}");
        let res = resolve(&m, &none, "Lewis and Clark and Broadwater", Some("MT"));
        assert_eq!(res.code.as_deref(), Some("30007+30049"), "{res:?}");
        let res = resolve(&m, &none, "Brown-Nemaha", Some("KS"));
        assert_eq!(res.code.as_deref(), Some("20013+20131"), "{res:?}");
    }

    #[test]
    fn an_ambiguous_part_sends_the_whole_to_review_with_each_parts_candidates() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let none = NamedComposites::default();
        // "Mitchell" is a county in Iowa and in Kansas; no state is given.
        let res = resolve(&m, &none, "Black Hawk and Mitchell", None);
        assert_eq!(res.status, Status::Review, "{res:?}");
        let codes: Vec<&str> = res.candidates.iter().map(|c| c.code.as_str()).collect();
        assert!(codes.contains(&"19013"), "{codes:?}");
        assert!(
            codes.contains(&"19131") && codes.contains(&"20123"),
            "{codes:?}"
        );
        assert!(
            res.note.contains("\"Mitchell\" needs a decision"),
            "{}",
            res.note
        );
    }

    #[test]
    fn a_part_that_matches_nothing_leaves_the_name_as_the_matcher_said() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let none = NamedComposites::default();
        let whole = m.resolve("Dukes and Nowhere", Some("MA"));
        assert!(read(&m, &none, "Dukes and Nowhere", Some("MA"), &whole).is_none());
    }

    #[test]
    fn new_york_city_is_its_five_counties() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        for (name, state) in [
            ("New York City", None),
            ("NEW YORK CITY", Some("NY")),
            ("New York City, NY", None),
        ] {
            let res = resolve(&m, &nyc(), name, state);
            assert_eq!(
                res.code.as_deref(),
                Some("36005+36047+36061+36081+36085"),
                "{name}: {res:?}"
            );
            assert_eq!(res.method, Some(Method::Composite));
        }
        // In another state the name is not New York City.
        let res = resolve(&m, &nyc(), "New York City", Some("KS"));
        assert_ne!(res.method, Some(Method::Composite), "{res:?}");
    }

    #[test]
    fn a_decision_may_choose_several_codes() {
        let r = sample();
        let m = Matcher::new(&r, 2023, CodeForm::County);
        let res = decided(&m, &["25019".into(), "25007".into()]).unwrap();
        assert_eq!(res.code.as_deref(), Some("25007+25019"));
        assert_eq!(res.method, Some(Method::Decision));
        assert_eq!(
            decided(&m, &["25007".into(), "99999".into()]),
            Err("99999".into())
        );
    }

    #[test]
    fn composite_code_cells_are_read_member_by_member() {
        let norm = |t: &str| -> Result<String, String> {
            t.parse::<crate::core::fips::CountyFips>()
                .map(|c| c.to_string())
                .map_err(|e| e.to_string())
        };
        assert_eq!(parse_code("36047", norm), Ok(None));
        assert_eq!(
            parse_code("36085 + 36005+36047", norm),
            Ok(Some(vec!["36005".into(), "36047".into(), "36085".into()]))
        );
        assert_eq!(
            parse_code("2060+2164", norm),
            Ok(Some(vec!["02060".into(), "02164".into()]))
        );
        assert!(parse_code("36047+", norm)
            .unwrap_err()
            .contains("empty member"));
        assert!(parse_code("36047+36047", norm)
            .unwrap_err()
            .contains("twice"));
        assert!(parse_code("36047+ABC", norm)
            .unwrap_err()
            .contains("\"ABC\""));
    }

    #[test]
    fn segments_are_cut_at_joining_words_and_signs() {
        let t = "Bristol Bay + Lake and Peninsula";
        let (s, g) = segments(t);
        let words: Vec<&str> = s.iter().map(|&(a, b)| &t[a..b]).collect();
        assert_eq!(words, ["Bristol Bay", "Lake", "Peninsula"]);
        assert_eq!(g, [false, false]);
        let t = "Anderson, Andover, and Sandy, KS";
        let (s, g) = segments(t);
        let words: Vec<&str> = s.iter().map(|&(a, b)| &t[a..b]).collect();
        // "and" inside a word is no separator.
        assert_eq!(words, ["Anderson", "Andover", "Sandy", "KS"]);
        assert_eq!(g, [true, true, true]);
    }

    #[test]
    fn spread_splits_counts_by_share_and_copies_intensive_values() {
        // Two plan sources (members) and one pooled source holding
        // count 100, rate 0.2; shares 0.25 and 0.75.
        let mut v = SourceValues::new(1, 3, 2);
        v.add(0, 2, 0, 100.0);
        v.add(0, 2, 1, 0.2);
        let pooled = [Pooled {
            code: "A+B".into(),
            members: vec![(0, 0.25), (1, 0.75)],
            basis: SplitBasis::Area,
        }];
        let (out, cells) = spread(&v, 2, &pooled, &[false, true]);
        assert_eq!(out.sources(), 2);
        assert_eq!(out.get(0, 0, 0), Some(25.0));
        assert_eq!(out.get(0, 1, 0), Some(75.0));
        assert_eq!(out.get(0, 0, 1), Some(0.2));
        assert_eq!(out.get(0, 1, 1), Some(0.2));
        assert_eq!(cells.len(), 2);
        assert!(cells.iter().all(|c| !c.overlap));
    }

    proptest::proptest! {
        /// With full coverage, the members of a split composite add up to
        /// the composite's figure, through allocation onto the members too.
        #[test]
        fn a_split_composite_conserves_its_figure(
            sizes in proptest::collection::vec(0.01f64..1.0e4, 2..9),
            value in -1.0e6f64..1.0e6,
            rate in 0.0f64..1.0,
        ) {
            use crate::core::allocate::{allocate, Measure, Origin, Plan, Spec};
            use crate::core::crosswalk::{Basis, Crosswalk, CrosswalkRow};
            let codes: Vec<String> = (0..sizes.len()).map(|i| format!("M{i}")).collect();
            let sh = shares(&codes, |c| codes.iter().position(|x| x == c).map(|i| sizes[i])).unwrap();
            let pooled = [Pooled {
                code: join_codes(&codes),
                members: sh.iter().copied().enumerate().collect(),
                basis: SplitBasis::Area,
            }];
            let n = codes.len();
            let mut v = SourceValues::new(1, n + 1, 2);
            v.add(0, n, 0, value);
            v.add(0, n, 1, rate);
            let (out, cells) = spread(&v, n, &pooled, &[false, true]);
            proptest::prop_assert_eq!(cells.len(), n);
            let total: f64 = (0..n).map(|m| out.get(0, m, 0).unwrap()).sum();
            proptest::prop_assert!((total - value).abs() <= 1e-9 * value.abs().max(1.0));
            // Onto the members themselves (identity rows).
            let cw = Crosswalk {
                rows: codes.iter().map(|c| CrosswalkRow {
                    from_code: c.clone(),
                    to_code: Some(c.clone()),
                    weight: 1.0,
                    target_share: Some(1.0),
                    basis: Basis::Area,
                }).collect(),
            };
            let plan = Plan::new(&cw, &[], |_| Origin::Direct);
            let a = allocate(&plan, &out, &Spec { measures: vec![Measure::Count(0)], min_coverage: 0.0 });
            let mut sum = 0.0;
            for t in 0..n {
                let e = a.get(t, 0, 0);
                proptest::prop_assert_eq!(e.coverage, 1.0);
                sum += e.value.unwrap();
                // An intensive value is every member's.
                proptest::prop_assert_eq!(out.get(0, t, 1), Some(rate));
            }
            proptest::prop_assert!((sum - value).abs() <= 1e-9 * value.abs().max(1.0));
        }
    }

    #[test]
    fn shares_need_a_size_for_every_member() {
        let sizes: BTreeMap<&str, f64> = [("A", 1.0), ("B", 3.0)].into();
        let s = shares(&["A".into(), "B".into()], |c| sizes.get(c).copied()).unwrap();
        assert_eq!(s, [0.25, 0.75]);
        let e = shares(&["A".into(), "C".into()], |c| sizes.get(c).copied()).unwrap_err();
        assert!(e.contains("C"), "{e}");
    }
}
