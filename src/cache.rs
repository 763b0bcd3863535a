//! Content-addressed store of bytes: one entry per fit of a family's grid on
//! one set of training rows, keyed by a blake3 digest of exactly what
//! determines it. The cache knows nothing of models: callers hand it an
//! explicit task identity and digests, and get back the bytes they stored.
//!
//! The key (see [`key`] and `docs/reproducibility.md`) covers the key recipe
//! version [`FORMAT`], the tool version, the task identity (family name and
//! algorithm version, features, every grid value as bits, as the family
//! registry encodes it), whether the final fit's coefficients were asked for,
//! the digests of the feature and target columns, and the digest of the
//! task's rows. So a changed data value, fold or setting misses, while a new
//! title or an added candidate leaves every other entry valid. Changing the
//! recipe changes `FORMAT`, so old entries are never read as new ones.
//!
//! An entry is `blake3(key ‖ payload) ‖ key ‖ payload`: it carries the full
//! key it was written under. A read checks both the digest and that the
//! stored key is the key asked for, so an entry copied, renamed or swapped
//! into another entry's place is reported, ignored and recomputed like a
//! damaged one; no content of an entry can make a read fail otherwise.
//! Temporary files that a killed run left behind are swept at the start of
//! the next run ([`Cache::sweep_orphans`]).
//! Writes go to a unique temporary file that is renamed into place, so
//! concurrent runs sharing a folder never see half an entry, and a run killed
//! part-way leaves only whole entries behind.

use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::error::CacheError;

/// Version of the entry format and key recipe; bump to orphan old entries.
/// v2: explicit task identities instead of a debug rendering of the family.
/// v3: entries carry the key they were written under.
/// v4: a payload holds each setting's fit or why it could not be fitted.
const FORMAT: &str = "heldout fit cache v4";

/// Bytes before the payload: the digest, then the key.
const HEADER: usize = 64;

/// A 32-byte cache key.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct CacheKey(pub [u8; 32]);

impl CacheKey {
    pub(crate) fn hex(&self) -> String {
        blake3::Hash::from_bytes(self.0).to_hex().to_string()
    }
}

/// Computes the key of one task from its explicit `identity` (what is
/// fitted), whether it is a final fit, and digests of what it reads: its
/// feature columns and the target (each digested once per run, see
/// `digests::digest_values`) and its training and evaluation rows.
pub(crate) fn key(
    identity: &[u8],
    final_fit: bool,
    feature_digests: &[[u8; 32]],
    target_digest: &[u8; 32],
    rows_digest: &[u8; 32],
) -> CacheKey {
    let mut hasher = blake3::Hasher::new();
    hasher.update(FORMAT.as_bytes());
    hasher.update(env!("CARGO_PKG_VERSION").as_bytes());
    hasher.update(&(identity.len() as u64).to_le_bytes());
    hasher.update(identity);
    hasher.update(&[u8::from(final_fit)]);
    hasher.update(&(feature_digests.len() as u64).to_le_bytes());
    for digest in feature_digests {
        hasher.update(digest);
    }
    hasher.update(target_digest);
    hasher.update(rows_digest);
    CacheKey(*hasher.finalize().as_bytes())
}

/// What a lookup found.
#[derive(Debug)]
pub(crate) enum Lookup {
    Hit(Vec<u8>),
    Miss,
    /// The entry exists but failed its integrity check; it must be recomputed.
    Corrupt(String),
}

/// One stored entry: its key and its size on disk.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Entry {
    pub(crate) key: CacheKey,
    pub(crate) bytes: u64,
}

/// A cache folder.
#[derive(Debug, Clone)]
pub(crate) struct Cache {
    root: PathBuf,
}

static TEMPORARY_COUNTER: AtomicU64 = AtomicU64::new(0);

impl Cache {
    pub(crate) fn new(root: impl Into<PathBuf>) -> Self {
        Cache { root: root.into() }
    }

    pub(crate) fn root(&self) -> &Path {
        &self.root
    }

    fn path_of(&self, key: &CacheKey) -> PathBuf {
        let hex = key.hex();
        self.root.join(&hex[..2]).join(format!("{hex}.fit"))
    }

    /// Whether an entry exists (without reading it).
    pub(crate) fn contains(&self, key: &CacheKey) -> bool {
        self.path_of(key).is_file()
    }

    /// Reads and checks an entry.
    pub(crate) fn get(&self, key: &CacheKey) -> Lookup {
        let path = self.path_of(key);
        let Ok(bytes) = std::fs::read(&path) else {
            return Lookup::Miss;
        };
        if bytes.len() < HEADER {
            return Lookup::Corrupt(format!("{}: truncated entry", path.display()));
        }
        let (stored, keyed) = bytes.split_at(32);
        if blake3::hash(keyed).as_bytes() != stored {
            return Lookup::Corrupt(format!(
                "{}: content does not match its digest",
                path.display()
            ));
        }
        let written_under = &keyed[..32];
        if written_under != key.0 {
            return Lookup::Corrupt(format!(
                "{}: entry was written under another key ({}…)",
                path.display(),
                &blake3::Hash::from_bytes(written_under.try_into().unwrap_or([0; 32])).to_hex()
                    [..12]
            ));
        }
        // The payload moved to the front of the buffer read, not copied.
        let mut bytes = bytes;
        bytes.drain(..HEADER);
        Lookup::Hit(bytes)
    }

    /// Removes temporary files (`.<key>.<pid>.<n>.tmp`) last written before
    /// `before`: what a killed run left behind. A concurrent run's file in
    /// flight is younger than the calling run, so it is spared. Returns how
    /// many were removed; a folder that cannot be read is skipped.
    pub(crate) fn sweep_orphans(&self, before: std::time::SystemTime) -> usize {
        let Ok(folders) = std::fs::read_dir(&self.root) else {
            return 0;
        };
        let mut removed = 0;
        for folder in folders.flatten() {
            let Ok(files) = std::fs::read_dir(folder.path()) else {
                continue;
            };
            for file in files.flatten() {
                let name = file.file_name();
                let name = name.to_string_lossy();
                let stale = file
                    .metadata()
                    .and_then(|m| m.modified())
                    .is_ok_and(|modified| modified < before);
                if name.starts_with('.')
                    && name.ends_with(".tmp")
                    && stale
                    && std::fs::remove_file(file.path()).is_ok()
                {
                    removed += 1;
                }
            }
        }
        removed
    }

    /// Every entry file in the folder (`<2 hex>/<64 hex>.fit`), in key order;
    /// files of any other name are not entries and are never listed.
    pub(crate) fn entries(&self) -> Vec<Entry> {
        let mut entries = Vec::new();
        let Ok(folders) = std::fs::read_dir(&self.root) else {
            return entries;
        };
        for folder in folders.flatten() {
            let Ok(files) = std::fs::read_dir(folder.path()) else {
                continue;
            };
            for file in files.flatten() {
                let name = file.file_name();
                let Some(hex) = name.to_str().and_then(|n| n.strip_suffix(".fit")) else {
                    continue;
                };
                let Ok(hash) = blake3::Hash::from_hex(hex) else {
                    continue;
                };
                let Ok(metadata) = file.metadata() else {
                    continue;
                };
                if metadata.is_file() && self.path_of(&CacheKey(*hash.as_bytes())) == file.path() {
                    entries.push(Entry {
                        key: CacheKey(*hash.as_bytes()),
                        bytes: metadata.len(),
                    });
                }
            }
        }
        entries.sort_by_key(|entry| entry.key.0);
        entries
    }

    /// Removes the entry stored under `key`; false when it was not there
    /// (another process removed it first) or cannot be removed.
    pub(crate) fn remove(&self, key: &CacheKey) -> bool {
        std::fs::remove_file(self.path_of(key)).is_ok()
    }

    /// Where an entry lives, for messages about its content.
    pub(crate) fn describe(&self, key: &CacheKey) -> String {
        self.path_of(key).display().to_string()
    }

    /// Stores an entry atomically.
    pub(crate) fn put(&self, key: &CacheKey, payload: &[u8]) -> Result<(), CacheError> {
        let path = self.path_of(key);
        let dir = path.parent().expect("entries live in a sub-folder");
        let io = |error| CacheError::Io {
            path: dir.to_path_buf(),
            error,
        };
        std::fs::create_dir_all(dir).map_err(io)?;
        // digest(key ‖ payload) ‖ key ‖ payload, written in parts: the
        // payload of a large fit is never copied to frame it.
        let mut hasher = blake3::Hasher::new();
        hasher.update(&key.0);
        hasher.update(payload);
        let temporary = dir.join(format!(
            ".{}.{}.{}.tmp",
            key.hex(),
            std::process::id(),
            TEMPORARY_COUNTER.fetch_add(1, Ordering::Relaxed)
        ));
        let write = || -> std::io::Result<()> {
            let mut file = std::io::BufWriter::new(std::fs::File::create(&temporary)?);
            file.write_all(hasher.finalize().as_bytes())?;
            file.write_all(&key.0)?;
            file.write_all(payload)?;
            file.into_inner().map_err(|e| e.into_error())?;
            Ok(())
        };
        write().map_err(io)?;
        std::fs::rename(&temporary, &path).map_err(io)?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::digests::{digest_rows, digest_values};

    const PAYLOAD: &[u8] = b"any bytes \x00\xff";

    #[test]
    fn entries_round_trip_bit_for_bit() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([7; 32]);
        assert!(matches!(cache.get(&key), Lookup::Miss));
        cache.put(&key, PAYLOAD).unwrap();
        match cache.get(&key) {
            Lookup::Hit(read) => assert_eq!(read, PAYLOAD),
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn a_tampered_entry_is_reported_not_used() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([9; 32]);
        cache.put(&key, PAYLOAD).unwrap();
        let path = cache.path_of(&key);
        let mut bytes = std::fs::read(&path).unwrap();
        let last = bytes.len() - 1;
        bytes[last] ^= 1;
        std::fs::write(&path, bytes).unwrap();
        assert!(matches!(cache.get(&key), Lookup::Corrupt(_)));
    }

    #[test]
    fn an_entry_read_under_another_key_is_refused() {
        // Two valid entries swapped on disk: each is whole and matches its
        // own digest, but was written under the other key.
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let (a, b) = (CacheKey([1; 32]), CacheKey([2; 32]));
        cache.put(&a, b"fits of a").unwrap();
        cache.put(&b, b"fits of b").unwrap();
        let (path_a, path_b) = (cache.path_of(&a), cache.path_of(&b));
        let bytes_a = std::fs::read(&path_a).unwrap();
        std::fs::copy(&path_b, &path_a).unwrap();
        std::fs::write(&path_b, bytes_a).unwrap();
        for key in [a, b] {
            match cache.get(&key) {
                Lookup::Corrupt(why) => assert!(why.contains("another key"), "{why}"),
                other => panic!("{other:?}"),
            }
        }
    }

    #[test]
    fn any_bytes_in_an_entry_give_a_hit_a_miss_or_corrupt_never_a_panic() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([3; 32]);
        let path = cache.path_of(&key);
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        for length in [0, 1, 31, 32, 63, 64, 65, 200] {
            std::fs::write(&path, vec![0xA5; length]).unwrap();
            assert!(matches!(cache.get(&key), Lookup::Corrupt(_)), "{length}");
        }
    }

    #[test]
    fn orphaned_temporary_files_older_than_the_run_are_swept() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        cache.put(&CacheKey([4; 32]), b"kept").unwrap();
        let folder = dir.path().join("04");
        let orphan = folder.join(".0404.999.0.tmp");
        std::fs::write(&orphan, b"half an entry").unwrap();
        let after_orphan = std::time::SystemTime::now() + std::time::Duration::from_secs(1);
        let young = std::time::SystemTime::UNIX_EPOCH;
        assert_eq!(cache.sweep_orphans(young), 0, "a younger run spares it");
        assert!(orphan.exists());
        assert_eq!(cache.sweep_orphans(after_orphan), 1);
        assert!(!orphan.exists());
        assert!(matches!(cache.get(&CacheKey([4; 32])), Lookup::Hit(_)));
    }

    #[test]
    fn keys_follow_identity_data_and_rows() {
        let x = [digest_values(&[0.0, 1.0, 2.0, 3.0])];
        let y = digest_values(&[1.0, 2.0, 0.0, 5.0]);
        let rows = digest_rows(&[0, 1, 2]);
        let base = key(b"family a", false, &x, &y, &rows);
        assert_eq!(base, key(b"family a", false, &x, &y, &rows));
        assert_ne!(base, key(b"family b", false, &x, &y, &rows));
        let other_y = digest_values(&[1.0, 2.0, 0.0, 5.5]);
        assert_ne!(base, key(b"family a", false, &x, &other_y, &rows));
        let other_rows = digest_rows(&[0, 1, 3]);
        assert_ne!(base, key(b"family a", false, &x, &y, &other_rows));
        assert_ne!(base, key(b"family a", true, &x, &y, &rows));
        assert_ne!(base, key(b"family a", false, &[], &y, &rows));
    }
}
