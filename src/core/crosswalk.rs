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
