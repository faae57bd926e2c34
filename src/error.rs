//! Typed errors. Every message names where the problem is (file, line or
//! feature, column, value) and, where it helps, what to do about it.

use std::path::PathBuf;

/// Result alias used across the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Where in an input a problem sits.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Location {
    /// File (or `-` for standard input, or `builtin:NAME`).
    pub path: PathBuf,
    /// 1-based line (header is line 1) or feature/record number, if known.
    pub line: Option<u64>,
    /// Column or field name, if known.
    pub column: Option<String>,
    /// What `line` counts when it is not a text line: `"feature"` (layers)
    /// or `"record"` (binary files such as a Shapefile's); `None` for lines.
    pub unit: Option<&'static str>,
}

impl Location {
    /// A location naming only a file.
    pub fn file(path: impl Into<PathBuf>) -> Self {
        Location {
            path: path.into(),
            line: None,
            column: None,
            unit: None,
        }
    }

    /// Adds a feature number (1-based, in file order) of a layer.
    pub fn at_feature(mut self, feature: u64) -> Self {
        self.line = Some(feature);
        self.unit = Some("feature");
        self
    }

    /// Adds a record number (1-based) of a binary file.
    pub fn at_record(mut self, record: u64) -> Self {
        self.line = Some(record);
        self.unit = Some("record");
        self
    }

    /// Adds a line (or record) number.
    pub fn at_line(mut self, line: u64) -> Self {
        self.line = Some(line);
        self
    }

    /// Adds a column name.
    pub fn in_column(mut self, column: impl Into<String>) -> Self {
        self.column = Some(column.into());
        self
    }
}

impl std::fmt::Display for Location {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.path.display())?;
        if let Some(line) = self.line {
            write!(f, ": {} {line}", self.unit.unwrap_or("line"))?;
        }
        if let Some(column) = &self.column {
            write!(f, ": column {column:?}")?;
        }
        Ok(())
    }
}

/// Errors raised by regionkey.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A file could not be opened, read or written.
    #[error("{path}: {action}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// What was being done ("cannot open", "cannot write", ...).
        action: &'static str,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// The content of an input is malformed at a known place.
    #[error("{location}: {message}")]
    Input {
        /// Where.
        location: Location,
        /// What is wrong and, where possible, what to do.
        message: String,
    },
    /// A requested column does not exist.
    #[error("{path}: no column {column:?}; the columns are: {available}")]
    MissingColumn {
        /// The file.
        path: PathBuf,
        /// The column asked for.
        column: String,
        /// The columns present, comma-separated.
        available: String,
    },
    /// The options given cannot work together or name something unknown.
    #[error("{0}")]
    Usage(String),
}

impl Error {
    /// An input error at a location.
    pub fn input(location: Location, message: impl Into<String>) -> Self {
        Error::Input {
            location,
            message: message.into(),
        }
    }

    /// An I/O error on a path.
    pub fn io(path: impl Into<PathBuf>, action: &'static str, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            action,
            source,
        }
    }

    /// True when this is a broken pipe on output (the reader went away):
    /// the command then exits quietly.
    pub fn is_broken_pipe(&self) -> bool {
        matches!(self, Error::Io { source, .. } if source.kind() == std::io::ErrorKind::BrokenPipe)
    }
}
