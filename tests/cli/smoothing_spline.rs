//! The `smoothing-spline` family through the binary: a df grid, 5-fold
//! cross-validation on a small invented table, ids and effective df in
//! `results.json`.

use std::fmt::Write as _;
use std::path::Path;

use crate::util;

/// An invented table: 48 rows, x irregular in [0, 12), y a smooth curve plus
/// a deterministic wiggle standing in for noise (no random generator needed).
fn write_table(dir: &Path) {
    let mut csv = String::from("hours,output\n");
    for i in 0..48u32 {
        let k = f64::from(i);
        let x = (k * 0.25 + 0.37 * libm::sin(k * 1.7).abs()).min(11.99);
        let y = 4.0 + 0.6 * x - 0.05 * x * x + 0.8 * libm::sin(0.9 * x) + 0.15 * libm::cos(k * 2.3);
        writeln!(csv, "{x:?},{y:?}").unwrap();
    }
    std::fs::write(dir.join("table.csv"), csv).unwrap();
}

const SPEC: &str = r#"[experiment]
name = "spline-df"
seed = 424242

[data]
table = "table.csv"
target = "output"
features = ["hours"]

[split]
holdout = 0
method = "kfold"
folds = 5

[[candidate]]
family = "smoothing-spline"
df = [2.5, 4, 8]

[choose]
metric = "mse"
rule = "lowest"
"#;

#[test]
fn df_grid_runs_and_reports_the_requested_df() {
    let dir = tempfile::tempdir().expect("cannot create a temporary directory");
    write_table(dir.path());
    std::fs::write(dir.path().join("spec.toml"), SPEC).unwrap();
    let results = util::run_results(dir.path(), "spline-df");
    let candidates = results["candidates"].as_array().expect("candidates array");
    let ids: Vec<&str> = candidates
        .iter()
        .map(|c| c["id"].as_str().unwrap())
        .collect();
    assert_eq!(
        ids,
        [
            "smoothing-spline/df=2.5",
            "smoothing-spline/df=4",
            "smoothing-spline/df=8"
        ]
    );
    for (candidate, df) in candidates.iter().zip([2.5, 4.0, 8.0]) {
        // The df grid is met by root finding on the penalty (to 1e-11
        // relative in the code); 1e-6 here is the brief's tolerance.
        let reported = candidate["effective_df"].as_f64().unwrap();
        assert!(
            (reported - df).abs() <= 1e-6,
            "{}: effective_df {reported}",
            candidate["id"]
        );
        let folds = candidate["fold_scores"].as_array().unwrap();
        assert_eq!(folds.len(), 5);
        assert!(folds.iter().all(|s| s.as_f64().is_some_and(f64::is_finite)));
        assert_eq!(candidate["setting"]["df"].as_f64(), Some(df));
    }
    // Recomputing without the cache reproduces every number bit for bit
    // (docs/architecture.md, "Determinism": fixed-order arithmetic, no
    // platform maths).
    util::assert_success(&util::run_spec(dir.path(), "verify"));
    // Training error falls as the fit gets more flexible (common practice).
    let train: Vec<f64> = candidates
        .iter()
        .map(|c| c["train_score"].as_f64().unwrap())
        .collect();
    assert!(train[0] > train[1] && train[1] > train[2], "{train:?}");
}

#[test]
fn df_above_the_distinct_values_is_set_aside_naming_the_setting() {
    let dir = tempfile::tempdir().expect("cannot create a temporary directory");
    write_table(dir.path());
    std::fs::write(
        dir.path().join("spec.toml"),
        SPEC.replace("[2.5, 4, 8]", "[4, 60]"),
    )
    .unwrap();
    // df = 60 is infeasible (docs/spec.md, "Infeasible settings"); df = 4 is kept.
    let output = util::run_spec(dir.path(), "run");
    util::assert_success(&output);
    let results = util::read_json(&dir.path().join("out/spline-df/results.json"));
    let high = util::candidate(&results, "smoothing-spline/df=60");
    assert!(high["cv_score"].is_null());
    let reason = high["infeasible"][0]["reason"].as_str().unwrap();
    assert!(reason.contains("df=60"), "{reason}");
    assert!(reason.contains("distinct values"), "{reason}");
    assert_eq!(results["chosen"], "smoothing-spline/df=4");
    // With no feasible df left, the run stops naming the setting.
    std::fs::write(
        dir.path().join("spec.toml"),
        SPEC.replace("[2.5, 4, 8]", "[60]"),
    )
    .unwrap();
    let output = util::run_spec(dir.path(), "run");
    let stderr = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("df=60"), "{stderr}");
    assert!(stderr.contains("distinct values"), "{stderr}");
}
