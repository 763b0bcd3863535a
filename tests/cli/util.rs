//! Helpers shared by the integration tests: run the binary, read outputs.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A command for the `heldout` binary built by this crate.
pub fn heldout() -> Command {
    Command::new(env!("CARGO_BIN_EXE_heldout"))
}

/// The crate root (where `Cargo.toml` lives).
pub fn crate_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Runs `heldout` with `args` in `dir`; returns the finished process output.
pub fn run_in(dir: &Path, args: &[&str]) -> Output {
    heldout()
        .current_dir(dir)
        .args(args)
        .output()
        .expect("the heldout binary could not be started")
}

/// Runs `heldout <command> spec.toml --out out --cache cache --quiet` in
/// `dir`, where the test has written the spec and its table.
pub fn run_spec(dir: &Path, command: &str) -> Output {
    run_in(
        dir,
        &[
            command,
            "spec.toml",
            "--out",
            "out",
            "--cache",
            "cache",
            "--quiet",
        ],
    )
}

/// Fails the test, showing what the process wrote, unless it exited with
/// success (code 0).
pub fn assert_success(output: &Output) {
    assert!(
        output.status.success(),
        "heldout failed with {}\nstdout:\n{}\nstderr:\n{}",
        output.status,
        stdout_of(output),
        stderr_of(output)
    );
}

/// Runs `spec.toml` in `dir` (see [`run_spec`]), which must succeed, and
/// returns the `results.json` of its experiment `name`.
pub fn run_results(dir: &Path, name: &str) -> serde_json::Value {
    assert_success(&run_spec(dir, "run"));
    read_json(&dir.join("out").join(name).join("results.json"))
}

/// The entry of `results["candidates"]` whose `"id"` is `id`.
pub fn candidate<'a>(results: &'a serde_json::Value, id: &str) -> &'a serde_json::Value {
    results["candidates"]
        .as_array()
        .expect("results.json: \"candidates\" is not an array")
        .iter()
        .find(|c| c["id"].as_str() == Some(id))
        .unwrap_or_else(|| panic!("results.json has no candidate with id {id:?}"))
}

/// Why `python3 -c "import <modules>"` fails here (with the pip command
/// that would fix it), or `None` when those modules import. Tests that
/// compare with a Python reference hand it to [`skip_reference`] when it is
/// `Some`.
pub fn python_missing(modules: &str, install: &str) -> Option<String> {
    match Command::new("python3")
        .args(["-c", &format!("import {modules}")])
        .output()
    {
        Err(e) => Some(format!("python3 could not be started ({e})")),
        Ok(out) if !out.status.success() => Some(format!(
            "`import {modules}` failed in python3 (needs Python >= 3.11 and `{install}`): {}",
            String::from_utf8_lossy(&out.stderr)
                .lines()
                .last()
                .unwrap_or("no message")
        )),
        Ok(_) => None,
    }
}

/// The environment variable that turns a skipped reference check into a
/// failure when set to `1` (`.ci/run` sets it, so CI cannot pass on checks
/// that never ran).
pub const REQUIRE_REFERENCES: &str = "HELDOUT_REQUIRE_REFERENCES";

/// Whether [`REQUIRE_REFERENCES`] is set to `1`.
pub fn references_required() -> bool {
    std::env::var_os(REQUIRE_REFERENCES).is_some_and(|value| value == "1")
}

/// Reports that the reference check `check` cannot run here, for the reason
/// `why`: panics when [`references_required`], and otherwise prints one
/// `SKIPPED` line and returns, so the caller returns early.
///
/// The line is written to the process's stderr directly: libtest captures
/// `eprintln!` of a passing test and throws it away, so a skip said that way
/// is never seen in `cargo test`'s normal output.
pub fn skip_reference(check: &str, why: &str) {
    use std::io::Write as _;
    assert!(
        !references_required(),
        "{check} could not run: {why} ({REQUIRE_REFERENCES}=1 makes a missing reference a failure)"
    );
    let _ = writeln!(
        std::io::stderr(),
        "SKIPPED {check}: {why} (set {REQUIRE_REFERENCES}=1 to fail instead)"
    );
}

/// Stderr of a finished process as text.
pub fn stderr_of(output: &Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// Stdout of a finished process as text.
pub fn stdout_of(output: &Output) -> String {
    String::from_utf8_lossy(&output.stdout).into_owned()
}

/// (computed, reused) from the `fits: N computed, M reused from the cache`
/// line on a run's stderr.
pub fn fit_counts(stderr: &str) -> (usize, usize) {
    let line = stderr
        .lines()
        .find(|l| l.starts_with("fits: "))
        .unwrap_or_else(|| panic!("no `fits:` line on stderr:\n{stderr}"));
    let numbers: Vec<usize> = line
        .split_whitespace()
        .filter_map(|word| word.parse().ok())
        .collect();
    assert_eq!(numbers.len(), 2, "unexpected fits line: {line}");
    (numbers[0], numbers[1])
}

/// Reads and parses a JSON file.
pub fn read_json(path: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(path)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{} is not JSON: {e}", path.display()))
}

/// Log relative error (digits of agreement) of `computed` against `certified`,
/// following McCullough (1998): absolute error when the certified value is 0,
/// capped at 15 digits and floored at 0.
pub fn log_relative_error(computed: f64, certified: f64) -> f64 {
    let err = if certified == 0.0 {
        computed.abs()
    } else {
        (computed - certified).abs() / certified.abs()
    };
    if err == 0.0 {
        15.0
    } else {
        (-err.log10()).clamp(0.0, 15.0)
    }
}

/// The skip line is seen in `cargo test`'s normal output and the variable
/// turns it into a failure. Both are checked by running the probe below in a
/// child test process without `--nocapture`, as `cargo test` runs it.
mod skip_reporting {
    use std::process::{Command, Output};

    /// Set by [`run_probe`] so the probe acts only when started from here
    /// (not when someone runs every ignored test).
    const PROBE: &str = "HELDOUT_SKIP_PROBE";
    const PROBE_CHECK: &str = "skip-probe: an absent reference";

    #[test]
    #[ignore = "a probe started as a child process by the skip-reporting tests"]
    fn skip_probe() {
        if std::env::var_os(PROBE).is_some() {
            super::skip_reference(PROBE_CHECK, "nothing to compare with");
        }
    }

    /// Runs [`skip_probe`] alone in this test binary, output captured as usual.
    fn run_probe(require: Option<&str>) -> Output {
        let mut command = Command::new(std::env::current_exe().expect("no test binary path"));
        command
            .args(["util::skip_reporting::skip_probe", "--exact", "--ignored"])
            .env(PROBE, "1")
            .env_remove(super::REQUIRE_REFERENCES);
        if let Some(value) = require {
            command.env(super::REQUIRE_REFERENCES, value);
        }
        command
            .output()
            .expect("the test binary could not be started")
    }

    #[test]
    fn a_skipped_reference_check_is_printed_past_the_test_harness() {
        for require in [None, Some("0")] {
            let output = run_probe(require);
            let stderr = super::stderr_of(&output);
            assert!(
                output.status.success(),
                "the probe failed with {require:?}:\n{stderr}"
            );
            assert!(
                stderr.contains(&format!("SKIPPED {PROBE_CHECK}: nothing to compare with")),
                "no SKIPPED line in the normal output with {require:?}:\n{stderr}"
            );
        }
    }

    #[test]
    fn a_skipped_reference_check_fails_when_references_are_required() {
        let output = run_probe(Some("1"));
        let stdout = super::stdout_of(&output);
        assert!(
            !output.status.success(),
            "the probe passed although {}=1:\n{stdout}",
            super::REQUIRE_REFERENCES
        );
        assert!(
            stdout.contains(&format!(
                "{PROBE_CHECK} could not run: nothing to compare with"
            )),
            "the failure does not name the check:\n{stdout}"
        );
    }
}

/// How many entries the cache folder holds, as `heldout cache` counts them
/// (each key once, packs and loose entries alike).
pub fn cache_entry_count(cache: &Path) -> usize {
    let output = heldout()
        .args(["cache", "--cache"])
        .arg(cache)
        .output()
        .unwrap();
    assert_success(&output);
    let stdout = stdout_of(&output);
    let first = stdout.lines().next().unwrap_or_default().to_string();
    first
        .rsplit_once(": ")
        .and_then(|(_, rest)| rest.split(' ').next())
        .and_then(|n| n.parse().ok())
        .unwrap_or_else(|| panic!("no entry count in {stdout}"))
}

/// The pack files of a cache folder (`packs/*.pack`), sorted.
pub fn cache_packs(cache: &Path) -> Vec<PathBuf> {
    let mut found: Vec<PathBuf> = std::fs::read_dir(cache.join("packs"))
        .into_iter()
        .flatten()
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|e| e == "pack"))
        .collect();
    found.sort();
    found
}

/// The entries of a pack as (key, offset, length), read from its index by
/// the layout docs/reproducibility.md describes: 16 bytes of marker, the
/// entries, the index (count, then key ‖ offset ‖ length per entry), and a
/// trailer of index offset ‖ index digest ‖ marker.
pub fn pack_records(bytes: &[u8]) -> Vec<([u8; 32], u64, u64)> {
    let number = |at: usize| u64::from_le_bytes(bytes[at..at + 8].try_into().unwrap());
    let trailer = bytes.len() - 56;
    let index = number(trailer) as usize;
    let count = number(index) as usize;
    (0..count)
        .map(|i| {
            let at = index + 8 + 48 * i;
            (
                bytes[at..at + 32].try_into().unwrap(),
                number(at + 32),
                number(at + 40),
            )
        })
        .collect()
}
