//! Unit codes: one code type ([`Code`]) and one parser ([`CodeForm::read`])
//! used by every command, plus the FIPS newtypes behind it.
//!
//! A [`StateFips`] holds 1..=99; a [`CountyFips`] holds a state part 1..=99
//! and a county part 1..=999, so "1001" or "06000" cannot be represented.
//! Reading normalizes once, at the edge, and says what it repaired:
//!
//! - lost leading zeros ("1001" -> 01001, the work of spreadsheets and of
//!   integer columns);
//! - spreadsheet floats ("6037.0", "6037.00");
//! - inner spaces, dashes or underscores ("06 037", "06-037");
//! - a separate state part (state "6", county "37" -> 06037).
//!
//! A text that cannot be a code of the form is refused with the reason
//! ([`FipsError`]). The form of a column (county, state, fixed-width digits
//! such as 11-digit tract GEOIDs, or a user's own keys kept as written) is
//! given by the caller or detected from the column ([`CodeForm::detect`]).

use std::fmt;
use std::str::FromStr;

/// Why a text is not a code of the form asked for.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum FipsError {
    /// Nothing but white space.
    #[error("the code is empty")]
    Empty,
    /// Not made of digits (after removing spaces, dashes and a `.0` tail).
    #[error("{0:?} is not a number")]
    NotNumeric(String),
    /// Too many or too few digits for the level.
    #[error("{0:?} has the wrong number of digits")]
    WrongLength(String),
    /// More digits than the column's codes have.
    #[error("{text:?} has more than {width} digits")]
    TooLong {
        /// The text read.
        text: String,
        /// The column's width.
        width: usize,
    },
    /// State part 00.
    #[error("{0:?} has state part 00")]
    ZeroState(String),
    /// County part 000: a state-level code, not a county.
    #[error("{0:?} is a state-level code (county part 000), not a county")]
    StateLevel(String),
    /// One to three digits where a five-digit county code is needed and no
    /// state part is given.
    #[error("{0:?} is a county number without its state; name the state column to read it")]
    CountyWithoutState(String),
    /// A county part that is not a number 1..=999.
    #[error("county part {0:?} is not a number 1..999")]
    CountyPart(String),
    /// The separate state part cannot be read.
    #[error("state part: {0}")]
    StatePart(Box<FipsError>),
    /// A full county code whose state disagrees with the separate state part.
    #[error("{code:?} lies in state {in_code}, but the state part says {state}")]
    StateDisagrees {
        /// The code text.
        code: String,
        /// The state part of the code.
        in_code: String,
        /// The separate state part.
        state: String,
    },
    /// A separate state part given for codes that are not county codes.
    #[error("a separate state part applies only to county codes")]
    StatePartNotCounty,
}

/// What reading a code repaired, so a command can report it.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Repairs {
    /// Leading zeros were restored ("1001" -> "01001").
    pub leading_zeros: bool,
    /// A spreadsheet float tail was dropped ("6037.0").
    pub float_tail: bool,
    /// Inner spaces, dashes or underscores were removed ("06 037").
    pub separators: bool,
}

impl Repairs {
    /// True when nothing was repaired.
    pub fn is_empty(self) -> bool {
        self == Repairs::default()
    }
}

impl fmt::Display for Repairs {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts = Vec::new();
        if self.leading_zeros {
            parts.push("lost leading zero restored");
        }
        if self.float_tail {
            parts.push("spreadsheet decimal tail dropped");
        }
        if self.separators {
            parts.push("inner spaces or dashes removed");
        }
        if parts.is_empty() {
            parts.push("as written");
        }
        write!(f, "{}", parts.join(", "))
    }
}

/// The digits of a code and what had to go to find them.
struct Digits {
    digits: String,
    repairs: Repairs,
}

/// Strips surrounding white space, inner spaces/dashes/underscores and a
/// spreadsheet tail (`.` followed by zeros); returns the digits, or an
/// error if anything else remains.
fn digits_of(text: &str) -> Result<Digits, FipsError> {
    let t = text.trim();
    if t.is_empty() {
        return Err(FipsError::Empty);
    }
    let mut repairs = Repairs::default();
    let t = match t.rsplit_once('.') {
        Some((head, tail)) if !tail.is_empty() && tail.bytes().all(|b| b == b'0') => {
            repairs.float_tail = true;
            head
        }
        _ => t,
    };
    let mut digits = String::with_capacity(t.len());
    for c in t.chars() {
        match c {
            '0'..='9' => digits.push(c),
            ' ' | '-' | '_' | '\u{a0}' => repairs.separators = true,
            _ => return Err(FipsError::NotNumeric(text.to_string())),
        }
    }
    if digits.is_empty() {
        return Err(FipsError::NotNumeric(text.to_string()));
    }
    Ok(Digits { digits, repairs })
}

/// A unit code as regionkey writes it: read through a [`CodeForm`], so a
/// county code always has five digits and a fixed-width code its width.
/// Ordering is by text, which for codes of one width is numeric order.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Code(String);

impl Code {
    /// The code's text.
    pub fn as_str(&self) -> &str {
        &self.0
    }

    /// The code's text, owned.
    pub fn into_string(self) -> String {
        self.0
    }
}

impl fmt::Display for Code {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl AsRef<str> for Code {
    fn as_ref(&self) -> &str {
        &self.0
    }
}

impl From<StateFips> for Code {
    fn from(s: StateFips) -> Self {
        Code(s.to_string())
    }
}

impl From<CountyFips> for Code {
    fn from(c: CountyFips) -> Self {
        Code(c.to_string())
    }
}

/// How the codes of a column are read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum CodeForm {
    /// Five-digit county FIPS codes (4-5 digits; 1-3 digits with a
    /// separate state part).
    County,
    /// Two-digit state FIPS codes.
    State,
    /// All-digit codes of a fixed width (GEOIDs of tracts, block groups,
    /// places, ...): shorter codes get their lost leading zeros back.
    Digits(usize),
    /// A user's own keys, kept as written (surrounding white space aside).
    Plain,
}

impl CodeForm {
    /// Reads one code.
    pub fn read(self, text: &str) -> Result<(Code, Repairs), FipsError> {
        match self {
            CodeForm::County => {
                let d = digits_of(text)?;
                let c = county_from_digits(text, &d.digits)?;
                let mut repairs = d.repairs;
                repairs.leading_zeros = d.digits.len() < 5;
                Ok((c.into(), repairs))
            }
            CodeForm::State => {
                let d = digits_of(text)?;
                let s = state_from_digits(text, &d.digits)?;
                let mut repairs = d.repairs;
                repairs.leading_zeros = d.digits.len() < 2;
                Ok((s.into(), repairs))
            }
            CodeForm::Digits(width) => {
                let d = digits_of(text)?;
                if d.digits.len() > width {
                    return Err(FipsError::TooLong {
                        text: text.to_string(),
                        width,
                    });
                }
                let mut repairs = d.repairs;
                repairs.leading_zeros = d.digits.len() < width;
                Ok((Code(format!("{:0>width$}", d.digits)), repairs))
            }
            CodeForm::Plain => {
                let t = text.trim();
                if t.is_empty() {
                    return Err(FipsError::Empty);
                }
                Ok((Code(t.to_string()), Repairs::default()))
            }
        }
    }

    /// Reads one code, dropping the note of what was repaired.
    pub fn parse(self, text: &str) -> Result<Code, FipsError> {
        self.read(text).map(|(c, _)| c)
    }

    /// Reads a county code from a separate state part and a county part:
    /// ("6", "37") and ("06", "037.0") are 06037. A full county code in the
    /// county part is accepted when its state agrees. Only county codes
    /// have a state part.
    pub fn read_with_state(self, state: &str, text: &str) -> Result<(Code, Repairs), FipsError> {
        if self != CodeForm::County {
            return Err(FipsError::StatePartNotCounty);
        }
        let st = CodeForm::State
            .read(state)
            .map_err(|e| FipsError::StatePart(Box::new(e)))?;
        let d = digits_of(text)?;
        let mut repairs = d.repairs;
        repairs.leading_zeros |= st.1.leading_zeros;
        let st: StateFips = st.0.as_str().parse().expect("a state code read above");
        if d.digits.len() <= 3 {
            let n: u16 = d.digits.parse().unwrap_or(0);
            let c =
                CountyFips::new(st, n).ok_or_else(|| FipsError::CountyPart(text.to_string()))?;
            return Ok((c.into(), repairs));
        }
        let c = county_from_digits(text, &d.digits)?;
        if c.state() != st {
            return Err(FipsError::StateDisagrees {
                code: text.to_string(),
                in_code: c.state().to_string(),
                state: st.to_string(),
            });
        }
        repairs.leading_zeros |= d.digits.len() < 5;
        Ok((c.into(), repairs))
    }

    /// The number of digits of the form's codes, if fixed.
    pub fn width(self) -> Option<usize> {
        match self {
            CodeForm::County => Some(5),
            CodeForm::State => Some(2),
            CodeForm::Digits(w) => Some(w),
            CodeForm::Plain => None,
        }
    }

    /// Detects the form of a column of codes as written:
    ///
    /// - every code a county code (4-5 digits) and at least half with five
    ///   digits: [`CodeForm::County`];
    /// - every code a state code (1-2 digits) and at least three quarters
    ///   with two: [`CodeForm::State`];
    /// - every code all digits, at least three quarters of them of the
    ///   longest width `w`: [`CodeForm::Digits`]`(w)`;
    /// - otherwise (or with no codes) [`CodeForm::Plain`].
    ///
    /// The thresholds separate a column that lost some leading zeros (in a
    /// national county list about one code in ten is in states 01-09) from
    /// a column of numbers of varying length that are not zero-padded codes.
    /// Empty texts are skipped. Whatever is detected reads every code of
    /// the column.
    pub fn detect<'a>(codes: impl IntoIterator<Item = &'a str>) -> CodeForm {
        let mut lengths: Vec<usize> = Vec::new();
        let (mut all_county, mut all_state) = (true, true);
        for text in codes {
            if text.trim().is_empty() {
                continue;
            }
            let Ok(d) = digits_of(text) else {
                return CodeForm::Plain;
            };
            all_county &= county_from_digits(text, &d.digits).is_ok();
            all_state &= state_from_digits(text, &d.digits).is_ok();
            lengths.push(d.digits.len());
        }
        let Some(&longest) = lengths.iter().max() else {
            return CodeForm::Plain;
        };
        let at_longest = lengths.iter().filter(|&&l| l == longest).count();
        let share = at_longest as f64 / lengths.len() as f64;
        if all_county && longest == 5 && share >= 0.5 {
            CodeForm::County
        } else if all_state && longest == 2 && share >= 0.75 {
            CodeForm::State
        } else if share >= 0.75 {
            CodeForm::Digits(longest)
        } else {
            CodeForm::Plain
        }
    }
}

fn state_from_digits(text: &str, digits: &str) -> Result<StateFips, FipsError> {
    if digits.len() > 2 {
        return Err(FipsError::WrongLength(text.to_string()));
    }
    let n: u8 = digits
        .parse()
        .map_err(|_| FipsError::NotNumeric(text.to_string()))?;
    StateFips::new(n).ok_or_else(|| FipsError::ZeroState(text.to_string()))
}

fn county_from_digits(text: &str, digits: &str) -> Result<CountyFips, FipsError> {
    match digits.len() {
        4 | 5 => {}
        1..=3 => return Err(FipsError::CountyWithoutState(text.to_string())),
        _ => return Err(FipsError::WrongLength(text.to_string())),
    }
    let n: u32 = digits
        .parse()
        .map_err(|_| FipsError::NotNumeric(text.to_string()))?;
    if n / 1000 == 0 {
        return Err(FipsError::ZeroState(text.to_string()));
    }
    if n.is_multiple_of(1000) {
        return Err(FipsError::StateLevel(text.to_string()));
    }
    CountyFips::from_number(n).ok_or_else(|| FipsError::WrongLength(text.to_string()))
}

/// A two-digit state (or state-equivalent) FIPS code, 01..=99.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct StateFips(u8);

impl StateFips {
    /// Builds from a number 1..=99.
    pub fn new(n: u8) -> Option<Self> {
        (1..=99).contains(&n).then_some(StateFips(n))
    }

    /// The numeric value.
    pub fn get(self) -> u8 {
        self.0
    }
}

impl FromStr for StateFips {
    type Err = FipsError;
    /// Accepts "6", "06", " 06 ", "6.0".
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let d = digits_of(s)?;
        state_from_digits(s, &d.digits)
    }
}

impl fmt::Display for StateFips {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:02}", self.0)
    }
}

/// A five-digit county (or county-equivalent) FIPS code: state part
/// 01..=99, county part 001..=999.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct CountyFips(u32);

impl CountyFips {
    /// Builds from a state and a county part 1..=999.
    pub fn new(state: StateFips, county: u16) -> Option<Self> {
        (1..=999)
            .contains(&county)
            .then(|| CountyFips(state.0 as u32 * 1000 + county as u32))
    }

    /// Builds from the five-digit number (e.g. 6037 for 06037).
    pub fn from_number(n: u32) -> Option<Self> {
        let state = StateFips::new(u8::try_from(n / 1000).ok()?)?;
        CountyFips::new(state, (n % 1000) as u16)
    }

    /// The state part.
    pub fn state(self) -> StateFips {
        StateFips((self.0 / 1000) as u8)
    }

    /// The county part, 1..=999.
    pub fn county(self) -> u16 {
        (self.0 % 1000) as u16
    }

    /// The five-digit number.
    pub fn get(self) -> u32 {
        self.0
    }
}

impl FromStr for CountyFips {
    type Err = FipsError;
    /// Accepts "06037", "6037" (lost leading zero), "6037.0", "06 037", "06-037".
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let d = digits_of(s)?;
        county_from_digits(s, &d.digits)
    }
}

impl fmt::Display for CountyFips {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:05}", self.0)
    }
}

/// The level of a unit in the built-in US reference.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Level {
    /// States and equivalents (two-digit codes).
    State,
    /// Counties and equivalents (five-digit codes).
    County,
}

impl Level {
    /// The form of this level's codes.
    pub fn form(self) -> CodeForm {
        match self {
            Level::State => CodeForm::State,
            Level::County => CodeForm::County,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // County and state codes: the Census Bureau's FIPS code lists (ANSI
    // INCITS 31 counties, INCITS 38 states): 06037 is Los Angeles County,
    // 01001 Autauga County, 51600 Fairfax city; a county part 000 stands
    // for the state itself.

    #[test]
    fn county_codes_recover_lost_leading_zeros_and_spreadsheet_floats() {
        assert_eq!("1001".parse::<CountyFips>().unwrap().to_string(), "01001");
        assert_eq!("6037.0".parse::<CountyFips>().unwrap().to_string(), "06037");
        assert_eq!("06 037".parse::<CountyFips>().unwrap().to_string(), "06037");
        assert_eq!("06-037".parse::<CountyFips>().unwrap().to_string(), "06037");
    }

    #[test]
    fn state_level_and_malformed_codes_are_rejected() {
        assert_eq!(
            "06000".parse::<CountyFips>(),
            Err(FipsError::StateLevel("06000".into()))
        );
        assert!(matches!(
            "ABCDE".parse::<CountyFips>(),
            Err(FipsError::NotNumeric(_))
        ));
        assert!(matches!(
            "123".parse::<CountyFips>(),
            Err(FipsError::CountyWithoutState(_))
        ));
        assert!(matches!(
            "123456".parse::<CountyFips>(),
            Err(FipsError::WrongLength(_))
        ));
        assert!(matches!(
            "00123".parse::<CountyFips>(),
            Err(FipsError::ZeroState(_))
        ));
        assert!(matches!(
            "0".parse::<StateFips>(),
            Err(FipsError::ZeroState(_))
        ));
        assert!(matches!(
            "6037.5".parse::<CountyFips>(),
            Err(FipsError::NotNumeric(_))
        ));
    }

    #[test]
    fn county_parts_round_trip() {
        let c: CountyFips = "51600".parse().unwrap();
        assert_eq!(c.state().to_string(), "51");
        assert_eq!(c.county(), 600);
    }

    #[test]
    fn reading_says_what_it_repaired() {
        let (c, r) = CodeForm::County.read("6037.0").unwrap();
        assert_eq!(c.as_str(), "06037");
        assert!(r.leading_zeros && r.float_tail && !r.separators);
        let (c, r) = CodeForm::County.read(" 06 037 ").unwrap();
        assert_eq!(c.as_str(), "06037");
        assert!(!r.leading_zeros && r.separators);
        let (c, r) = CodeForm::County.read("06037").unwrap();
        assert_eq!(c.as_str(), "06037");
        assert!(r.is_empty());
        let (c, r) = CodeForm::State.read("6").unwrap();
        assert_eq!((c.as_str(), r.leading_zeros), ("06", true));
    }

    #[test]
    fn a_separate_state_part_joins_a_county_number() {
        let read = |s, c| {
            CodeForm::County
                .read_with_state(s, c)
                .map(|(c, _)| c.into_string())
        };
        assert_eq!(read("6", "37"), Ok("06037".into()));
        assert_eq!(read("06", "037.0"), Ok("06037".into()));
        assert_eq!(read("51", "600"), Ok("51600".into()));
        // A full code in the county column is taken when its state agrees.
        assert_eq!(read("6", "06037"), Ok("06037".into()));
        assert!(matches!(
            read("4", "06037"),
            Err(FipsError::StateDisagrees { .. })
        ));
        assert!(matches!(read("6", "0"), Err(FipsError::CountyPart(_))));
        assert!(matches!(read("CA", "37"), Err(FipsError::StatePart(_))));
        assert_eq!(
            CodeForm::State.read_with_state("6", "37"),
            Err(FipsError::StatePartNotCounty)
        );
    }

    #[test]
    fn fixed_width_digits_get_their_zeros_back_and_plain_keys_stay_as_written() {
        // Census tract GEOIDs are 11 digits: state (2), county (3), tract (6).
        let (c, r) = CodeForm::Digits(11).read("1001020100").unwrap();
        assert_eq!((c.as_str(), r.leading_zeros), ("01001020100", true));
        assert!(matches!(
            CodeForm::Digits(11).read("123456789012"),
            Err(FipsError::TooLong { width: 11, .. })
        ));
        let (c, r) = CodeForm::Plain.read(" North-1 ").unwrap();
        assert_eq!((c.as_str(), r.is_empty()), ("North-1", true));
        assert_eq!(CodeForm::Plain.read("  "), Err(FipsError::Empty));
        assert_eq!(CodeForm::County.read(""), Err(FipsError::Empty));
    }

    #[test]
    fn column_forms_are_detected_from_the_codes() {
        // A county list where the codes of states 01-09 lost their zero.
        let counties = ["1001", "1003", "6037", "36061", "51600", "48201"];
        assert_eq!(CodeForm::detect(counties), CodeForm::County);
        assert_eq!(CodeForm::detect(["01", "06", "36", "48"]), CodeForm::State);
        assert_eq!(
            CodeForm::detect(["1001020100", "36061000100", "48201100000", "06037101110"]),
            CodeForm::Digits(11)
        );
        // Numbers of varying length are not zero-padded codes.
        assert_eq!(
            CodeForm::detect(["1", "2", "3", "10", "11"]),
            CodeForm::Plain
        );
        assert_eq!(CodeForm::detect(["A1", "B2"]), CodeForm::Plain);
        assert_eq!(CodeForm::detect([]), CodeForm::Plain);
        // A ZIP-like column (county part 000 possible) is fixed-width digits.
        assert_eq!(
            CodeForm::detect(["10000", "2139", "94105", "60601"]),
            CodeForm::Digits(5)
        );
    }

    #[test]
    fn whatever_is_detected_reads_every_code_of_the_column() {
        let columns: [&[&str]; 4] = [
            &["1001", "6037.0", "36 061", "51600"],
            &["6", "06", "36", "48", "11"],
            &["1001020100", "36061000100", "48201100000", "06037101110"],
            &["x", "1", "22"],
        ];
        for col in columns {
            let form = CodeForm::detect(col.iter().copied());
            for c in col {
                assert!(form.read(c).is_ok(), "{form:?} cannot read {c:?}");
            }
        }
    }
}
