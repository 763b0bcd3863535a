//! Fold assignment against an outside reference, and pinned by snapshots.
//!
//! Reference: `tests/fixtures/splits/reimplement_splits.py`, an independent
//! reimplementation from docs/splits.md (written from the document alone,
//! without reading the Rust source; Python 3.11 + blake3 1.0.11 from PyPI).
//! For each fixture spec, `heldout folds` and the script must print the same
//! bytes. When `python3` or its `blake3` package is missing, that comparison
//! is skipped with a line in the test output (a failure when
//! `HELDOUT_REQUIRE_REFERENCES=1`); the snapshot tests still run.
//!
//! Fixtures (invented data):
//! - `seed-a`: key column with two space-padded keys, kfold 5 folds x 2
//!   repeats, holdout 0.25 of 42 rows (10.5, rounded to 11);
//! - `seed-b`: no key, `group` column with groups of 1 to 7 rows, one row
//!   dropped for an empty cell, kfold 4, holdout 0.2, another seed.

use std::path::{Path, PathBuf};
use std::process::Command;

use tempfile::TempDir;

use crate::util;

fn fixture_dir() -> PathBuf {
    util::crate_root()
        .join("tests")
        .join("fixtures")
        .join("splits")
}

fn script() -> PathBuf {
    fixture_dir().join("reimplement_splits.py")
}

/// Copies `<name>.toml` and `<name>.csv` into a fresh directory.
fn copy_fixture(name: &str) -> TempDir {
    let dir = tempfile::tempdir().unwrap();
    for ext in ["toml", "csv"] {
        let file = format!("{name}.{ext}");
        std::fs::copy(fixture_dir().join(&file), dir.path().join(&file))
            .unwrap_or_else(|e| panic!("cannot copy {file}: {e}"));
    }
    dir
}

/// Stdout of `heldout folds <name>.toml` run in `dir`; panics on failure.
fn heldout_folds(dir: &Path, name: &str) -> String {
    let spec = format!("{name}.toml");
    let output = util::run_in(dir, &["folds", &spec]);
    assert!(
        output.status.success(),
        "heldout folds {spec} failed with {}\nstderr:\n{}",
        output.status,
        util::stderr_of(&output)
    );
    util::stdout_of(&output)
}

/// Runs the reimplementation on `<name>.toml` in `dir` and compares its
/// stdout byte for byte with `heldout folds`.
fn assert_matches_reference(name: &str) {
    if let Some(why) =
        util::python_missing("tomllib, blake3", "python3 -m pip install blake3==1.0.11")
    {
        util::skip_reference(
            &format!("split_reference: the Python comparison for {name}"),
            &why,
        );
        return;
    }
    let dir = copy_fixture(name);
    let ours = heldout_folds(dir.path(), name);
    let output = Command::new("python3")
        .current_dir(dir.path())
        .arg(script())
        .arg(format!("{name}.toml"))
        .output()
        .expect("python3 could not be started");
    assert!(
        output.status.success(),
        "reimplement_splits.py failed with {}\nstderr:\n{}",
        output.status,
        util::stderr_of(&output)
    );
    let theirs = util::stdout_of(&output);
    assert!(
        ours.lines().count() > 1,
        "heldout folds printed no rows:\n{ours}"
    );
    if ours != theirs {
        let first = ours
            .lines()
            .zip(theirs.lines())
            .position(|(a, b)| a != b)
            .map_or_else(
                || "one output is a prefix of the other".to_string(),
                |i| format!("first difference on output line {}", i + 1),
            );
        panic!(
            "{name}: heldout folds and the reimplementation from docs/splits.md differ \
             ({first})\n--- heldout ---\n{ours}\n--- reimplement_splits.py ---\n{theirs}"
        );
    }
}

#[test]
fn seed_a_matches_reimplementation() {
    assert_matches_reference("seed-a");
}

#[test]
fn seed_b_matches_reimplementation() {
    assert_matches_reference("seed-b");
}

// Snapshots: a dependency upgrade must not silently reshuffle the folds.

#[test]
fn seed_a_folds_snapshot() {
    let dir = copy_fixture("seed-a");
    insta::assert_snapshot!("seed_a_folds", heldout_folds(dir.path(), "seed-a"));
}

#[test]
fn seed_b_folds_snapshot() {
    let dir = copy_fixture("seed-b");
    insta::assert_snapshot!("seed_b_folds", heldout_folds(dir.path(), "seed-b"));
}
