//! The `intervals` section of `results.json`: the kept setting's CV+ (or
//! jackknife+) prediction intervals, their coverage and width on the locked
//! test set (docs/intervals.md). Built by `crate::intervals`; the report
//! reads it, and never refits.

use serde::{Deserialize, Serialize};

use super::lenient;
use crate::error::FitFailure;
use crate::execute::CandidateFits;
use crate::plan::ExperimentPlan;

/// Prediction intervals of the kept setting.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Intervals {
    /// Nominal coverage 1 − α.
    #[serde(deserialize_with = "lenient::number")]
    pub level: f64,
    /// 1 − 2α = 2·level − 1: the coverage the theorem guarantees.
    #[serde(deserialize_with = "lenient::number")]
    pub guaranteed: f64,
    /// `cv+`, or `jackknife+` when the split is leave-one-out.
    pub method: String,
    /// Calibration folds (those of the first repeat).
    pub folds: usize,
    /// Repeats of the split left out of the intervals (all but the first).
    #[serde(default)]
    pub repeats_unused: usize,
    /// n: non-test rows, each with its out-of-fold residual.
    pub calibration_rows: usize,
    /// ⌈level·(n + 1)⌉: the rank of the upper bound among n values; the lower
    /// bound's is n + 1 − this. Above n, every bound is infinite.
    pub rank: usize,
    /// False when `rank` exceeds n: the intervals are the whole line.
    pub bounded: bool,
    /// Coverage and width on the locked test set; absent without one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub test: Option<IntervalTest>,
}

/// The intervals on the locked test rows.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct IntervalTest {
    pub rows: usize,
    /// Test rows whose target lies inside its interval (end points included).
    pub covered: usize,
    #[serde(deserialize_with = "lenient::number")]
    pub coverage: f64,
    /// 95 % Wilson score interval for the coverage.
    #[serde(deserialize_with = "lenient::number")]
    pub coverage_low: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub coverage_high: f64,
    /// Mean of upper − lower over the test rows (`null` when unbounded).
    #[serde(deserialize_with = "lenient::number")]
    pub mean_width: f64,
    /// Values of the one feature at the kept test rows (as in
    /// `final.predictions.test`, the same rows), for the figure's band.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_numbers"
    )]
    pub x: Option<Vec<f64>>,
    #[serde(deserialize_with = "lenient::numbers")]
    pub lower: Vec<f64>,
    #[serde(deserialize_with = "lenient::numbers")]
    pub upper: Vec<f64>,
}

/// The candidate and setting index whose id is `id`.
pub(crate) fn locate(plan: &ExperimentPlan, id: &str) -> Option<(usize, usize)> {
    plan.candidates
        .iter()
        .enumerate()
        .find_map(|(c, candidate)| {
            candidate
                .settings
                .iter()
                .position(|setting| candidate.id(setting) == id)
                .map(|s| (c, s))
        })
}

/// The kept setting's intervals when the spec asks for them: the fold fits
/// are evaluated once more at the test rows.
pub(crate) fn assess(
    plan: &ExperimentPlan,
    fits: &[CandidateFits],
    results: &super::Results,
) -> Result<Option<Intervals>, FitFailure> {
    let Some(spec) = plan.spec.spec.intervals else {
        return Ok(None);
    };
    if plan.task.classes.is_some() {
        // A class target gets prediction sets (results/prediction_sets.rs).
        return Ok(None);
    }
    let Some((c, s)) = locate(plan, &results.chosen) else {
        return Ok(None);
    };
    let feature = results.final_fit.predictions.feature.as_deref();
    let candidate = &plan.candidates[c];
    let a = &plan.assignment;
    let x_test = plan.design(candidate, &a.test);
    let (calibration, bounds) = crate::intervals::intervals_at(
        plan,
        candidate,
        s,
        &fits[c].fold_predictions,
        spec.level,
        &x_test,
    )?;
    let n = calibration.residuals.len();
    let rank = crate::intervals::upper_rank(spec.level, n);
    let bounded = rank <= n;
    let test = (!a.test.is_empty()).then(|| {
        let covered = a
            .test
            .iter()
            .zip(&bounds)
            .filter(|(&row, &(low, high))| low <= plan.target[row] && plan.target[row] <= high)
            .count();
        let rows = a.test.len();
        let (coverage_low, coverage_high) = crate::intervals::wilson(covered, rows);
        // Summed in row order (determinism).
        let width_sum: f64 = bounds.iter().map(|(low, high)| high - low).sum();
        let keep = super::thin(rows, super::PREDICTION_POINTS);
        IntervalTest {
            rows,
            covered,
            coverage: covered as f64 / rows as f64,
            coverage_low,
            coverage_high,
            mean_width: if bounded {
                width_sum / rows as f64
            } else {
                f64::NAN
            },
            x: feature.map(|name| {
                let column = plan.table.column(name);
                keep.iter().map(|&i| column[a.test[i]]).collect()
            }),
            lower: keep.iter().map(|&i| bounds[i].0).collect(),
            upper: keep.iter().map(|&i| bounds[i].1).collect(),
        }
    });
    let folds = calibration.folds.len();
    Ok(Some(Intervals {
        level: spec.level,
        guaranteed: (2.0 * spec.level - 1.0).max(0.0),
        method: if a.single_row_folds {
            "jackknife+"
        } else {
            "cv+"
        }
        .to_string(),
        folds,
        repeats_unused: a.repeats - 1,
        calibration_rows: n,
        rank,
        bounded,
        test,
    }))
}
