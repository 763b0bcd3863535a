//! `missing = "impute"` inside each task: the medians are those of the
//! task's training rows (scikit-learn's `SimpleImputer`, from the fixture),
//! and nothing a validation row holds reaches its own fold's fit.

use std::path::PathBuf;

use super::{task_data, Task, TaskRows};
use crate::plan::{self, ExperimentPlan};

fn fixture_plan() -> ExperimentPlan {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/impute");
    let spec = crate::spec::load(&dir.join("spec.toml")).expect("the fixture spec loads");
    plan::resolve(spec).expect("the fixture resolves")
}

fn read_expected() -> serde_json::Value {
    let path =
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/impute/expected.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The value each fold fills into a missing cell of column `j`: read off a
/// validation row whose cell is missing.
fn filled_value(plan: &ExperimentPlan, fold: usize, j: usize) -> f64 {
    let feature = &plan.candidates[0].features[j];
    let column = plan.table.column(feature);
    let valid = &plan.assignment.folds[fold].valid;
    let at = valid
        .iter()
        .position(|&r| column[r].is_nan())
        .expect("the fixture has a missing cell of each feature in every fold");
    let data = task_data(
        plan,
        Task {
            candidate: 0,
            rows: TaskRows::Fold(fold),
        },
    );
    data.x_eval[(at, j)]
}

#[test]
fn fold_medians_equal_scikit_learns_simple_imputer() {
    let plan = fixture_plan();
    let expected = read_expected();
    let folds = expected["folds"].as_array().unwrap();
    assert_eq!(plan.assignment.folds.len(), folds.len());
    for (f, want) in folds.iter().enumerate() {
        assert_eq!(plan.assignment.folds[f].label, want["label"].to_string());
        for j in 0..2 {
            // reference: scikit-learn 1.9.1 SimpleImputer(strategy="median",
            // add_indicator=True).statistics_ on the fold's training rows
            // (tests/fixtures/impute/expected.json)
            let median = want["medians"][j].as_f64().unwrap();
            assert_eq!(
                filled_value(&plan, f, j),
                median,
                "fold {} column {j}",
                f + 1
            );
        }
    }
    // Indicator columns: 1 exactly where the cell was missing.
    let features = &plan.candidates[0].features;
    assert_eq!(features[2], "missing(sun_h)");
    let sun = plan.table.column("sun_h");
    let indicator = plan.table.column("missing(sun_h)");
    for (v, i) in sun.iter().zip(indicator) {
        assert_eq!(*i, if v.is_nan() { 1.0 } else { 0.0 });
    }
}

#[test]
fn a_validation_row_changes_nothing_fitted_in_its_own_fold() {
    let fresh = fixture_plan();
    let mut plan = fixture_plan();
    let fold = 1;
    let task = Task {
        candidate: 0,
        rows: TaskRows::Fold(fold),
    };
    let before = task_data(&plan, task);
    let fills: Vec<f64> = (0..2).map(|j| filled_value(&plan, fold, j)).collect();
    let valid = plan.assignment.folds[fold].valid.clone();
    // Rewrite every feature value of the fold's validation rows: missing
    // cells get huge values, present ones become missing.
    for name in ["sun_h", "leaf_m2"] {
        let column = plan.table.numeric.get_mut(name).unwrap();
        for &r in &valid {
            column[r] = if column[r].is_nan() { 1e9 } else { f64::NAN };
        }
    }
    let after = task_data(&plan, task);
    // The training design, imputed cells included, is the same bit for bit.
    assert_eq!(before.x_train, after.x_train);
    assert_eq!(before.y_train, after.y_train);
    // Cells of the validation rows that are missing now get the very
    // medians the fold used before.
    for (j, &fill) in fills.iter().enumerate() {
        let column = plan.table.column(&plan.candidates[0].features[j]);
        let mut checked = 0;
        for (i, &r) in valid.iter().enumerate() {
            if column[r].is_nan() {
                assert_eq!(after.x_eval[(i, j)], fill, "column {j} row {r}");
                checked += 1;
            }
        }
        assert!(checked > 0);
    }
    // The same rewrite does move another fold's training design, which holds
    // these rows: the comparison above could fail.
    let other = Task {
        candidate: 0,
        rows: TaskRows::Fold(0),
    };
    assert_ne!(
        task_data(&plan, other).x_train,
        task_data(&fresh, other).x_train
    );
}
