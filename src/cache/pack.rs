//! Pack files: many cache entries in one file, so that a run of thousands of
//! small fits writes tens of files, not thousands (docs/reproducibility.md,
//! "The fit cache").
//!
//! Layout, all integers little-endian u64:
//!
//! ```text
//! MAGIC (16 bytes)
//! entry*    digest(key ‖ payload) (32) ‖ key (32) ‖ payload length ‖ payload
//! index     entry count ‖ (key (32) ‖ entry offset ‖ entry length)*
//! trailer   index offset ‖ digest(index) (32) ‖ MAGIC
//! ```
//!
//! Each entry checks itself exactly as a loose entry does (its digest covers
//! its key and payload); the index has a digest of its own, and a pack whose
//! trailer or index fails its check is not read at all. A pack is written to
//! a temporary file and renamed to the hex digest of its whole content, so a
//! reader never sees half a pack and two processes writing the same entries
//! write the same file.

use std::fs::File;
use std::io::{Read as _, Seek as _, SeekFrom, Write as _};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// First and last bytes of every pack.
pub(super) const MAGIC: &[u8; 16] = b"heldout-pack-v1\n";

/// Bytes before an entry's payload: digest, key, payload length.
pub(super) const ENTRY_HEADER: usize = 72;

/// Index offset, index digest, magic.
const TRAILER: usize = 8 + 32 + 16;

/// Bytes of one index record: key, offset, length.
const RECORD: usize = 48;

/// Where one entry lives inside its pack.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Record {
    pub(super) key: [u8; 32],
    pub(super) offset: u64,
    pub(super) length: u64,
}

/// An entry framed as it is stored: digest ‖ key ‖ payload length ‖ payload.
pub(super) fn frame(key: &[u8; 32], payload: &[u8]) -> Vec<u8> {
    let mut hasher = blake3::Hasher::new();
    hasher.update(key);
    hasher.update(payload);
    let mut framed = Vec::with_capacity(ENTRY_HEADER + payload.len());
    framed.extend_from_slice(hasher.finalize().as_bytes());
    framed.extend_from_slice(key);
    framed.extend_from_slice(&(payload.len() as u64).to_le_bytes());
    framed.extend_from_slice(payload);
    framed
}

/// Checks a framed entry read for `key` and returns its payload, or why it
/// cannot be used.
pub(super) fn unframe(key: &[u8; 32], mut framed: Vec<u8>) -> Result<Vec<u8>, String> {
    if framed.len() < ENTRY_HEADER {
        return Err("truncated entry".to_string());
    }
    let length = u64::from_le_bytes(framed[64..72].try_into().expect("8 bytes"));
    if length != (framed.len() - ENTRY_HEADER) as u64 {
        return Err("entry length does not match the pack's index".to_string());
    }
    let mut hasher = blake3::Hasher::new();
    hasher.update(&framed[32..64]);
    hasher.update(&framed[ENTRY_HEADER..]);
    if hasher.finalize().as_bytes() != &framed[..32] {
        return Err("content does not match its digest".to_string());
    }
    if &framed[32..64] != key {
        return Err(format!(
            "entry was written under another key ({}…)",
            &blake3::Hash::from_bytes(framed[32..64].try_into().expect("32 bytes")).to_hex()[..12]
        ));
    }
    // The payload moved to the front of the buffer read, not copied.
    framed.drain(..ENTRY_HEADER);
    Ok(framed)
}

static TEMPORARY_COUNTER: AtomicU64 = AtomicU64::new(0);

/// Writes `entries` (framed, each with its key) as one pack in `folder` and
/// returns its path and index. The file appears whole or not at all.
pub(super) fn write<'a>(
    folder: &Path,
    entries: impl IntoIterator<Item = (&'a [u8; 32], &'a [u8])>,
) -> std::io::Result<(PathBuf, Vec<Record>)> {
    std::fs::create_dir_all(folder)?;
    let temporary = folder.join(format!(
        ".pack.{}.{}.tmp",
        std::process::id(),
        TEMPORARY_COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    let result = (|| {
        let mut file = std::io::BufWriter::new(File::create(&temporary)?);
        let mut whole = blake3::Hasher::new();
        let mut put = |bytes: &[u8]| -> std::io::Result<()> {
            whole.update(bytes);
            file.write_all(bytes)
        };
        put(MAGIC)?;
        let mut offset = MAGIC.len() as u64;
        let mut records = Vec::new();
        for (key, framed) in entries {
            put(framed)?;
            records.push(Record {
                key: *key,
                offset,
                length: framed.len() as u64,
            });
            offset += framed.len() as u64;
        }
        let index = encode_index(&records);
        put(&index)?;
        put(&offset.to_le_bytes())?;
        put(blake3::hash(&index).as_bytes())?;
        put(MAGIC)?;
        file.into_inner().map_err(|e| e.into_error())?;
        let path = folder.join(format!("{}.pack", whole.finalize().to_hex()));
        std::fs::rename(&temporary, &path)?;
        Ok((path, records))
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&temporary);
    }
    result
}

fn encode_index(records: &[Record]) -> Vec<u8> {
    let mut index = Vec::with_capacity(8 + records.len() * RECORD);
    index.extend_from_slice(&(records.len() as u64).to_le_bytes());
    for record in records {
        index.extend_from_slice(&record.key);
        index.extend_from_slice(&record.offset.to_le_bytes());
        index.extend_from_slice(&record.length.to_le_bytes());
    }
    index
}

/// Opens a pack and reads its index. `Ok(Err(why))` for a file that is not
/// a whole pack (damaged, truncated, or not a pack at all): nothing in it is
/// read, whatever its bytes.
pub(super) fn open(path: &Path) -> std::io::Result<Result<(File, Vec<Record>), String>> {
    let mut file = File::open(path)?;
    let size = file.metadata()?.len();
    let header = MAGIC.len() as u64;
    if size < header + 8 + TRAILER as u64 {
        return Ok(Err("too short to be a pack".to_string()));
    }
    let mut magic = [0u8; 16];
    file.read_exact(&mut magic)?;
    let mut trailer = [0u8; TRAILER];
    file.seek(SeekFrom::End(-(TRAILER as i64)))?;
    file.read_exact(&mut trailer)?;
    if &magic != MAGIC || &trailer[40..] != MAGIC {
        return Ok(Err("not a pack (no pack marker)".to_string()));
    }
    let index_offset = u64::from_le_bytes(trailer[..8].try_into().expect("8 bytes"));
    let index_end = size - TRAILER as u64;
    if index_offset < header || index_offset > index_end {
        return Ok(Err("index offset outside the file".to_string()));
    }
    let index_length = index_end - index_offset;
    if index_length < 8 || !(index_length - 8).is_multiple_of(RECORD as u64) {
        return Ok(Err("index of the wrong length".to_string()));
    }
    let mut index = vec![0u8; index_length as usize];
    file.seek(SeekFrom::Start(index_offset))?;
    file.read_exact(&mut index)?;
    if blake3::hash(&index).as_bytes() != &trailer[8..40] {
        return Ok(Err("index does not match its digest".to_string()));
    }
    let count = u64::from_le_bytes(index[..8].try_into().expect("8 bytes"));
    if count != (index_length - 8) / RECORD as u64 {
        return Ok(Err("index count does not match its length".to_string()));
    }
    let mut records = Vec::with_capacity(count as usize);
    for record in index[8..].chunks_exact(RECORD) {
        let number = |at: usize| u64::from_le_bytes(record[at..at + 8].try_into().expect("8"));
        let record = Record {
            key: record[..32].try_into().expect("32 bytes"),
            offset: number(32),
            length: number(40),
        };
        let inside = record.offset >= header
            && record.length >= ENTRY_HEADER as u64
            && record
                .offset
                .checked_add(record.length)
                .is_some_and(|end| end <= index_offset);
        if !inside {
            return Ok(Err("an index record points outside the entries".to_string()));
        }
        records.push(record);
    }
    Ok(Ok((file, records)))
}

/// Reads the framed entry at `record` of an open pack.
pub(super) fn read(file: &File, record: &Record) -> std::io::Result<Vec<u8>> {
    let mut framed = vec![0u8; record.length as usize];
    read_exact_at(file, &mut framed, record.offset)?;
    Ok(framed)
}

#[cfg(unix)]
fn read_exact_at(file: &File, buffer: &mut [u8], offset: u64) -> std::io::Result<()> {
    std::os::unix::fs::FileExt::read_exact_at(file, buffer, offset)
}

#[cfg(not(unix))]
fn read_exact_at(file: &File, buffer: &mut [u8], offset: u64) -> std::io::Result<()> {
    // Positioned reads elsewhere go through a clone of the handle, which
    // shares the position: callers of one pack never interleave here
    // because each read opens its own clone.
    let mut handle = file.try_clone()?;
    handle.seek(SeekFrom::Start(offset))?;
    handle.read_exact(buffer)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_pack_round_trips_and_checks_each_entry() {
        let dir = tempfile::tempdir().unwrap();
        let keys = [[1u8; 32], [2u8; 32], [3u8; 32]];
        let payloads: [&[u8]; 3] = [b"", b"second", &[0xff; 300]];
        let framed: Vec<Vec<u8>> = keys
            .iter()
            .zip(payloads)
            .map(|(k, p)| frame(k, p))
            .collect();
        let (path, records) = write(
            dir.path(),
            keys.iter().zip(framed.iter().map(Vec::as_slice)),
        )
        .unwrap();
        let (file, read_back) = open(&path).unwrap().unwrap();
        assert_eq!(records, read_back);
        for ((key, payload), record) in keys.iter().zip(payloads).zip(&read_back) {
            assert_eq!(unframe(key, read(&file, record).unwrap()).unwrap(), payload);
        }
        // Named by content: the same entries give the same file name.
        let (again, _) = write(
            dir.path(),
            keys.iter().zip(framed.iter().map(Vec::as_slice)),
        )
        .unwrap();
        assert_eq!(path, again);
        // Asked for under another key, an entry is refused.
        let why = unframe(&[9; 32], read(&file, &read_back[1]).unwrap()).unwrap_err();
        assert!(why.contains("another key"), "{why}");
    }

    #[test]
    fn any_damage_to_a_pack_is_refused_never_read_wrong() {
        let dir = tempfile::tempdir().unwrap();
        let key = [7u8; 32];
        let framed = frame(&key, b"payload of a fit");
        let (path, _) = write(dir.path(), [(&key, framed.as_slice())]).unwrap();
        let pristine = std::fs::read(&path).unwrap();
        // Flip every byte in turn: the pack is refused, or the entry fails
        // its own check, or (a flipped byte the checks do not cover cannot
        // exist) the payload read back is the one written.
        for at in 0..pristine.len() {
            let mut bytes = pristine.clone();
            bytes[at] ^= 0x40;
            std::fs::write(&path, &bytes).unwrap();
            match open(&path).unwrap() {
                Err(_) => {}
                Ok((file, records)) => {
                    for record in &records {
                        if let Ok(payload) = unframe(&key, read(&file, record).unwrap()) {
                            assert_eq!(payload, b"payload of a fit", "byte {at}");
                        }
                    }
                }
            }
        }
        // Truncated at every length.
        for length in 0..pristine.len() {
            std::fs::write(&path, &pristine[..length]).unwrap();
            assert!(open(&path).unwrap().is_err(), "{length}");
        }
    }
}
