//! Cross-validation scores against an outside reference.
//!
//! Runs `tests/fixtures/cv_reference/spec.toml` (five fixed folds from the
//! data's `fold` column) and compares every fold score and training score
//! with `expected.json`. Reference: numpy 2.4.6 `Polynomial.fit` and
//! scikit-learn 1.9.1 (`StandardScaler` + `KNeighborsRegressor`,
//! `LinearRegression`); fixture made by
//! `tests/fixtures/cv_reference/make_fixture.py`, which also checks each value
//! against exact rational arithmetic to 1e-12 relative.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::util;

/// Relative tolerance for every comparison in this module.
const TOL: f64 = 1e-9;

/// Folds declared in `data.csv` (labels 1..5).
const FOLDS: usize = 5;

fn fixture_dir() -> PathBuf {
    util::crate_root()
        .join("tests")
        .join("fixtures")
        .join("cv_reference")
}

/// Relative error of `computed` against `expected`; absolute when `expected`
/// is 0 (the 1-nearest-neighbour training score).
fn rel_err(computed: f64, expected: f64) -> f64 {
    if expected == 0.0 {
        computed.abs()
    } else {
        (computed - expected).abs() / expected.abs()
    }
}

fn assert_close(what: &str, computed: f64, expected: f64) {
    let err = rel_err(computed, expected);
    // `err <= TOL` is false for NaN, so a NaN fails too.
    assert!(
        err <= TOL,
        "{what}: heldout gave {computed:e}, reference {expected:e} (relative error {err:e} > {TOL:e})"
    );
}

fn as_f64(value: &Value, what: &str) -> f64 {
    value
        .as_f64()
        .unwrap_or_else(|| panic!("{what} is not a number: {value}"))
}

fn f64_array(value: &Value, what: &str) -> Vec<f64> {
    value
        .as_array()
        .unwrap_or_else(|| panic!("{what} is not an array: {value}"))
        .iter()
        .enumerate()
        .map(|(i, v)| as_f64(v, &format!("{what}[{i}]")))
        .collect()
}

/// Copies the spec and its table into a fresh directory, runs it there
/// ([`util::run_results`]) and returns `results.json`.
fn run_fixture(dir: &Path) -> Value {
    for name in ["spec.toml", "data.csv"] {
        std::fs::copy(fixture_dir().join(name), dir.join(name))
            .unwrap_or_else(|e| panic!("cannot copy {name}: {e}"));
    }
    util::run_results(dir, "cv-reference")
}

fn expected_candidates() -> serde_json::Map<String, Value> {
    let expected = util::read_json(&fixture_dir().join("expected.json"));
    expected["candidates"]
        .as_object()
        .expect("expected.json: \"candidates\" is not an object")
        .clone()
}

#[test]
fn fold_and_train_scores_match_reference() {
    let dir = tempfile::tempdir().expect("cannot create a temporary directory");
    let results = run_fixture(dir.path());
    let expected = expected_candidates();

    let got_count = results["candidates"].as_array().map_or(0, Vec::len);
    assert_eq!(
        got_count,
        expected.len(),
        "results.json should hold exactly the candidates of spec.toml"
    );

    for (id, want) in &expected {
        let got = util::candidate(&results, id);
        let got_folds = f64_array(&got["fold_scores"], &format!("{id} fold_scores"));
        let want_folds = f64_array(&want["fold_scores"], &format!("expected {id} fold_scores"));
        assert_eq!(got_folds.len(), FOLDS, "{id}: number of fold scores");
        for (f, (&g, &w)) in got_folds.iter().zip(&want_folds).enumerate() {
            // reference: numpy 2.4.6 / scikit-learn 1.9.1, fixture made by
            // tests/fixtures/cv_reference/make_fixture.py (expected.json)
            assert_close(&format!("{id} fold {} score", f + 1), g, w);
        }
        let got_train = as_f64(&got["train_score"], &format!("{id} train_score"));
        let want_train = as_f64(&want["train_score"], &format!("expected {id} train_score"));
        // reference: numpy 2.4.6 / scikit-learn 1.9.1, fixture made by
        // tests/fixtures/cv_reference/make_fixture.py (expected.json)
        assert_close(&format!("{id} train_score"), got_train, want_train);
    }
}

#[test]
fn cv_score_and_standard_error_follow_fold_scores() {
    let dir = tempfile::tempdir().expect("cannot create a temporary directory");
    let results = run_fixture(dir.path());

    for (id, want) in &expected_candidates() {
        let got = util::candidate(&results, id);
        let folds = f64_array(&want["fold_scores"], &format!("expected {id} fold_scores"));
        let n = folds.len() as f64;
        let mean = folds.iter().sum::<f64>() / n;
        let var = folds.iter().map(|s| (s - mean).powi(2)).sum::<f64>() / (n - 1.0);
        let se = var.sqrt() / n.sqrt();

        // reference: mean of the fold scores in expected.json (numpy 2.4.6 /
        // scikit-learn 1.9.1, made by tests/fixtures/cv_reference/make_fixture.py);
        // all five folds hold 12 rows, so a row-weighted mean is the same number
        let got_cv = as_f64(&got["cv_score"], &format!("{id} cv_score"));
        assert_close(&format!("{id} cv_score"), got_cv, mean);

        // reference: common practice, standard error of the CV estimate =
        // sample standard deviation (ddof = 1) of the fold scores / sqrt(folds),
        // applied to the fold scores in expected.json
        let got_se = as_f64(&got["cv_se"], &format!("{id} cv_se"));
        assert_close(&format!("{id} cv_se"), got_se, se);
    }
}
