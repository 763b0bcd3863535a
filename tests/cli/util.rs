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
/// compare with a Python reference skip, saying so, when it is `Some`.
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
