//! Ordered (time) splits: forward chaining over a time column. Every fold
//! fits only on rows earlier than the ones it scores, the latest rows are the
//! locked test set, the first block is never validated on, and the spec
//! errors that guard the method name the key at fault.

use std::collections::BTreeMap;
use std::path::Path;

use crate::util;

/// 40 invented daily readings, written in a shuffled file order (day =
/// 17·row mod 40 + 1) so that time order is not file order.
fn table() -> String {
    let mut text = String::from("day,load,temp\n");
    for row in 0..40 {
        let day = (17 * row) % 40 + 1;
        let temp = 10.0 - 0.2 * day as f64 + ((row * 7) % 5) as f64 * 0.3;
        let load = 30.0 - 1.5 * temp + ((row * 3) % 4) as f64 * 0.25;
        text.push_str(&format!("{day},{load:.3},{temp:.2}\n"));
    }
    text
}

const SPEC: &str = r#"[experiment]
name = "ordered"
seed = 5

[data]
table = "data.csv"
target = "load"
features = ["temp"]
order = "day"

[split]
holdout = 0.15
method = "ordered"
folds = 4

[[candidate]]
family = "polynomial"
degree = [1, 2, 3]
"#;

fn write_case(dir: &Path, spec: &str) {
    std::fs::write(dir.join("spec.toml"), spec).unwrap();
    std::fs::write(dir.join("data.csv"), table()).unwrap();
}

#[test]
fn folds_chain_forward_in_time_and_the_run_verifies() {
    let dir = tempfile::tempdir().unwrap();
    write_case(dir.path(), SPEC);
    let folds = util::run_in(dir.path(), &["folds", "spec.toml"]);
    util::assert_success(&folds);

    // Day of each data row (row numbers count data rows from 1).
    let days: Vec<usize> = table()
        .lines()
        .skip(1)
        .map(|line| line.split(',').next().unwrap().parse().unwrap())
        .collect();
    let mut days_of: BTreeMap<String, Vec<usize>> = BTreeMap::new();
    for line in util::stdout_of(&folds).lines().skip(1) {
        let fields: Vec<&str> = line.split(',').collect();
        let row: usize = fields[0].parse().unwrap();
        days_of
            .entry(fields[2].to_string())
            .or_default()
            .push(days[row - 1]);
    }
    for days in days_of.values_mut() {
        days.sort_unstable();
    }
    // round(0.15 × 40) = 6: the six latest days are locked away.
    assert_eq!(days_of["test"], (35..=40).collect::<Vec<_>>());
    // 34 days in 5 blocks of ⌊5s/34⌋: days 1–7, 8–14, 15–21, 22–28, 29–34.
    assert_eq!(days_of["train-only"], (1..=7).collect::<Vec<_>>());
    assert_eq!(days_of["1"], (8..=14).collect::<Vec<_>>());
    assert_eq!(days_of["4"], (29..=34).collect::<Vec<_>>());

    let run = util::run_in(dir.path(), &["run", "spec.toml", "--out", "out", "--quiet"]);
    util::assert_success(&run);
    let results = util::read_json(&dir.path().join("out/ordered/results.json"));
    assert_eq!(results["split"]["method"], "ordered");
    assert_eq!(results["data"]["order"], "day");
    assert_eq!(results["split"]["folds"], 4);
    // Validation rows per fold: 7, 7, 7 and 6.
    assert_eq!(results["split"]["fold_rows"], serde_json::json!([6, 7]));
    let report = std::fs::read_to_string(dir.path().join("out/ordered/report.md")).unwrap();
    assert!(
        report.contains("forward-chaining cross-validation in order of")
            && report.contains("the latest by day, later than every row the choice saw")
            && report.contains("no random choices, so no seed is used"),
        "the report names the method and the test set:\n{report}"
    );
    let verify = util::run_in(dir.path(), &["verify", "spec.toml", "--quiet"]);
    util::assert_success(&verify);
}

/// Runs the spec with `from` replaced by `to`; asserts exit 2 and that
/// stderr names every part.
fn assert_refused(from: &str, to: &str, parts: &[&str]) {
    assert_eq!(SPEC.matches(from).count(), 1, "{from:?}");
    let dir = tempfile::tempdir().unwrap();
    write_case(dir.path(), &SPEC.replacen(from, to, 1));
    let output = util::run_in(dir.path(), &["run", "spec.toml", "--out", "out", "--quiet"]);
    let stderr = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(2), "stderr:\n{stderr}");
    for part in parts {
        assert!(
            stderr.contains(part),
            "stderr should name {part:?}:\n{stderr}"
        );
    }
}

#[test]
fn an_order_column_without_the_ordered_method_is_refused() {
    assert_refused(
        r#"method = "ordered""#,
        r#"method = "kfold""#,
        &["data.order", r#"only used with [split] method = "ordered""#],
    );
}

#[test]
fn the_ordered_method_without_an_order_column_is_refused() {
    assert_refused(
        "order = \"day\"\n",
        "",
        &[
            "split.method",
            r#"needs `order = "<time column>"` in [data]"#,
        ],
    );
}

#[test]
fn groups_with_the_ordered_method_are_refused() {
    assert_refused(
        "order = \"day\"\n",
        "order = \"day\"\ngroup = \"day\"\n",
        &[
            "data.group",
            r#"cannot be combined with method = "ordered""#,
        ],
    );
}

#[test]
fn repeats_of_an_ordered_split_are_refused() {
    assert_refused(
        "folds = 4\n",
        "folds = 4\nrepeats = 2\n",
        &["split.repeats", "no randomness to repeat"],
    );
}

#[test]
fn more_folds_than_time_points_allow_is_refused() {
    assert_refused(
        "folds = 4\n",
        "folds = 39\n",
        &[
            "data.csv",
            "34 distinct time points",
            "40 consecutive blocks",
        ],
    );
}

#[test]
fn a_simulation_cannot_use_ordered_splits() {
    let dir = tempfile::tempdir().unwrap();
    let spec = r#"[experiment]
name = "sim-ordered"
seed = 5

[simulate]
truth = "1 + 2*x"
inputs = { x = { uniform = [0, 1] } }
noise_sd = 0.1
train_size = 30
replicates = 3
test_points = 10

[split]
method = "ordered"
folds = 3

[[candidate]]
family = "linear"
"#;
    std::fs::write(dir.path().join("spec.toml"), spec).unwrap();
    let output = util::run_in(dir.path(), &["run", "spec.toml", "--out", "out", "--quiet"]);
    let stderr = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(2), "stderr:\n{stderr}");
    assert!(
        stderr.contains("split.method") && stderr.contains("a simulation has none"),
        "{stderr}"
    );
}
