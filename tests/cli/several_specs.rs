//! `run` and `verify` given several specs: every spec is checked and
//! reported, whatever happened to the ones before it, and the exit code is
//! the worst of them. Also: what a run writes on stderr when stderr is not a
//! terminal (no progress drawing at all).

use std::path::Path;

use crate::util;

/// A small invented table: y ≈ 3 + 2x with a deterministic wiggle.
fn table() -> String {
    let mut text = String::from("x,y\n");
    for row in 0..30 {
        let x = row as f64 / 3.0;
        // Noise wide enough that x neither orders the rows as y does nor
        // correlates with it above 0.99 (either would be a leakage warning).
        let y = 3.0 + 2.0 * x + ((row * 7) % 5) as f64 * 2.0;
        text.push_str(&format!("{x:.4},{y:.4}\n"));
    }
    text
}

/// A spec named `name` reading `table`: 5 folds, one candidate of three
/// degrees, so 6 fits.
fn spec(name: &str, table: &str) -> String {
    format!(
        "[experiment]\nname = \"{name}\"\nseed = 11\n\n[data]\ntable = \"{table}\"\n\
         target = \"y\"\nfeatures = [\"x\"]\n\n[split]\nholdout = 0.2\nfolds = 5\n\n\
         [[candidate]]\nfamily = \"polynomial\"\ndegree = [1, 2, 3]\n"
    )
}

/// Writes `<name>.toml` and its own table `<name>.csv` in `dir`.
fn write_spec(dir: &Path, name: &str) {
    std::fs::write(dir.join(format!("{name}.csv")), table()).unwrap();
    std::fs::write(
        dir.join(format!("{name}.toml")),
        spec(name, &format!("{name}.csv")),
    )
    .unwrap();
}

fn heldout(dir: &Path, args: &[&str]) -> (Option<i32>, String, String) {
    let mut all = args.to_vec();
    all.extend(["--out", "out", "--cache", "cache"]);
    let output = util::run_in(dir, &all);
    (
        output.status.code(),
        util::stdout_of(&output),
        util::stderr_of(&output),
    )
}

#[test]
fn verify_checks_every_spec_and_exits_with_the_worst_code() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for name in ["good", "changed", "unreceipted"] {
        write_spec(d, name);
    }
    let (code, _, stderr) = heldout(d, &["run", "good.toml", "changed.toml", "--quiet"]);
    assert_eq!(code, Some(0), "{stderr}");
    // One cell of the second spec's table moves after its receipt was written.
    let moved = table().replacen("3.0000,", "3.0001,", 1);
    assert_ne!(moved, table());
    std::fs::write(d.join("changed.csv"), moved).unwrap();

    // The spec without a receipt comes first: the others are still checked.
    let (code, stdout, stderr) = heldout(
        d,
        &["verify", "unreceipted.toml", "changed.toml", "good.toml"],
    );
    assert_eq!(
        code,
        Some(2),
        "bad input outranks a mismatch:\n{stdout}{stderr}"
    );
    assert!(
        stderr.contains("error: unreceipted.toml: receipt: no receipt at unreceipted.receipt.toml"),
        "{stderr}"
    );
    assert!(
        stdout.contains("MISMATCH changed.toml\n  first difference: data file changed.csv changed"),
        "{stdout}"
    );
    assert!(
        stdout.contains("verified good.toml: identical to its receipt"),
        "{stdout}"
    );
    assert!(
        stderr.ends_with(
            "error: 2 of 3 specs failed: unreceipted.toml (bad input), changed.toml (mismatch)\n"
        ),
        "{stderr}"
    );
    // One line per spec on stdout for the specs that were verified, and one
    // error line per failed spec (plus the summary) on stderr.
    assert_eq!(
        stdout.lines().filter(|l| !l.starts_with("  ")).count(),
        2,
        "{stdout}"
    );
    assert_eq!(stderr.lines().count(), 2, "{stderr}");

    // Without the missing receipt, the mismatch is the worst.
    let (code, stdout, stderr) = heldout(d, &["verify", "changed.toml", "good.toml", "--quiet"]);
    assert_eq!(code, Some(1), "{stdout}{stderr}");
    assert!(stdout.starts_with("MISMATCH changed.toml\n"), "{stdout}");
    assert_eq!(
        stderr,
        "error: 1 of 2 specs failed: changed.toml (mismatch)\n"
    );

    let (code, stdout, stderr) = heldout(d, &["verify", "good.toml", "good.toml"]);
    assert_eq!(code, Some(0), "{stdout}{stderr}");
    assert_eq!(stdout.matches("verified good.toml").count(), 2, "{stdout}");
}

#[test]
fn run_goes_on_after_a_broken_spec_and_names_each_failure() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_spec(d, "good");
    // A spec with a key heldout does not know, and one whose table has text
    // where a number belongs.
    std::fs::write(
        d.join("misspelt.toml"),
        spec("misspelt", "good.csv").replace("folds = 5", "fols = 5"),
    )
    .unwrap();
    std::fs::write(d.join("text.csv"), table().replacen("3.0000,", "three,", 1)).unwrap();
    std::fs::write(d.join("textual.toml"), spec("textual", "text.csv")).unwrap();

    let (code, stdout, stderr) = heldout(
        d,
        &[
            "run",
            "misspelt.toml",
            "textual.toml",
            "good.toml",
            "--quiet",
        ],
    );
    assert_eq!(code, Some(2), "{stdout}{stderr}");
    let lines: Vec<&str> = stderr.lines().collect();
    assert_eq!(lines.len(), 3, "{stderr}");
    assert!(
        lines[0].starts_with("error: misspelt.toml:") && lines[0].contains("fols"),
        "{stderr}"
    );
    // A data error names the table; the spec is named in front of it.
    assert!(
        lines[1].starts_with("error: textual.toml: ")
            && lines[1]
                .contains("text.csv: line 11, column \"x\": cannot read \"three\" as a number"),
        "{stderr}"
    );
    assert_eq!(
        lines[2],
        "error: 2 of 3 specs failed: misspelt.toml (bad input), textual.toml (bad input)"
    );
    // The good spec, last, was still run.
    assert!(d.join("out/good/results.json").is_file());
    assert!(d.join("good.receipt.toml").is_file());
    assert!(!d.join("misspelt.receipt.toml").exists());
}

#[test]
fn one_failing_spec_reports_as_before() {
    let dir = tempfile::tempdir().unwrap();
    write_spec(dir.path(), "alone");
    let (code, _, stderr) = heldout(dir.path(), &["verify", "alone.toml"]);
    assert_eq!(code, Some(2));
    // No summary line for a single spec: its own error is the whole story.
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(
        stderr.starts_with("error: alone.toml: receipt: no receipt"),
        "{stderr}"
    );
}

#[test]
fn stderr_that_is_not_a_terminal_gets_no_progress_drawing() {
    let dir = tempfile::tempdir().unwrap();
    write_spec(dir.path(), "quietly");
    // stderr is a pipe here: no bar, spinner, carriage return or escape.
    let (code, stdout, stderr) = heldout(dir.path(), &["run", "quietly.toml"]);
    assert_eq!(code, Some(0), "{stdout}{stderr}");
    assert_eq!(stderr, "fits: 6 computed, 0 reused from the cache\n");
    let (code, _, stderr) = heldout(dir.path(), &["run", "quietly.toml"]);
    assert_eq!(code, Some(0));
    assert_eq!(stderr, "fits: 0 computed, 6 reused from the cache\n");
    let (code, _, stderr) = heldout(dir.path(), &["verify", "quietly.toml"]);
    assert_eq!(code, Some(0));
    assert_eq!(stderr, "");
}

#[test]
fn a_glob_that_also_matches_the_receipts_checks_each_spec_once() {
    // `heldout verify specs/*.toml` matches `x.receipt.toml` beside `x.toml`;
    // the receipt of a spec given alongside is not taken for a spec.
    let dir = tempfile::tempdir().unwrap();
    crate::demo::copy_demo(dir.path());
    let output = crate::util::run_in(
        dir.path(),
        &[
            "verify",
            "specs/heat-demand.receipt.toml",
            "specs/heat-demand.toml",
        ],
    );
    crate::util::assert_success(&output);
    let stdout = crate::util::stdout_of(&output);
    assert_eq!(stdout.matches("verified ").count(), 1, "{stdout}");
    // Alone, a receipt is named for what it is.
    let output = crate::util::run_in(dir.path(), &["verify", "specs/heat-demand.receipt.toml"]);
    assert_eq!(output.status.code(), Some(2));
}
