//! The join audit: the checks a map maker runs before drawing a table on a
//! boundary layer. Which codes of the table are not on the layer (and what
//! the change history says of them), which units of the layer have no row
//! in each period, which (code, period) pairs have several rows, and which
//! codes were written in a damaged form (a lost leading zero, a spreadsheet
//! float).
//!
//! Pure: the rows and the layer's codes come in as plain values.

use std::collections::{BTreeMap, BTreeSet};

use crate::core::fips::CountyFips;
use crate::core::history::{carry, Carried};
use crate::core::reference::{ChangeKind, Reference};

/// How the table's code texts are read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CodeKind {
    /// Five-digit county FIPS codes, read with the one code parser
    /// (lost leading zeros and spreadsheet floats are recovered and reported).
    County,
    /// A layer's own keys, compared as written (trimmed).
    Plain,
}

/// One row of the table as the audit sees it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct AuditRow {
    /// 1-based line of the row in its file.
    pub line: u64,
    /// The code as written.
    pub code: String,
    /// The period as written (empty without a period column).
    pub period: String,
}

/// What kind of problem a finding is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Check {
    /// A row with an empty code.
    EmptyCode,
    /// A code text that is not a code of the layer's kind ("ABCDE", "06000").
    NotACode,
    /// A county code written with four digits: its leading zero was lost.
    LostLeadingZero,
    /// A county code written in another form ("6037.0", "06 037").
    Reformatted,
    /// A code that is not on the layer.
    NotOnLayer,
    /// Several rows for one (code, period).
    Duplicate,
    /// A unit of the layer with no row in a period.
    NoRow,
}

impl Check {
    /// The word written in the audit file.
    pub fn as_str(self) -> &'static str {
        match self {
            Check::EmptyCode => "empty_code",
            Check::NotACode => "not_a_code",
            Check::LostLeadingZero => "lost_leading_zero",
            Check::Reformatted => "reformatted_code",
            Check::NotOnLayer => "not_on_layer",
            Check::Duplicate => "duplicate",
            Check::NoRow => "no_row",
        }
    }
}

/// One finding: a code (or a written form of one) with the rows concerned.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Finding {
    /// What is off.
    pub check: Check,
    /// The code (normalized where it could be read; as written otherwise).
    pub code: String,
    /// The period (empty when the check is not per period).
    pub period: String,
    /// Lines of the rows concerned (empty for units with no row).
    pub lines: Vec<u64>,
    /// Plain words: what the change history says, the form it was written in.
    pub detail: String,
}

/// Counts per state (first two digits of county codes).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct StateCounts {
    /// Units of the layer in the state.
    pub layer_units: usize,
    /// Units of the layer with a row in at least one period.
    pub units_with_rows: usize,
    /// (unit, period) pairs of the layer with no row.
    pub missing_unit_periods: usize,
    /// Rows whose code is in the state.
    pub rows: usize,
    /// Distinct codes of the table in the state that are not on the layer.
    pub codes_not_on_layer: usize,
    /// Distinct (code, period) pairs with several rows.
    pub duplicates: usize,
}

/// The audit's result.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Audit {
    /// Rows read.
    pub rows: usize,
    /// Periods of the table, in order (one empty period without a period column).
    pub periods: Vec<String>,
    /// Units of the layer considered.
    pub layer_units: usize,
    /// Every finding, ordered by check, code and period.
    pub findings: Vec<Finding>,
    /// Counts per state (county codes only), by state code.
    pub states: BTreeMap<String, StateCounts>,
}

impl Audit {
    /// Findings of one kind.
    pub fn of(&self, check: Check) -> impl Iterator<Item = &Finding> {
        self.findings.iter().filter(move |f| f.check == check)
    }

    /// Rows concerned by findings of one kind.
    pub fn rows_of(&self, check: Check) -> usize {
        self.of(check).map(|f| f.lines.len()).sum()
    }

    /// True when nothing is off.
    pub fn is_clean(&self) -> bool {
        self.findings.is_empty()
    }
}

/// What to compare against.
#[derive(Debug, Clone, Copy)]
pub struct AuditLayer<'a> {
    /// The layer's unit codes.
    pub codes: &'a BTreeSet<String>,
    /// How codes are read.
    pub kind: CodeKind,
    /// Change history to explain codes not on the layer, with the layer's vintage year.
    pub history: Option<(&'a Reference, u16)>,
    /// Only count units with no row in states that have at least one row.
    pub states_in_data: bool,
}

/// Sorts periods numerically when they all are integers, as text otherwise.
pub fn sort_periods(periods: &mut [String]) {
    if periods.iter().all(|p| p.trim().parse::<i64>().is_ok()) {
        periods.sort_by_key(|p| p.trim().parse::<i64>().unwrap_or(0));
    } else {
        periods.sort();
    }
}

/// Runs every check.
pub fn audit(rows: &[AuditRow], layer: AuditLayer<'_>) -> Audit {
    let mut out = Audit {
        rows: rows.len(),
        layer_units: layer.codes.len(),
        ..Audit::default()
    };
    let mut periods: Vec<String> = rows
        .iter()
        .map(|r| r.period.trim().to_string())
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect();
    if periods.is_empty() {
        periods.push(String::new());
    }
    sort_periods(&mut periods);
    out.periods = periods;

    // Written forms, keyed by (check, normalized code, written text).
    let mut forms: BTreeMap<(Check, String, String), Vec<u64>> = BTreeMap::new();
    let mut empty: Vec<u64> = Vec::new();
    // (code, period) -> lines, for readable codes.
    let mut seen: BTreeMap<(String, String), Vec<u64>> = BTreeMap::new();
    for r in rows {
        let raw = r.code.trim();
        if raw.is_empty() {
            empty.push(r.line);
            continue;
        }
        let code = match layer.kind {
            CodeKind::Plain => raw.to_string(),
            CodeKind::County => match raw.parse::<CountyFips>() {
                Ok(c) => {
                    let code = c.to_string();
                    if code != raw {
                        let check = if raw.len() == 4 && raw.bytes().all(|b| b.is_ascii_digit()) {
                            Check::LostLeadingZero
                        } else {
                            Check::Reformatted
                        };
                        forms
                            .entry((check, code.clone(), raw.to_string()))
                            .or_default()
                            .push(r.line);
                    }
                    code
                }
                Err(e) => {
                    forms
                        .entry((Check::NotACode, raw.to_string(), e.to_string()))
                        .or_default()
                        .push(r.line);
                    continue;
                }
            },
        };
        seen.entry((code, r.period.trim().to_string()))
            .or_default()
            .push(r.line);
    }
    if !empty.is_empty() {
        out.findings.push(Finding {
            check: Check::EmptyCode,
            code: String::new(),
            period: String::new(),
            lines: empty,
            detail: "no code in this row".into(),
        });
    }
    for ((check, code, written), lines) in forms {
        let detail = match check {
            Check::NotACode => written,
            Check::LostLeadingZero => format!("written {written:?}; read as {code}"),
            _ => format!("written {written:?}; read as {code}"),
        };
        out.findings.push(Finding {
            check,
            code,
            period: String::new(),
            lines,
            detail,
        });
    }

    // Codes not on the layer, with every row that carries them.
    let mut by_code: BTreeMap<&str, Vec<u64>> = BTreeMap::new();
    for ((code, _), lines) in &seen {
        by_code.entry(code).or_default().extend(lines);
    }
    for (code, lines) in &by_code {
        if layer.codes.contains(*code) {
            continue;
        }
        let mut lines = lines.clone();
        lines.sort_unstable();
        out.findings.push(Finding {
            check: Check::NotOnLayer,
            code: code.to_string(),
            period: String::new(),
            lines,
            detail: match layer.history {
                Some((reference, year)) => explain(reference, code, year),
                None => "not a key of the layer".into(),
            },
        });
    }
    for ((code, period), lines) in &seen {
        if lines.len() > 1 {
            out.findings.push(Finding {
                check: Check::Duplicate,
                code: code.clone(),
                period: period.clone(),
                lines: lines.clone(),
                detail: format!("{} rows for one code and period", lines.len()),
            });
        }
    }

    // Units of the layer with no row, per period.
    let state_of = |code: &str| -> Option<String> {
        (layer.kind == CodeKind::County)
            .then(|| code.get(..2).map(str::to_string))
            .flatten()
    };
    let states_with_rows: BTreeSet<String> = seen.keys().filter_map(|(c, _)| state_of(c)).collect();
    let considered: Vec<&String> = layer
        .codes
        .iter()
        .filter(|c| {
            !layer.states_in_data || state_of(c).is_none_or(|s| states_with_rows.contains(&s))
        })
        .collect();
    out.layer_units = considered.len();
    for period in &out.periods {
        for code in &considered {
            if !seen.contains_key(&((*code).clone(), period.clone())) {
                out.findings.push(Finding {
                    check: Check::NoRow,
                    code: (*code).clone(),
                    period: period.clone(),
                    lines: Vec::new(),
                    detail: "a unit of the layer with no row".into(),
                });
            }
        }
    }
    out.findings.sort_by(|a, b| {
        (a.check, &a.code, period_key(&a.period), &a.period).cmp(&(
            b.check,
            &b.code,
            period_key(&b.period),
            &b.period,
        ))
    });

    if layer.kind == CodeKind::County {
        for code in &considered {
            if let Some(s) = state_of(code) {
                let e = out.states.entry(s).or_default();
                e.layer_units += 1;
                if by_code.contains_key(code.as_str()) {
                    e.units_with_rows += 1;
                }
            }
        }
        for ((code, _), lines) in &seen {
            if let Some(s) = state_of(code) {
                let e = out.states.entry(s).or_default();
                e.rows += lines.len();
                if lines.len() > 1 {
                    e.duplicates += 1;
                }
            }
        }
        for f in &out.findings {
            let Some(s) = state_of(&f.code) else { continue };
            match f.check {
                Check::NotOnLayer => out.states.entry(s).or_default().codes_not_on_layer += 1,
                Check::NoRow => out.states.entry(s).or_default().missing_unit_periods += 1,
                _ => {}
            }
        }
    }
    out
}

fn period_key(p: &str) -> i64 {
    p.trim().parse::<i64>().unwrap_or(i64::MIN)
}

/// What the change history says of a code that is not a unit of `year`:
/// "absorbed 2013 into 51019 Bedford County", "renamed 2015, now 02158
/// Kusilvak Census Area", "split 2019 among 02063, 02066".
pub fn explain(reference: &Reference, code: &str, year: u16) -> String {
    let eras = reference.eras(code);
    let Some(first) = eras.first() else {
        return format!("not a code of any vintage in {} (1970 on)", reference.label);
    };
    let name_in = |c: &str| {
        reference
            .unit(c, year)
            .map(|u| format!("{c} {}", u.full_name()))
            .unwrap_or_else(|| c.to_string())
    };
    let last = eras.last().copied().unwrap_or(first);
    let was = last.full_name();
    match carry(reference, code, year) {
        Carried::Same => {
            format!("{was}: a unit of {year} in the reference, but not on this layer")
        }
        Carried::Unknown => match last.valid.to {
            Some(to) if to < year => format!("{was}: last valid {to}; no successor recorded"),
            _ => format!("{was}: not valid in {year}; no path through the change history"),
        },
        Carried::To { code: now, .. } if first.valid.from > year => format!(
            "{was}: a code from {} on; in {year} its area was in {}",
            first.valid.from,
            name_in(&now)
        ),
        Carried::Divided { successors, .. } if first.valid.from > year => format!(
            "{was}: a code from {} on; in {year} its area was in {}",
            first.valid.from,
            successors.join(", ")
        ),
        Carried::To { code: now, .. } => {
            let (kind, when) = first_ceasing(reference, code, year);
            match kind {
                Some(ChangeKind::Absorbed) => {
                    format!("{was}: absorbed {when}, now part of {}", name_in(&now))
                }
                Some(ChangeKind::Renamed) => {
                    format!("{was}: renamed {when}, now {}", name_in(&now))
                }
                _ => format!("{was}: retired {when}, now {}", name_in(&now)),
            }
        }
        Carried::Divided { successors, .. } => {
            let (kind, when) = first_ceasing(reference, code, year);
            let verb = match kind {
                Some(ChangeKind::Split) => "split",
                Some(ChangeKind::Reorganized) => "replaced",
                _ => "retired",
            };
            format!(
                "{was}: {verb} {when}, now divided among {}",
                successors.join(", ")
            )
        }
    }
}

/// The first change that ended `code` by `year`: its kind and year.
fn first_ceasing(reference: &Reference, code: &str, year: u16) -> (Option<ChangeKind>, String) {
    reference
        .changes_of(code)
        .into_iter()
        .find(|c| {
            c.from_code == code
                && c.year <= year
                && matches!(
                    c.kind,
                    ChangeKind::Renamed
                        | ChangeKind::Absorbed
                        | ChangeKind::Split
                        | ChangeKind::Reorganized
                )
                && !(c.kind == ChangeKind::Renamed && c.to_code == code)
        })
        .map_or((None, "?".into()), |c| (Some(c.kind), c.year.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::reference::{Change, Unit, YearSpan};

    fn unit(code: &str, name: &str, from: u16, to: Option<u16>) -> Unit {
        Unit {
            code: code.into(),
            name: name.into(),
            description: "County".into(),
            parent: Some(code[..2].into()),
            valid: YearSpan { from, to },
        }
    }

    fn row(line: u64, code: &str, period: &str) -> AuditRow {
        AuditRow {
            line,
            code: code.into(),
            period: period.into(),
        }
    }

    #[test]
    fn each_check_finds_the_rows_it_names() {
        let codes: BTreeSet<String> = ["01001", "01003", "01005"]
            .iter()
            .map(|s| s.to_string())
            .collect();
        let rows = [
            row(2, "1001", "2020"),  // lost zero
            row(3, "01003", "2020"), // fine
            row(4, "01003", "2020"), // duplicate
            row(5, "01007", "2021"), // not on the layer
            row(6, "", "2021"),      // empty
            row(7, "ABCDE", "2021"), // not a code
            row(8, "01001.0", "2021"),
        ];
        let a = audit(
            &rows,
            AuditLayer {
                codes: &codes,
                kind: CodeKind::County,
                history: None,
                states_in_data: false,
            },
        );
        assert_eq!(a.periods, ["2020", "2021"]);
        let lines = |c: Check| -> Vec<u64> { a.of(c).flat_map(|f| f.lines.clone()).collect() };
        assert_eq!(lines(Check::LostLeadingZero), [2]);
        assert_eq!(lines(Check::Reformatted), [8]);
        assert_eq!(lines(Check::Duplicate), [3, 4]);
        assert_eq!(lines(Check::NotOnLayer), [5]);
        assert_eq!(lines(Check::EmptyCode), [6]);
        assert_eq!(lines(Check::NotACode), [7]);
        // 2020: 01005 has no row; 2021: 01003 and 01005.
        let no_row: Vec<(String, String)> = a
            .of(Check::NoRow)
            .map(|f| (f.code.clone(), f.period.clone()))
            .collect();
        assert_eq!(
            no_row,
            [
                ("01003".to_string(), "2021".to_string()),
                ("01005".into(), "2020".into()),
                ("01005".into(), "2021".into())
            ]
        );
        let al = &a.states["01"];
        assert_eq!(al.layer_units, 3);
        assert_eq!(al.units_with_rows, 2);
        assert_eq!(al.missing_unit_periods, 3);
        assert_eq!(al.codes_not_on_layer, 1);
        assert_eq!(al.rows, 5);
        assert!(!a.is_clean());
    }

    #[test]
    fn history_explains_absorbed_renamed_and_split_codes() {
        // A small history in the shape of the Census Bureau's list of
        // changes (Bedford city 2013, Wade Hampton 2015, Valdez-Cordova 2019).
        let reference = Reference {
            label: "test".into(),
            units: vec![
                unit("51515", "Bedford", 1970, Some(2012)),
                unit("51019", "Bedford", 1970, None),
                unit("02270", "Wade Hampton", 1970, Some(2014)),
                unit("02158", "Kusilvak", 2015, None),
                unit("02261", "Valdez-Cordova", 1980, Some(2018)),
                unit("02063", "Chugach", 2019, None),
                unit("02066", "Copper River", 2019, None),
            ],
            changes: [
                ("51515", "51019", ChangeKind::Absorbed, 2013),
                ("02270", "02158", ChangeKind::Renamed, 2015),
                ("02261", "02063", ChangeKind::Split, 2019),
                ("02261", "02066", ChangeKind::Split, 2019),
            ]
            .iter()
            .map(|&(f, t, kind, year)| Change {
                year,
                kind,
                from_code: f.into(),
                from_name: String::new(),
                to_code: t.into(),
                to_name: String::new(),
                note: String::new(),
                source: String::new(),
            })
            .collect(),
            ..Reference::default()
        };
        assert_eq!(
            explain(&reference, "51515", 2023),
            "Bedford County: absorbed 2013, now part of 51019 Bedford County"
        );
        assert_eq!(
            explain(&reference, "02270", 2023),
            "Wade Hampton County: renamed 2015, now 02158 Kusilvak County"
        );
        assert_eq!(
            explain(&reference, "02261", 2023),
            "Valdez-Cordova County: split 2019, now divided among 02063, 02066"
        );
        assert!(explain(&reference, "02063", 2017).contains("a code from 2019 on"));
        assert!(explain(&reference, "99999", 2023).starts_with("not a code of any vintage"));
    }
}
