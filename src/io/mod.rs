//! Readers and writers. Everything that touches a file, standard input or
//! output, or the terminal lives here; the computation lives in [`crate::core`].

pub mod builtin;
pub mod composites;
pub mod crosswalk_file;
pub mod data;
pub mod geo;
pub mod guard;
pub mod html;
pub mod output;
pub mod png;
pub mod progress;
pub mod review;
pub mod svg;
pub mod table;
