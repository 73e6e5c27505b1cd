//! Fuzzes the `site.toml` reader: the input is the text of a `site.toml` placed in the tiny
//! test site (tests/fixtures/tiny-site), so file names it mentions (`snapshots.npy`,
//! `candidates.csv`) resolve to real files and valid-looking inputs reach the deep checks.
//! The loader may return any error; it must never panic.
#![no_main]

use std::path::PathBuf;
use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;

fn site_file() -> &'static PathBuf {
    static PATH: OnceLock<PathBuf> = OnceLock::new();
    PATH.get_or_init(|| {
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../tests/fixtures/tiny-site/site.toml")
    })
}

fuzz_target!(|data: &[u8]| {
    // `load_site` reads the file as UTF-8 text and refuses anything else before parsing.
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = crowsnest::io::load_site_from_str(site_file(), text);
    }
});
