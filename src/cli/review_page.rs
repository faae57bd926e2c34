//! `regionkey review-page REVIEW --output page.html`: one self-contained
//! HTML file (no network, no external scripts or fonts) in which a person
//! settles the names of a review file. One card per name, ordered by the rows
//! it covers: the reason in plain words, the rows' years and a few example
//! rows from the matched table, the candidates with their full names, scores
//! and what the change history says of each, and a small map of the state
//! with the candidates drawn and numbered. Decisions stay in the browser's
//! local storage and are saved as a decisions CSV that `match --decisions`
//! reads as it is.

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use super::{say, Global};
use crate::core::history::lineage;
use crate::core::projection::{Frame, Inset};
use crate::core::reference::Reference;
use crate::error::{Error, Result};
use crate::io::builtin::{read_reference_file, us_counties};
use crate::io::geo::{read_layer, sha256_hex, LayerRequest};
use crate::io::html::{write_review_page, Base, Card, CardMap, Page, PageCandidate};
use crate::io::output::{write_to, Target};
use crate::io::table::{read_table, ReadOptions, Table};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The review file written by `match --review`.
    pub review: PathBuf,
    /// The matched table written by `match --output`, for the rows' years and examples.
    #[arg(long, value_name = "FILE")]
    pub matched: Option<PathBuf>,
    /// Column of the matched table holding the names (default: the column
    /// in which the review's names occur most).
    #[arg(long, value_name = "COL", requires = "matched")]
    pub name_column: Option<String>,
    /// Column of the matched table holding the state, if the input had one.
    #[arg(long, value_name = "COL", requires = "matched")]
    pub state_column: Option<String>,
    /// Column of the matched table holding the year (default: a column
    /// named `year`, `vintage` or `period`, if there is one).
    #[arg(long, value_name = "COL", requires = "matched")]
    pub year_column: Option<String>,
    /// The user's own reference list the names were matched against (as
    /// given to `match --reference`); typed codes are checked against it and
    /// no maps are drawn. Default: the built-in US counties.
    #[arg(long, value_name = "FILE")]
    pub reference: Option<PathBuf>,
    /// Example rows shown per name.
    #[arg(long, default_value_t = 3, value_name = "N")]
    pub examples: usize,
    /// Title of the page.
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
    /// Where to write the page.
    #[arg(long, short, value_name = "FILE")]
    pub output: String,
}

/// A checked configuration.
#[derive(Debug, Clone)]
pub struct PageConfig {
    /// The review file.
    pub review: PathBuf,
    /// The matched table and its columns, if given.
    pub matched: Option<PathBuf>,
    /// Name column of the matched table (detected when `None`).
    pub name_column: Option<String>,
    /// State column of the matched table.
    pub state_column: Option<String>,
    /// Year column of the matched table (detected when `None`).
    pub year_column: Option<String>,
    /// A user's reference file instead of the built-in counties.
    pub reference: Option<PathBuf>,
    /// Example rows per name.
    pub examples: usize,
    /// Page title.
    pub title: String,
}

/// Turns arguments into a checked configuration.
pub fn configure(args: &Args) -> Result<PageConfig> {
    for p in std::iter::once(&args.review)
        .chain(args.matched.iter())
        .chain(args.reference.iter())
    {
        if !p.is_file() {
            return Err(Error::io(
                p,
                "cannot open",
                std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
            ));
        }
    }
    Target::parse(&args.output).check_writable()?;
    Ok(PageConfig {
        review: args.review.clone(),
        matched: args.matched.clone(),
        name_column: args.name_column.clone(),
        state_column: args.state_column.clone(),
        year_column: args.year_column.clone(),
        reference: args.reference.clone(),
        examples: args.examples,
        title: args.title.clone().unwrap_or_else(|| {
            format!(
                "Names to settle: {}",
                args.review
                    .file_name()
                    .map_or(String::new(), |f| f.to_string_lossy().into_owned())
            )
        }),
    })
}

/// Writes years as sorted ranges joined by ";" (`2000-2021;2023`).
pub fn year_ranges(years: &BTreeSet<u16>) -> String {
    let mut out: Vec<String> = Vec::new();
    let mut it = years.iter().copied().peekable();
    while let Some(start) = it.next() {
        let mut end = start;
        while it.peek() == Some(&(end + 1)) {
            end += 1;
            it.next();
        }
        out.push(if start == end {
            start.to_string()
        } else {
            format!("{start}-{end}")
        });
    }
    out.join(";")
}

/// Reads a `years` cell ("2000-2021;2023") back into years; `None` when
/// the cell is not of that form.
pub fn parse_years(cell: &str) -> Option<BTreeSet<u16>> {
    let mut out = BTreeSet::new();
    for part in cell.split(';').map(str::trim).filter(|p| !p.is_empty()) {
        match part.split_once('-') {
            Some((a, b)) => {
                let (a, b): (u16, u16) = (a.trim().parse().ok()?, b.trim().parse().ok()?);
                if b < a || b - a > 500 {
                    return None;
                }
                out.extend(a..=b);
            }
            None => {
                out.insert(part.parse().ok()?);
            }
        }
    }
    Some(out)
}

const ADDED: [&str; 7] = [
    "code",
    "code_name",
    "match_status",
    "match_method",
    "match_score",
    "note",
    "candidates",
];

fn is_added(header: &str) -> bool {
    let h = header.strip_prefix("rk_").unwrap_or(header);
    ADDED.contains(&h)
}

/// The column of `table` in which most of `names` occur.
fn detect_name_column(table: &Table, names: &BTreeSet<&str>) -> Option<usize> {
    (0..table.headers.len())
        .filter(|&c| !is_added(&table.headers[c]))
        .map(|c| {
            let hits: BTreeSet<&str> = table
                .records
                .iter()
                .map(|r| r[c].trim())
                .filter(|v| names.contains(v))
                .collect();
            (hits.len(), c)
        })
        .filter(|&(n, _)| n > 0)
        .max_by_key(|&(n, c)| (n, std::cmp::Reverse(c)))
        .map(|(_, c)| c)
}

fn plain_reason(status: &str, reason: &str, candidates: usize) -> (String, String) {
    let reason = if reason.is_empty() {
        "no reason given".to_string()
    } else {
        let mut r = reason.to_string();
        if let Some(first) = r.get(..1) {
            let up = first.to_uppercase();
            r.replace_range(..1, &up);
        }
        r
    };
    let advice = match (status, candidates) {
        ("review", _) => "Several units could be meant: pick the one the rows are about, or type another code.",
        (_, 0) => "No unit was found: type a code if it is a place, or choose \u{201c}none\u{201d} if it is not one (a total, a placeholder, a city inside a county).",
        _ => "No candidate was good enough: pick one if it is right, type a code, or choose \u{201c}none\u{201d}.",
    };
    (reason, advice.to_string())
}

/// What the change history says of a code, in short lines.
fn history_lines(reference: &Reference, code: &str) -> Vec<String> {
    let events = lineage(reference, code);
    let eras: Vec<String> = events
        .iter()
        .filter(|e| e.event == "era")
        .map(|e| e.text.clone())
        .collect();
    let mut out = Vec::new();
    if eras.len() > 1
        || eras
            .first()
            .is_some_and(|e| !e.contains("from 1970 to today"))
    {
        out.extend(eras);
    }
    out.extend(
        events
            .iter()
            .filter(|e| e.event != "era")
            .map(|e| e.text.clone()),
    );
    out
}

/// A unit's polygons as read (each an exterior ring and its holes).
type Polygons = Vec<Vec<crate::core::overlay::Ring>>;

/// The built-in layers, read once, by code.
struct Layers {
    by_year: Vec<(u16, BTreeMap<String, Polygons>)>,
    states: BTreeMap<String, Polygons>,
}

impl Layers {
    fn read() -> Result<Layers> {
        let read = |name: &str, object: &str| -> Result<_> {
            let layer = read_layer(&LayerRequest {
                spec: format!("builtin:{name}"),
                key: None,
                object: Some(object.to_string()),
                key_option: "--key",
                object_option: "--object",
            })?;
            Ok(layer
                .features
                .into_iter()
                .map(|f| (f.key, f.polygons))
                .collect::<BTreeMap<_, _>>())
        };
        Ok(Layers {
            by_year: vec![
                (2023, read("counties-2023", "counties")?),
                (2017, read("counties-2017", "counties")?),
            ],
            states: read("counties-2023", "states")?,
        })
    }

    fn shape(&self, code: &str) -> Option<&Polygons> {
        self.by_year.iter().find_map(|(_, m)| m.get(code))
    }
}

const MAP_W: f64 = 320.0;
const MAP_H: f64 = 240.0;

fn path_of(
    polygons: &[Vec<crate::core::overlay::Ring>],
    project: &dyn Fn(f64, f64) -> (f64, f64),
) -> String {
    let mut d = String::new();
    for ring in polygons.iter().flatten() {
        let mut last = (f64::NAN, f64::NAN);
        let mut n = 0;
        for c in ring {
            let (x, y) = project(c.x, c.y);
            let p = ((x * 10.0).round() / 10.0, (y * 10.0).round() / 10.0);
            if p == last {
                continue;
            }
            d.push_str(&format!(
                "{}{},{}",
                if n == 0 { "M" } else { "L" },
                p.0,
                p.1
            ));
            last = p;
            n += 1;
        }
        if n > 0 {
            d.push('Z');
        }
    }
    d
}

/// A label point: the centroid of the largest projected ring.
fn label_point(
    polygons: &[Vec<crate::core::overlay::Ring>],
    project: &dyn Fn(f64, f64) -> (f64, f64),
) -> (f64, f64) {
    let mut best = (0.0, (0.0, 0.0));
    for poly in polygons {
        let Some(ext) = poly.first() else { continue };
        let pts: Vec<(f64, f64)> = ext.iter().map(|c| project(c.x, c.y)).collect();
        let (mut a, mut cx, mut cy) = (0.0, 0.0, 0.0);
        for w in pts.windows(2) {
            let cross = w[0].0 * w[1].1 - w[1].0 * w[0].1;
            a += cross;
            cx += (w[0].0 + w[1].0) * cross;
            cy += (w[0].1 + w[1].1) * cross;
        }
        if a.abs() > best.0 {
            best = (a.abs(), (cx / (3.0 * a), cy / (3.0 * a)));
        } else if best.0 == 0.0 && !pts.is_empty() {
            best.1 = pts[0];
        }
    }
    (
        (best.1 .0 * 10.0).round() / 10.0,
        (best.1 .1 * 10.0).round() / 10.0,
    )
}

/// Builds the page (the library entry).
pub fn execute(config: &PageConfig) -> Result<Page> {
    let bytes = std::fs::read(&config.review)
        .map_err(|e| Error::io(&config.review, "cannot open review file", e))?;
    let review = read_table(&config.review, ReadOptions::default())?;
    let col = |n: &str| review.column(n).ok();
    let name_c = review.column("name")?;
    let state_c = col("state");
    let years_c = col("years");
    let status_c = col("status");
    let rows_c = col("rows");
    let reason_c = col("reason");
    let chosen_c = col("chosen_code");

    let builtin = config.reference.is_none();
    let reference: Reference = match &config.reference {
        Some(p) => read_reference_file(p)?,
        None => us_counties()?.clone(),
    };
    let layers = if builtin { Some(Layers::read()?) } else { None };
    let state_names: BTreeMap<String, String> = reference
        .parents
        .iter()
        .map(|p| (p.code.clone(), p.name.clone()))
        .collect();
    let state_short: BTreeMap<String, String> = reference
        .parents
        .iter()
        .map(|p| (p.code.clone(), p.short.clone().unwrap_or_default()))
        .collect();

    // The matched table: rows per (name, state).
    let mut example_columns = Vec::new();
    let mut by_key: BTreeMap<(String, String), Vec<usize>> = BTreeMap::new();
    let mut matched_table = None;
    let mut year_col = None;
    if let Some(path) = &config.matched {
        let t = read_table(path, ReadOptions::default())?;
        let names: BTreeSet<&str> = review.records.iter().map(|r| r[name_c].trim()).collect();
        let name_col = match &config.name_column {
            Some(c) => t.column(c)?,
            None => detect_name_column(&t, &names).ok_or_else(|| {
                Error::Usage(format!(
                    "{}: no column holds the review's names; say which with --name-column",
                    path.display()
                ))
            })?,
        };
        let state_col = config
            .state_column
            .as_deref()
            .map(|c| t.column(c))
            .transpose()?;
        year_col = match &config.year_column {
            Some(c) => Some(t.column(c)?),
            None => ["year", "vintage", "period"]
                .iter()
                .find_map(|n| t.column(n).ok()),
        };
        for (i, r) in t.records.iter().enumerate() {
            let key = (
                r[name_col].trim().to_string(),
                state_col.map_or(String::new(), |c| r[c].trim().to_string()),
            );
            by_key.entry(key).or_default().push(i);
        }
        example_columns = t
            .headers
            .iter()
            .filter(|h| !is_added(h))
            .take(8)
            .cloned()
            .collect();
        matched_table = Some(t);
    }

    let mut bases: BTreeMap<String, Base> = BTreeMap::new();
    let mut cards = Vec::new();
    for (i, r) in review.records.iter().enumerate() {
        let get = |c: Option<usize>| c.map_or(String::new(), |c| r[c].trim().to_string());
        let name = r[name_c].trim().to_string();
        let state = get(state_c);
        let status = get(status_c);
        let rows_text = get(rows_c);
        let rows: u64 = if rows_text.is_empty() {
            0
        } else {
            rows_text.parse().map_err(|_| {
                Error::input(
                    review.location(i, rows_c.unwrap_or(0)),
                    format!("{rows_text:?} is not a count of rows"),
                )
            })?
        };
        let years_cell = get(years_c);
        let mut candidates = Vec::new();
        for k in 1..=5 {
            let Some(code_c) = col(&format!("candidate_{k}_code")) else {
                break;
            };
            let code = r[code_c].trim().to_string();
            if code.is_empty() {
                continue;
            }
            let cell = |what: &str| {
                col(&format!("candidate_{k}_{what}"))
                    .map_or(String::new(), |c| r[c].trim().to_string())
            };
            candidates.push(PageCandidate {
                history: history_lines(&reference, &code),
                drawn: false,
                code,
                name: cell("name"),
                score: cell("score"),
            });
        }

        // Years and examples from the matched table.
        let wanted: Option<BTreeSet<u16>> = years_c.and_then(|_| parse_years(&years_cell));
        let mut years: BTreeSet<u16> = wanted.clone().unwrap_or_default();
        let mut examples = Vec::new();
        if let Some(t) = &matched_table {
            for &row in by_key
                .get(&(name.clone(), state.clone()))
                .map(Vec::as_slice)
                .unwrap_or(&[])
            {
                let year = year_col.and_then(|c| t.records[row][c].trim().parse::<u16>().ok());
                if let (Some(w), Some(y)) = (&wanted, year) {
                    if !w.is_empty() && !w.contains(&y) {
                        continue;
                    }
                }
                if wanted.is_none() {
                    years.extend(year);
                }
                if examples.len() < config.examples {
                    examples.push(
                        example_columns
                            .iter()
                            .map(|h| {
                                t.column(h)
                                    .map_or(String::new(), |c| t.records[row][c].to_string())
                            })
                            .collect(),
                    );
                }
            }
        }
        let years_text = if years_c.is_some() && !years_cell.is_empty() {
            years_cell.clone()
        } else {
            year_ranges(&years)
        };

        // The map: the candidates' state, or the nation when they lie in several.
        let map = layers.as_ref().and_then(|layers| {
            let drawable: Vec<usize> = (0..candidates.len())
                .filter(|&k| layers.shape(&candidates[k].code).is_some())
                .collect();
            let states: BTreeSet<&str> = drawable
                .iter()
                .filter_map(|&k| candidates[k].code.get(..2))
                .collect();
            let key = match states.len() {
                0 => return None,
                1 => states.iter().next()?.to_string(),
                _ => "us".to_string(),
            };
            let frame = base_frame(layers, &key)?;
            if !bases.contains_key(&key) {
                bases.insert(key.clone(), build_base(layers, &key, &frame, &state_names));
            }
            let mut marks = Vec::new();
            for &k in &drawable {
                let code = &candidates[k].code;
                let polys = layers.shape(code)?;
                let proj = |lon: f64, lat: f64| {
                    let st = key_state(&key, code);
                    let (x, y) = Inset::for_state(&st).project(lon, lat);
                    frame.apply(x, y)
                };
                let (lx, ly) = label_point(polys, &proj);
                marks.push((k + 1, path_of(polys, &proj), lx, ly));
                candidates[k].drawn = true;
            }
            Some(CardMap { base: key, marks })
        });
        let (reason, advice) = plain_reason(&status, &get(reason_c), candidates.len());
        cards.push(Card {
            name,
            state,
            years: years_text,
            years_cell,
            status,
            rows,
            reason,
            advice,
            candidates,
            chosen: get(chosen_c),
            examples,
            map,
        });
    }
    // Most rows first; ties keep the review file's order.
    cards.sort_by_key(|c| std::cmp::Reverse(c.rows));

    let mut codes: BTreeMap<String, [String; 3]> = BTreeMap::new();
    for u in &reference.units {
        let entry = codes.entry(u.code.clone()).or_insert_with(|| {
            [
                u.full_name(),
                u.parent
                    .as_ref()
                    .and_then(|p| state_short.get(p).cloned().or(Some(p.clone())))
                    .unwrap_or_default(),
                String::new(),
            ]
        });
        let span = match u.valid.to {
            Some(to) if u.valid.from == 0 => format!("to {to}"),
            Some(to) => format!("{}-{to}", u.valid.from),
            None if u.valid.from == 0 => String::new(),
            None => format!("{} on", u.valid.from),
        };
        if u.valid.to.is_none() {
            entry[0] = u.full_name();
        }
        if !span.is_empty() {
            if !entry[2].is_empty() {
                entry[2].push_str(", ");
            }
            entry[2].push_str(&span);
        }
    }
    Ok(Page {
        title: config.title.clone(),
        id: sha256_hex(&[&bytes]),
        source: config
            .review
            .file_name()
            .map_or(String::new(), |f| f.to_string_lossy().into_owned()),
        has_state: state_c.is_some(),
        has_years: years_c.is_some(),
        example_columns,
        cards,
        bases,
        codes,
        codes_label: if builtin {
            "US counties and equivalents of every vintage since 1970".into()
        } else {
            format!("the codes of {}", reference.label)
        },
    })
}

/// The state whose inset projects a code on a base: the base's own state,
/// or on the national base the code's state.
fn key_state(key: &str, code: &str) -> String {
    if key == "us" {
        code.get(..2).unwrap_or("").to_string()
    } else {
        key.to_string()
    }
}

fn base_frame(layers: &Layers, key: &str) -> Option<Frame> {
    let mut pts = Vec::new();
    let mut push = |code: &str, polys: &Polygons| {
        let inset = Inset::for_state(&key_state(key, code));
        for c in polys.iter().flatten().flatten() {
            pts.push(inset.project(c.x, c.y));
        }
    };
    if key == "us" {
        for (code, polys) in &layers.states {
            push(code, polys);
        }
    } else {
        for (code, polys) in layers.by_year[0]
            .1
            .iter()
            .filter(|(c, _)| c.starts_with(key))
        {
            push(code, polys);
        }
        for (code, polys) in layers.by_year[1]
            .1
            .iter()
            .filter(|(c, _)| c.starts_with(key))
        {
            push(code, polys);
        }
    }
    Frame::fit(&pts, MAP_W, MAP_H, 4.0)
}

fn build_base(
    layers: &Layers,
    key: &str,
    frame: &Frame,
    state_names: &BTreeMap<String, String>,
) -> Base {
    let mut paths = Vec::new();
    let units: Vec<(&String, &Polygons)> = if key == "us" {
        layers.states.iter().collect()
    } else {
        layers.by_year[0]
            .1
            .iter()
            .filter(|(c, _)| c.starts_with(key))
            .collect()
    };
    for (code, polys) in units {
        let inset = Inset::for_state(&key_state(key, code));
        let proj = |lon: f64, lat: f64| {
            let (x, y) = inset.project(lon, lat);
            frame.apply(x, y)
        };
        paths.push(path_of(polys, &proj));
    }
    let (w, h) = frame.size();
    Base {
        caption: if key == "us" {
            "United States, states".into()
        } else {
            format!(
                "{}, 2023 counties",
                state_names
                    .get(key)
                    .cloned()
                    .unwrap_or_else(|| key.to_string())
            )
        },
        size: (w, h),
        paths,
    }
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = configure(&args)?;
    let page = execute(&config)?;
    let target = Target::parse(&args.output);
    write_to(&target, |w| write_review_page(w, &page))?;
    let decided = page.cards.iter().filter(|c| !c.chosen.is_empty()).count();
    say(
        global,
        format!(
            "review-page: {} names ({} rows), {} already decided; written to {}",
            page.cards.len(),
            page.cards.iter().map(|c| c.rows).sum::<u64>(),
            decided,
            args.output
        ),
    );
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn years_round_trip_through_ranges() {
        let y: BTreeSet<u16> = [2000, 2001, 2002, 2005, 2007, 2008].into();
        assert_eq!(year_ranges(&y), "2000-2002;2005;2007-2008");
        assert_eq!(parse_years("2000-2002;2005;2007-2008"), Some(y));
        assert_eq!(parse_years(""), Some(BTreeSet::new()));
        assert_eq!(parse_years("2021-2000"), None);
        assert_eq!(parse_years("recent"), None);
    }
}
