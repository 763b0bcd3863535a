//! Ridge and lasso against scikit-learn on an invented dataset.
//!
//! Reference: `tests/fixtures/ridge_lasso/expected.json`, made by
//! `tests/fixtures/ridge_lasso/make_fixture.py` with numpy 2.4.6 and
//! scikit-learn 1.9.1 (`StandardScaler`, then `LinearRegression` for ridge
//! penalty 0, `Ridge(alpha=λ)`, `Lasso(alpha=λ, tol=1e-14, max_iter=10**6)`);
//! the script also checks those library values against exact rational
//! solutions. Data: `tests/fixtures/ridge_lasso/data.csv` (60 `train` rows
//! fitted, 20 `eval` rows predicted).

use std::path::PathBuf;

use nalgebra::DMatrix;
use serde_json::Value;

use super::lasso::{Lasso, LassoProblem};
use super::linear::Linear;
use super::registry::{FamilyDef, KeyValue};
use super::ridge::{Ridge, RidgePath};
use super::standardise::{centre, Standardiser};
use super::{Family, SettingFit};

/// Ridge against scikit-learn, relative (brief: 1e-8).
const RIDGE_TOL: f64 = 1e-8;
/// Lasso against scikit-learn, relative (brief: 1e-6).
const LASSO_TOL: f64 = 1e-6;

/// The fixture's rows, split into its training and evaluation parts.
pub(crate) struct Fixture {
    pub(crate) features: Vec<String>,
    pub(crate) x_train: DMatrix<f64>,
    pub(crate) y_train: Vec<f64>,
    pub(crate) x_eval: DMatrix<f64>,
    pub(crate) expected: Value,
}

impl Fixture {
    /// Fits `family`'s grid on the training rows, predicting the evaluation rows.
    pub(crate) fn fit(&self, family: &dyn Family, final_fit: bool) -> Vec<SettingFit> {
        family
            .fit_path(&self.x_train, &self.y_train, &self.x_eval, final_fit)
            .expect("the family fits the fixture")
    }

    /// Least squares with an intercept on every feature (the `linear` family),
    /// which ridge and lasso reach at penalty 0.
    pub(crate) fn least_squares(&self, final_fit: bool) -> SettingFit {
        let linear = Linear {
            features: self.features.clone(),
            intercept: true,
        };
        self.fit(&linear, final_fit).remove(0)
    }
}

fn fixture_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("fixtures")
        .join("ridge_lasso")
}

/// Reads `data.csv` and `expected.json` of the fixture.
pub(crate) fn load() -> Fixture {
    let dir = fixture_dir();
    let expected: Value = serde_json::from_str(
        &std::fs::read_to_string(dir.join("expected.json")).expect("fixture expected.json"),
    )
    .expect("expected.json is JSON");
    let features: Vec<String> = expected["features"]
        .as_array()
        .expect("features")
        .iter()
        .map(|f| f.as_str().expect("feature name").to_string())
        .collect();
    let target = expected["target"].as_str().expect("target");
    let mut reader = csv::Reader::from_path(dir.join("data.csv")).expect("fixture data.csv");
    let header = reader.headers().expect("header").clone();
    let column = |name: &str| header.iter().position(|h| h == name).expect(name);
    let feature_columns: Vec<usize> = features.iter().map(|f| column(f)).collect();
    let (target_column, part_column) = (column(target), column("part"));
    let (mut train, mut eval, mut y_train) = (Vec::new(), Vec::new(), Vec::new());
    for record in reader.records() {
        let record = record.expect("data.csv record");
        let number = |c: usize| record[c].parse::<f64>().expect("number");
        let row: Vec<f64> = feature_columns.iter().map(|&c| number(c)).collect();
        if &record[part_column] == "train" {
            train.push(row);
            y_train.push(number(target_column));
        } else {
            eval.push(row);
        }
    }
    let matrix =
        |rows: &[Vec<f64>]| DMatrix::from_fn(rows.len(), features.len(), |i, j| rows[i][j]);
    Fixture {
        x_train: matrix(&train),
        x_eval: matrix(&eval),
        features,
        y_train,
        expected,
    }
}

pub(crate) fn numbers(value: &Value) -> Vec<f64> {
    value
        .as_array()
        .expect("array")
        .iter()
        .map(|v| v.as_f64().expect("number"))
        .collect()
}

/// The penalties of one family's fits in the fixture, in file order.
pub(crate) fn penalties(fixture: &Fixture, family: &str) -> Vec<f64> {
    fixture.expected[family]
        .as_array()
        .expect("fits")
        .iter()
        .map(|fit| fit["penalty"].as_f64().expect("penalty"))
        .collect()
}

/// Largest elementwise relative error; an expected 0 must be computed as
/// exactly 0 (lasso zeros are exact in both programs), else the error is ∞.
fn worst_relative(what: &str, computed: &[f64], expected: &[f64]) -> f64 {
    assert_eq!(computed.len(), expected.len(), "{what}: length");
    computed
        .iter()
        .zip(expected)
        .map(|(&c, &e)| {
            if e == 0.0 {
                if c == 0.0 {
                    0.0
                } else {
                    f64::INFINITY
                }
            } else {
                (c - e).abs() / e.abs()
            }
        })
        .fold(0.0, f64::max)
}

/// Compares one family's fits (coefficients on both scales, intercept, eval
/// predictions) with the fixture; returns the worst relative error seen.
fn compare(
    family: &str,
    fixture: &Fixture,
    fits: &[SettingFit],
    standardised: &[Vec<f64>],
    tolerance: f64,
) -> f64 {
    let expected = fixture.expected[family].as_array().expect("fits");
    assert_eq!(fits.len(), expected.len(), "{family}: number of fits");
    let mut worst = 0.0_f64;
    for ((fit, beta), want) in fits.iter().zip(standardised).zip(expected) {
        let penalty = want["penalty"].as_f64().expect("penalty");
        let raw: Vec<f64> = fit
            .coefficients
            .as_ref()
            .expect("final fit has coefficients")
            .iter()
            .map(|(_, v)| *v)
            .collect();
        let checks = [
            (
                "standardised coefficients",
                beta.clone(),
                numbers(&want["standardised_coefficients"]),
            ),
            ("raw coefficients", raw, numbers(&want["raw_coefficients"])),
            (
                "eval predictions",
                fit.eval_pred.clone(),
                numbers(&want["eval_predictions"]),
            ),
        ];
        for (what, computed, reference) in checks {
            let err = worst_relative(what, &computed, &reference);
            // reference: scikit-learn 1.9.1 via tests/fixtures/ridge_lasso/make_fixture.py
            assert!(
                err <= tolerance,
                "{family} penalty={penalty} {what}: relative error {err:e} > {tolerance:e}\n\
                 heldout   {computed:?}\nreference {reference:?}"
            );
            worst = worst.max(err);
        }
    }
    worst
}

#[test]
fn ridge_matches_scikit_learn() {
    let fixture = load();
    let penalties = penalties(&fixture, "ridge");
    let ridge = Ridge {
        features: fixture.features.clone(),
        penalties: penalties.clone(),
    };
    let fits = fixture.fit(&ridge, true);
    let path = RidgePath::new(&fixture.x_train, &fixture.y_train).expect("factorised");
    let standardised: Vec<Vec<f64>> = penalties.iter().map(|&l| path.coefficients(l)).collect();
    let worst = compare("ridge", &fixture, &fits, &standardised, RIDGE_TOL);
    println!("ridge vs scikit-learn: worst relative error {worst:e}");
}

#[test]
fn lasso_matches_scikit_learn() {
    let fixture = load();
    let penalties = penalties(&fixture, "lasso");
    let lasso = Lasso {
        features: fixture.features.clone(),
        penalties: penalties.clone(),
    };
    let fits = fixture.fit(&lasso, true);
    let (_, y_centred) = centre(&fixture.y_train);
    let standardiser = Standardiser::fit(&fixture.x_train);
    let problem = LassoProblem::new(&standardiser, &fixture.x_train, &y_centred);
    let standardised = problem.path(&penalties).expect("lasso path");
    let worst = compare("lasso", &fixture, &fits, &standardised, LASSO_TOL);
    println!("lasso vs scikit-learn: worst relative error {worst:e}");

    // reference: λ_max written by make_fixture.py (max |Z_j'(y − ȳ)|/n, exact arithmetic)
    let lambda_max = fixture.expected["lasso_lambda_max"]
        .as_f64()
        .expect("λ_max");
    let err = (problem.lambda_max() - lambda_max).abs() / lambda_max;
    assert!(
        err <= 1e-12,
        "λ_max {} vs {lambda_max}",
        problem.lambda_max()
    );
}

/// Invariant (docs/architecture.md, "A whole grid per fit"): the fixture's
/// penalty grid of a penalised family, bound through its registry entry and
/// fitted at once, equals one fit per penalty, to `tolerance` relative.
pub(crate) fn assert_path_equals_separate_fits(def: &'static FamilyDef, tolerance: f64) {
    let f = load();
    let penalties = penalties(&f, def.name);
    let with = |grid: Vec<f64>| {
        let settings = def.settings(&[("penalty", KeyValue::Reals(grid))]).unwrap();
        def.bind(&settings, f.features.clone()).unwrap()
    };
    crate::models::test_support::assert_grid_equals_separate_fits(
        with(penalties.clone()).as_ref(),
        |s| with(vec![penalties[s]]),
        &f.x_train,
        &f.y_train,
        &f.x_eval,
        tolerance,
    );
}
