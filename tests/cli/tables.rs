//! Real tables: other delimiters and decimal commas, missing-value markers,
//! and `missing = "impute"` against scikit-learn.
//!
//! Reference for imputation: scikit-learn 1.9.1
//! `SimpleImputer(strategy="median", add_indicator=True)` fitted on each
//! training fold, then `LinearRegression` or `StandardScaler` + `Ridge`
//! (numpy 2.4.6 recheck); fixture made by
//! `tests/fixtures/impute/make_fixture.py` (`expected.json`).

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::util;

/// Relative tolerance against the scikit-learn fold scores.
const TOL: f64 = 1e-8;

fn fixture_dir() -> PathBuf {
    util::crate_root()
        .join("tests")
        .join("fixtures")
        .join("impute")
}

fn copy_fixture(dir: &Path) {
    for name in ["spec.toml", "data.csv"] {
        std::fs::copy(fixture_dir().join(name), dir.join(name))
            .unwrap_or_else(|e| panic!("cannot copy {name}: {e}"));
    }
}

fn fold_scores(results: &Value, id: &str) -> Vec<f64> {
    util::candidate(results, id)["fold_scores"]
        .as_array()
        .unwrap_or_else(|| panic!("{id}: no fold_scores"))
        .iter()
        .map(|v| v.as_f64().expect("a fold score"))
        .collect()
}

#[test]
fn imputed_fold_scores_match_scikit_learn() {
    let dir = tempfile::tempdir().unwrap();
    copy_fixture(dir.path());
    let results = util::run_results(dir.path(), "impute-reference");
    let expected = util::read_json(&fixture_dir().join("expected.json"));
    let candidates = expected["candidates"].as_object().unwrap();
    assert_eq!(candidates.len(), 4);
    for (id, want) in candidates {
        let got = fold_scores(&results, id);
        let want: Vec<f64> = want
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        assert_eq!(got.len(), want.len(), "{id}: fold count");
        for (f, (g, w)) in got.iter().zip(&want).enumerate() {
            // reference: scikit-learn 1.9.1 SimpleImputer(median, add_indicator)
            // + LinearRegression / StandardScaler + Ridge per training fold
            // (tests/fixtures/impute/expected.json)
            let err = (g - w).abs() / w.abs();
            assert!(err <= TOL, "{id} fold {}: {g:e} against {w:e}", f + 1);
        }
    }
    // Each candidate is bound to the indicator columns too; the polynomial
    // takes them once (2 + 2 squares + 2 indicators + intercept).
    for id in ["linear", "polynomial/degree=2"] {
        assert_eq!(
            util::candidate(&results, id)["features"],
            serde_json::json!(["sun_h", "leaf_m2", "missing(sun_h)", "missing(leaf_m2)"])
        );
    }
    assert_eq!(
        util::candidate(&results, "polynomial/degree=2")["effective_df"],
        7.0
    );
    // The report's facts: per column, the count and what was done.
    assert_eq!(
        results["data"]["missing"],
        serde_json::json!([
            {"column": "leaf_m2", "cells": 8, "handling": "impute"},
            {"column": "sun_h", "cells": 8, "handling": "impute"}
        ])
    );
    let report =
        std::fs::read_to_string(dir.path().join("out/impute-reference/report.md")).unwrap();
    assert!(
        report.contains("sun\\_h: 8, filled with the median of each fit's training rows"),
        "{report}"
    );
}

/// The fixture's table rewritten with semicolons, decimal commas and other
/// markers gives the same numbers to the bit.
#[test]
fn semicolons_and_decimal_commas_read_the_same_numbers() {
    let plain = tempfile::tempdir().unwrap();
    copy_fixture(plain.path());
    let base = util::run_results(plain.path(), "impute-reference");

    let other = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(fixture_dir().join("data.csv")).unwrap();
    let rewritten: String = text
        .lines()
        .map(|line| {
            let cells: Vec<String> = line
                .split(',')
                .map(|c| match c {
                    "NA" => "null".to_string(),
                    "" => "N/A".to_string(),
                    c => c.replace('.', ","),
                })
                .collect();
            cells.join(";") + "\n"
        })
        .collect();
    std::fs::write(other.path().join("data.csv"), rewritten).unwrap();
    let spec = std::fs::read_to_string(fixture_dir().join("spec.toml"))
        .unwrap()
        .replace(
            "missing = \"impute\"",
            "missing = \"impute\"\ndelimiter = \";\"\ndecimal = \",\"",
        );
    std::fs::write(other.path().join("spec.toml"), spec).unwrap();
    let again = util::run_results(other.path(), "impute-reference");
    for id in ["linear", "ridge/penalty=0.5", "ridge/penalty=5"] {
        assert_eq!(fold_scores(&base, id), fold_scores(&again, id), "{id}");
    }
    // The digest is of the file's bytes, so it differs.
    assert_ne!(base["data"]["digest"], again["data"]["digest"]);
}

/// `heldout new` on a bakery-like invented table with a row number, a
/// column computed from the target, "NA" cells and semicolons: the spec
/// leaves the first two out with their reasons, imputes, and runs.
#[test]
fn the_scaffold_leaves_out_row_numbers_and_leaks_imputes_and_runs() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("id;outdoor_c;rain_mm;sales;sales_k\n");
    for i in 0..40u32 {
        let outdoor = f64::from((i * 7) % 23) - 3.0;
        let rain = f64::from((i * 5) % 11);
        let sales = 400.0 - 6.0 * outdoor + 2.5 * rain + f64::from((i * 13) % 17);
        let outdoor_cell = if i % 9 == 4 {
            "NA".to_string()
        } else {
            format!("{outdoor:.1}").replace('.', ",")
        };
        text.push_str(&format!(
            "{i};{outdoor_cell};{};{};{}\n",
            format!("{rain:.1}").replace('.', ","),
            format!("{sales:.1}").replace('.', ","),
            format!("{:.4}", sales / 1000.0).replace('.', ",")
        ));
    }
    std::fs::write(dir.path().join("bakery.csv"), text).unwrap();
    let output = util::heldout()
        .current_dir(dir.path())
        .args([
            "new",
            "--table",
            "bakery.csv",
            "--target",
            "sales",
            "--output",
            "spec.toml",
        ])
        .output()
        .unwrap();
    util::assert_success(&output);
    let spec = std::fs::read_to_string(dir.path().join("spec.toml")).unwrap();
    assert!(
        spec.contains("features = [\"outdoor_c\", \"rain_mm\"]\n"),
        "{spec}"
    );
    assert!(spec.contains("key = \"id\"\n"), "{spec}");
    assert!(
        spec.contains("sales_k (the target is almost exactly a function of it"),
        "{spec}"
    );
    assert!(spec.contains("delimiter = \";\"\n"), "{spec}");
    assert!(spec.contains("decimal = \",\"\n"), "{spec}");
    assert!(spec.contains("missing = \"impute\"\n"), "{spec}");
    let results = util::run_results(dir.path(), "bakery");
    assert_eq!(results["data"]["missing"][0]["column"], "outdoor_c");
    assert_eq!(results["data"]["missing"][0]["handling"], "impute");
}

/// A logistic degree grid under `missing = "impute"` takes the indicator of
/// a feature's missing cells once: raised to powers, a standardised 0/1
/// column repeats itself (z² is a line in z), which made every degree above
/// 1 rank-deficient.
#[test]
fn a_logistic_degree_grid_takes_imputed_indicators_once() {
    let dir = tempfile::tempdir().unwrap();
    // Invented: valves that stick (label) by supply temperature and flow,
    // temperature missing on every ninth row; deterministic, no generator.
    let mut table = String::from("temp_c,flow,valve\n");
    for i in 0..160u32 {
        let temp = 14.0 + f64::from((i * 37) % 23) * 0.7;
        let flow = 1.0 + f64::from((i * 11) % 17) * 0.25;
        let score = 0.45 * (temp - 21.0) + 1.3 * (flow - 3.0) + f64::from((i * 7) % 5) - 2.0;
        let label = if score > 0.0 { "sticks" } else { "moves" };
        let cell = if i % 9 == 4 {
            String::new()
        } else {
            format!("{temp:.1}")
        };
        table.push_str(&format!("{cell},{flow:.2},{label}\n"));
    }
    std::fs::write(dir.path().join("valves.csv"), table).unwrap();
    std::fs::write(
        dir.path().join("spec.toml"),
        "[experiment]\nname = \"valves\"\nseed = 3\n\n[data]\ntable = \"valves.csv\"\n\
         target = \"valve\"\nfeatures = [\"temp_c\", \"flow\"]\nmissing = \"impute\"\n\n\
         [split]\nfolds = 4\nholdout = 0\n\n[[candidate]]\nfamily = \"logistic\"\n\
         degree = [1, 2, 3]\n",
    )
    .unwrap();
    let results = util::run_results(dir.path(), "valves");
    for (degree, columns) in [(1, 4.0), (2, 6.0), (3, 8.0)] {
        let id = format!("logistic/degree={degree}");
        let candidate = util::candidate(&results, &id);
        // intercept + 2 features × degree powers + 1 indicator, once.
        assert_eq!(candidate["effective_df"], columns, "{id}");
        assert!(
            candidate["cv_score"].as_f64().is_some(),
            "{id}: {candidate}"
        );
    }
}
