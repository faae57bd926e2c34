//! The Shapefile and dBase readers on arbitrary bytes. The input is split
//! in three: two little-endian u16 lengths, then the .shp, the .dbf and
//! (what is left) the .shx.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use regionkey::io::geo::{shapefile, LayerRequest};

fuzz_target!(|data: &[u8]| {
    if data.len() < 4 {
        return;
    }
    let a = u16::from_le_bytes([data[0], data[1]]) as usize;
    let b = u16::from_le_bytes([data[2], data[3]]) as usize;
    let rest = &data[4..];
    let a = a.min(rest.len());
    let b = b.min(rest.len() - a);
    let (shp, rest) = rest.split_at(a);
    let (dbf, shx) = rest.split_at(b);
    let req = LayerRequest {
        spec: "fuzz.shp".into(),
        key: Some("ZONE".into()),
        object: None,
        key_option: "--from-key",
        object_option: "--from-object",
    };
    let shx = (!shx.is_empty()).then(|| shx.to_vec());
    if let Err(e) = shapefile::read_bytes(Path::new("fuzz.shp"), shp.to_vec(), shx, dbf.to_vec(), &req) {
        // The last guard turns a panic into this message: treat it as a crash.
        assert!(!e.to_string().contains("could not be read ("), "{e}");
    }
});
