//! `missing = "impute"` with `[intervals]`: the fold fits behind the CV+
//! intervals fill missing feature cells with their own training rows'
//! medians, as the fold tasks do (docs/intervals.md), and `predict` fills a
//! new row's missing cells the same way, so the locked test rows, gaps
//! included, get the report's predictions and intervals to the bit.

use std::path::Path;

use crate::util;

/// An invented table: y = 3 + 2·x1 − x2 + a deterministic wobble; every
/// seventh x1 cell and every eleventh x2 cell is empty.
fn write_table(dir: &Path) -> Vec<String> {
    let mut lines = vec!["id,x1,x2,y".to_string()];
    for i in 0..140_u32 {
        let x1 = f64::from((i * 29) % 97) / 10.0;
        let x2 = f64::from((i * 41) % 83) / 20.0;
        let y = 3.0 + 2.0 * x1 - x2 + 0.8 * (f64::from(i) * 2.3).sin();
        let cell = |v: f64, gap: bool| if gap { String::new() } else { v.to_string() };
        lines.push(format!(
            "r{i},{},{},{y}",
            cell(x1, i % 7 == 3),
            cell(x2, i % 11 == 5)
        ));
    }
    std::fs::write(dir.join("table.csv"), lines.join("\n") + "\n").unwrap();
    lines
}

const SPEC: &str = r#"[experiment]
name = "gaps"
seed = 5

[data]
table = "table.csv"
target = "y"
features = ["x1", "x2"]
key = "id"
missing = "impute"

[split]
holdout = 0.25
method = "kfold"
folds = 5

[[candidate]]
family = "linear"

[choose]
metric = "mse"
rule = "lowest"

[intervals]
level = 0.9

[report]
formats = ["markdown"]
"#;

#[test]
fn imputed_gaps_get_the_reports_intervals_in_predict() {
    let dir = tempfile::tempdir().unwrap();
    let lines = write_table(dir.path());
    std::fs::write(dir.path().join("spec.toml"), SPEC).unwrap();
    util::assert_success(&util::run_in(dir.path(), &["run", "--quiet", "spec.toml"]));
    let results = util::read_json(&dir.path().join("out/gaps/results.json"));
    let intervals = &results["intervals"]["test"];
    let numbers = |v: &serde_json::Value| -> Vec<f64> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    let (lower, upper) = (numbers(&intervals["lower"]), numbers(&intervals["upper"]));
    let predicted = numbers(&results["final"]["predictions"]["test"]["predicted"]);
    // Coverage in a sane range for 35 rows at level 0.9 (Wilson bounds).
    let coverage = intervals["coverage"].as_f64().unwrap();
    assert!(coverage > 0.6, "{coverage}");

    let output = util::run_in(dir.path(), &["folds", "spec.toml"]);
    util::assert_success(&output);
    let mut test: Vec<usize> = util::stdout_of(&output)
        .lines()
        .skip(1)
        .filter(|line| line.ends_with(",1,test"))
        .map(|line| line.split(',').next().unwrap().parse().unwrap())
        .collect();
    test.sort_unstable();
    assert_eq!(test.len(), predicted.len());
    let gaps = test.iter().filter(|&&r| lines[r].contains(",,")).count();
    assert!(gaps >= 3, "the test rows hold gaps: {gaps}");

    let mut new = format!("{}\n", lines[0]);
    for &row in &test {
        new.push_str(&lines[row]);
        new.push('\n');
    }
    std::fs::write(dir.path().join("new.csv"), new).unwrap();
    let output = util::run_in(dir.path(), &["predict", "spec.toml", "--table", "new.csv"]);
    util::assert_success(&output);
    let stdout = util::stdout_of(&output);
    let body: Vec<&str> = stdout.lines().filter(|l| !l.starts_with('#')).collect();
    assert_eq!(body[0], "id,predicted_y,lower_y,upper_y");
    assert_eq!(body.len(), test.len() + 1);
    for (i, line) in body[1..].iter().enumerate() {
        let fields: Vec<f64> = line
            .split(',')
            .skip(1)
            .map(|v| v.parse().unwrap())
            .collect();
        for (got, want) in fields.iter().zip([predicted[i], lower[i], upper[i]]) {
            assert_eq!(got.to_bits(), want.to_bits(), "{line}: {got} vs {want}");
        }
        assert!(lower[i] < predicted[i] && predicted[i] < upper[i], "{line}");
    }
}
