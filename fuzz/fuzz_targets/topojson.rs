//! The topojson reader on arbitrary JSON text.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use regionkey::io::geo::{topojson, LayerRequest};

fuzz_target!(|data: &[u8]| {
    let Ok(doc) = serde_json::from_slice::<serde_json::Value>(data) else {
        return;
    };
    let req = LayerRequest {
        spec: "fuzz.json".into(),
        key: None,
        object: None,
        key_option: "--from-key",
        object_option: "--from-object",
    };
    if let Err(e) = topojson::read(Path::new("fuzz.json"), &doc, String::new(), &req) {
        assert!(!e.to_string().contains("could not be read ("), "{e}");
    }
});
