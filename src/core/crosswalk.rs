//! Crosswalk tables: how much of each source unit lies in each target unit.
//!
//! A row says that `weight` of source `from_code` (by area or population)
//! lies in target `to_code`, and that this piece is `target_share` of the
//! target. A row with no `to_code` holds the share of the source that lies
//! outside every target, so nothing is lost.
//!
//! Allocating with a crosswalk gives estimates: it assumes a value is spread
//! evenly (by area or by population) within each source unit.

/// What a weight measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Basis {
    /// Share of the source's area.
    Area,
    /// Share of the source's population.
    Population,
    /// Population weighting was asked but the source has no population;
    /// the weight is its area share.
    AreaFallback,
    /// One-to-one from the change history (renames, absorptions).
    History,
}

impl Basis {
    /// The word used in crosswalk files.
    pub fn as_str(self) -> &'static str {
        match self {
            Basis::Area => "area",
            Basis::Population => "population",
            Basis::AreaFallback => "area-fallback",
            Basis::History => "history",
        }
    }
}

impl std::str::FromStr for Basis {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Ok(match s {
            "area" => Basis::Area,
            "population" => Basis::Population,
            "area-fallback" => Basis::AreaFallback,
            "history" => Basis::History,
            other => {
                return Err(format!(
                    "unknown basis {other:?}; expected area, population, area-fallback or history"
                ))
            }
        })
    }
}

/// One (source, target) pair.
#[derive(Debug, Clone, PartialEq)]
pub struct CrosswalkRow {
    /// Source unit code.
    pub from_code: String,
    /// Target unit code; `None` for the part of the source outside every target.
    pub to_code: Option<String>,
    /// Share of the source in this target (0..=1).
    pub weight: f64,
    /// Share of the target made of this piece of the source (0..=1), if known.
    pub target_share: Option<f64>,
    /// What the weight measures.
    pub basis: Basis,
}

/// A crosswalk: rows sorted by (`from_code`, `to_code`), the uncovered row
/// (no `to_code`) of a source last.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Crosswalk {
    /// The rows.
    pub rows: Vec<CrosswalkRow>,
}

impl Crosswalk {
    /// Sorts rows into the canonical order (by source, then target, the
    /// uncovered row last), so output bytes are stable.
    pub fn sort(&mut self) {
        self.rows.sort_by(|a, b| {
            a.from_code
                .cmp(&b.from_code)
                .then_with(|| match (&a.to_code, &b.to_code) {
                    (Some(x), Some(y)) => x.cmp(y),
                    (Some(_), None) => std::cmp::Ordering::Less,
                    (None, Some(_)) => std::cmp::Ordering::Greater,
                    (None, None) => std::cmp::Ordering::Equal,
                })
        });
    }
}

/// A problem found by [`Crosswalk::validate`].
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// 0-based row index, when one row is at fault.
    pub row: Option<usize>,
    /// The source code concerned.
    pub from_code: String,
    /// What is wrong.
    pub message: String,
}

/// Default tolerance for weights per source summing to one.
pub const SUM_TOLERANCE: f64 = 1e-6;

fn code_problem(code: &str) -> Option<&'static str> {
    if code.is_empty() {
        Some("is empty")
    } else if code.trim() != code || code.chars().any(|c| c.is_whitespace() || c.is_control()) {
        Some("holds white space or control characters")
    } else if code.contains([',', '"']) {
        Some("holds a comma or a quote")
    } else {
        None
    }
}

/// The usual length of all-digit codes in a column, if most codes are
/// all digits of one length (FIPS-like).
fn digit_length<'a>(codes: impl Iterator<Item = &'a str>) -> Option<usize> {
    let mut counts: BTreeMap<usize, usize> = BTreeMap::new();
    let mut total = 0usize;
    for c in codes {
        total += 1;
        if !c.is_empty() && c.bytes().all(|b| b.is_ascii_digit()) {
            *counts.entry(c.len()).or_default() += 1;
        }
    }
    let (&len, &n) = counts.iter().max_by_key(|(_, &n)| n)?;
    (n * 10 >= total * 9).then_some(len)
}

use std::collections::{BTreeMap, BTreeSet};

use crate::core::fips::{CodeForm, Repairs};

impl Crosswalk {
    /// Checks the crosswalk: weights and target shares within 0..=1; no
    /// (source, target) pair twice; codes well-formed (not empty, no white
    /// space, and all-digit codes of the column's usual length, so "1001"
    /// among 5-digit codes is caught as a lost leading zero); one basis per
    /// source, except that area and area-fallback never mix with
    /// population; and each source's weights, the row with no target
    /// included, summing to 1 within `tolerance`.
    pub fn validate(&self, tolerance: f64) -> Vec<Problem> {
        let mut out = Vec::new();
        let from_len = digit_length(self.rows.iter().map(|r| r.from_code.as_str()));
        let to_len = digit_length(self.rows.iter().filter_map(|r| r.to_code.as_deref()));
        let mut seen: BTreeSet<(&str, Option<&str>)> = BTreeSet::new();
        let mut sums: BTreeMap<&str, (f64, BTreeSet<Basis>)> = BTreeMap::new();
        for (i, r) in self.rows.iter().enumerate() {
            let mut bad = |message: String| {
                out.push(Problem {
                    row: Some(i),
                    from_code: r.from_code.clone(),
                    message,
                })
            };
            for (side, code, len) in [
                ("from_code", Some(r.from_code.as_str()), from_len),
                ("to_code", r.to_code.as_deref(), to_len),
            ] {
                let Some(code) = code else { continue };
                if let Some(p) = code_problem(code) {
                    bad(format!("{side} {code:?} {p}"));
                } else if let Some(len) = len {
                    if code.bytes().all(|b| b.is_ascii_digit()) && code.len() != len {
                        bad(format!(
                            "{side} {code:?} has {} digits where the others have {len}; a lost leading zero?",
                            code.len()
                        ));
                    }
                }
            }
            if !(r.weight.is_finite() && (0.0..=1.0 + tolerance).contains(&r.weight)) {
                bad(format!("weight {} is outside 0..1", r.weight));
            }
            if let Some(s) = r.target_share {
                if !(s.is_finite() && (0.0..=1.0 + tolerance).contains(&s)) {
                    bad(format!("target_share {s} is outside 0..1"));
                }
            }
            if !seen.insert((r.from_code.as_str(), r.to_code.as_deref())) {
                bad(format!(
                    "the pair {} -> {} appears more than once",
                    r.from_code,
                    r.to_code.as_deref().unwrap_or("(outside every target)")
                ));
            }
            let e = sums.entry(r.from_code.as_str()).or_default();
            e.0 += r.weight;
            e.1.insert(r.basis);
        }
        for (code, (sum, bases)) in sums {
            if (sum - 1.0).abs() > tolerance {
                out.push(Problem {
                    row: None,
                    from_code: code.to_string(),
                    message: format!(
                        "the weights of source {code} sum to {sum:.9}, not 1 (tolerance {tolerance:e}); \
                         a source's rows, with its row for the part outside every target, must add up to 1"
                    ),
                });
            }
            let pop = bases.contains(&Basis::Population);
            let area = bases.contains(&Basis::Area) || bases.contains(&Basis::AreaFallback);
            if pop && area {
                out.push(Problem {
                    row: None,
                    from_code: code.to_string(),
                    message: format!("source {code} mixes population and area weights"),
                });
            }
        }
        out
    }

    /// Summarizes the crosswalk's structure (see [`Summary`]). `top` bounds
    /// the list of largest changes.
    pub fn summary(&self, top: usize) -> Summary {
        let mut targets_of: BTreeMap<&str, Vec<&CrosswalkRow>> = BTreeMap::new();
        let mut sources_of: BTreeMap<&str, BTreeSet<&str>> = BTreeMap::new();
        for r in &self.rows {
            targets_of.entry(&r.from_code).or_default().push(r);
            if let Some(t) = &r.to_code {
                sources_of.entry(t).or_default().insert(&r.from_code);
            }
        }
        let mut s = Summary {
            rows: self.rows.len(),
            sources: targets_of.len(),
            targets: sources_of.len(),
            ..Summary::default()
        };
        let mut changes: Vec<(f64, String)> = Vec::new();
        for (code, rows) in &targets_of {
            let to: Vec<&&CrosswalkRow> = rows.iter().filter(|r| r.to_code.is_some()).collect();
            let uncovered: f64 = rows
                .iter()
                .filter(|r| r.to_code.is_none())
                .map(|r| r.weight)
                .sum();
            if uncovered > 0.0 {
                s.partly_uncovered += 1;
            }
            if to.is_empty() {
                s.entirely_uncovered += 1;
                continue;
            }
            if to.len() > 1 {
                s.splits += 1;
            }
            let largest = to.iter().map(|r| r.weight).fold(0.0, f64::max);
            let single_target_sources = to.len() == 1
                && to[0]
                    .to_code
                    .as_deref()
                    .is_some_and(|t| sources_of.get(t).is_some_and(|v| v.len() == 1));
            if single_target_sources && uncovered == 0.0 {
                s.one_to_one += 1;
            }
            let moved = 1.0 - largest;
            if moved > 0.0 {
                let parts: Vec<String> = to
                    .iter()
                    .map(|r| format!("{} {:.4}", r.to_code.as_deref().unwrap_or(""), r.weight))
                    .collect();
                changes.push((moved, format!("{code} -> {}", parts.join(", "))));
            }
        }
        s.merges = sources_of.values().filter(|v| v.len() > 1).count();
        changes.sort_by(|a, b| b.0.total_cmp(&a.0).then_with(|| a.1.cmp(&b.1)));
        s.largest_changes = changes.into_iter().take(top).collect();
        s
    }
}

/// A code of a crosswalk that reading normalized ("2201" -> "02201").
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CodeRepair {
    /// 0-based row index.
    pub row: usize,
    /// `from_code` or `to_code`.
    pub side: &'static str,
    /// The code as written.
    pub written: String,
    /// The code as read.
    pub code: String,
    /// What was repaired.
    pub repairs: Repairs,
}

impl Crosswalk {
    /// Normalizes the codes of each side through the one code parser: the
    /// form of each column is detected from its codes ([`CodeForm::detect`]),
    /// then every code is read in that form, so a code that lost its
    /// leading zero ("2201" among five-digit codes) or came from a
    /// spreadsheet ("6037.0") gets the form of its column. Returns the
    /// forms of the two sides and each code that changed, so a command can
    /// report them. Detection guarantees every code of the side reads; a
    /// code that did not would be kept as written.
    pub fn normalize_codes(&mut self) -> (CodeForm, CodeForm, Vec<CodeRepair>) {
        let from_form = CodeForm::detect(self.rows.iter().map(|r| r.from_code.as_str()));
        let to_form = CodeForm::detect(self.rows.iter().filter_map(|r| r.to_code.as_deref()));
        let repaired = self.normalize_codes_as(from_form, to_form);
        (from_form, to_form, repaired)
    }

    /// Reads the codes of each side in a form known beforehand (county
    /// codes, when carrying to a county vintage); a code that does not read
    /// in that form is kept as written. Returns each code that changed.
    pub fn normalize_codes_as(
        &mut self,
        from_form: CodeForm,
        to_form: CodeForm,
    ) -> Vec<CodeRepair> {
        let mut repaired = Vec::new();
        for (i, r) in self.rows.iter_mut().enumerate() {
            for (side, form, code) in [
                ("from_code", from_form, Some(&mut r.from_code)),
                ("to_code", to_form, r.to_code.as_mut()),
            ] {
                let Some(code) = code else { continue };
                if let Ok((c, repairs)) = form.read(code) {
                    if c.as_str() != code.as_str() {
                        repaired.push(CodeRepair {
                            row: i,
                            side,
                            written: std::mem::replace(code, c.into_string()),
                            code: code.clone(),
                            repairs,
                        });
                    }
                }
            }
        }
        repaired
    }
}

/// The shape of a crosswalk.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Summary {
    /// Rows.
    pub rows: usize,
    /// Distinct sources.
    pub sources: usize,
    /// Distinct targets.
    pub targets: usize,
    /// Sources wholly in one target that takes nothing from any other source.
    pub one_to_one: usize,
    /// Sources spread over more than one target.
    pub splits: usize,
    /// Targets made of more than one source.
    pub merges: usize,
    /// Sources with a share outside every target.
    pub partly_uncovered: usize,
    /// Sources wholly outside every target.
    pub entirely_uncovered: usize,
    /// Sources whose largest piece is smallest: (share not in the largest
    /// target, description), largest change first.
    pub largest_changes: Vec<(f64, String)>,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(f: &str, t: Option<&str>, w: f64) -> CrosswalkRow {
        CrosswalkRow {
            from_code: f.into(),
            to_code: t.map(Into::into),
            weight: w,
            target_share: None,
            basis: Basis::Area,
        }
    }

    #[test]
    fn a_source_whose_weights_do_not_sum_to_one_is_reported() {
        let cw = Crosswalk {
            rows: vec![
                row("01001", Some("01001"), 0.6),
                row("01003", Some("01003"), 1.0),
            ],
        };
        let p = cw.validate(SUM_TOLERANCE);
        assert_eq!(p.len(), 1);
        assert_eq!(p[0].from_code, "01001");
        assert!(p[0].message.contains("sum to 0.6"));
    }

    #[test]
    fn the_uncovered_row_counts_towards_the_sum() {
        let cw = Crosswalk {
            rows: vec![row("01001", Some("01001"), 0.6), row("01001", None, 0.4)],
        };
        assert!(cw.validate(SUM_TOLERANCE).is_empty());
    }

    #[test]
    fn duplicate_pairs_and_lost_leading_zeros_are_reported() {
        let cw = Crosswalk {
            rows: vec![
                row("01001", Some("01001"), 0.5),
                row("01001", Some("01001"), 0.5),
                row("1003", Some("01003"), 1.0),
                row("01005", Some("01005"), 1.0),
                row("01007", Some("01007"), 1.0),
                row("01009", Some("01009"), 1.0),
                row("01011", Some("01011"), 1.0),
                row("01013", Some("01013"), 1.0),
                row("01015", Some("01015"), 1.0),
                row("01017", Some("01017"), 1.0),
                row("01019", Some("01019"), 1.0),
            ],
        };
        let p = cw.validate(SUM_TOLERANCE);
        assert!(p
            .iter()
            .any(|p| p.row == Some(1) && p.message.contains("more than once")));
        assert!(p
            .iter()
            .any(|p| p.row == Some(2) && p.message.contains("lost leading zero")));
        assert_eq!(p.len(), 2);
    }

    #[test]
    fn summary_counts_splits_merges_and_one_to_one() {
        let cw = Crosswalk {
            rows: vec![
                row("A", Some("X"), 0.25),
                row("A", Some("Y"), 0.75),
                row("B", Some("Y"), 1.0),
                row("C", Some("Z"), 1.0),
                row("D", None, 1.0),
            ],
        };
        let s = cw.summary(5);
        assert_eq!(
            (s.sources, s.targets, s.splits, s.merges, s.one_to_one),
            (4, 3, 1, 1, 1)
        );
        assert_eq!(s.entirely_uncovered, 1);
        assert_eq!(s.largest_changes.len(), 1);
        assert!((s.largest_changes[0].0 - 0.25).abs() < 1e-12);
    }

    #[test]
    fn codes_that_lost_their_leading_zero_are_normalized_and_listed() {
        // Integer keys: 2201 is Alaska's Prince of Wales-Outer Ketchikan
        // (02201) as an integer column writes it.
        let mut cw = Crosswalk {
            rows: vec![
                row("2201", Some("2198"), 1.0),
                row("06037", Some("6037.0"), 1.0),
                row("36061", Some("36061"), 1.0),
                row("48201", Some("48201"), 1.0),
                row("51600", Some("51600"), 1.0),
            ],
        };
        let (from, to, repaired) = cw.normalize_codes();
        assert_eq!((from, to), (CodeForm::County, CodeForm::County));
        assert_eq!(cw.rows[0].from_code, "02201");
        assert_eq!(cw.rows[0].to_code.as_deref(), Some("02198"));
        assert_eq!(cw.rows[1].to_code.as_deref(), Some("06037"));
        assert_eq!(repaired.len(), 3);
        assert_eq!(repaired[0].written, "2201");
        assert!(repaired[0].repairs.leading_zeros);
        assert!(repaired[2].repairs.float_tail);
    }
}
