//! Bad input: every way a spec or a data table can be wrong must end with exit
//! code 2 and one message that names the file, the place (line and column,
//! spec key, or line:col) and, where there is one, the offending text.
//!
//! The cases are files in `tests/fixtures/bad-input/`: one broken spec per
//! case (`*.toml`, `*.yaml`), the shared table `data.csv`, and a table of its
//! own where the table is what is broken; `README.md` there lists each case.
//! Every case is the unbroken spec of `baseline/` with one thing broken, and
//! `baseline_runs_cleanly` proves the unbroken inputs succeed, so every failure
//! is caused by that one edit. Each case runs as
//! `heldout run <case file> --out out --quiet` in a fresh directory holding
//! the case and the tables, so the file names and line:col in a message point
//! into the fixture itself; the exit code and the whole stderr are pinned in
//! an insta snapshot, `snapshots/cli__bad_input__bad_input_cases@<case>.snap`.

use std::path::{Path, PathBuf};
use std::process::Output;

use tempfile::TempDir;

use crate::util;

/// Where results would be written if a run got that far.
const RESULTS: &str = "out/bad-input/results.json";

/// Stands for the temporary directory a case runs in, wherever a message
/// shows it, so the snapshots do not depend on it.
const TMP: &str = "[TMP]";

/// At most this many lines of a case (its comment lines aside) differ from
/// the baseline: one defect can take a few lines, e.g. another family and its
/// key, plus the line naming the case's own table.
const MAX_EDITED_LINES: usize = 3;

/// The fixture folder of this module.
fn fixtures() -> PathBuf {
    util::crate_root().join("tests/fixtures/bad-input")
}

/// Copies `spec` (when given) and every table (`*.csv`) of the fixture folder
/// into a fresh directory and runs `heldout run <spec_name> --out out --quiet`
/// there. The directory is returned so it lives as long as the caller needs it.
fn run_case(spec: Option<&Path>, spec_name: &str) -> (TempDir, Output) {
    let dir = tempfile::tempdir().expect("cannot create a temporary directory");
    for entry in std::fs::read_dir(fixtures()).expect("cannot list the fixture folder") {
        let path = entry.expect("cannot list the fixture folder").path();
        if path.extension().is_some_and(|ext| ext == "csv") {
            std::fs::copy(&path, dir.path().join(path.file_name().unwrap()))
                .unwrap_or_else(|e| panic!("cannot copy {}: {e}", path.display()));
        }
    }
    if let Some(spec) = spec {
        std::fs::copy(spec, dir.path().join(spec_name))
            .unwrap_or_else(|e| panic!("cannot copy {}: {e}", spec.display()));
    }
    let output = util::run_in(dir.path(), &["run", spec_name, "--out", "out", "--quiet"]);
    (dir, output)
}

/// The file name of `path` as text.
fn file_name(path: &Path) -> &str {
    path.file_name().and_then(|name| name.to_str()).unwrap()
}

/// Reads a fixture file.
fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()))
}

/// Asserts that the run failed as bad input (exit code 2) without writing
/// results.
fn assert_bad_input(dir: &Path, output: &Output) {
    let stderr = util::stderr_of(output);
    assert_eq!(
        output.status.code(),
        Some(2),
        "expected exit code 2 (bad input), got {}\nstderr:\n{stderr}",
        output.status
    );
    assert!(
        !dir.join(RESULTS).exists(),
        "a failed run must not write {RESULTS}\nstderr:\n{stderr}"
    );
}

/// The exit code and the whole stderr of a run in `dir`, with `dir` (as given
/// and canonical) replaced by [`TMP`]: what a snapshot pins.
fn exit_and_stderr(dir: &Path, output: &Output) -> String {
    let mut stderr = util::stderr_of(output);
    let canonical = dir
        .canonicalize()
        .expect("cannot resolve the temporary directory");
    for path in [canonical.as_path(), dir] {
        stderr = stderr.replace(path.to_str().expect("a non-UTF-8 temporary path"), TMP);
    }
    let code = output
        .status
        .code()
        .map_or_else(|| "none (killed by a signal)".to_owned(), |c| c.to_string());
    format!("exit code: {code}\nstderr:\n{stderr}")
}

/// The lines of `case`, `#` comment lines aside, that `baseline` lacks.
fn edited_lines<'a>(case: &'a str, baseline: &str) -> Vec<&'a str> {
    let mut unmatched: Vec<&str> = baseline.lines().collect();
    let mut edited = Vec::new();
    for line in case.lines().filter(|l| !l.trim_start().starts_with('#')) {
        match unmatched.iter().position(|b| *b == line) {
            Some(i) => {
                unmatched.remove(i);
            }
            None => edited.push(line),
        }
    }
    edited
}

#[test]
fn baseline_runs_cleanly() {
    for name in ["spec.toml", "spec.yaml"] {
        let spec = fixtures().join("baseline").join(name);
        let (dir, output) = run_case(Some(&spec), name);
        assert_eq!(
            output.status.code(),
            Some(0),
            "{name}: the unbroken inputs must run\nstderr:\n{}",
            util::stderr_of(&output)
        );
        let results = util::read_json(&dir.path().join(RESULTS));
        assert_eq!(results["rows"]["total"], 10, "{name}");
        assert_eq!(results["rows"]["dropped"], 0, "{name}");
    }
}

#[test]
fn bad_input_cases() {
    insta::glob!("../fixtures/bad-input", "*.{toml,yaml}", |spec| {
        let name = file_name(spec);
        let extension = spec.extension().and_then(|ext| ext.to_str()).unwrap();
        let baseline = read(
            &fixtures()
                .join("baseline")
                .join(format!("spec.{extension}")),
        );
        let case = read(spec);
        let edited = edited_lines(&case, &baseline);
        assert!(
            !edited.is_empty() && edited.len() <= MAX_EDITED_LINES,
            "{name} should be the baseline with one thing broken; its edited lines: {edited:?}"
        );
        let (dir, output) = run_case(Some(spec), name);
        assert_bad_input(dir.path(), &output);
        insta::assert_snapshot!(exit_and_stderr(dir.path(), &output));
    });
}

#[test]
fn every_case_is_listed_in_the_readme() {
    let readme = read(&fixtures().join("README.md"));
    let mut cases = 0;
    for entry in std::fs::read_dir(fixtures()).unwrap() {
        let path = entry.unwrap().path();
        let name = file_name(&path);
        if path.is_file() && name != "README.md" {
            cases += 1;
            assert!(
                readme.contains(&format!("`{name}`")),
                "tests/fixtures/bad-input/README.md does not list `{name}`"
            );
        }
    }
    assert!(cases > 0, "the fixture folder has no cases");
}

#[test]
fn spec_file_missing() {
    // The tables are there; the spec named on the command line is not.
    let (dir, output) = run_case(None, "spec.toml");
    assert_bad_input(dir.path(), &output);
    insta::assert_snapshot!(exit_and_stderr(dir.path(), &output));
}

// ------------------------------------------------------ positive control ---

#[test]
fn drop_rows_counts_every_row_with_an_empty_cell() {
    let baseline = read(&fixtures().join("baseline").join("spec.toml"));
    let from = "features = [\"x\"]\n";
    assert_eq!(
        baseline.matches(from).count(),
        1,
        "the baseline spec:\n{baseline}"
    );
    let spec = baseline.replacen(from, "features = [\"x\"]\nmissing = \"drop-rows\"\n", 1);
    // Three rows with a missing cell: empty x, empty y, whitespace-only x.
    let data = "x,y
1,2.1
2,
3,6.2
,7.8
5,10.1
6,12.2
  ,13.8
8,16.1
9,18.0
10,20.2
11,22.1
12,23.9
";
    let rows: Vec<&str> = data.lines().skip(1).collect();
    let with_empty = rows
        .iter()
        .filter(|row| row.split(',').any(|cell| cell.trim().is_empty()))
        .count();
    assert_eq!(with_empty, 3, "the test table itself");

    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("spec.toml"), spec).unwrap();
    std::fs::write(dir.path().join("data.csv"), data).unwrap();
    let output = util::run_in(dir.path(), &["run", "spec.toml", "--out", "out", "--quiet"]);
    assert_eq!(
        output.status.code(),
        Some(0),
        "drop-rows must run\nstderr:\n{}",
        util::stderr_of(&output)
    );
    let results = util::read_json(&dir.path().join(RESULTS));
    assert_eq!(results["rows"]["dropped"], with_empty);
    assert_eq!(results["rows"]["total"], rows.len() - with_empty);
}

// ----------------------------------------------------------------- help ---

#[test]
fn help_texts_exit_zero_and_show_an_example() {
    let dir = tempfile::tempdir().unwrap();
    for args in [
        &["--help"][..],
        &["run", "--help"][..],
        &["folds", "--help"][..],
    ] {
        let output = util::run_in(dir.path(), args);
        assert_eq!(
            output.status.code(),
            Some(0),
            "heldout {args:?}\nstderr:\n{}",
            util::stderr_of(&output)
        );
        let stdout = util::stdout_of(&output);
        assert!(
            stdout.contains("Example"),
            "heldout {args:?} should show an example\nstdout:\n{stdout}"
        );
    }
}
