//! Bad input: every way a spec or a data table can be wrong must end with exit
//! code 2 and one message that names the file, the place (line and column,
//! spec key, or line:col) and, where there is one, the offending text.
//!
//! Each test starts from the same small valid spec and table, breaks exactly
//! one thing, and runs `heldout run spec.toml --out out --quiet` in a fresh
//! temporary directory. `baseline_runs_cleanly` proves the unbroken inputs
//! succeed, so every failure below is caused by the one edit.

use std::path::Path;
use std::process::Output;

use tempfile::TempDir;

use crate::util;

/// The valid spec every test edits. Line numbers matter: `[[candidate]]` is
/// on line 14, `family` on 15, `degree` on 16; `folds` is on line 12.
const SPEC: &str = r#"[experiment]
name = "bad-input"
seed = 3

[data]
table = "data.csv"
target = "y"
features = ["x"]

[split]
holdout = 0
folds = 3

[[candidate]]
family = "polynomial"
degree = [1, 2]
"#;

/// The same spec in YAML; `features` is on line 7, `degree` on line 13.
const SPEC_YAML: &str = "experiment:
  name: bad-input
  seed: 3
data:
  table: data.csv
  target: y
  features: [x]
split:
  holdout: 0
  folds: 3
candidate:
  - family: polynomial
    degree: [1, 2]
";

/// The valid table (invented values). The header is line 1, so the row
/// `3,6.2` is line 4 and `6,12.2` is line 7.
const DATA: &str = "x,y
1,2.1
2,3.9
3,6.2
4,7.8
5,10.1
6,12.2
7,13.8
8,16.1
9,18.0
10,20.2
";

/// Where results would be written if a run got that far.
const RESULTS: &str = "out/bad-input/results.json";

/// Replaces the single occurrence of `from` in `text`; panics when `from` is
/// missing or repeated, so a mistyped edit cannot leave the input valid.
fn edit(text: &str, from: &str, to: &str) -> String {
    let count = text.matches(from).count();
    assert_eq!(count, 1, "{from:?} occurs {count} times in:\n{text}");
    text.replacen(from, to, 1)
}

/// Writes the spec as `spec_name` and, when given, the table as `data.csv`
/// into a fresh directory, then runs `heldout run <spec_name> --out out --quiet`
/// there. The directory is returned so it lives as long as the caller needs it.
fn run_case(spec_name: &str, spec: &str, data: Option<&str>) -> (TempDir, Output) {
    let dir = tempfile::tempdir().expect("cannot create a temporary directory");
    std::fs::write(dir.path().join(spec_name), spec).expect("cannot write the spec");
    if let Some(data) = data {
        std::fs::write(dir.path().join("data.csv"), data).expect("cannot write the table");
    }
    let output = util::run_in(dir.path(), &["run", spec_name, "--out", "out", "--quiet"]);
    (dir, output)
}

/// `run_case` with a TOML spec named `spec.toml` and a table.
fn run_toml(spec: &str, data: &str) -> (TempDir, Output) {
    run_case("spec.toml", spec, Some(data))
}

/// Asserts that the run failed as bad input (exit code 2) without writing
/// results, and returns its stderr.
fn bad_input(dir: &Path, output: &Output) -> String {
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
    stderr
}

/// Asserts that `stderr` contains every one of `parts`.
fn assert_mentions(stderr: &str, parts: &[&str]) {
    for part in parts {
        assert!(
            stderr.contains(part),
            "stderr should contain {part:?}\nstderr:\n{stderr}"
        );
    }
}

#[test]
fn baseline_runs_cleanly() {
    for (name, spec) in [("spec.toml", SPEC), ("spec.yaml", SPEC_YAML)] {
        let (dir, output) = run_case(name, spec, Some(DATA));
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

// ---------------------------------------------------------------- files ---

#[test]
fn spec_file_missing() {
    // The table is there; the spec named on the command line is not.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), DATA).unwrap();
    let output = util::run_in(dir.path(), &["run", "spec.toml", "--out", "out", "--quiet"]);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(&stderr, &["error: spec.toml: cannot read the spec"]);
}

#[test]
fn data_file_missing() {
    let spec = edit(SPEC, r#"table = "data.csv""#, r#"table = "dta.csv""#);
    let (dir, output) = run_toml(&spec, DATA);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(&stderr, &["error: dta.csv: cannot read the data table"]);
}

// -------------------------------------------------------------- columns ---

#[test]
fn target_column_missing_lists_header_and_suggests_near_name() {
    let data = edit(DATA, "x,y\n", "x,yield\n");
    let spec = edit(SPEC, r#"target = "y""#, r#"target = "yeild""#);
    let (dir, output) = run_toml(&spec, &data);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: data.csv: ",
            r#"no column named "yeild""#,
            r#"did you mean "yield"?"#,
            "the header has: x, yield",
        ],
    );
}

#[test]
fn feature_column_missing_lists_header_without_a_far_fetched_hint() {
    let spec = edit(SPEC, r#"features = ["x"]"#, r#"features = ["x", "speed"]"#);
    let (dir, output) = run_toml(&spec, DATA);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: data.csv: ",
            r#"no column named "speed""#,
            "the header has: x, y",
        ],
    );
    assert!(
        !stderr.contains("did you mean"),
        "no header name is close to \"speed\"\nstderr:\n{stderr}"
    );
}

// ---------------------------------------------------------------- cells ---

#[test]
fn non_numeric_cell_names_line_column_and_text() {
    let data = edit(DATA, "3,6.2\n", "abc,6.2\n");
    let (dir, output) = run_toml(SPEC, &data);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            r#"error: data.csv: line 4, column "x": "#,
            r#""abc""#,
            "as a number",
        ],
    );
}

#[test]
fn empty_cell_is_an_error_by_default() {
    let data = edit(DATA, "3,6.2\n", ",6.2\n");
    let (dir, output) = run_toml(SPEC, &data);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            r#"error: data.csv: line 4, column "x": "#,
            "empty",
            r#"missing = "drop-rows""#,
        ],
    );
}

#[test]
fn whitespace_only_cell_counts_as_empty() {
    let data = edit(DATA, "6,12.2\n", "6,   \n");
    let (dir, output) = run_toml(SPEC, &data);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[r#"error: data.csv: line 7, column "y": "#, "empty"],
    );
}

#[test]
fn nan_cell_is_rejected() {
    let data = edit(DATA, "3,6.2\n", "NaN,6.2\n");
    let (dir, output) = run_toml(SPEC, &data);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            r#"error: data.csv: line 4, column "x": "#,
            r#""NaN""#,
            "not a finite number",
        ],
    );
}

#[test]
fn infinite_cell_is_rejected() {
    let data = edit(DATA, "6,12.2\n", "6,-inf\n");
    let (dir, output) = run_toml(SPEC, &data);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            r#"error: data.csv: line 7, column "y": "#,
            r#""-inf""#,
            "not a finite number",
        ],
    );
}

// ---------------------------------------------------------------- table ---

#[test]
fn ragged_rows_name_the_line_and_field_counts() {
    let too_many = edit(DATA, "3,6.2\n", "3,6.2,9\n");
    let (dir, output) = run_toml(SPEC, &too_many);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &["error: data.csv: line 4: ", "has 3 fields", "header has 2"],
    );

    let too_few = edit(DATA, "6,12.2\n", "6\n");
    let (dir, output) = run_toml(SPEC, &too_few);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &["error: data.csv: line 7: ", "has 1 field", "header has 2"],
    );
}

#[test]
fn header_only_table_is_rejected() {
    let (dir, output) = run_toml(SPEC, "x,y\n");
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(&stderr, &["error: data.csv: ", "no rows"]);
}

#[test]
fn completely_empty_file_is_rejected() {
    let (dir, output) = run_toml(SPEC, "");
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(&stderr, &["error: data.csv: ", "empty"]);
}

#[test]
fn constant_feature_is_named_for_each_family_that_needs_spread() {
    let mut data = String::from("x,y\n");
    for i in 1..=10 {
        data.push_str(&format!("5,{}.5\n", i * 2));
    }
    let families = [
        ("polynomial", "family = \"polynomial\"\ndegree = [1, 2]"),
        (
            "nearest-neighbors",
            "family = \"nearest-neighbors\"\nk = [1, 2]",
        ),
    ];
    for (family, candidate) in families {
        let spec = edit(SPEC, "family = \"polynomial\"\ndegree = [1, 2]", candidate);
        let (dir, output) = run_toml(&spec, &data);
        let stderr = bad_input(dir.path(), &output);
        assert_mentions(
            &stderr,
            &[
                "error: data.csv: ",
                r#"column "x" is constant (5)"#,
                &format!("candidate {family} "),
            ],
        );
    }
}

#[test]
fn fewer_rows_than_folds() {
    let spec = edit(SPEC, "folds = 3", "folds = 5");
    let (dir, output) = run_toml(&spec, "x,y\n1,2.5\n2,4.5\n3,6.5\n4,8.5\n");
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(&stderr, &["error: data.csv: ", "4 rows", "5 folds"]);
}

#[test]
fn duplicate_key_value_names_both_lines() {
    let spec = edit(
        SPEC,
        "features = [\"x\"]\n",
        "features = [\"x\"]\nkey = \"id\"\n",
    );
    let data = "id,x,y
m1,1,2.1
m2,2,3.9
m3,3,6.2
m4,4,7.8
m3,5,10.1
m6,6,12.2
m7,7,13.8
m8,8,16.1
";
    let (dir, output) = run_toml(&spec, data);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: data.csv: ",
            r#"key column "id""#,
            r#""m3""#,
            "line 4",
            "line 6",
        ],
    );
}

// ----------------------------------------------------------------- spec ---

#[test]
fn unknown_key_has_line_column_and_suggestion() {
    let spec = edit(SPEC, "folds = 3", "fold = 3");
    let (dir, output) = run_toml(&spec, DATA);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: spec.toml:12:1: ",
            "`fold`",
            "(did you mean `folds`?)",
        ],
    );
}

/// The key `degre` is on line 16; the message points at the start of the
/// candidate array (`[[candidate]]`, line 14) instead. With several candidates
/// it names the first one's header whichever candidate holds the typo.
#[test]
fn unknown_candidate_key_points_at_its_own_line() {
    let spec = edit(SPEC, "degree = [1, 2]", "degre = [1, 2]");
    let (dir, output) = run_toml(&spec, DATA);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: spec.toml:16:1: ",
            "`degre`",
            "(did you mean `degree`?)",
        ],
    );
}

#[test]
fn unknown_family_suggests_the_near_one() {
    let spec = edit(SPEC, r#"family = "polynomial""#, r#"family = "polynomal""#);
    let (dir, output) = run_toml(&spec, DATA);
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: spec.toml:15:10: ",
            "`polynomal`",
            "(did you mean `polynomial`?)",
        ],
    );
}

#[test]
fn invalid_values_name_their_key_and_value() {
    let cases = [
        (
            "degree = [1, 2]",
            "degree = [0]",
            "error: spec.toml: candidate[1] (polynomial).degree: ",
            "degree = 0",
        ),
        (
            "holdout = 0",
            "holdout = 1.5",
            "error: spec.toml: split.holdout: ",
            "1.5",
        ),
        (
            "folds = 3",
            "folds = 1",
            "error: spec.toml: split.folds: ",
            "1 folds",
        ),
    ];
    for (from, to, place, value) in cases {
        let spec = edit(SPEC, from, to);
        let (dir, output) = run_toml(&spec, DATA);
        let stderr = bad_input(dir.path(), &output);
        assert_mentions(&stderr, &[place, value]);
    }
}

#[test]
fn yaml_unknown_key_has_line_column_and_suggestion() {
    let spec = edit(SPEC_YAML, "  features: [x]", "  featurs: [x]");
    let (dir, output) = run_case("spec.yaml", &spec, Some(DATA));
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: spec.yaml:7:3: ",
            "`featurs`",
            "(did you mean `features`?)",
        ],
    );
}

/// Same defect as `unknown_candidate_key_points_at_its_own_line`, in YAML:
/// `degre` is on line 13, the message says line 12 (the list item's start).
#[test]
fn yaml_unknown_candidate_key_points_at_its_own_line() {
    let spec = edit(SPEC_YAML, "    degree: [1, 2]", "    degre: [1, 2]");
    let (dir, output) = run_case("spec.yaml", &spec, Some(DATA));
    let stderr = bad_input(dir.path(), &output);
    assert_mentions(
        &stderr,
        &[
            "error: spec.yaml:13:5: ",
            "`degre`",
            "(did you mean `degree`?)",
        ],
    );
}

// ------------------------------------------------------ positive control ---

#[test]
fn drop_rows_counts_every_row_with_an_empty_cell() {
    let spec = edit(
        SPEC,
        "features = [\"x\"]\n",
        "features = [\"x\"]\nmissing = \"drop-rows\"\n",
    );
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

    let (dir, output) = run_toml(&spec, data);
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
