//! Categorical features and interactions as a user meets them: the
//! `data.categorical` section of results.json and the report, the cache
//! keys, and every refusal (exit 2, naming the spec key or the cell).
//!
//! The numbers themselves are checked against scikit-learn 1.9.1
//! `OneHotEncoder` + `LinearRegression` / `Ridge` in
//! `src/plan/encode/encode_tests.rs` (tests/fixtures/categorical).

use std::path::{Path, PathBuf};

use crate::util;

fn fixture_dir() -> PathBuf {
    util::crate_root().join("tests/fixtures/categorical")
}

fn copy_fixture(dir: &Path) -> (String, String) {
    let spec = std::fs::read_to_string(fixture_dir().join("spec.toml")).unwrap();
    let table = std::fs::read_to_string(fixture_dir().join("data.csv")).unwrap();
    std::fs::write(dir.join("spec.toml"), &spec).unwrap();
    std::fs::write(dir.join("data.csv"), &table).unwrap();
    (spec, table)
}

fn run_args() -> [&'static str; 6] {
    ["run", "spec.toml", "--out", "out", "--cache", "cache"]
}

#[test]
fn results_and_report_state_levels_references_and_unseen_rows() {
    let dir = tempfile::tempdir().unwrap();
    copy_fixture(dir.path());
    let results = util::run_results(dir.path(), "categorical-reference");
    let columns = results["data"]["categorical"].as_array().unwrap();
    let names: Vec<&str> = columns
        .iter()
        .map(|c| c["column"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["shop", "weekday"]);
    let shop = &columns[0];
    assert_eq!(
        shop["levels"],
        serde_json::json!(["bridge", "market", "mill", "quay"])
    );
    // "quay" lies in fold 3 only (tests/fixtures/categorical/make_fixture.py).
    assert_eq!(shop["unseen_per_fold"], serde_json::json!([0, 0, 4, 0]));
    assert_eq!(shop["unseen_test"], 0);
    // By hand from data.csv: bridge and market have 22 rows each, the most;
    // the tie goes to the first in byte order.
    assert_eq!(shop["reference"], "bridge");
    let report =
        std::fs::read_to_string(dir.path().join("out/categorical-reference/report.md")).unwrap();
    assert!(
        report.contains("shop: 4 levels (bridge, market, mill, quay), reference bridge"),
        "{report}"
    );
    assert!(report.contains("0, 0, 4, 0 per fold"), "{report}");
}

#[test]
fn a_renamed_level_or_a_pooling_option_refits_and_nothing_else_does() {
    let dir = tempfile::tempdir().unwrap();
    let (spec, table) = copy_fixture(dir.path());
    util::assert_success(&util::run_in(dir.path(), &run_args()));
    let warm = util::run_in(dir.path(), &run_args());
    assert_eq!(util::fit_counts(&util::stderr_of(&warm)).0, 0);
    // Renaming a level keeps every code ("mill" -> "mills" sorts the same)
    // but renames columns: every candidate refits (4 candidates, each on 4
    // folds and all rows).
    std::fs::write(
        dir.path().join("data.csv"),
        table.replace(",mill,", ",mills,"),
    )
    .unwrap();
    let renamed = util::run_in(dir.path(), &run_args());
    util::assert_success(&renamed);
    assert_eq!(util::fit_counts(&util::stderr_of(&renamed)).0, 4 * 5);
    std::fs::write(
        dir.path().join("spec.toml"),
        spec.replace("features = [", "min_level_rows = 5\nfeatures = ["),
    )
    .unwrap();
    let pooled = util::run_in(dir.path(), &run_args());
    util::assert_success(&pooled);
    assert_eq!(util::fit_counts(&util::stderr_of(&pooled)).0, 4 * 5);
    let results = util::read_json(&dir.path().join("out/categorical-reference/results.json"));
    // "Sun" has 3 rows (make_fixture.py), fewer than 5 in any training set.
    let weekday = &results["data"]["categorical"][1];
    assert_eq!(weekday["column"], "weekday");
    assert_eq!(weekday["pooled"], serde_json::json!(["Sun"]));
}

/// Runs the fixture with `edit` applied to its spec; it must exit 2 with a
/// message holding every one of `wanted`.
fn refused(edit: impl Fn(&str) -> String, table_edit: impl Fn(&str) -> String, wanted: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let (spec, table) = copy_fixture(dir.path());
    std::fs::write(dir.path().join("spec.toml"), edit(&spec)).unwrap();
    std::fs::write(dir.path().join("data.csv"), table_edit(&table)).unwrap();
    let output = util::run_spec(dir.path(), "run");
    let stderr = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    for want in wanted {
        assert!(stderr.contains(want), "wanted {want:?} in:\n{stderr}");
    }
}

fn same(text: &str) -> String {
    text.to_string()
}

#[test]
fn families_of_numeric_features_refuse_a_categorical_one() {
    refused(
        |spec| {
            format!(
                "{spec}\n[[candidate]]\nfamily = \"smoothing-spline\"\nfeatures = [\"shop\"]\ndf = [3]\n"
            )
        },
        same,
        &[
            "spec.toml",
            "candidate[5] (smoothing-spline).features",
            "column \"shop\" is categorical",
        ],
    );
    refused(
        |spec| format!("{spec}\n[[candidate]]\nfamily = \"spline\"\ndf = [4]\n"),
        same,
        &[
            "candidate[5] (spline).features",
            "column \"weekday\" is categorical",
        ],
    );
}

/// A degree grid takes a categorical feature: the indicators enter once
/// (was refused, since powers of a 0/1 column repeat it). The numbers are
/// checked against scikit-learn in `src/plan/encode/degree_tests.rs`.
#[test]
fn degree_grids_take_a_categorical_feature_once() {
    let dir = tempfile::tempdir().unwrap();
    let (spec, _) = copy_fixture(dir.path());
    std::fs::write(
        dir.path().join("spec.toml"),
        format!("{spec}\n[[candidate]]\nfamily = \"polynomial\"\ndegree = [1, 2, 3]\n"),
    )
    .unwrap();
    let results = util::run_results(dir.path(), "categorical-reference");
    let scored: Vec<(&str, bool)> = results["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["family"] == "polynomial")
        .map(|c| (c["id"].as_str().unwrap(), c["cv_score"].is_f64()))
        .collect();
    assert_eq!(
        scored,
        [
            ("polynomial/degree=1", true),
            ("polynomial/degree=2", true),
            ("polynomial/degree=3", true)
        ]
    );
}

#[test]
fn interactions_are_checked_by_name_family_and_kind() {
    refused(
        |spec| spec.replace("[[\"temp_c\", \"shop\"]]", "[[\"temp_c\", \"rain\"]]"),
        same,
        &[
            "candidate[3] (linear).interactions[1]",
            "\"rain\" is not among the candidate's features",
        ],
    );
    refused(
        |spec| spec.replace("[[\"temp_c\", \"shop\"]]", "[[\"weekday\", \"shop\"]]"),
        same,
        &[
            "candidate[3] (linear).interactions[1]",
            "\"weekday\" and \"shop\" are both categorical",
        ],
    );
    refused(
        |spec| {
            format!(
                "{spec}\n[[candidate]]\nfamily = \"nearest-neighbors\"\nk = [3]\ninteractions = [[\"temp_c\", \"shop\"]]\n"
            )
        },
        same,
        &[
            "candidate[5] (nearest-neighbors).interactions",
            "not linear-type",
        ],
    );
}

#[test]
fn a_stray_word_in_a_numeric_column_stays_an_error_at_its_cell() {
    // One word among numbers is a mistake in the table, not a category.
    refused(
        same,
        |table| {
            // Line 2's temperature (the second cell) becomes a word.
            let mut lines: Vec<String> = table.lines().map(str::to_string).collect();
            let mut cells: Vec<&str> = lines[1].split(',').collect();
            cells[1] = "seven";
            lines[1] = cells.join(",");
            lines.join("\n") + "\n"
        },
        &["data.csv: line 2, column \"temp_c\": cannot read \"seven\" as a number"],
    );
    // A missing label is an error unless `missing` says otherwise.
    refused(
        same,
        |table| table.replacen(",bridge,", ",NA,", 1),
        &[
            "column \"shop\"",
            "missing-value marker",
            "missing = \"impute\"",
        ],
    );
}

#[test]
fn predict_refuses_a_level_the_kept_fit_never_saw() {
    let dir = tempfile::tempdir().unwrap();
    copy_fixture(dir.path());
    util::assert_success(&util::run_in(dir.path(), &run_args()));
    let predict = |table: &str| {
        std::fs::write(dir.path().join("new.csv"), table).unwrap();
        util::run_in(
            dir.path(),
            &[
                "predict",
                "spec.toml",
                "--table",
                "new.csv",
                "--cache",
                "cache",
                "--quiet",
            ],
        )
    };
    let known = predict("temp_c,weekday,shop\n10.0,Mon,bridge\n12.5,Sun,quay\n");
    util::assert_success(&known);
    let stdout = util::stdout_of(&known);
    let rows: Vec<&str> = stdout.lines().filter(|l| !l.starts_with('#')).collect();
    assert_eq!(rows.len(), 3, "{stdout}");
    assert!(rows[0].starts_with("row,predicted_loaves"), "{stdout}");
    let unknown = predict("temp_c,weekday,shop\n10.0,Mon,bridge\n12.5,Sun,harbour\n");
    assert_eq!(unknown.status.code(), Some(2));
    let stderr = util::stderr_of(&unknown);
    assert!(
        stderr.contains("new.csv: line 3, column \"shop\": level \"harbour\" never occurs"),
        "{stderr}"
    );
}

#[test]
fn predict_gives_the_final_fits_test_predictions_to_the_bit() {
    // The fixture with a locked test set, every fourth temperature missing
    // (imputed) and the interaction of temperature and shop: new rows equal
    // to the test rows get the report's test predictions, bit for bit.
    let dir = tempfile::tempdir().unwrap();
    let (_, table) = copy_fixture(dir.path());
    let mut lines: Vec<String> = table.lines().map(str::to_string).collect();
    for (i, line) in lines.iter_mut().enumerate().skip(1) {
        if i % 4 == 2 {
            let mut cells: Vec<&str> = line.split(',').collect();
            cells[1] = "";
            *line = cells.join(",");
        }
    }
    let table = lines.join("\n") + "\n";
    std::fs::write(dir.path().join("data.csv"), &table).unwrap();
    std::fs::write(dir.path().join("new.csv"), &table).unwrap();
    std::fs::write(
        dir.path().join("spec.toml"),
        "[experiment]\nname = \"held\"\nseed = 5\n\n[data]\ntable = \"data.csv\"\n\
         target = \"loaves\"\nfeatures = [\"temp_c\", \"weekday\", \"shop\"]\nkey = \"day\"\n\
         missing = \"impute\"\n\n[split]\nholdout = 0.25\nmethod = \"kfold\"\nfolds = 4\n\n\
         [[candidate]]\nfamily = \"linear\"\ninteractions = [[\"temp_c\", \"shop\"]]\n\n\
         [choose]\nmetric = \"mse\"\nrule = \"lowest\"\n",
    )
    .unwrap();
    let results = util::run_results(dir.path(), "held");
    let test = &results["final"]["predictions"]["test"];
    let predicted = util::run_in(
        dir.path(),
        &[
            "predict",
            "spec.toml",
            "--table",
            "new.csv",
            "--cache",
            "cache",
            "--quiet",
        ],
    );
    util::assert_success(&predicted);
    let stdout = util::stdout_of(&predicted);
    let by_day: std::collections::BTreeMap<String, f64> = stdout
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| {
            let (day, value) = l.split_once(',').unwrap();
            (day.to_string(), value.parse().unwrap())
        })
        .collect();
    let folds = util::run_in(dir.path(), &["folds", "spec.toml"]);
    let mut test_days: Vec<u64> = util::stdout_of(&folds)
        .lines()
        .filter(|l| l.ends_with(",1,test"))
        .map(|l| l.split(',').nth(1).unwrap().parse().unwrap())
        .collect();
    test_days.sort_unstable();
    let want = test["predicted"].as_array().unwrap();
    assert_eq!(want.len(), test_days.len());
    assert_eq!(want.len(), 16);
    for (day, want) in test_days.iter().zip(want) {
        let got = by_day[&day.to_string()];
        assert_eq!(got.to_bits(), want.as_f64().unwrap().to_bits(), "day {day}");
    }
}
