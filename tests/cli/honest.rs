//! Honest selection (issue 15): the leakage report on a planted leak and on
//! a clean table, `[choose] leakage = "error"`, one look at the test set
//! (`peek`), the test score's interval, paired differences and nested
//! cross-validation through the binary. Tables are invented here.

use std::path::Path;

use crate::util;

/// A smooth invented curve with deterministic wobble as noise.
fn curve(i: usize) -> (f64, f64) {
    let x = (i as f64 * 0.37) % 10.0;
    let noise = ((i * 7919) % 101) as f64 / 101.0 - 0.5;
    (x, (x * 0.8).sin() * 3.0 + x * 0.2 + noise)
}

/// 120 rows in five labelled folds, then 30 copies of rows 1–30 (features
/// and target) placed in the next fold; `leak` is 2·y + 1, a copy of the
/// target.
fn leaky_table() -> String {
    let mut text = String::from("x,leak,y,fold\n");
    let mut rows = Vec::new();
    for i in 0..120 {
        let (x, y) = curve(i);
        rows.push((x, y, i % 5 + 1));
    }
    for i in 0..30 {
        let (x, y, fold) = rows[i];
        rows.push((x, y, fold % 5 + 1));
    }
    for (x, y, fold) in rows {
        text.push_str(&format!("{x},{},{y},{fold}\n", 2.0 * y + 1.0));
    }
    text
}

const LEAKY_SPEC: &str = r#"[experiment]
name = "leaky"
seed = 3

[data]
table = "data.csv"
target = "y"
features = ["x", "leak"]

[split]
holdout = 0
method = "column"
column = "fold"

[[candidate]]
family = "polynomial"
features = ["x"]
degree = [1, 3, 5]
"#;

/// 100 rows of the curve at distinct inputs, no copies.
fn clean_table() -> String {
    let mut text = String::from("x,y\n");
    for i in 0..100 {
        let (x, y) = curve(i);
        text.push_str(&format!("{x},{y}\n"));
    }
    text
}

fn clean_spec(choose: &str) -> String {
    format!(
        r#"[experiment]
name = "clean"
seed = 11

[data]
table = "data.csv"
target = "y"
features = ["x"]

[split]
holdout = 0.2
method = "kfold"
folds = 5
repeats = 2

[[candidate]]
family = "polynomial"
degree = [1, 2, 3, 5, 8]

[[candidate]]
family = "nearest-neighbors"
k = [1, 5, 15]

[choose]
rule = "one-se"
{choose}
"#
    )
}

fn write_case(dir: &Path, spec: &str, table: &str) {
    std::fs::write(dir.join("spec.toml"), spec).unwrap();
    std::fs::write(dir.join("data.csv"), table).unwrap();
}

#[test]
fn a_planted_leak_is_reported_with_its_counts_and_lines() {
    let dir = tempfile::tempdir().unwrap();
    write_case(dir.path(), LEAKY_SPEC, &leaky_table());
    let output = util::run_spec(dir.path(), "run");
    util::assert_success(&output);
    let stderr = util::stderr_of(&output);
    let results = util::read_json(&dir.path().join("out/leaky/results.json"));
    let leakage = &results["leakage"];
    // Each of the 30 copies sits in another fold than its original: 30
    // distinct rows, 60 rows involved, the first five on lines 2–6.
    let folds = &leakage["duplicates_across_folds"];
    assert_eq!(folds["sets"], 30, "{leakage}");
    assert_eq!(folds["rows"], 60);
    assert_eq!(folds["lines"], serde_json::json!([2, 3, 4, 5, 6]));
    assert_eq!(leakage["duplicates_across_test"]["sets"], 0);
    let copies = leakage["target_copies"].as_array().unwrap();
    assert_eq!(copies.len(), 1, "{leakage}");
    assert_eq!(copies[0]["feature"], "leak");
    assert_eq!(copies[0]["same_order"], true);
    assert!(copies[0]["correlation"].as_f64().unwrap() > 0.999);
    assert!(
        stderr.contains("leakage: 60 rows (30 distinct)") && stderr.contains("feature \"leak\""),
        "{stderr}"
    );
    let report = std::fs::read_to_string(dir.path().join("out/leaky/report.md")).unwrap();
    assert!(report.contains("60 rows (30 distinct) repeat another row's features and target"));
}

#[test]
fn leakage_error_stops_with_exit_2_naming_the_rows() {
    let dir = tempfile::tempdir().unwrap();
    let spec = format!("{LEAKY_SPEC}\n[choose]\nleakage = \"error\"\n");
    write_case(dir.path(), &spec, &leaky_table());
    let output = util::run_spec(dir.path(), "run");
    assert_eq!(output.status.code(), Some(2));
    let stderr = util::stderr_of(&output);
    assert!(stderr.contains("data.csv"), "{stderr}");
    assert!(stderr.contains("lines 2, 3, 4, 5, 6, …"), "{stderr}");
    assert!(!dir.path().join("out/leaky/results.json").exists());
}

#[test]
fn a_clean_table_reports_no_leakage_and_scores_only_the_kept_setting_on_test() {
    let dir = tempfile::tempdir().unwrap();
    write_case(dir.path(), &clean_spec(""), &clean_table());
    let output = util::run_spec(dir.path(), "run");
    util::assert_success(&output);
    assert!(!util::stderr_of(&output).contains("leakage"));
    let results = util::read_json(&dir.path().join("out/clean/results.json"));
    let leakage = &results["leakage"];
    for side in ["duplicates_across_folds", "duplicates_across_test"] {
        assert_eq!(leakage[side]["sets"], 0, "{leakage}");
    }
    assert_eq!(leakage["target_copies"], serde_json::json!([]));
    assert!(results.get("peek").is_none());
    for c in results["candidates"].as_array().unwrap() {
        assert!(c.get("test_score").is_none(), "{c}");
    }
    // The interval holds the test score; rows to halve it ≈ 4 × 20.
    let interval = &results["test_interval"];
    let score = results["test_score"].as_f64().unwrap();
    assert_eq!(interval["method"], "t");
    assert!(
        interval["low"].as_f64().unwrap() < score && score < interval["high"].as_f64().unwrap()
    );
    let halve = interval["rows_to_halve"].as_u64().unwrap();
    assert!((60..=80).contains(&halve), "{halve}");
    // Repeated k-fold: the paired table uses the corrected resampled t.
    let paired = &results["paired"];
    assert_eq!(paired["estimator"], "corrected resampled t");
    assert_eq!(paired["folds"], 10);
    let report = std::fs::read_to_string(dir.path().join("out/clean/report.md")).unwrap();
    assert!(report.contains("No leakage found"));
    assert!(report.contains("### Paired differences"));
    assert!(report.contains("Only the kept setting was scored on the locked test set"));
}

#[test]
fn peek_scores_every_setting_and_the_summary_says_so_first() {
    let dir = tempfile::tempdir().unwrap();
    write_case(dir.path(), &clean_spec("peek = true"), &clean_table());
    let output = util::run_in(
        dir.path(),
        &["run", "spec.toml", "--out", "out", "--cache", "cache"],
    );
    util::assert_success(&output);
    let stdout = util::stdout_of(&output);
    assert!(
        stdout
            .lines()
            .next()
            .unwrap()
            .contains("no longer an unbiased estimate"),
        "{stdout}"
    );
    let results = util::read_json(&dir.path().join("out/clean/results.json"));
    assert_eq!(results["peek"], true);
    let kept = util::candidate(&results, results["chosen"].as_str().unwrap());
    assert_eq!(kept["test_score"], results["test_score"]);
    for c in results["candidates"].as_array().unwrap() {
        assert!(c["test_score"].as_f64().is_some(), "{c}");
    }
    let report = std::fs::read_to_string(dir.path().join("out/clean/report.md")).unwrap();
    assert!(report.starts_with("**NOTE: every setting was scored on the locked test set"));
}

#[test]
fn nested_cross_validation_reports_each_outer_fold_and_reruns_warm() {
    let dir = tempfile::tempdir().unwrap();
    write_case(dir.path(), &clean_spec("nested = true"), &clean_table());
    let args = ["run", "spec.toml", "--out", "out", "--cache", "cache"];
    let cold = util::run_in(dir.path(), &args);
    util::assert_success(&cold);
    let (computed, _) = util::fit_counts(&util::stderr_of(&cold));
    // 2 candidates × (10 folds + full) + 5 outer folds × 2 × (10 + 1).
    assert_eq!(computed, 2 * 11 + 5 * 2 * 11);
    let results = util::read_json(&dir.path().join("out/clean/results.json"));
    let nested = &results["nested"];
    assert_eq!(nested["outer_folds"], 5);
    let scores: Vec<f64> = nested["scores"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(scores.len(), 5);
    assert_eq!(nested["chosen"].as_array().unwrap().len(), 5);
    let mean = scores.iter().sum::<f64>() / 5.0;
    assert!((nested["mean"].as_f64().unwrap() - mean).abs() < 1e-12);
    let kept_cv = util::candidate(&results, results["chosen"].as_str().unwrap())["cv_score"]
        .as_f64()
        .unwrap();
    assert_eq!(nested["kept_cv_score"].as_f64().unwrap(), kept_cv);
    assert!((nested["optimism"].as_f64().unwrap() - (mean - kept_cv)).abs() < 1e-12);
    let first = std::fs::read(dir.path().join("out/clean/results.json")).unwrap();

    let warm = util::run_in(dir.path(), &args);
    util::assert_success(&warm);
    assert_eq!(
        util::fit_counts(&util::stderr_of(&warm)).0,
        0,
        "a warm rerun refits nothing"
    );
    let second = std::fs::read(dir.path().join("out/clean/results.json")).unwrap();
    assert_eq!(first, second);
    let verify = util::run_in(
        dir.path(),
        &["verify", "spec.toml", "--out", "out", "--cache", "cache"],
    );
    util::assert_success(&verify);
    let report = std::fs::read_to_string(dir.path().join("out/clean/report.md")).unwrap();
    assert!(report.contains("**Nested cross-validation.**"));
}

#[test]
fn nested_needs_kfold() {
    let dir = tempfile::tempdir().unwrap();
    let spec = format!("{LEAKY_SPEC}\n[choose]\nnested = true\n");
    write_case(dir.path(), &spec, &leaky_table());
    let output = util::run_spec(dir.path(), "run");
    assert_eq!(output.status.code(), Some(2));
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("choose.nested") && stderr.contains("kfold"),
        "{stderr}"
    );
}
