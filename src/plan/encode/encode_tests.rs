//! Categorical features and interactions inside each fit, against
//! scikit-learn (tests/fixtures/categorical: `OneHotEncoder(drop=<the fold's
//! most frequent level>, handle_unknown="ignore")` with `LinearRegression`
//! and `StandardScaler` + `Ridge`), and the proof that a validation row's own
//! values change nothing encoded in its fold.

use std::path::PathBuf;

use super::unseen_rows;
use crate::data::encode::LevelEncoding;
use crate::execute::{run_all, CachePolicy};
use crate::plan::{self, ExperimentPlan};

fn fixture_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/categorical")
}

fn fixture_plan() -> ExperimentPlan {
    let spec = crate::spec::load(&fixture_dir().join("spec.toml")).expect("the fixture spec loads");
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

#[test]
fn text_columns_are_read_as_sorted_levels() {
    let plan = fixture_plan();
    assert_eq!(
        plan.table.levels["shop"],
        ["bridge", "market", "mill", "quay"]
    );
    assert_eq!(
        plan.table.levels["weekday"],
        ["Fri", "Mon", "Sat", "Sun", "Thu", "Tue", "Wed"]
    );
    assert!(!plan.table.levels.contains_key("temp_c"));
}

#[test]
fn fold_predictions_equal_scikit_learns_one_hot_fits() {
    let plan = fixture_plan();
    let expected = expected();
    let (fits, _) = run_all(&plan, NO_CACHE, &|_| {}).expect("the fixture fits");
    let mut compared = 0;
    for (c, candidate) in plan.candidates.iter().enumerate() {
        for (s, setting) in candidate.settings.iter().enumerate() {
            let id = candidate.id(setting);
            // reference: scikit-learn 1.9.1 out-of-fold predictions
            // (tests/fixtures/categorical/expected.json, make_fixture.py)
            let want = expected["predictions"][&id]
                .as_array()
                .unwrap_or_else(|| panic!("expected.json has no predictions of {id}"));
            for (f, fold) in plan.assignment.folds.iter().enumerate() {
                for (i, &row) in fold.valid.iter().enumerate() {
                    let got = fits[c].fold_predictions[f][s][i];
                    let reference = want[row].as_f64().unwrap();
                    let error = (got - reference).abs() / reference.abs();
                    assert!(
                        error <= 1e-8,
                        "{id}, fold {}, row {}: heldout {got}, scikit-learn {reference} \
                         (relative error {error:e})",
                        fold.label,
                        row + 1
                    );
                    compared += 1;
                }
            }
        }
    }
    // Five settings, each predicting all 64 rows once.
    assert_eq!(compared, 5 * 64);
}

#[test]
fn references_and_unseen_levels_follow_each_training_fold() {
    let plan = fixture_plan();
    let expected = expected();
    for (f, want) in expected["folds"].as_array().unwrap().iter().enumerate() {
        assert_eq!(plan.assignment.folds[f].label, want["label"].to_string());
        let train = plan.assignment.fold_train(f);
        for column in ["weekday", "shop"] {
            let levels = &plan.table.levels[column];
            let codes = plan.table.column(column);
            let encoding =
                LevelEncoding::fit(train.iter().map(|&r| codes[r]), levels.len(), 1, true);
            let reference = encoding.groups[encoding.reference.unwrap()];
            // reference: the fold's `drop` in make_fixture.py (expected.json)
            assert_eq!(
                encoding.name(reference, levels),
                want["reference"][column].as_str().unwrap(),
                "fold {} column {column}",
                f + 1
            );
            assert_eq!(
                unseen_rows(&plan.table, column, &train, &plan.assignment.folds[f].valid),
                want["unseen"][column].as_u64().unwrap() as usize,
                "fold {} column {column}",
                f + 1
            );
        }
    }
}

#[test]
fn a_validation_row_changes_nothing_encoded_in_its_own_fold() {
    let fresh = fixture_plan();
    let mut plan = fixture_plan();
    let fold = 0;
    let candidate = 2; // linear-slopes: indicators and interactions
    let fit = |plan: &ExperimentPlan, f: usize| {
        let train = plan.assignment.fold_train(f);
        let valid = &plan.assignment.folds[f].valid;
        let c = &plan.candidates[candidate];
        c.family
            .fit_path(
                &plan.design(c, &train),
                &plan.target_of(&train),
                &plan.design(c, valid),
                false,
            )
            .unwrap()[0]
            .eval_pred
            .clone()
    };
    let before = fit(&plan, fold);
    // Every validation row but the first becomes the shop "quay" (a level
    // fold 1's training rows hold 4 times) on a Sunday (3 times): enough to
    // move any reference or level fitted on rows beyond the training rows.
    let valid = plan.assignment.folds[fold].valid.clone();
    let quay = plan.table.levels["shop"]
        .iter()
        .position(|l| l == "quay")
        .unwrap() as f64;
    let sunday = plan.table.levels["weekday"]
        .iter()
        .position(|l| l == "Sun")
        .unwrap() as f64;
    for &r in &valid[1..] {
        plan.table.numeric.get_mut("shop").unwrap()[r] = quay;
        plan.table.numeric.get_mut("weekday").unwrap()[r] = sunday;
    }
    let after = fit(&plan, fold);
    // The first validation row's prediction is the same to the bit.
    assert_eq!(before[0].to_bits(), after[0].to_bits());
    // The rewritten rows' predictions did move (the rewrite is real) ...
    assert!(before[1..].iter().zip(&after[1..]).any(|(b, a)| b != a));
    // ... and another fold, whose training rows hold them, fits differently.
    assert_ne!(fit(&plan, 1), fit(&fresh, 1));
}
