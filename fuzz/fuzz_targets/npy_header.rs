//! Fuzzes the `.npy` reader: the input is a whole `.npy` file. The header parser (magic,
//! version, header dict, dtype, shape, length check) runs first; when it accepts, the
//! whole-array decoder runs too. Any error is fine; a panic is a failure.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let path = Path::new("fuzz.npy");
    if let Ok(header) = crowsnest::io::parse_npy_header(path, data) {
        let _ = header.require_c_order(path);
        let _ = crowsnest::io::parse_npy_f64(path, data);
    }
});
