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
//! Entries are bundled into pack files (`packs/<digest>.pack`, see [`pack`]):
//! a run gathers the entries it computes and writes them as one pack every
//! [`BUNDLE_ENTRIES`] entries, [`BUNDLE_BYTES`] bytes or [`BUNDLE_AGE`],
//! whichever comes first, and once more when it ends, so a run killed
//! part-way keeps all but its last moments of work. Each entry is
//! `blake3(key ‖ payload) ‖ key ‖ length ‖ payload`: it carries the full key
//! it was written under. A read checks both the digest and that the stored
//! key is the key asked for, so an entry copied, renamed or swapped into
//! another entry's place is reported, ignored and recomputed like a damaged
//! one; no content of a pack can make a read fail otherwise. A pack is written
//! to a unique temporary file and renamed into place, so concurrent runs
//! sharing a folder never see half a pack; temporary files that a killed run
//! left behind are swept at the start of the next run
//! ([`Cache::sweep_orphans`]).
//!
//! Entries of the earlier one-file-per-entry layout (`<2 hex>/<64 hex>.fit`,
//! `digest ‖ key ‖ payload`, same keys) are still read, listed and pruned.

mod pack;

use std::collections::{BTreeMap, HashMap};
use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex, MutexGuard};
use std::time::{Duration, Instant};

use crate::error::CacheError;

/// Version of the key recipe; bump to orphan old entries.
/// v2: explicit task identities instead of a debug rendering of the family.
/// v3: entries carry the key they were written under.
/// v4: a payload holds each setting's fit or why it could not be fitted.
const FORMAT: &str = "heldout fit cache v4";

/// Bytes before the payload of a loose (one-file) entry: digest, key.
const LOOSE_HEADER: usize = 64;

/// A pack is written once this many entries wait…
const BUNDLE_ENTRIES: usize = 512;
/// …or their bytes reach this…
const BUNDLE_BYTES: usize = 16 << 20;
/// …or the oldest has waited this long.
const BUNDLE_AGE: Duration = Duration::from_millis(200);

/// The folder of pack files inside a cache folder.
const PACKS: &str = "packs";

/// A 32-byte cache key.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
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

/// One stored entry: its key and its size on disk (all its copies).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Entry {
    pub(crate) key: CacheKey,
    pub(crate) bytes: u64,
}

/// What [`Cache::retain`] removed.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Pruned {
    pub(crate) entries: usize,
    pub(crate) bytes: u64,
    /// Pack files that were not whole packs, removed.
    pub(crate) damaged: usize,
}

/// A cache folder. Clones share the entries waiting to be written.
#[derive(Debug, Clone)]
pub(crate) struct Cache {
    root: PathBuf,
    shared: Arc<Shared>,
}

/// One open pack of the index.
#[derive(Debug)]
struct OpenPack {
    path: PathBuf,
    file: Arc<File>,
}

/// Where the copies of one key live: pack number and record.
type Locations = HashMap<[u8; 32], Vec<(usize, pack::Record)>>;

/// The packs on disk when first looked at, plus those this process wrote.
#[derive(Debug, Default)]
struct Index {
    packs: Vec<OpenPack>,
    locations: Locations,
    /// Pack files that are not whole packs, with why.
    damaged: Vec<(PathBuf, String)>,
    /// Whether the folder holds shelves of loose entries at all.
    loose: bool,
}

#[derive(Debug, Default)]
struct State {
    index: Option<Index>,
    /// Framed entries computed but not yet in a pack, by key.
    waiting: BTreeMap<[u8; 32], Vec<u8>>,
    waiting_bytes: usize,
    oldest: Option<Instant>,
}

#[derive(Debug)]
struct Shared {
    root: PathBuf,
    state: Mutex<State>,
}

impl Drop for Shared {
    fn drop(&mut self) {
        // A run that failed part-way still keeps the fits it computed;
        // callers that finish normally have flushed and seen any error.
        let state = self.state.get_mut().unwrap_or_else(|p| p.into_inner());
        let _ = write_waiting(&self.root, state);
    }
}

impl Cache {
    pub(crate) fn new(root: impl Into<PathBuf>) -> Self {
        let root = root.into();
        Cache {
            shared: Arc::new(Shared {
                root: root.clone(),
                state: Mutex::new(State::default()),
            }),
            root,
        }
    }

    pub(crate) fn root(&self) -> &Path {
        &self.root
    }

    fn state(&self) -> MutexGuard<'_, State> {
        // A panic elsewhere while holding the lock leaves whole values only.
        self.shared.state.lock().unwrap_or_else(|p| p.into_inner())
    }

    fn loose_path(&self, key: &CacheKey) -> PathBuf {
        let hex = key.hex();
        self.root.join(&hex[..2]).join(format!("{hex}.fit"))
    }

    /// Whether an entry exists (without reading it).
    pub(crate) fn contains(&self, key: &CacheKey) -> bool {
        let mut state = self.state();
        if state.waiting.contains_key(&key.0) {
            return true;
        }
        let index = index_of(&self.root, &mut state);
        index.locations.contains_key(&key.0) || (index.loose && self.loose_path(key).is_file())
    }

    /// Reads and checks an entry. Of several copies (the same fit written
    /// by two runs), the first that passes its checks is used.
    pub(crate) fn get(&self, key: &CacheKey) -> Lookup {
        let (copies, loose) = {
            let mut state = self.state();
            if let Some(framed) = state.waiting.get(&key.0) {
                return Lookup::Hit(framed[pack::ENTRY_HEADER..].to_vec());
            }
            let index = index_of(&self.root, &mut state);
            let copies: Vec<(Arc<File>, PathBuf, pack::Record)> = index
                .locations
                .get(&key.0)
                .into_iter()
                .flatten()
                .map(|(p, record)| {
                    let open = &index.packs[*p];
                    (Arc::clone(&open.file), open.path.clone(), *record)
                })
                .collect();
            (copies, index.loose)
        };
        let mut problem = None;
        for (file, path, record) in copies {
            let checked = pack::read(&file, &record)
                .map_err(|e| e.to_string())
                .and_then(|framed| pack::unframe(&key.0, framed));
            match checked {
                Ok(payload) => return Lookup::Hit(payload),
                Err(why) => {
                    problem.get_or_insert(format!(
                        "{} (entry {}…): {why}",
                        path.display(),
                        &key.hex()[..12]
                    ));
                }
            }
        }
        if loose {
            match self.get_loose(key) {
                Lookup::Miss => {}
                found @ Lookup::Hit(_) => return found,
                Lookup::Corrupt(why) => {
                    problem.get_or_insert(why);
                }
            }
        }
        problem.map_or(Lookup::Miss, Lookup::Corrupt)
    }

    /// Reads an entry of the one-file-per-entry layout.
    fn get_loose(&self, key: &CacheKey) -> Lookup {
        let path = self.loose_path(key);
        let Ok(bytes) = std::fs::read(&path) else {
            return Lookup::Miss;
        };
        if bytes.len() < LOOSE_HEADER {
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
        let mut bytes = bytes;
        bytes.drain(..LOOSE_HEADER);
        Lookup::Hit(bytes)
    }

    /// Removes temporary files (`.<name>.<pid>.<n>.tmp`) last written before
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

    /// Every entry in the folder (packs and loose files, read afresh), in
    /// key order, each key once with the bytes of all its copies.
    pub(crate) fn entries(&self) -> Vec<Entry> {
        let mut state = self.state();
        state.index = None;
        let index = index_of(&self.root, &mut state);
        let mut bytes: BTreeMap<[u8; 32], u64> = BTreeMap::new();
        for (key, copies) in &index.locations {
            *bytes.entry(*key).or_default() += copies.iter().map(|(_, r)| r.length).sum::<u64>();
        }
        if index.loose {
            for (key, size) in self.loose_entries() {
                *bytes.entry(key.0).or_default() += size;
            }
        }
        bytes
            .into_iter()
            .map(|(key, bytes)| Entry {
                key: CacheKey(key),
                bytes,
            })
            .collect()
    }

    /// How many pack files the folder holds, and how many of them are not
    /// whole packs (as last read by [`Cache::entries`]).
    pub(crate) fn pack_files(&self) -> (usize, usize) {
        let mut state = self.state();
        let index = index_of(&self.root, &mut state);
        (index.packs.len(), index.damaged.len())
    }

    /// Entries of the one-file-per-entry layout with their sizes.
    fn loose_entries(&self) -> Vec<(CacheKey, u64)> {
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
                let key = CacheKey(*hash.as_bytes());
                let Ok(metadata) = file.metadata() else {
                    continue;
                };
                if metadata.is_file() && self.loose_path(&key) == file.path() {
                    entries.push((key, metadata.len()));
                }
            }
        }
        entries
    }

    /// Keeps only the entries whose key `keep` accepts: each pack holding
    /// others is rewritten without them (a new pack, then the old one
    /// removed), loose entries are removed, and pack files that are not
    /// whole packs are removed. Entries waiting to be written are written
    /// first. A concurrent reader of a rewritten pack finds its entries in
    /// the new pack on its next run, or recomputes them.
    pub(crate) fn retain(&self, keep: impl Fn(&[u8; 32]) -> bool) -> Result<Pruned, CacheError> {
        self.flush()?;
        let mut state = self.state();
        state.index = None;
        let index = index_of(&self.root, &mut state);
        let io = |path: &Path| {
            let path = path.to_path_buf();
            move |error| CacheError::Io { path, error }
        };
        let mut pruned = Pruned::default();
        let mut by_pack: Vec<Vec<pack::Record>> = vec![Vec::new(); index.packs.len()];
        for copies in index.locations.values() {
            for (p, record) in copies {
                by_pack[*p].push(*record);
            }
        }
        let packs_folder = self.root.join(PACKS);
        for (open, mut records) in index.packs.iter().zip(by_pack) {
            if records.iter().all(|r| keep(&r.key)) {
                continue;
            }
            records.sort_by_key(|r| r.offset);
            let mut kept = Vec::new();
            for record in &records {
                if keep(&record.key) {
                    let framed = pack::read(&open.file, record).map_err(io(&open.path))?;
                    kept.push((record.key, framed));
                } else {
                    pruned.entries += 1;
                    pruned.bytes += record.length;
                }
            }
            if !kept.is_empty() {
                pack::write(&packs_folder, kept.iter().map(|(k, f)| (k, f.as_slice())))
                    .map_err(io(&packs_folder))?;
            }
            match std::fs::remove_file(&open.path) {
                Ok(()) => {}
                // Another pruner removed it first.
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
                Err(e) => return Err(io(&open.path)(e)),
            }
        }
        for (path, _) in &index.damaged {
            if std::fs::remove_file(path).is_ok() {
                pruned.damaged += 1;
            }
        }
        if index.loose {
            for (key, size) in self.loose_entries() {
                if !keep(&key.0) && std::fs::remove_file(self.loose_path(&key)).is_ok() {
                    pruned.entries += 1;
                    pruned.bytes += size;
                }
            }
        }
        state.index = None;
        Ok(pruned)
    }

    /// Where an entry lives, for messages about its content.
    pub(crate) fn describe(&self, key: &CacheKey) -> String {
        let mut state = self.state();
        let index = index_of(&self.root, &mut state);
        match index.locations.get(&key.0).and_then(|c| c.first()) {
            Some((p, _)) => format!(
                "{} (entry {}…)",
                index.packs[*p].path.display(),
                &key.hex()[..12]
            ),
            None => self.loose_path(key).display().to_string(),
        }
    }

    /// Stores an entry. It waits with others and is written as part of a
    /// pack (see the module notes); [`Cache::flush`] writes what waits.
    pub(crate) fn put(&self, key: &CacheKey, payload: &[u8]) -> Result<(), CacheError> {
        let framed = pack::frame(&key.0, payload);
        let mut state = self.state();
        state.waiting_bytes += framed.len();
        if let Some(replaced) = state.waiting.insert(key.0, framed) {
            state.waiting_bytes -= replaced.len();
        }
        let oldest = *state.oldest.get_or_insert_with(Instant::now);
        if state.waiting.len() >= BUNDLE_ENTRIES
            || state.waiting_bytes >= BUNDLE_BYTES
            || oldest.elapsed() >= BUNDLE_AGE
        {
            write_waiting(&self.root, &mut state)?;
        }
        Ok(())
    }

    /// Writes the entries that wait as one pack.
    pub(crate) fn flush(&self) -> Result<(), CacheError> {
        write_waiting(&self.root, &mut self.state())
    }
}

/// The index, read from disk on first use.
fn index_of<'s>(root: &Path, state: &'s mut State) -> &'s mut Index {
    state.index.get_or_insert_with(|| read_index(root))
}

/// Reads every pack's index in file-name order, and notes whether loose
/// entries may exist. Unreadable folders and files read as empty.
fn read_index(root: &Path) -> Index {
    let mut index = Index::default();
    let mut names: Vec<PathBuf> = std::fs::read_dir(root.join(PACKS))
        .into_iter()
        .flatten()
        .flatten()
        .map(|entry| entry.path())
        .filter(|path| path.extension().is_some_and(|e| e == "pack"))
        .collect();
    names.sort();
    for path in names {
        match pack::open(&path) {
            Ok(Ok((file, records))) => add_pack(&mut index, path, file, records),
            Ok(Err(why)) => index.damaged.push((path, why)),
            Err(_) => {}
        }
    }
    index.loose = std::fs::read_dir(root)
        .into_iter()
        .flatten()
        .flatten()
        .any(|entry| {
            let name = entry.file_name();
            let name = name.to_string_lossy();
            name.len() == 2 && name.bytes().all(|b| b.is_ascii_hexdigit())
        });
    index
}

fn add_pack(index: &mut Index, path: PathBuf, file: File, records: Vec<pack::Record>) {
    let number = index.packs.len();
    for record in records {
        index
            .locations
            .entry(record.key)
            .or_default()
            .push((number, record));
    }
    index.packs.push(OpenPack {
        path,
        file: Arc::new(file),
    });
}

/// Writes the waiting entries as one pack and adds it to the index.
fn write_waiting(root: &Path, state: &mut State) -> Result<(), CacheError> {
    if state.waiting.is_empty() {
        return Ok(());
    }
    let folder = root.join(PACKS);
    let waiting = std::mem::take(&mut state.waiting);
    state.waiting_bytes = 0;
    state.oldest = None;
    let (path, records) = pack::write(&folder, waiting.iter().map(|(k, f)| (k, f.as_slice())))
        .map_err(|error| CacheError::Io {
            path: folder.clone(),
            error,
        })?;
    if let Some(index) = state.index.as_mut() {
        let file = File::open(&path).map_err(|error| CacheError::Io {
            path: path.clone(),
            error,
        })?;
        add_pack(index, path, file, records);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::digests::{digest_rows, digest_values};

    const PAYLOAD: &[u8] = b"any bytes \x00\xff";

    /// The pack files of a cache folder, sorted.
    fn packs(root: &Path) -> Vec<PathBuf> {
        let mut found: Vec<PathBuf> = std::fs::read_dir(root.join(PACKS))
            .into_iter()
            .flatten()
            .flatten()
            .map(|e| e.path())
            .collect();
        found.sort();
        found
    }

    /// An entry in the one-file-per-entry layout of earlier versions.
    fn write_loose(cache: &Cache, key: &CacheKey, payload: &[u8]) -> PathBuf {
        let path = cache.loose_path(key);
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        let mut keyed = key.0.to_vec();
        keyed.extend_from_slice(payload);
        let mut bytes = blake3::hash(&keyed).as_bytes().to_vec();
        bytes.extend_from_slice(&keyed);
        std::fs::write(&path, bytes).unwrap();
        path
    }

    #[test]
    fn entries_round_trip_bit_for_bit_before_and_after_their_pack_is_written() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([7; 32]);
        assert!(matches!(cache.get(&key), Lookup::Miss));
        cache.put(&key, PAYLOAD).unwrap();
        assert!(packs(dir.path()).is_empty(), "one entry waits");
        assert!(matches!(cache.get(&key), Lookup::Hit(read) if read == PAYLOAD));
        cache.flush().unwrap();
        assert_eq!(packs(dir.path()).len(), 1);
        // Another process (a fresh cache on the folder) reads it from the pack.
        let other = Cache::new(dir.path());
        assert!(other.contains(&key));
        assert!(matches!(other.get(&key), Lookup::Hit(read) if read == PAYLOAD));
    }

    #[test]
    fn many_entries_go_into_few_packs_and_a_dropped_cache_writes_what_waits() {
        let dir = tempfile::tempdir().unwrap();
        let count = 2 * BUNDLE_ENTRIES + 3;
        {
            let cache = Cache::new(dir.path());
            for i in 0..count {
                let key = CacheKey(*blake3::hash(&i.to_le_bytes()).as_bytes());
                cache.put(&key, &i.to_le_bytes()).unwrap();
            }
            // Written without being asked, every BUNDLE_ENTRIES entries (or
            // sooner, on a slow machine, by age).
            assert!(packs(dir.path()).len() >= 2);
        }
        let written = packs(dir.path()).len();
        assert!((3..=count / 2).contains(&written), "{written} packs");
        let cache = Cache::new(dir.path());
        assert_eq!(cache.entries().len(), count);
        for i in 0..count {
            let key = CacheKey(*blake3::hash(&i.to_le_bytes()).as_bytes());
            assert!(matches!(cache.get(&key), Lookup::Hit(read) if read == i.to_le_bytes()));
        }
    }

    #[test]
    fn a_tampered_entry_is_reported_not_used_and_a_good_copy_wins() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([9; 32]);
        cache.put(&key, PAYLOAD).unwrap();
        cache.flush().unwrap();
        let path = packs(dir.path()).remove(0);
        let mut bytes = std::fs::read(&path).unwrap();
        // The last byte of the one payload: the entry fails its digest.
        let at = pack::MAGIC.len() + pack::ENTRY_HEADER + PAYLOAD.len() - 1;
        bytes[at] ^= 1;
        std::fs::write(&path, bytes).unwrap();
        let fresh = Cache::new(dir.path());
        match fresh.get(&key) {
            Lookup::Corrupt(why) => assert!(why.contains("does not match its digest"), "{why}"),
            other => panic!("{other:?}"),
        }
        // Recomputed and written again: the new copy is used, quietly.
        fresh.put(&key, PAYLOAD).unwrap();
        fresh.flush().unwrap();
        assert!(matches!(Cache::new(dir.path()).get(&key), Lookup::Hit(read) if read == PAYLOAD));
    }

    #[test]
    fn loose_entries_of_the_earlier_layout_are_read_and_checked() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let (a, b) = (CacheKey([1; 32]), CacheKey([2; 32]));
        let path_a = write_loose(&cache, &a, b"fits of a");
        let path_b = write_loose(&cache, &b, b"fits of b");
        assert!(matches!(cache.get(&a), Lookup::Hit(read) if read == b"fits of a"));
        // Two valid entries swapped on disk: each is whole and matches its
        // own digest, but was written under the other key.
        let bytes_a = std::fs::read(&path_a).unwrap();
        std::fs::copy(&path_b, &path_a).unwrap();
        std::fs::write(&path_b, bytes_a).unwrap();
        for key in [a, b] {
            match cache.get(&key) {
                Lookup::Corrupt(why) => assert!(why.contains("another key"), "{why}"),
                other => panic!("{other:?}"),
            }
        }
        assert_eq!(cache.entries().len(), 2);
    }

    #[test]
    fn any_bytes_in_a_loose_entry_or_a_pack_give_a_hit_a_miss_or_corrupt_never_a_panic() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        let key = CacheKey([3; 32]);
        let path = cache.loose_path(&key);
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        for length in [0, 1, 31, 32, 63, 64, 65, 200] {
            std::fs::write(&path, vec![0xA5; length]).unwrap();
            assert!(matches!(cache.get(&key), Lookup::Corrupt(_)), "{length}");
        }
        std::fs::remove_file(&path).unwrap();
        std::fs::create_dir_all(dir.path().join(PACKS)).unwrap();
        let bogus = dir.path().join(PACKS).join("bogus.pack");
        for length in [0, 16, 100, 5000] {
            std::fs::write(&bogus, vec![0x5A; length]).unwrap();
            let fresh = Cache::new(dir.path());
            assert!(matches!(fresh.get(&key), Lookup::Miss), "{length}");
            assert_eq!(fresh.pack_files(), (0, 1));
        }
    }

    #[test]
    fn orphaned_temporary_files_older_than_the_run_are_swept() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        cache.put(&CacheKey([4; 32]), b"kept").unwrap();
        cache.flush().unwrap();
        let orphan = dir.path().join(PACKS).join(".pack.999.0.tmp");
        std::fs::write(&orphan, b"half a pack").unwrap();
        let after_orphan = std::time::SystemTime::now() + std::time::Duration::from_secs(1);
        let young = std::time::SystemTime::UNIX_EPOCH;
        assert_eq!(cache.sweep_orphans(young), 0, "a younger run spares it");
        assert!(orphan.exists());
        assert_eq!(cache.sweep_orphans(after_orphan), 1);
        assert!(!orphan.exists());
        assert!(matches!(cache.get(&CacheKey([4; 32])), Lookup::Hit(_)));
    }

    #[test]
    fn retain_rewrites_packs_without_the_entries_no_one_needs() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::new(dir.path());
        for i in 0..4u8 {
            cache.put(&CacheKey([i; 32]), &[i; 100]).unwrap();
        }
        cache.flush().unwrap();
        cache.put(&CacheKey([9; 32]), b"alone").unwrap();
        cache.flush().unwrap();
        let loose = write_loose(&cache, &CacheKey([10; 32]), b"old layout");
        assert_eq!(cache.entries().len(), 6);
        let keep = |key: &[u8; 32]| key[0] == 1 || key[0] == 2;
        let pruned = cache.retain(keep).unwrap();
        assert_eq!(pruned.entries, 4);
        assert!(!loose.exists());
        // One pack rewritten with the two kept entries, the other removed.
        assert_eq!(packs(dir.path()).len(), 1);
        let fresh = Cache::new(dir.path());
        let kept: Vec<u8> = fresh.entries().iter().map(|e| e.key.0[0]).collect();
        assert_eq!(kept, vec![1, 2]);
        assert!(matches!(fresh.get(&CacheKey([2; 32])), Lookup::Hit(read) if read == [2; 100]));
        assert!(matches!(fresh.get(&CacheKey([0; 32])), Lookup::Miss));
        // Nothing more to remove.
        assert_eq!(fresh.retain(keep).unwrap(), Pruned::default());
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
