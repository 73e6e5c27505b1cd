//! Fuzzes the candidates CSV reader: the input is the content of `candidates.csv`, checked
//! against the tiny test site (tests/fixtures/tiny-site: grid, solid shed, zone, two kinds)
//! exactly as the site loader checks it. Any error is fine; a panic is a failure.
#![no_main]

use std::path::Path;
use std::sync::OnceLock;

use crowsnest::io::Site;
use libfuzzer_sys::fuzz_target;

fn site() -> &'static Site {
    static SITE: OnceLock<Site> = OnceLock::new();
    SITE.get_or_init(|| {
        let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/fixtures/tiny-site");
        crowsnest::io::load_site(&dir).expect("the tiny test site loads")
    })
}

fuzz_target!(|data: &[u8]| {
    let _ = crowsnest::io::parse_candidates_csv(site(), Path::new("candidates.csv"), data);
});
