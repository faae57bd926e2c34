//! The review page: one HTML file with its styles, script and data inline,
//! so it opens offline from disk with no network, scripts or fonts from
//! elsewhere.

use std::collections::BTreeMap;
use std::io::Write;

use serde::Serialize;

const CSS: &str = include_str!("../../assets/review-page.css");
const JS: &str = include_str!("../../assets/review-page.js");

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// JSON that can sit inside a `<script>` element: `<` is written as `\u003c`
/// so no text of the data can close the element.
pub fn script_json<T: serde::Serialize>(value: &T) -> std::io::Result<String> {
    let text = serde_json::to_string(value).map_err(std::io::Error::other)?;
    Ok(text.replace('<', "\\u003c"))
}

/// One candidate on a card.
#[derive(Debug, Clone, Serialize)]
pub struct PageCandidate {
    /// Its code.
    pub code: String,
    /// Full name.
    pub name: String,
    /// Score as written in the review file.
    pub score: String,
    /// What the change history says of it, one line per fact.
    pub history: Vec<String>,
    /// True when the map shows it.
    pub drawn: bool,
}

/// One card: a name that needs a decision.
#[derive(Debug, Clone, Serialize)]
pub struct Card {
    /// The name as written.
    pub name: String,
    /// The state as written.
    pub state: String,
    /// The years (review file's `years`, or from the matched table), as ranges.
    pub years: String,
    /// The review file's `years` cell, written back into the decisions.
    pub years_cell: String,
    /// What the matcher said (`review`, `unmatched`, ...).
    pub status: String,
    /// Rows covered.
    pub rows: u64,
    /// The reason, in plain words.
    pub reason: String,
    /// What to do, in plain words.
    pub advice: String,
    /// Candidates, ranked.
    pub candidates: Vec<PageCandidate>,
    /// A decision already in the review file.
    pub chosen: String,
    /// Example rows (cells of `example_columns`).
    pub examples: Vec<Vec<String>>,
    /// The map: the base to draw and the candidates' shapes on it.
    pub map: Option<CardMap>,
}

/// The map of one card.
#[derive(Debug, Clone, Serialize)]
pub struct CardMap {
    /// Key of the base drawing in [`Page::bases`].
    pub base: String,
    /// Candidate shapes: (candidate number 1-5, path, label x, label y).
    pub marks: Vec<(usize, String, f64, f64)>,
}

/// A base drawing: a state's counties or the nation's states.
#[derive(Debug, Clone, Serialize)]
pub struct Base {
    /// Caption ("Virginia, 2023 counties").
    pub caption: String,
    /// Width and height of the drawing.
    pub size: (f64, f64),
    /// One path per unit.
    pub paths: Vec<String>,
}

/// Everything the page embeds.
#[derive(Debug, Clone, Serialize)]
pub struct Page {
    /// Title.
    pub title: String,
    /// A key for local storage: the review file's SHA-256.
    pub id: String,
    /// The review file's name.
    pub source: String,
    /// True when the review file has a `state` column.
    pub has_state: bool,
    /// True when the review file has a `years` column.
    pub has_years: bool,
    /// Columns of the example rows.
    pub example_columns: Vec<String>,
    /// Cards, most rows first.
    pub cards: Vec<Card>,
    /// Base drawings by key.
    pub bases: BTreeMap<String, Base>,
    /// Every code of the reference: code -> [full name, state, years].
    pub codes: BTreeMap<String, [String; 3]>,
    /// What the codes are ("US counties of every vintage since 1970").
    pub codes_label: String,
}

/// Writes the page.
pub fn write_review_page(w: &mut dyn Write, page: &Page) -> std::io::Result<()> {
    let title = escape(&page.title);
    write!(
        w,
        r#"<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; img-src data: blob:">
<title>{title}</title>
<style>
{CSS}</style>
</head>
<body>
<header>
<h1>{title}</h1>
<span id="count" aria-live="polite"></span>
<input id="filter" type="search" placeholder="Filter names, states, candidates (/)" aria-label="filter">
<select id="show" aria-label="which names"><option value="all">all names</option><option value="open">undecided</option><option value="done">decided</option></select>
<button id="save" type="button">Save decisions CSV</button>
<span id="saved" aria-live="polite"></span>
<div class="keys">Keys: <kbd>j</kbd>/<kbd>&darr;</kbd> next, <kbd>k</kbd>/<kbd>&uarr;</kbd> previous, <kbd>1</kbd>&ndash;<kbd>5</kbd> pick a candidate, <kbd>n</kbd> none (not a unit), <kbd>c</kbd> type a code, <kbd>u</kbd> undo, <kbd>/</kbd> filter, <kbd>Esc</kbd> leave a field. Decisions are kept in this browser until you save them.</div>
</header>
<main id="cards"><p id="empty" class="empty" hidden>No name matches the filter.</p></main>
<footer>
<p>From {source}. Save the decisions and pass the file to <code>regionkey match --decisions FILE</code>: each decision applies to the name, state and years of its card. Typed codes are checked against {codes_label}.</p>
</footer>
<script type="application/json" id="page-data">{data}</script>
<script>
{JS}</script>
</body>
</html>
"#,
        source = escape(&page.source),
        codes_label = escape(&page.codes_label),
        data = script_json(page)?,
    )
}
