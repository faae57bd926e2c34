//! SQL that does in a database engine what `regionkey apply` does on files:
//! values of source units carried onto target units through a crosswalk
//! table, counts allocated, ratios rebuilt from their allocated numerator
//! and denominator, weighted means, and the coverage of every figure.
//!
//! The query reads two tables:
//!
//! - the data table: a code column (or a state column and a county-part
//!   column), an optional period column and the value columns; an empty
//!   value is `NULL`;
//! - the crosswalk table: `from_code`, `to_code`, `weight`, `target_share`
//!   (`NULL` where unknown) and, optionally, `origin` (`direct` or
//!   `carried`, for crosswalks that mix codes of two vintages).
//!
//! It returns one row per target unit and period with, for each variable,
//! `NAME` and `NAME_coverage` (and `NAME_weighting` for a mean), as the
//! command writes them. The rules are those of [`crate::core::allocate`]:
//! duplicate (code, period) rows are added together; a value is known when
//! it is not `NULL`; coverage is the part of the target (by `target_share`,
//! else `weight`) made of sources with a known value, counted over the
//! origins that have a known source in that period; a target with no known
//! source gets `NULL` and coverage 0. Missing is never read as zero.
//!
//! Figures come out unrounded (the command rounds to `--decimals`); sums
//! are added in the engine's order, so they agree with the command to about
//! 1e-12 relative, not to the last bit.
//!
//! Allocated figures are estimates: they assume a value is spread evenly
//! (by area or by population) within each source unit. Where figures feed
//! legal or funding decisions, official relationship files and local
//! practice take precedence.

use std::fmt::Write as _;
use std::str::FromStr;

/// The SQL dialect written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dialect {
    /// DuckDB.
    DuckDb,
    /// Spark SQL.
    Spark,
    /// ISO SQL without vendor functions: codes are taken as written (trimmed),
    /// so they must already be in the crosswalk's form.
    Ansi,
}

impl Dialect {
    /// The name used on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            Dialect::DuckDb => "duckdb",
            Dialect::Spark => "spark",
            Dialect::Ansi => "ansi",
        }
    }

    fn quote(self, name: &str) -> String {
        match self {
            Dialect::Spark => format!("`{}`", name.replace('`', "``")),
            _ => format!("\"{}\"", name.replace('"', "\"\"")),
        }
    }

    fn text_type(self) -> &'static str {
        match self {
            Dialect::DuckDb => "VARCHAR",
            Dialect::Spark => "STRING",
            Dialect::Ansi => "VARCHAR(255)",
        }
    }

    fn number_type(self) -> &'static str {
        match self {
            Dialect::Ansi => "DOUBLE PRECISION",
            _ => "DOUBLE",
        }
    }
}

impl FromStr for Dialect {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.to_ascii_lowercase().as_str() {
            "duckdb" => Ok(Dialect::DuckDb),
            "spark" | "sparksql" | "spark-sql" => Ok(Dialect::Spark),
            "ansi" | "sql" => Ok(Dialect::Ansi),
            _ => Err(format!(
                "{s:?} is not a SQL dialect regionkey writes; choose duckdb, spark or ansi"
            )),
        }
    }
}

/// How the data's codes are brought to the crosswalk's form.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CodeForm {
    /// Five-digit county FIPS codes: a lost leading zero is restored, a
    /// spreadsheet `.0` tail and inner spaces or dashes are removed.
    County,
    /// Two-digit state FIPS codes, likewise.
    State,
    /// All-digit codes of this width (tract or block-group GEOIDs, ...),
    /// likewise.
    Digits(usize),
    /// Any other code: trimmed only.
    Text,
}

/// One output variable, by column names of the data table.
#[derive(Debug, Clone, PartialEq)]
pub enum Variable {
    /// A count allocated by weight.
    Count(String),
    /// A ratio of two allocated counts.
    Ratio {
        /// Output name.
        name: String,
        /// Numerator column.
        numerator: String,
        /// Denominator column.
        denominator: String,
    },
    /// A weighted mean of an intensive variable: by a weight column
    /// allocated as a count, or by the crosswalk's `target_share`.
    Mean {
        /// The variable's column (also the output name).
        column: String,
        /// The weight column, or `None` for `target_share`.
        weight: Option<String>,
    },
}

impl Variable {
    fn name(&self) -> &str {
        match self {
            Variable::Count(c) => c,
            Variable::Ratio { name, .. } => name,
            Variable::Mean { column, .. } => column,
        }
    }
}

/// Everything the query needs.
#[derive(Debug, Clone)]
pub struct Query {
    /// Dialect written.
    pub dialect: Dialect,
    /// The data table, as the engine names it (written as given).
    pub data_table: String,
    /// The crosswalk table, as the engine names it (written as given).
    pub crosswalk_table: String,
    /// Whether the crosswalk table has an `origin` column.
    pub crosswalk_has_origin: bool,
    /// Code column of the data (the county part with `state_column`).
    pub code_column: String,
    /// State column joined with the county part, if any.
    pub state_column: Option<String>,
    /// Period column, if any.
    pub period_column: Option<String>,
    /// How codes are normalized.
    pub codes: CodeForm,
    /// Output variables, in output order.
    pub variables: Vec<Variable>,
    /// Figures whose coverage is below this are `NULL` (0 keeps all).
    pub min_coverage: f64,
    /// Output column names, as the command writes them: the code column,
    /// the period column (with `period_column`), then per variable its
    /// value, its coverage and, for a mean, its weighting. Empty: the
    /// names of [`Query::default_columns`].
    pub columns: Vec<String>,
}

/// Writes a number as a SQL literal that reads back exactly.
fn literal(x: f64) -> String {
    let s = format!("{x:?}");
    if s.contains('e') || s.contains('.') {
        s
    } else {
        format!("{s}.0")
    }
}

/// `'text'` with quotes doubled.
fn string(text: &str) -> String {
    format!("'{}'", text.replace('\'', "''"))
}

impl Query {
    fn q(&self, name: &str) -> String {
        self.dialect.quote(name)
    }

    fn text(&self, expr: &str) -> String {
        format!("TRIM(CAST({expr} AS {}))", self.dialect.text_type())
    }

    fn number(&self, expr: &str) -> String {
        format!("CAST({expr} AS {})", self.dialect.number_type())
    }

    /// The digits of a code (without a `.0` tail, spaces, dashes or
    /// underscores), or NULL when anything else is left or there are more
    /// than `width` digits; padded with zeros to `width`.
    fn padded(&self, expr: &str, width: usize) -> String {
        let t = self.text(expr);
        let digits = match self.dialect {
            Dialect::DuckDb => {
                format!("regexp_replace(regexp_replace({t}, '\\.0+$', ''), '[ _-]', '', 'g')")
            }
            Dialect::Spark => {
                format!("regexp_replace(regexp_replace({t}, '\\\\.0+$', ''), '[ _-]', '')")
            }
            Dialect::Ansi => return t,
        };
        let test = match self.dialect {
            Dialect::DuckDb => format!("regexp_full_match({digits}, '[0-9]+')"),
            _ => format!("{digits} RLIKE '^[0-9]+$'"),
        };
        format!(
            "CASE WHEN {test} AND LENGTH({digits}) <= {width} THEN lpad({digits}, {width}, '0') END"
        )
    }

    /// The expression of a data row's source code.
    fn source_code(&self) -> String {
        let code = self.q(&self.code_column);
        match (self.codes, &self.state_column) {
            (CodeForm::County, Some(state)) if self.dialect != Dialect::Ansi => {
                let s = self.padded(&self.q(state), 2);
                let c = self.padded(&code, 3);
                format!("CASE WHEN ({s}) <> '00' AND ({c}) <> '000' THEN ({s}) || ({c}) END")
            }
            (CodeForm::County, Some(state)) => {
                format!("{} || {}", self.text(&self.q(state)), self.text(&code))
            }
            (CodeForm::County, None) => self.padded(&code, 5),
            (CodeForm::State, _) => self.padded(&code, 2),
            (CodeForm::Digits(w), _) => self.padded(&code, w),
            (CodeForm::Text, _) => self.text(&code),
        }
    }

    /// Per variable: (is the piece known, numerator, denominator), in terms
    /// of the piece's value columns `v0, v1, ...`, `weight` and
    /// `target_share`.
    fn contributions(&self, columns: &[String]) -> Vec<(String, String, String)> {
        let v = |c: &str| {
            let i = columns.iter().position(|x| x == c).unwrap_or(0);
            format!("v{i}")
        };
        self.variables
            .iter()
            .map(|var| match var {
                Variable::Count(c) => {
                    let c = v(c);
                    (
                        format!("{c} IS NOT NULL"),
                        format!("{c} * weight"),
                        "0.0".to_string(),
                    )
                }
                Variable::Ratio {
                    numerator,
                    denominator,
                    ..
                } => {
                    let (n, d) = (v(numerator), v(denominator));
                    (
                        format!("{n} IS NOT NULL AND {d} IS NOT NULL"),
                        format!("{n} * weight"),
                        format!("{d} * weight"),
                    )
                }
                Variable::Mean {
                    column,
                    weight: Some(w),
                } => {
                    let (c, w) = (v(column), v(w));
                    (
                        format!("{c} IS NOT NULL AND {w} IS NOT NULL"),
                        format!("{c} * {w} * weight"),
                        format!("{w} * weight"),
                    )
                }
                Variable::Mean {
                    column,
                    weight: None,
                } => {
                    let c = v(column);
                    (
                        format!("{c} IS NOT NULL AND target_share IS NOT NULL"),
                        format!("{c} * target_share"),
                        "target_share".to_string(),
                    )
                }
            })
            .collect()
    }

    /// The value columns the variables read, each once, in first use order.
    fn value_columns(&self) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for var in &self.variables {
            let cols: Vec<&String> = match var {
                Variable::Count(c) => vec![c],
                Variable::Ratio {
                    numerator,
                    denominator,
                    ..
                } => vec![numerator, denominator],
                Variable::Mean { column, weight } => {
                    std::iter::once(column).chain(weight.as_ref()).collect()
                }
            };
            for c in cols {
                if !out.contains(c) {
                    out.push(c.clone());
                }
            }
        }
        out
    }

    /// The output names used when [`Query::columns`] is empty: the code and
    /// period columns' own names, then `NAME`, `NAME_coverage` and
    /// `NAME_weighting` (for a mean).
    pub fn default_columns(&self) -> Vec<String> {
        let mut out = vec![self.code_column.clone()];
        out.extend(self.period_column.clone());
        for v in &self.variables {
            out.push(v.name().to_string());
            out.push(format!("{}_coverage", v.name()));
            if matches!(v, Variable::Mean { .. }) {
                out.push(format!("{}_weighting", v.name()));
            }
        }
        out
    }

    /// The query.
    pub fn render(&self) -> String {
        let output = if self.columns.is_empty() {
            self.default_columns()
        } else {
            self.columns.clone()
        };
        let mut output = output.into_iter();
        let mut out_name = || output.next().unwrap_or_default();
        let columns = self.value_columns();
        let parts = self.contributions(&columns);
        let mut s = String::new();
        let _ = writeln!(
            s,
            "-- regionkey apply: data carried through a crosswalk, with coverage ({}).",
            self.dialect.as_str()
        );
        let _ = writeln!(
            s,
            "-- Tables: data = {}, crosswalk = {} (from_code, to_code, weight, target_share{}).",
            self.data_table,
            self.crosswalk_table,
            if self.crosswalk_has_origin {
                ", origin"
            } else {
                ""
            }
        );
        let _ = writeln!(
            s,
            "-- Allocated figures are estimates: values are assumed spread evenly by area or by population within each source unit."
        );
        let _ = writeln!(
            s,
            "-- For legal or funding uses, official relationship files and local practice prevail."
        );
        let origin = if self.crosswalk_has_origin {
            format!(
                "CASE WHEN LOWER({}) = 'carried' THEN 1 ELSE 0 END",
                self.text(&self.q("origin"))
            )
        } else {
            "0".to_string()
        };
        let weight = self.number(&self.q("weight"));
        let share = self.number(&self.q("target_share"));
        let to = self.text(&self.q("to_code"));
        // Links: the crosswalk rows that reach a target.
        let _ = writeln!(s, "WITH links AS (");
        let _ = writeln!(
            s,
            "  SELECT {} AS source, {to} AS target, {weight} AS weight, {share} AS target_share,",
            self.text(&self.q("from_code"))
        );
        let _ = writeln!(
            s,
            "    COALESCE({share}, {weight}) AS part, {origin} AS origin"
        );
        let _ = writeln!(s, "  FROM {}", self.crosswalk_table);
        let _ = writeln!(s, "  WHERE {to} IS NOT NULL AND {to} <> ''");
        let _ = writeln!(s, "),");
        // The whole of each target, per origin.
        let _ = writeln!(s, "targets AS (");
        let _ = writeln!(
            s,
            "  SELECT target, SUM(CASE WHEN origin = 0 THEN part ELSE 0.0 END) AS whole0,"
        );
        let _ = writeln!(
            s,
            "    SUM(CASE WHEN origin = 1 THEN part ELSE 0.0 END) AS whole1"
        );
        let _ = writeln!(s, "  FROM links GROUP BY target");
        let _ = writeln!(s, "),");
        // Periods and the data folded onto (source, period).
        let period = self.period_column.as_ref().map(|p| self.text(&self.q(p)));
        let _ = writeln!(s, "periods AS (");
        match &period {
            Some(p) => {
                let _ = writeln!(
                    s,
                    "  SELECT DISTINCT {p} AS period FROM {} WHERE {p} IS NOT NULL AND {p} <> ''",
                    self.data_table
                );
            }
            None => {
                let _ = writeln!(s, "  SELECT '' AS period");
            }
        }
        let _ = writeln!(s, "),");
        let _ = writeln!(s, "rows_in AS (");
        let _ = write!(
            s,
            "  SELECT {} AS source, {} AS period",
            self.source_code(),
            period.clone().unwrap_or_else(|| "''".into())
        );
        for (i, c) in columns.iter().enumerate() {
            let _ = write!(s, ", {} AS v{i}", self.number(&self.q(c)));
        }
        let _ = writeln!(s);
        let _ = writeln!(s, "  FROM {}", self.data_table);
        if let Some(p) = &period {
            let _ = writeln!(s, "  WHERE {p} IS NOT NULL AND {p} <> ''");
        }
        let _ = writeln!(s, "),");
        let _ = writeln!(s, "cells AS (");
        let _ = write!(s, "  SELECT source, period");
        for i in 0..columns.len() {
            let _ = write!(s, ", SUM(v{i}) AS v{i}");
        }
        let _ = writeln!(s);
        let _ = writeln!(
            s,
            "  FROM rows_in WHERE source IS NOT NULL AND source <> '' GROUP BY source, period"
        );
        let _ = writeln!(s, "),");
        // Each link met by a cell, and the sums per (target, period).
        let _ = writeln!(s, "sums AS (");
        let _ = writeln!(s, "  SELECT l.target AS target, c.period AS period");
        for (k, (known, num, den)) in parts.iter().enumerate() {
            let _ = writeln!(
                s,
                "    , SUM(CASE WHEN {known} THEN {num} END) AS n{k}, SUM(CASE WHEN {known} THEN {den} END) AS d{k}"
            );
            let _ = writeln!(
                s,
                "    , SUM(CASE WHEN {known} THEN part ELSE 0.0 END) AS k{k}, MAX(CASE WHEN {known} AND origin = 0 THEN 1 ELSE 0 END) AS a0_{k}, MAX(CASE WHEN {known} AND origin = 1 THEN 1 ELSE 0 END) AS a1_{k}"
            );
        }
        let _ = writeln!(s, "  FROM links l JOIN cells c ON c.source = l.source");
        let _ = writeln!(s, "  GROUP BY l.target, c.period");
        let _ = writeln!(s, "),");
        // Coverage per variable.
        let _ = writeln!(s, "covered AS (");
        let _ = writeln!(s, "  SELECT t.target AS target, p.period AS period");
        for k in 0..parts.len() {
            let whole = format!(
                "(CASE WHEN s.a0_{k} = 1 THEN t.whole0 ELSE 0.0 END + CASE WHEN s.a1_{k} = 1 THEN t.whole1 ELSE 0.0 END)"
            );
            let _ = writeln!(
                s,
                "    , CASE WHEN s.a0_{k} = 1 OR s.a1_{k} = 1 THEN 1 ELSE 0 END AS known{k}, s.n{k} AS n{k}, s.d{k} AS d{k}"
            );
            let _ = writeln!(
                s,
                "    , CASE WHEN COALESCE(s.a0_{k}, 0) + COALESCE(s.a1_{k}, 0) = 0 OR {whole} <= 0 THEN 0.0 WHEN s.k{k} / {whole} > 1 THEN 1.0 ELSE s.k{k} / {whole} END AS c{k}"
            );
        }
        let _ = writeln!(s, "  FROM targets t CROSS JOIN periods p");
        let _ = writeln!(
            s,
            "  LEFT JOIN sums s ON s.target = t.target AND s.period = p.period"
        );
        let _ = writeln!(s, ")");
        // The result, as the command writes it.
        let code_name = out_name();
        let _ = write!(s, "SELECT target AS {}", self.q(&code_name));
        let mut order = vec![self.q(&code_name)];
        if self.period_column.is_some() {
            let period_name = out_name();
            let _ = write!(s, ", period AS {}", self.q(&period_name));
            order.push(self.q(&period_name));
        }
        let _ = writeln!(s);
        let min = literal(self.min_coverage);
        for (k, var) in self.variables.iter().enumerate() {
            let value = match var {
                Variable::Count(_) => format!("n{k}"),
                _ => format!("CASE WHEN d{k} <> 0 THEN n{k} / d{k} END"),
            };
            let (name, coverage) = (out_name(), out_name());
            let _ = writeln!(
                s,
                "  , CASE WHEN known{k} = 1 AND c{k} >= {min} THEN {value} END AS {}, c{k} AS {}",
                self.q(&name),
                self.q(&coverage)
            );
            if let Variable::Mean { weight, .. } = var {
                let _ = writeln!(
                    s,
                    "  , {} AS {}",
                    string(weight.as_deref().unwrap_or("target_share")),
                    self.q(&out_name())
                );
            }
        }
        let _ = writeln!(s, "FROM covered");
        let _ = writeln!(s, "ORDER BY {};", order.join(", "));
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn query(dialect: Dialect) -> Query {
        Query {
            dialect,
            data_table: "data".into(),
            crosswalk_table: "crosswalk".into(),
            crosswalk_has_origin: false,
            code_column: "fips".into(),
            state_column: None,
            period_column: Some("year".into()),
            codes: CodeForm::County,
            variables: vec![
                Variable::Count("pop".into()),
                Variable::Ratio {
                    name: "rate".into(),
                    numerator: "unemployed".into(),
                    denominator: "pop".into(),
                },
                Variable::Mean {
                    column: "density".into(),
                    weight: None,
                },
            ],
            min_coverage: 0.5,
            columns: Vec::new(),
        }
    }

    #[test]
    fn dialect_names_are_read_and_others_refused() {
        assert_eq!("duckdb".parse::<Dialect>(), Ok(Dialect::DuckDb));
        assert_eq!("Spark".parse::<Dialect>(), Ok(Dialect::Spark));
        assert_eq!("ansi".parse::<Dialect>(), Ok(Dialect::Ansi));
        assert!("oracle".parse::<Dialect>().unwrap_err().contains("duckdb"));
    }

    #[test]
    fn each_value_column_is_read_once_and_each_variable_has_its_coverage() {
        let sql = query(Dialect::DuckDb).render();
        // pop is used by the count and the ratio: read once.
        assert_eq!(sql.matches("CAST(\"pop\" AS DOUBLE)").count(), 1);
        for name in ["pop", "rate", "density"] {
            assert!(sql.contains(&format!("AS \"{name}\",")), "{name}");
            assert!(sql.contains(&format!("AS \"{name}_coverage\"")), "{name}");
        }
        assert!(sql.contains("'target_share' AS \"density_weighting\""));
        assert!(sql.contains(">= 0.5 THEN"));
    }

    #[test]
    fn identifiers_are_quoted_in_each_dialects_way() {
        let mut q = query(Dialect::Spark);
        q.code_column = "odd`name".into();
        let sql = q.render();
        assert!(sql.contains("`odd``name`"));
        assert!(!sql.contains("regexp_full_match"));
        let mut q = query(Dialect::Ansi);
        q.code_column = "odd\"name".into();
        let sql = q.render();
        assert!(sql.contains("\"odd\"\"name\""));
        assert!(!sql.contains("lpad"), "ANSI has no lpad");
        assert!(sql.contains("DOUBLE PRECISION"));
    }

    #[test]
    fn literals_read_back_exactly() {
        assert_eq!(literal(0.0), "0.0");
        assert_eq!(literal(1.0), "1.0");
        assert_eq!(literal(0.1), "0.1");
        assert_eq!(string("it's"), "'it''s'");
    }
}
