//! The crosswalk reader on arbitrary bytes.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use regionkey::io::crosswalk_file::read_csv_bytes;

fuzz_target!(|data: &[u8]| {
    let _ = read_csv_bytes(Path::new("fuzz.csv"), data);
});
