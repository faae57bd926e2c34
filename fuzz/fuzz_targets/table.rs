//! The table reader (CSV, TSV, Parquet) on arbitrary bytes.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use regionkey::io::table::{read_table_bytes, ReadOptions};

fuzz_target!(|data: &[u8]| {
    let _ = read_table_bytes(Path::new("fuzz.csv"), data, ReadOptions::default());
});
