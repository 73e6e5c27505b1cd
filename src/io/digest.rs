//! Content digests of a site's inputs, for the journals of `plan` and `sweep`: a journal is
//! reused only when every input the result depends on is byte-for-byte the same — the text
//! of `site.toml`, everything the loader read from the files it names (candidates, points,
//! solid mask, zones and GeoJSON, existing sensors), the snapshot or basis files streamed in
//! full, and the caller's options.
//!
//! The hash is a four-lane multiply–rotate mix over 8-byte words (in the style of the xxHash
//! family, not compatible with it) with a final avalanche. It streams files in 1 MiB reads,
//! so hashing a snapshot file costs about one read of it (docs/performance.md). It detects
//! changes; it is not a cryptographic hash.

use std::fmt;
use std::fs::File;
use std::io::Read;
use std::path::Path;

use super::{FlowSource, IoError, Site};

const P1: u64 = 0x9E37_79B1_85EB_CA87;
const P2: u64 = 0xC2B2_AE3D_27D4_EB4F;
const P3: u64 = 0x1656_67B1_9E37_79F9;
const STRIPE: usize = 32;

/// A streaming 64-bit content hash. Feed bytes with [`Hasher::update`] (or format into it:
/// it implements [`fmt::Write`]) and read the result with [`Hasher::finish`].
#[derive(Debug, Clone)]
pub struct Hasher {
    lanes: [u64; 4],
    pending: [u8; STRIPE],
    n_pending: usize,
    len: u64,
}

impl Default for Hasher {
    fn default() -> Self {
        Self::new()
    }
}

fn round(acc: u64, word: u64) -> u64 {
    acc.wrapping_add(word.wrapping_mul(P2))
        .rotate_left(31)
        .wrapping_mul(P1)
}

fn word_at(bytes: &[u8], at: usize) -> u64 {
    let mut raw = [0u8; 8];
    raw.copy_from_slice(&bytes[at..at + 8]);
    u64::from_le_bytes(raw)
}

impl Hasher {
    pub fn new() -> Self {
        Self {
            lanes: [P1.wrapping_add(P2), P2, 0, P1.wrapping_neg()],
            pending: [0; STRIPE],
            n_pending: 0,
            len: 0,
        }
    }

    fn stripe(&mut self, bytes: &[u8]) {
        for (lane_idx, lane) in self.lanes.iter_mut().enumerate() {
            *lane = round(*lane, word_at(bytes, 8 * lane_idx));
        }
    }

    /// Adds `bytes` to the hashed stream.
    pub fn update(&mut self, mut bytes: &[u8]) {
        self.len = self.len.wrapping_add(bytes.len() as u64);
        if self.n_pending > 0 {
            let take = (STRIPE - self.n_pending).min(bytes.len());
            self.pending[self.n_pending..self.n_pending + take].copy_from_slice(&bytes[..take]);
            self.n_pending += take;
            bytes = &bytes[take..];
            if self.n_pending < STRIPE {
                return;
            }
            let pending = self.pending;
            self.stripe(&pending);
            self.n_pending = 0;
        }
        let mut chunks = bytes.chunks_exact(STRIPE);
        for chunk in &mut chunks {
            self.stripe(chunk);
        }
        let rest = chunks.remainder();
        self.pending[..rest.len()].copy_from_slice(rest);
        self.n_pending = rest.len();
    }

    /// Adds a length-prefixed field, so `("ab", "c")` and `("a", "bc")` hash differently.
    pub fn field(&mut self, bytes: &[u8]) {
        self.update(&(bytes.len() as u64).to_le_bytes());
        self.update(bytes);
    }

    /// The digest of everything fed so far.
    pub fn finish(&self) -> u64 {
        let [a, b, c, d] = self.lanes;
        let mut h = a
            .rotate_left(1)
            .wrapping_add(b.rotate_left(7))
            .wrapping_add(c.rotate_left(12))
            .wrapping_add(d.rotate_left(18));
        h ^= self.len.wrapping_mul(P3);
        for &byte in &self.pending[..self.n_pending] {
            h = (h ^ u64::from(byte)).wrapping_mul(P1).rotate_left(11);
        }
        // Final avalanche: every input bit reaches every output bit.
        h ^= h >> 33;
        h = h.wrapping_mul(P2);
        h ^= h >> 29;
        h = h.wrapping_mul(P3);
        h ^ (h >> 32)
    }
}

impl fmt::Write for Hasher {
    fn write_str(&mut self, s: &str) -> fmt::Result {
        self.update(s.as_bytes());
        Ok(())
    }
}

/// Streams the whole file at `path` into `hasher`, preceded by its length.
pub fn hash_file(hasher: &mut Hasher, path: &Path) -> Result<(), IoError> {
    let mut file = File::open(path).map_err(|e| IoError::file(path, e))?;
    let len = file.metadata().map_err(|e| IoError::file(path, e))?.len();
    hasher.update(&len.to_le_bytes());
    let mut buffer = vec![0u8; 1 << 20];
    loop {
        let n = file.read(&mut buffer).map_err(|e| IoError::file(path, e))?;
        if n == 0 {
            return Ok(());
        }
        hasher.update(&buffer[..n]);
    }
}

/// Revision of the numbers a journal holds. Bump it with any change that alters a scored or
/// ranked number without a version bump (a filter, a tuning rule, a study's settings), so an
/// old journal is never resumed into a new run. 2: nudging tuned with the one-standard-error
/// rule; budget study at eight levels.
pub const RESULTS_REVISION: u32 = 2;

/// Digest of every input of `site`: the text of `site.toml`, the loaded site (every value
/// read from the files it names), the snapshot or basis files in full, and `options` (the
/// caller's settings, as text). Two runs with equal digests ask the same question.
pub fn site_inputs_digest(site: &Site, options: &str) -> Result<u64, IoError> {
    use fmt::Write as _;
    let mut hasher = Hasher::new();
    hasher.field(env!("CARGO_PKG_VERSION").as_bytes());
    hasher.field(&RESULTS_REVISION.to_le_bytes());
    let toml = site.root.join("site.toml");
    if toml.is_file() {
        hash_file(&mut hasher, &toml)?;
    }
    // Every parsed value (candidates, points, weights, solid mask, zones, kinds, existing
    // sensors) through its Debug form; f64 Debug is round-trip exact.
    let _ = write!(hasher, "{site:?}");
    match &site.flow {
        FlowSource::Snapshots(files) => hash_file(&mut hasher, &files.path)?,
        FlowSource::Basis(files) => {
            for path in [&files.modes, &files.mean, &files.energies] {
                hash_file(&mut hasher, path)?;
            }
        }
    }
    hasher.field(options.as_bytes());
    Ok(hasher.finish())
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    fn digest(bytes: &[u8]) -> u64 {
        let mut h = Hasher::new();
        h.update(bytes);
        h.finish()
    }

    #[test]
    fn split_feeding_equals_one_feed() {
        let data: Vec<u8> = (0..1000u32).map(|i| (i * 7 + 3) as u8).collect();
        let whole = digest(&data);
        for split in [0, 1, 5, 31, 32, 33, 100, 999, 1000] {
            let mut h = Hasher::new();
            h.update(&data[..split]);
            h.update(&data[split..]);
            assert_eq!(h.finish(), whole, "split at {split}");
        }
    }

    #[test]
    fn any_one_byte_change_changes_the_digest() {
        let data: Vec<u8> = (0..300u32).map(|i| (i * 13) as u8).collect();
        let base = digest(&data);
        for at in 0..data.len() {
            for flip in [1u8, 0x80] {
                let mut changed = data.clone();
                changed[at] ^= flip;
                assert_ne!(digest(&changed), base, "byte {at} xor {flip}");
            }
        }
        assert_ne!(digest(&data[..299]), base, "truncation");
        assert_ne!(digest(b""), digest(b"\0"), "length counts");
    }

    #[test]
    fn files_hash_by_content() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.bin");
        let data: Vec<u8> = (0..3_000_000u32).map(|i| (i % 251) as u8).collect();
        std::fs::write(&a, &data).unwrap();
        let mut h = Hasher::new();
        hash_file(&mut h, &a).unwrap();
        let mut expected = Hasher::new();
        expected.update(&(data.len() as u64).to_le_bytes());
        expected.update(&data);
        assert_eq!(h.finish(), expected.finish());
    }
}
