//! Fuzzes the `layout.csv` reader (the file `rescore` and `score` read back). Any error is
//! fine; a panic is a failure.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let _ = crowsnest::io::parse_layout_csv(Path::new("layout.csv"), data);
});
