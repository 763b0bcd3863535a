//! Writing outputs: the one place that touches the output folder. Files are
//! written to a temporary name and renamed, so a reader never sees half a file.

use std::path::{Path, PathBuf};

use anyhow::Context;

/// Writes `contents` to `path` atomically (temporary file, then rename).
pub(crate) fn write_atomic(path: &Path, contents: &[u8]) -> anyhow::Result<()> {
    let dir = path.parent().unwrap_or(Path::new("."));
    std::fs::create_dir_all(dir)
        .with_context(|| format!("cannot create the folder {}", dir.display()))?;
    let file_name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let temporary = dir.join(format!(".{file_name}.{}.tmp", std::process::id()));
    std::fs::write(&temporary, contents)
        .with_context(|| format!("cannot write {}", temporary.display()))?;
    std::fs::rename(&temporary, path)
        .with_context(|| format!("cannot move {} into place", path.display()))?;
    Ok(())
}

/// Refuses a folder option (`--out`, `--cache`) that names an existing file
/// or anything else that is not a folder; a missing folder is created later.
pub(crate) fn require_folder(path: &Path, option: &str) -> Result<(), crate::error::UsageError> {
    match std::fs::metadata(path) {
        Ok(metadata) if !metadata.is_dir() => Err(crate::error::UsageError(format!(
            "{option} {}: is a file, not a folder; give a folder (it is created when missing)",
            path.display()
        ))),
        _ => Ok(()),
    }
}

/// The folder of one experiment's outputs: `<out>/<experiment name>/`.
pub(crate) fn experiment_dir(out: &Path, experiment: &str) -> PathBuf {
    out.join(experiment)
}
