//! Pure computation on in-memory types. Nothing here reads files, writes to
//! the terminal or knows about the command line.

pub mod allocate;
pub mod audit;
pub mod carrying;
pub mod chain;
pub mod classify;
pub mod composite;
pub mod crosswalk;
pub mod decisions;
pub mod fips;
pub mod geodesy;
pub mod group;
pub mod history;
pub mod match_table;
pub mod matcher;
pub mod normalize;
pub mod overlay;
pub mod projection;
pub mod reference;
pub mod sql;
