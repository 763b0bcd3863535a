//! Content-addressed store of fitted grids: one entry per (family, grid,
//! training fold), keyed by a blake3 digest of exactly what determines it.
//!
//! The key covers the tool version, the family with its features and grid, the
//! family's algorithm version, whether coefficients were asked for, and the
//! bytes of the training matrix, training target and evaluation matrix. So a
//! changed data value, fold or setting misses, while a new title or an added
//! candidate leaves every other entry valid.
//!
//! An entry is `blake3(payload) ‖ payload` (postcard encoding). A read checks
//! the digest; an entry that fails it is reported, ignored and overwritten.
//! Writes go to a unique temporary file that is renamed into place, so
//! concurrent runs sharing a folder never see half an entry, and a run killed
//! part-way leaves only whole entries behind.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::error::CacheError;
use crate::models::{Family, SettingFit};

/// Version of the entry format and key recipe; bump to orphan old entries.
const FORMAT: &str = "heldout fit cache v1";

/// A 32-byte cache key.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CacheKey(pub [u8; 32]);

impl CacheKey {
    pub fn hex(&self) -> String {
        blake3::Hash::from_bytes(self.0).to_hex().to_string()
    }
}

/// Computes the key of one fit of `family`'s grid from digests of what it
/// reads: its feature columns and the target (each digested once per run, see
/// [`digest_values`]) and its training and evaluation rows ([`digest_rows`]).
pub fn key(
    family: &dyn Family,
    final_fit: bool,
    feature_digests: &[[u8; 32]],
    target_digest: &[u8; 32],
    rows_digest: &[u8; 32],
) -> CacheKey {
    let mut hasher = blake3::Hasher::new();
    hasher.update(FORMAT.as_bytes());
    hasher.update(env!("CARGO_PKG_VERSION").as_bytes());
    let identity = format!(
        "{}\u{1f}{}\u{1f}{:?}\u{1f}{}",
        family.family(),
        family.algorithm_version(),
        family,
        final_fit
    );
    hasher.update(&(identity.len() as u64).to_le_bytes());
    hasher.update(identity.as_bytes());
    hasher.update(&(feature_digests.len() as u64).to_le_bytes());
    for digest in feature_digests {
        hasher.update(digest);
    }
    hasher.update(target_digest);
    hasher.update(rows_digest);
    CacheKey(*hasher.finalize().as_bytes())
}

/// Digest of a column of values (their little-endian bits, with the length),
/// fed to the hasher in large blocks: one `update` per value would cost more
/// than the hashing itself.
pub fn digest_values(values: &[f64]) -> [u8; 32] {
    let mut hasher = blake3::Hasher::new();
    hasher.update(&(values.len() as u64).to_le_bytes());
    let mut block = Vec::with_capacity(8 * 4096);
    for chunk in values.chunks(4096) {
        block.clear();
        for value in chunk {
            block.extend_from_slice(&value.to_bits().to_le_bytes());
        }
        hasher.update(&block);
    }
    *hasher.finalize().as_bytes()
}

/// Digest of a list of rows (indices into the table).
pub fn digest_rows(rows: &[usize]) -> [u8; 32] {
    let mut block = Vec::with_capacity(8 * (rows.len() + 1));
    block.extend_from_slice(&(rows.len() as u64).to_le_bytes());
    for &row in rows {
        block.extend_from_slice(&(row as u64).to_le_bytes());
    }
    *blake3::hash(&block).as_bytes()
}

/// What a lookup found.
#[derive(Debug)]
pub enum Lookup {
    Hit(Vec<SettingFit>),
    Miss,
    /// The entry exists but failed its integrity check; it must be recomputed.
    Corrupt(String),
}

/// A cache folder.
#[derive(Debug, Clone)]
pub struct Cache {
    root: PathBuf,
}

static TEMPORARY_COUNTER: AtomicU64 = AtomicU64::new(0);

impl Cache {
    pub fn new(root: impl Into<PathBuf>) -> Self {
        Cache { root: root.into() }
    }

    pub fn root(&self) -> &Path {
        &self.root
    }

    fn path_of(&self, key: &CacheKey) -> PathBuf {
        let hex = key.hex();
        self.root.join(&hex[..2]).join(format!("{hex}.fit"))
    }

    /// Whether an entry exists (without reading it).
    pub fn contains(&self, key: &CacheKey) -> bool {
        self.path_of(key).is_file()
    }

    /// Reads and checks an entry.
    pub fn get(&self, key: &CacheKey) -> Lookup {
        let path = self.path_of(key);
        let Ok(bytes) = std::fs::read(&path) else {
            return Lookup::Miss;
        };
        if bytes.len() < 32 {
            return Lookup::Corrupt(format!("{}: truncated entry", path.display()));
        }
        let (stored, payload) = bytes.split_at(32);
        if blake3::hash(payload).as_bytes() != stored {
            return Lookup::Corrupt(format!(
                "{}: content does not match its digest",
                path.display()
            ));
        }
        match postcard::from_bytes::<Vec<SettingFit>>(payload) {
            Ok(fits) => Lookup::Hit(fits),
            Err(e) => Lookup::Corrupt(format!("{}: cannot decode: {e}", path.display())),
        }
    }

    /// Stores an entry atomically.
    pub fn put(&self, key: &CacheKey, fits: &[SettingFit]) -> Result<(), CacheError> {
        let path = self.path_of(key);
        let dir = path.parent().expect("entries live in a sub-folder");
        let io = |error| CacheError::Io {
            path: dir.to_path_buf(),
            error,
        };
        std::fs::create_dir_all(dir).map_err(io)?;
        let payload = postcard::to_allocvec(fits).map_err(|e| CacheError::Encode(e.to_string()))?;
        let mut bytes = Vec::with_capacity(32 + payload.len());
        bytes.extend_from_slice(blake3::hash(&payload).as_bytes());
        bytes.extend_from_slice(&payload);
        let temporary = dir.join(format!(
            ".{}.{}.{}.tmp",
            key.hex(),
            std::process::id(),
            TEMPORARY_COUNTER.fetch_add(1, Ordering::Relaxed)
        ));
        std::fs::write(&temporary, &bytes).map_err(io)?;
        std::fs::rename(&temporary, &path).map_err(io)?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::polynomial::Polynomial;

    fn fits() -> Vec<SettingFit> {
        vec![SettingFit {
            train_pred: vec![1.0, 2.5],
            eval_pred: vec![0.1 + 0.2],
            effective_df: 3.0,
            coefficients: Some(vec![("intercept".into(), -1e-300)]),
        }]
    }

    #[test]
    fn entries_round_trip_bit_for_bit() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([7; 32]);
        assert!(matches!(cache.get(&key), Lookup::Miss));
        cache.put(&key, &fits()).unwrap();
        match cache.get(&key) {
            Lookup::Hit(read) => assert_eq!(read, fits()),
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn a_tampered_entry_is_reported_not_used() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([9; 32]);
        cache.put(&key, &fits()).unwrap();
        let path = cache.path_of(&key);
        let mut bytes = std::fs::read(&path).unwrap();
        let last = bytes.len() - 1;
        bytes[last] ^= 1;
        std::fs::write(&path, bytes).unwrap();
        assert!(matches!(cache.get(&key), Lookup::Corrupt(_)));
    }

    #[test]
    fn keys_follow_data_and_grid_not_names() {
        let family = |degrees: Vec<usize>| Polynomial {
            features: vec!["x".into()],
            intercept: true,
            degrees,
        };
        let x = [digest_values(&[0.0, 1.0, 2.0, 3.0])];
        let y = digest_values(&[1.0, 2.0, 0.0, 5.0]);
        let rows = digest_rows(&[0, 1, 2]);
        let base = key(&family(vec![1, 2]), false, &x, &y, &rows);
        assert_eq!(base, key(&family(vec![1, 2]), false, &x, &y, &rows));
        assert_ne!(base, key(&family(vec![1, 3]), false, &x, &y, &rows));
        let other_y = digest_values(&[1.0, 2.0, 0.0, 5.5]);
        assert_ne!(base, key(&family(vec![1, 2]), false, &x, &other_y, &rows));
        let other_rows = digest_rows(&[0, 1, 3]);
        assert_ne!(base, key(&family(vec![1, 2]), false, &x, &y, &other_rows));
        assert_ne!(base, key(&family(vec![1, 2]), true, &x, &y, &rows));
    }
}
