//! Ridge on badly scaled, nearly collinear features against a numpy
//! reference checked by exact rational arithmetic.
//!
//! Reference: `tests/fixtures/ridge_scaled/expected.json`, made by
//! `tests/fixtures/ridge_scaled/make_fixture.py` with numpy 2.4.6 (thin SVD
//! of the standardised training rows; every solution checked against the
//! exact rational solution of the normal equations to 1e-11, and the exact
//! one written as the reference). Data: `tests/fixtures/ridge_scaled/data.csv`,
//! four features of scales 10⁻³, 10⁶ (with unit spread), 1 (with 10⁻⁶ spread)
//! and 10³, two of them correlated 0.9999: the Gram matrix of the
//! standardised rows has condition number 2.4·10⁴, so `RidgePath` refines
//! its small penalties (see `ridge`, "Accuracy").

use std::path::PathBuf;

use nalgebra::DMatrix;
use serde_json::Value;

use super::penalised_reference::numbers;
use super::ridge::{Ridge, RidgePath};
use super::Family;

/// Agreement required with the exact solution, relative to the largest
/// |value| of each vector.
const TOLERANCE: f64 = 1e-12;

fn fixture() -> (DMatrix<f64>, Vec<f64>, DMatrix<f64>, Value) {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/ridge_scaled");
    let expected: Value = serde_json::from_str(
        &std::fs::read_to_string(dir.join("expected.json")).expect("expected.json"),
    )
    .expect("expected.json is JSON");
    let mut reader = csv::Reader::from_path(dir.join("data.csv")).expect("data.csv");
    let (mut train, mut eval, mut y) = (Vec::new(), Vec::new(), Vec::new());
    for record in reader.records() {
        let record = record.expect("record");
        let values: Vec<f64> = (0..5).map(|c| record[c].parse().expect("number")).collect();
        if &record[5] == "train" {
            train.push(values[..4].to_vec());
            y.push(values[4]);
        } else {
            eval.push(values[..4].to_vec());
        }
    }
    let matrix = |rows: &[Vec<f64>]| DMatrix::from_fn(rows.len(), 4, |i, j| rows[i][j]);
    (matrix(&train), y, matrix(&eval), expected)
}

/// max |computed − expected| / max |expected|.
fn worst(computed: &[f64], expected: &[f64]) -> f64 {
    assert_eq!(computed.len(), expected.len());
    let scale = expected.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    computed
        .iter()
        .zip(expected)
        .map(|(c, e)| (c - e).abs() / scale)
        .fold(0.0, f64::max)
}

#[test]
fn badly_scaled_features_match_the_exact_solution() {
    let (x_train, y_train, x_eval, expected) = fixture();
    let fits_expected = expected["ridge"].as_array().expect("ridge fits");
    let penalties: Vec<f64> = fits_expected
        .iter()
        .map(|f| f["penalty"].as_f64().expect("penalty"))
        .collect();
    let ridge = Ridge {
        features: (0..4).map(|j| format!("x{j}")).collect(),
        penalties: penalties.clone(),
    };
    let fits = ridge.fit_path(&x_train, &y_train, &x_eval, false).unwrap();
    let path = RidgePath::new(&x_train, &y_train).unwrap();
    let mut largest = 0.0_f64;
    for ((fit, want), &penalty) in fits.iter().zip(fits_expected).zip(&penalties) {
        let beta = path.coefficients(penalty);
        let numpy = numbers(&want["numpy_svd_coefficients"]);
        let exact = numbers(&want["standardised_coefficients"]);
        // The reference itself: numpy's SVD agrees with the exact solution.
        assert!(worst(&numpy, &exact) <= 1e-11, "numpy at penalty {penalty}");
        let checks = [
            ("coefficients", worst(&beta, &exact)),
            (
                "eval predictions",
                worst(&fit.eval_pred, &numbers(&want["eval_predictions"])),
            ),
        ];
        for (what, error) in checks {
            // reference: tests/fixtures/ridge_scaled/make_fixture.py (numpy 2.4.6, exact check)
            assert!(error <= TOLERANCE, "penalty {penalty} {what}: {error:e}");
            largest = largest.max(error);
        }
        assert_eq!(fit.effective_df, path.effective_df(penalty));
    }
    println!("ridge on badly scaled features: worst relative error {largest:e}");
}
