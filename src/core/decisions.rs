//! Decisions a person took on the review list, tied to the years they were
//! taken for.
//!
//! A decision says what a written (name, state) means: one unit, a unit
//! made of several units (codes joined by `+`), or no unit at all
//! ([`NONE`]). It applies to the rows whose year lies in its [`Years`]; an
//! empty `years` means every year. So choosing a 2022 planning region for
//! "Hartford" leaves the rows of 2000-2021 to the matcher, which puts them
//! on Hartford County.

use std::collections::HashMap;
use std::fmt;

use crate::error::{Error, Location, Result};

/// The word in `chosen_code` that means "not a unit; leave unmatched".
pub const NONE: &str = "none";

/// A set of years written as inclusive ranges, sorted and merged
/// ("2000-2021;2023"). Empty means every year.
#[derive(Debug, Clone, Default, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Years(Vec<(u16, u16)>);

impl Years {
    /// Every year (written as an empty field).
    pub fn all() -> Years {
        Years(Vec::new())
    }

    /// The years given, as merged ranges (consecutive years join one range).
    pub fn from_years(years: impl IntoIterator<Item = u16>) -> Years {
        let mut v: Vec<u16> = years.into_iter().collect();
        v.sort_unstable();
        v.dedup();
        let mut ranges: Vec<(u16, u16)> = Vec::new();
        for y in v {
            match ranges.last_mut() {
                Some((_, to)) if to.checked_add(1) == Some(y) => *to = y,
                _ => ranges.push((y, y)),
            }
        }
        Years(ranges)
    }

    /// True for the set meaning every year.
    pub fn is_all(&self) -> bool {
        self.0.is_empty()
    }

    /// True when `year` is in the set (always, for every year).
    pub fn contains(&self, year: u16) -> bool {
        self.is_all() || self.0.iter().any(|&(a, b)| a <= year && year <= b)
    }

    /// True when some year is in both sets.
    pub fn overlaps(&self, other: &Years) -> bool {
        if self.is_all() || other.is_all() {
            return true;
        }
        self.0
            .iter()
            .any(|&(a, b)| other.0.iter().any(|&(c, d)| a <= d && c <= b))
    }

    /// Reads "2000-2021;2023" (ranges or single years, separated by `;` or
    /// `,`; spaces allowed; empty = every year). Says what is wrong
    /// otherwise.
    pub fn parse(text: &str) -> std::result::Result<Years, String> {
        let mut ranges = Vec::new();
        for part in text.split([';', ',']).map(str::trim) {
            if part.is_empty() {
                continue;
            }
            let year = |t: &str| -> std::result::Result<u16, String> {
                let t = t.trim();
                let t = t.strip_suffix(".0").unwrap_or(t);
                match t.parse::<u16>() {
                    Ok(y) if (1000..=9999).contains(&y) => Ok(y),
                    _ => Err(format!(
                        "{text:?} is not a list of years (write e.g. 2000-2021;2023, or leave it empty for every year)"
                    )),
                }
            };
            let (a, b) = match part.split_once('-') {
                Some((a, b)) => (year(a)?, year(b)?),
                None => {
                    let y = year(part)?;
                    (y, y)
                }
            };
            if a > b {
                return Err(format!("{part:?}: the range runs backwards"));
            }
            ranges.push((a, b));
        }
        let years = ranges.iter().flat_map(|&(a, b)| a..=b);
        Ok(Years::from_years(years))
    }
}

impl fmt::Display for Years {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, (a, b)) in self.0.iter().enumerate() {
            if i > 0 {
                f.write_str(";")?;
            }
            if a == b {
                write!(f, "{a}")?;
            } else {
                write!(f, "{a}-{b}")?;
            }
        }
        Ok(())
    }
}

/// What a decision says.
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Choice {
    /// These codes, as written (checked against the reference when used):
    /// one code is one unit; several (written joined by `+`) are a unit
    /// made of several units.
    Codes(Vec<String>),
    /// Not a unit: leave unmatched.
    NotAUnit,
}

impl Choice {
    /// Reads a `chosen_code` field: empty (no decision, `None`), [`NONE`]
    /// (any case), a code, or codes joined by `+`.
    pub fn parse(text: &str) -> std::result::Result<Option<Choice>, String> {
        let t = text.trim();
        if t.is_empty() {
            return Ok(None);
        }
        if t.eq_ignore_ascii_case(NONE) {
            return Ok(Some(Choice::NotAUnit));
        }
        let codes: Vec<String> = t.split('+').map(|c| c.trim().to_string()).collect();
        if codes.iter().any(String::is_empty) {
            return Err(format!(
                "{t:?} has an empty code; write one code, codes joined by +, or {NONE}"
            ));
        }
        Ok(Some(Choice::Codes(codes)))
    }
}

impl fmt::Display for Choice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Choice::NotAUnit => f.write_str(NONE),
            Choice::Codes(c) => f.write_str(&c.join("+")),
        }
    }
}

/// One decision.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Decision {
    /// The name as written in the input (trimmed).
    pub name: String,
    /// The state as written (trimmed; empty when the file has no `state`).
    pub state: String,
    /// The years it applies to (every year when empty).
    pub years: Years,
    /// The decision.
    pub choice: Choice,
    /// Where its `chosen_code` is (for messages).
    pub location: Location,
}

/// The decisions of a run, found by (name, state, year).
#[derive(Debug, Clone, Default)]
pub struct Decisions {
    by_key: HashMap<(String, String), Vec<Decision>>,
    count: usize,
}

impl Decisions {
    /// Indexes `list`. Two decisions for one (name, state) whose years
    /// overlap must agree; otherwise the error names the second.
    /// Repeats of the same decision are kept once.
    pub fn new(list: Vec<Decision>) -> Result<Decisions> {
        let mut by_key: HashMap<(String, String), Vec<Decision>> = HashMap::new();
        let mut count = 0;
        for d in list {
            let slot = by_key.entry((d.name.clone(), d.state.clone())).or_default();
            if let Some(first) = slot.iter().find(|o| o.years.overlaps(&d.years)) {
                if first.choice == d.choice {
                    continue;
                }
                let state = if d.state.is_empty() {
                    String::new()
                } else {
                    format!(" in {:?}", d.state)
                };
                return Err(Error::input(
                    d.location.clone(),
                    format!(
                        "a second, different decision for {:?}{state} in years it shares with the one at {}; keep one, or give each its own years",
                        d.name, first.location
                    ),
                ));
            }
            slot.push(d);
            count += 1;
        }
        Ok(Decisions { by_key, count })
    }

    /// The decision for a (name, state) as written (trimmed) in `year`.
    pub fn find(&self, name: &str, state: &str, year: u16) -> Option<&Decision> {
        self.by_key
            .get(&(name.trim().to_string(), state.trim().to_string()))?
            .iter()
            .find(|d| d.years.contains(year))
    }

    /// How many decisions there are.
    pub fn len(&self) -> usize {
        self.count
    }

    /// True when there are none.
    pub fn is_empty(&self) -> bool {
        self.count == 0
    }

    /// Every decision (in no particular order).
    pub fn iter(&self) -> impl Iterator<Item = &Decision> {
        self.by_key.values().flatten()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn decision(name: &str, years: &str, chosen: &str, line: u64) -> Decision {
        Decision {
            name: name.into(),
            state: "CT".into(),
            years: Years::parse(years).unwrap(),
            choice: Choice::parse(chosen).unwrap().unwrap(),
            location: Location::file("d.csv").at_line(line),
        }
    }

    #[test]
    fn years_are_written_as_merged_ranges_and_read_back() {
        let y = Years::from_years([2023, 2000, 2001, 2002, 2021, 2020]);
        assert_eq!(y.to_string(), "2000-2002;2020-2021;2023");
        assert_eq!(Years::parse(&y.to_string()).unwrap(), y);
        assert_eq!(Years::parse(" 2000-2002 , 2020;2021; 2023 ").unwrap(), y);
        assert_eq!(Years::parse("").unwrap(), Years::all());
        assert!(Years::parse("2021-2000").is_err());
        assert!(Years::parse("last year").is_err());
        assert!(Years::parse("21").is_err());
    }

    #[test]
    fn an_empty_year_set_means_every_year() {
        assert!(Years::all().contains(1970));
        assert!(Years::all().overlaps(&Years::from_years([2023])));
        let y = Years::parse("2000-2021;2023").unwrap();
        assert!(y.contains(2000) && y.contains(2021) && y.contains(2023));
        assert!(!y.contains(2022) && !y.contains(1999));
        assert!(!y.overlaps(&Years::from_years([2022])));
        assert!(y.overlaps(&Years::parse("2021-2022").unwrap()));
    }

    #[test]
    fn chosen_codes_read_one_code_several_codes_or_none() {
        assert_eq!(Choice::parse("  ").unwrap(), None);
        assert_eq!(Choice::parse("NONE").unwrap(), Some(Choice::NotAUnit));
        assert_eq!(
            Choice::parse("2066").unwrap(),
            Some(Choice::Codes(vec!["2066".into()]))
        );
        let c = Choice::parse("36005 + 36047+36061").unwrap().unwrap();
        assert_eq!(
            c,
            Choice::Codes(vec!["36005".into(), "36047".into(), "36061".into()])
        );
        assert_eq!(c.to_string(), "36005+36047+36061");
        assert!(Choice::parse("36005++36047").is_err());
    }

    /// The Hartford case of issue 7: the 2022 planning region chosen for
    /// "Hartford" must not reach the rows of 2000-2021 (Connecticut's
    /// planning regions replaced its counties in 2022: Census Bureau change
    /// list, as carried in crosswalks/us-county-changes.csv).
    #[test]
    fn a_decision_for_2022_does_not_reach_the_rows_of_2000_to_2021() {
        let d = Decisions::new(vec![decision("Hartford", "2022-2023", "09110", 2)]).unwrap();
        assert!(d.find("Hartford", "CT", 2021).is_none());
        assert!(d.find("Hartford", "CT", 2000).is_none());
        assert_eq!(
            d.find(" Hartford ", "CT", 2022).unwrap().choice,
            Choice::Codes(vec!["09110".into()])
        );
        let widened = Decisions::new(vec![decision("Hartford", "", "09110", 2)]).unwrap();
        assert!(widened.find("Hartford", "CT", 2000).is_some());
    }

    #[test]
    fn decisions_for_separate_years_may_differ_but_overlapping_ones_must_agree() {
        let d = Decisions::new(vec![
            decision("Hartford", "2000-2021", "09003", 2),
            decision("Hartford", "2022-2023", "09110", 3),
            decision("Hartford", "2023", "09110", 4),
        ])
        .unwrap();
        assert_eq!(d.len(), 2);
        assert_eq!(
            d.find("Hartford", "CT", 2010).unwrap().choice,
            Choice::Codes(vec!["09003".into()])
        );
        let e = Decisions::new(vec![
            decision("Hartford", "2000-2022", "09003", 2),
            decision("Hartford", "2022-2023", "09110", 3),
        ])
        .unwrap_err()
        .to_string();
        assert!(e.contains("line 3") && e.contains("line 2"), "{e}");
    }
}
