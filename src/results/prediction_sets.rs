//! The `prediction_sets` section of `results.json`: for a class target with
//! `[intervals]`, the kept setting's CV+ prediction sets, their coverage, size
//! and the share of empty and of all-class sets on the locked test set
//! (docs/intervals.md, "Class targets: prediction sets"). Built by
//! `crate::prediction_sets`; the report reads it, and never refits.

use serde::{Deserialize, Serialize};

use super::lenient;
use crate::error::FitFailure;
use crate::execute::CandidateFits;
use crate::plan::ExperimentPlan;

/// The score the sets are built on, as `results.json` names it.
pub const SET_SCORE: &str = "1 - p(y|x)";

/// Prediction sets of the kept setting.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct PredictionSets {
    /// Nominal coverage 1 − α.
    #[serde(deserialize_with = "lenient::number")]
    pub level: f64,
    /// max(0, 1 − 2α): the coverage the CV+ theorem guarantees.
    #[serde(deserialize_with = "lenient::number")]
    pub guaranteed: f64,
    /// `cv+`, or `jackknife+` when the split is leave-one-out.
    pub method: String,
    /// The nonconformity score: `1 - p(y|x)`, one minus the probability
    /// of the class.
    pub score: String,
    /// Calibration folds (those of the first repeat).
    pub folds: usize,
    /// Repeats of the split left out of the sets (all but the first).
    #[serde(default)]
    pub repeats_unused: usize,
    /// n: non-test rows, each with its out-of-fold score.
    pub calibration_rows: usize,
    /// ⌈level·(n + 1)⌉: a class is in the set when fewer than this many
    /// calibration scores lie strictly below its score.
    pub rank: usize,
    /// False when `rank` exceeds n: every set holds every class.
    pub bounded: bool,
    /// Coverage and size on the locked test set; absent without one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub test: Option<SetTest>,
}

/// The sets on the locked test rows.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SetTest {
    pub rows: usize,
    /// Test rows whose class is in its set.
    pub covered: usize,
    #[serde(deserialize_with = "lenient::number")]
    pub coverage: f64,
    /// 95 % Wilson score interval for the coverage.
    #[serde(deserialize_with = "lenient::number")]
    pub coverage_low: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub coverage_high: f64,
    /// Mean number of classes in a set (summed in row order).
    #[serde(deserialize_with = "lenient::number")]
    pub mean_size: f64,
    /// `sizes[m]`: test rows whose set holds m classes, m = 0 … classes.
    pub sizes: Vec<usize>,
    /// Share of test rows with an empty set (`sizes[0]` / rows).
    #[serde(deserialize_with = "lenient::number")]
    pub empty_share: f64,
    /// Share of test rows whose set holds every class.
    #[serde(deserialize_with = "lenient::number")]
    pub all_classes_share: f64,
}

/// The kept setting's prediction sets when the spec asks for intervals and
/// the target is a class: the fold fits are evaluated once more at the test
/// rows.
pub(crate) fn assess(
    plan: &ExperimentPlan,
    fits: &[CandidateFits],
    results: &super::Results,
) -> Result<Option<PredictionSets>, FitFailure> {
    let (Some(spec), Some(_)) = (plan.spec.spec.intervals, &plan.task.classes) else {
        return Ok(None);
    };
    let Some((c, s)) = super::intervals::locate(plan, &results.chosen) else {
        return Ok(None);
    };
    let candidate = &plan.candidates[c];
    let a = &plan.assignment;
    let classes = plan.task.class_count();
    let calibration = crate::prediction_sets::calibration(plan, &fits[c].fold_predictions, s);
    let x_test = plan.design(candidate, &a.test);
    let at =
        crate::intervals::fold_predictions_at(plan, candidate, s, &calibration.folds, &x_test)?;
    let sets = crate::prediction_sets::sets(
        spec.level,
        &calibration.scores,
        &calibration.fold_of,
        &at,
        classes,
        a.test.len(),
    );
    let n = calibration.scores.len();
    let rank = crate::intervals::upper_rank(spec.level, n);
    let test = (!a.test.is_empty()).then(|| summarise(plan, &a.test, &sets, classes));
    Ok(Some(PredictionSets {
        level: spec.level,
        guaranteed: (2.0 * spec.level - 1.0).max(0.0),
        method: if a.single_row_folds {
            "jackknife+"
        } else {
            "cv+"
        }
        .to_string(),
        score: SET_SCORE.to_string(),
        folds: calibration.folds.len(),
        repeats_unused: a.repeats - 1,
        calibration_rows: n,
        rank,
        bounded: rank <= n,
        test,
    }))
}

/// Coverage, sizes and shares of `sets` at `rows` (whose targets are class
/// indices).
pub(crate) fn summarise(
    plan: &ExperimentPlan,
    rows: &[usize],
    sets: &[Vec<usize>],
    classes: usize,
) -> SetTest {
    let covered = rows
        .iter()
        .zip(sets)
        .filter(|(&row, set)| set.contains(&(plan.target[row] as usize)))
        .count();
    let mut sizes = vec![0; classes + 1];
    for set in sets {
        sizes[set.len()] += 1;
    }
    let n = rows.len();
    let total: usize = sets.iter().map(Vec::len).sum();
    let (coverage_low, coverage_high) = crate::intervals::wilson(covered, n);
    SetTest {
        rows: n,
        covered,
        coverage: covered as f64 / n as f64,
        coverage_low,
        coverage_high,
        mean_size: total as f64 / n as f64,
        empty_share: sizes[0] as f64 / n as f64,
        all_classes_share: sizes[classes] as f64 / n as f64,
        sizes,
    }
}
