//! regionkey: match place names to FIPS codes, build crosswalks between
//! boundary vintages by polygon overlay, and carry data across them with
//! its coverage.
//!
//! The crate has three layers and dependencies point one way:
//!
//! - [`core`]: pure computation on in-memory types (codes, normalization,
//!   matching, geodesic areas, overlay, crosswalks, allocation). It never
//!   touches files, the terminal or the command line.
//! - [`io`]: readers and writers (CSV/TSV/Parquet tables, GeoJSON,
//!   Shapefile, TopoJSON, the built-in references), atomic output.
//! - [`cli`]: one module per subcommand, argument parsing and validation.
//!
//! Allocated figures are estimates: they assume a value is spread evenly by
//! area or by population within each unit. Where figures feed legal or
//! funding decisions, official relationship files and local practice win.
#![warn(missing_docs)]

pub mod cli;
pub mod core;
pub mod error;
pub mod io;

pub use error::{Error, Result};
