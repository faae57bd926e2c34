//! FIPS code newtypes. A [`StateFips`] holds 1..=99; a [`CountyFips`] holds a
//! state part 1..=99 and a county part 1..=999, so "1001" or "06000" cannot
//! be represented. Parsing normalizes once, at the edge: lost leading zeros
//! ("1001" -> 01001), spreadsheet floats ("6037.0"), inner spaces or dashes
//! ("06 037", "06-037").

use std::fmt;
use std::str::FromStr;

/// Why a text is not a FIPS code.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum FipsError {
    /// Not made of digits (after removing spaces, dashes and a `.0` tail).
    #[error("{0:?} is not a number")]
    NotNumeric(String),
    /// Too many or too few digits for the level.
    #[error("{0:?} has the wrong number of digits")]
    WrongLength(String),
    /// State part 00.
    #[error("{0:?} has state part 00")]
    ZeroState(String),
    /// County part 000: a state-level code, not a county.
    #[error("{0:?} is a state-level code (county part 000), not a county")]
    StateLevel(String),
}

/// Strips whitespace, inner spaces/dashes and a spreadsheet `.0` tail;
/// returns the digits, or an error if anything else remains.
fn digits_of(text: &str) -> Result<String, FipsError> {
    let t = text.trim();
    let t = t.strip_suffix(".0").unwrap_or(t);
    let t = t.trim_end_matches(".00").trim_end_matches(".0");
    let digits: String = t
        .chars()
        .filter(|c| !matches!(c, ' ' | '-' | '_' | '\u{a0}'))
        .collect();
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return Err(FipsError::NotNumeric(text.to_string()));
    }
    Ok(digits)
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
        if d.len() > 2 {
            return Err(FipsError::WrongLength(s.to_string()));
        }
        let n: u8 = d
            .parse()
            .map_err(|_| FipsError::NotNumeric(s.to_string()))?;
        StateFips::new(n).ok_or_else(|| FipsError::ZeroState(s.to_string()))
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
        if !(4..=5).contains(&d.len()) {
            return Err(FipsError::WrongLength(s.to_string()));
        }
        let n: u32 = d
            .parse()
            .map_err(|_| FipsError::NotNumeric(s.to_string()))?;
        if n / 1000 == 0 {
            return Err(FipsError::ZeroState(s.to_string()));
        }
        if n.is_multiple_of(1000) {
            return Err(FipsError::StateLevel(s.to_string()));
        }
        CountyFips::from_number(n).ok_or_else(|| FipsError::WrongLength(s.to_string()))
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

#[cfg(test)]
mod tests {
    use super::*;

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
    }

    #[test]
    fn county_parts_round_trip() {
        let c: CountyFips = "51600".parse().unwrap();
        assert_eq!(c.state().to_string(), "51");
        assert_eq!(c.county(), 600);
    }
}
