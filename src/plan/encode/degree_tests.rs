//! Categorical features in degree grids (`polynomial`, `logistic`): the
//! indicators and interaction columns enter once, only the numeric feature
//! is raised to powers. Checked against scikit-learn
//! (tests/fixtures/categorical-degree: `OneHotEncoder(drop=<the fold's most
//! frequent level>, handle_unknown="ignore")` beside
//! `PolynomialFeatures(include_bias=False)` of the numeric feature, then
//! `LinearRegression`, or `LogisticRegression` without a penalty).

use std::path::PathBuf;

use super::unseen_rows;
use crate::execute::{run_all, CachePolicy};
use crate::metrics::ClassPrediction;
use crate::plan::{self, ExperimentPlan};

fn fixture_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/categorical-degree")
}

fn fixture_plan(spec: &str) -> ExperimentPlan {
    let spec = crate::spec::load(&fixture_dir().join(spec)).expect("the fixture spec loads");
    plan::resolve(spec).expect("the fixture resolves")
}

fn expected() -> serde_json::Value {
    let text = std::fs::read_to_string(fixture_dir().join("expected.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

const NO_CACHE: CachePolicy<'static> = CachePolicy {
    read: None,
    write: None,
};

fn relative(got: f64, want: f64) -> f64 {
    (got - want).abs() / want.abs()
}

/// The largest relative difference of each fold's validation MSE and of
/// each out-of-fold prediction from scikit-learn's, over every setting.
#[test]
fn polynomial_folds_equal_scikit_learns_powers_beside_indicators() {
    let plan = fixture_plan("spec.toml");
    let expected = expected();
    let (fits, _) = run_all(&plan, NO_CACHE, &|_| {}).expect("the fixture fits");
    let (mut worst_score, mut worst_prediction, mut compared) = (0.0f64, 0.0f64, 0);
    for (c, candidate) in plan.candidates.iter().enumerate() {
        for (s, setting) in candidate.settings.iter().enumerate() {
            let id = candidate.id(setting);
            // reference: scikit-learn 1.9.1 (tests/fixtures/categorical-degree,
            // make_fixture.py), rechecked there against exact rational
            // least squares to 1e-9
            let want = expected["predictions"][&id]
                .as_array()
                .unwrap_or_else(|| panic!("expected.json has no predictions of {id}"));
            for (f, fold) in plan.assignment.folds.iter().enumerate() {
                let got = &fits[c].fold_predictions[f][s];
                let mut squares = 0.0;
                for (i, &row) in fold.valid.iter().enumerate() {
                    let reference = want[row].as_f64().unwrap();
                    let error = relative(got[i], reference);
                    assert!(
                        error <= 1e-8,
                        "{id}, fold {}, row {}: heldout {}, scikit-learn {reference} ({error:e})",
                        fold.label,
                        row + 1,
                        got[i]
                    );
                    worst_prediction = worst_prediction.max(error);
                    squares += (plan.target[row] - got[i]).powi(2);
                }
                let mse = squares / fold.valid.len() as f64;
                let reference = expected["folds"][f]["scores"][&id].as_f64().unwrap();
                let error = relative(mse, reference);
                assert!(
                    error <= 1e-8,
                    "{id}, fold {}: MSE {mse}, scikit-learn {reference} ({error:e})",
                    fold.label
                );
                worst_score = worst_score.max(error);
                compared += 1;
            }
        }
    }
    // Seven settings (degrees 1..4, and 1..3 with the interaction), four folds.
    assert_eq!(compared, 7 * 4);
    eprintln!(
        "largest relative difference: fold MSE {worst_score:e}, prediction {worst_prediction:e}"
    );
}

/// The fit on all rows: every raw-unit coefficient (named as scikit-learn's
/// columns are named in the fixture) and every fitted value.
#[test]
fn polynomial_kept_fit_has_scikit_learns_coefficients_and_fitted_values() {
    let plan = fixture_plan("spec.toml");
    let expected = expected();
    let rows = plan.assignment.train.clone();
    assert_eq!(rows.len(), 72, "no test rows in the fixture");
    let mut worst = 0.0f64;
    for candidate in &plan.candidates {
        let x = plan.design(candidate, &rows);
        let fits = candidate
            .family
            .fit_path(&x, &plan.target_of(&rows), &x, true)
            .expect("the fit on all rows");
        for (setting, fit) in candidate.settings.iter().zip(&fits) {
            let id = candidate.id(setting);
            // reference: scikit-learn 1.9.1 LinearRegression on all rows
            // (expected.json "final")
            let want = &expected["final"][&id];
            let coefficients = fit
                .coefficients
                .as_ref()
                .expect("a final fit's coefficients");
            let reference = want["coefficients"].as_object().unwrap();
            assert_eq!(
                coefficients.len(),
                reference.len(),
                "{id}: {coefficients:?}"
            );
            for (name, value) in coefficients {
                let target = reference[name]
                    .as_f64()
                    .unwrap_or_else(|| panic!("{id}: {name}"));
                let error = relative(*value, target);
                assert!(
                    error <= 1e-8,
                    "{id} {name}: {value} vs {target} ({error:e})"
                );
                worst = worst.max(error);
            }
            // Raw columns count once each: the intercept, the powers, the
            // indicators (and interactions).
            assert_eq!(fit.effective_df, reference.len() as f64, "{id}");
            for (i, &row) in rows.iter().enumerate() {
                let target = want["fitted"][row].as_f64().unwrap();
                let error = relative(fit.train_pred[i], target);
                assert!(error <= 1e-8, "{id} row {}: {error:e}", row + 1);
                worst = worst.max(error);
            }
        }
    }
    eprintln!("largest relative difference, fit on all rows: {worst:e}");
}

#[test]
fn logistic_fold_log_loss_equals_scikit_learns() {
    let plan = fixture_plan("spec-logistic.toml");
    let expected = expected();
    let (fits, _) = run_all(&plan, NO_CACHE, &|_| {}).expect("the fixture fits");
    let layout = ClassPrediction { classes: 2 };
    let candidate = &plan.candidates[0];
    let mut worst = 0.0f64;
    for (s, setting) in candidate.settings.iter().enumerate() {
        let id = candidate.id(setting);
        for (f, fold) in plan.assignment.folds.iter().enumerate() {
            let predicted = &fits[0].fold_predictions[f][s];
            let loss: f64 = fold
                .valid
                .iter()
                .enumerate()
                .map(|(i, &row)| {
                    -layout.probabilities(predicted, i)[plan.target[row] as usize].ln()
                })
                .sum::<f64>()
                / fold.valid.len() as f64;
            // reference: scikit-learn 1.9.1 LogisticRegression(C=inf,
            // solver="newton-cholesky", tol=1e-12), sklearn.metrics.log_loss
            let reference = expected["folds"][f]["scores"][&id].as_f64().unwrap();
            let error = relative(loss, reference);
            assert!(
                error <= 1e-6,
                "{id}, fold {}: log-loss {loss}, scikit-learn {reference} ({error:e})",
                fold.label
            );
            worst = worst.max(error);
        }
    }
    assert_eq!(candidate.settings.len(), 3);
    eprintln!("largest relative difference, fold log-loss: {worst:e}");
}

#[test]
fn the_fixture_folds_have_its_references_and_unseen_shop() {
    let plan = fixture_plan("spec.toml");
    let expected = expected();
    for (f, want) in expected["folds"].as_array().unwrap().iter().enumerate() {
        let train = plan.assignment.fold_train(f);
        let valid = &plan.assignment.folds[f].valid;
        // reference: make_fixture.py's count of validation rows whose shop
        // the fold's training rows never hold
        assert_eq!(
            unseen_rows(&plan.table, "shop", &train, valid),
            want["unseen"].as_u64().unwrap() as usize,
            "fold {}",
            f + 1
        );
    }
    assert_eq!(expected["folds"][2]["unseen"], 6);
}

/// A part of an encoded candidate's grid (what the executor refits when a
/// setting fails) is rebuilt through the encoding: its fits equal the
/// whole grid's at the same settings.
#[test]
fn a_narrowed_grid_is_fitted_on_the_encoded_columns() {
    let plan = fixture_plan("spec.toml");
    let candidate = &plan.candidates[1]; // poly-slopes, degrees 1..3
    let train = plan.assignment.fold_train(0);
    let valid = &plan.assignment.folds[0].valid;
    let (x_train, y_train, x_valid) = (
        plan.design(candidate, &train),
        plan.target_of(&train),
        plan.design(candidate, valid),
    );
    let whole = candidate
        .family
        .fit_path(&x_train, &y_train, &x_valid, false)
        .unwrap();
    let part = crate::execute::feasible::restricted(candidate, &[0, 2]).unwrap();
    assert_eq!(
        part.settings(),
        [candidate.settings[0], candidate.settings[2]]
    );
    let fits = part.fit_path(&x_train, &y_train, &x_valid, false).unwrap();
    assert_eq!(fits[0].eval_pred, whole[0].eval_pred);
    assert_eq!(fits[1].eval_pred, whole[2].eval_pred);
}

/// Before fitting, an encoded polynomial asks its numeric feature for
/// degree + 1 distinct values, never its level codes or indicators.
#[test]
fn feasibility_counts_the_numeric_features_values_only() {
    let plan = fixture_plan("spec.toml");
    let candidate = &plan.candidates[0]; // polynomial, degrees 1..4
                                         // 12 rows: sun_h takes 3 values, the shop 2 levels (codes 0 and 1).
    let x = nalgebra::DMatrix::from_fn(12, 2, |i, j| match j {
        0 => [1.5, 4.0, 9.5][i % 3],
        _ => (i % 2) as f64,
    });
    let shape = crate::models::TrainingShape::new(&x, false);
    let why: Vec<Option<String>> = (0..4)
        .map(|s| candidate.family.infeasible(s, &shape))
        .collect();
    assert_eq!(why[..2], [None, None], "{why:?}");
    for reason in &why[2..] {
        let reason = reason
            .as_deref()
            .expect("degrees 3 and 4 need 4 and 5 values");
        assert!(reason.contains("feature \"sun_h\""), "{reason}");
    }
}
