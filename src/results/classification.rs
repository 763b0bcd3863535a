//! The evidence particular to a class target, in `results.json` under
//! `classification`: how the task was decided, the classes, the folds whose
//! training rows lack a class, and, for the kept setting on the locked test
//! set, the confusion matrix, the ROC curve of the positive class and the
//! calibration table (docs/reports.md, "Classification").

use serde::{Deserialize, Serialize};

use super::lenient;
use crate::classes::Classes;
use crate::metrics::{binary_auc, ClassPrediction};
use crate::plan::ExperimentPlan;

/// Most points of the ROC curve kept in results.json.
const ROC_POINTS: usize = 1000;
/// Equal-width bins of predicted probability in the calibration table.
pub const CALIBRATION_BINS: usize = 10;

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Classification {
    /// Why the task was inferred; absent when `[data] task` declared it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inferred: Option<String>,
    /// The labels in class order (sorted).
    pub labels: Vec<String>,
    /// The positive class of a binary target.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub positive: Option<String>,
    /// Rows of each class among all rows used, in class order.
    pub counts: Vec<usize>,
    /// Folds whose training rows lack one or more classes.
    pub absent: Vec<AbsentClasses>,
    /// The kept setting on the locked test set; absent without one.
    pub test: Option<TestEvidence>,
}

/// The classes a fold's training rows lack: the fit gives them probability 0
/// (log-loss counts it at the floor of 10⁻¹⁵).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct AbsentClasses {
    pub fold: String,
    pub classes: Vec<String>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct TestEvidence {
    pub rows: usize,
    /// Rows by actual class (outer) and predicted class (inner).
    pub confusion: Vec<Vec<usize>>,
    /// Binary targets: (false-positive rate, true-positive rate) of the
    /// positive class's probability as a threshold, from (0, 0) to (1, 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub roc: Option<Vec<[f64; 2]>>,
    /// Area under the ROC curve (binary), or the one-vs-rest mean; NaN when
    /// the test set lacks a class.
    #[serde(deserialize_with = "lenient::number")]
    pub auc: f64,
    /// What the calibration table bins: the positive class's probability
    /// (binary) or the probability of the predicted class.
    pub calibration_of: String,
    /// The non-empty bins, in order.
    pub calibration: Vec<CalibrationBin>,
}

/// One bin of predicted probability: its bounds, its rows, their mean
/// predicted probability and the share of them where the event happened.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CalibrationBin {
    #[serde(deserialize_with = "lenient::number")]
    pub lower: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub upper: f64,
    pub rows: usize,
    #[serde(deserialize_with = "lenient::number")]
    pub mean_predicted: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub observed: f64,
}

/// The classification evidence of a plan, with `test_pred` the kept fit's
/// predictions at the locked test rows.
pub(crate) fn summarise(
    plan: &ExperimentPlan,
    classes: &Classes,
    test_pred: &[f64],
) -> Classification {
    let k = classes.labels.len();
    let label = |c: usize| classes.labels[c].clone();
    let mut counts = vec![0usize; k];
    for &y in &plan.target {
        counts[y as usize] += 1;
    }
    let a = &plan.assignment;
    let absent = (0..a.folds.len())
        .filter_map(|f| {
            let mut seen = vec![false; k];
            for r in a.fold_train(f) {
                seen[plan.target[r] as usize] = true;
            }
            let missing: Vec<String> = (0..k).filter(|&c| !seen[c]).map(label).collect();
            (!missing.is_empty()).then(|| AbsentClasses {
                fold: a.describe_fold(f),
                classes: missing,
            })
        })
        .collect();
    let test = (!a.test.is_empty()).then(|| {
        let truth: Vec<usize> = a.test.iter().map(|&r| plan.target[r] as usize).collect();
        test_evidence(&truth, test_pred, classes)
    });
    Classification {
        inferred: plan.task.inferred.clone(),
        labels: classes.labels.clone(),
        positive: (k == 2).then(|| label(classes.positive)),
        counts,
        absent,
        test,
    }
}

fn test_evidence(truth: &[usize], predicted: &[f64], classes: &Classes) -> TestEvidence {
    let k = classes.labels.len();
    let layout = ClassPrediction { classes: k };
    let mut confusion = vec![vec![0usize; k]; k];
    for (i, &y) in truth.iter().enumerate() {
        confusion[y][layout.class(predicted, i)] += 1;
    }
    let auc = crate::metrics::Scorer {
        metric: crate::spec::Metric::Auc,
        classes: Some((k, classes.positive)),
    }
    .score(
        &truth.iter().map(|&y| y as f64).collect::<Vec<_>>(),
        predicted,
    );
    // Binary: the positive class's probability and whether the row is
    // positive; otherwise the predicted class's probability and whether the
    // prediction is right.
    let (scores, events, calibration_of): (Vec<f64>, Vec<bool>, String) = if k == 2 {
        let p = classes.positive;
        (
            (0..truth.len())
                .map(|i| layout.probabilities(predicted, i)[p])
                .collect(),
            truth.iter().map(|&y| y == p).collect(),
            format!("probability of \"{}\"", classes.labels[p]),
        )
    } else {
        (
            (0..truth.len())
                .map(|i| layout.probabilities(predicted, i)[layout.class(predicted, i)])
                .collect(),
            (0..truth.len())
                .map(|i| layout.class(predicted, i) == truth[i])
                .collect(),
            "probability of the predicted class".to_string(),
        )
    };
    TestEvidence {
        rows: truth.len(),
        confusion,
        roc: (k == 2).then(|| roc_curve(&scores, &events)),
        auc: if auc.is_finite() {
            auc
        } else {
            binary_auc(&scores, &events)
        },
        calibration_of,
        calibration: calibration(&scores, &events),
    }
}

/// The ROC curve: thresholds at every distinct score, highest first; ties
/// move the curve diagonally (thinned to at most [`ROC_POINTS`]).
pub(crate) fn roc_curve(scores: &[f64], positive: &[bool]) -> Vec<[f64; 2]> {
    let positives = positive.iter().filter(|&&p| p).count().max(1) as f64;
    let negatives = positive.iter().filter(|&&p| !p).count().max(1) as f64;
    let mut order: Vec<usize> = (0..scores.len()).collect();
    order.sort_by(|&a, &b| scores[b].total_cmp(&scores[a]).then(a.cmp(&b)));
    let mut points = vec![[0.0, 0.0]];
    let (mut tp, mut fp) = (0usize, 0usize);
    let mut start = 0;
    while start < order.len() {
        let mut end = start;
        while end < order.len() && scores[order[end]] == scores[order[start]] {
            if positive[order[end]] {
                tp += 1;
            } else {
                fp += 1;
            }
            end += 1;
        }
        points.push([fp as f64 / negatives, tp as f64 / positives]);
        start = end;
    }
    if points.len() > ROC_POINTS {
        let last = points.len() - 1;
        points = (0..ROC_POINTS)
            .map(|i| points[i * last / (ROC_POINTS - 1)])
            .collect();
    }
    points
}

/// Calibration in [`CALIBRATION_BINS`] equal bins of [0, 1] (the last one
/// closed), non-empty bins only.
pub(crate) fn calibration(scores: &[f64], events: &[bool]) -> Vec<CalibrationBin> {
    let bins = CALIBRATION_BINS;
    let mut rows = vec![0usize; bins];
    let mut sum = vec![0.0; bins];
    let mut hits = vec![0usize; bins];
    for (&s, &e) in scores.iter().zip(events) {
        let b = ((s * bins as f64) as usize).min(bins - 1);
        rows[b] += 1;
        sum[b] += s;
        hits[b] += usize::from(e);
    }
    (0..bins)
        .filter(|&b| rows[b] > 0)
        .map(|b| CalibrationBin {
            lower: b as f64 / bins as f64,
            upper: (b + 1) as f64 / bins as f64,
            rows: rows[b],
            mean_predicted: sum[b] / rows[b] as f64,
            observed: hits[b] as f64 / rows[b] as f64,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn roc_curve_steps_through_thresholds_and_ties_go_diagonally() {
        // Hand-computed: scores 0.9 (+), 0.5 (+), 0.5 (−), 0.1 (−).
        let roc = roc_curve(&[0.9, 0.5, 0.5, 0.1], &[true, true, false, false]);
        assert_eq!(roc, vec![[0.0, 0.0], [0.0, 0.5], [0.5, 1.0], [1.0, 1.0]]);
    }

    #[test]
    fn calibration_bins_count_rows_and_events() {
        let bins = calibration(
            &[0.05, 0.15, 0.12, 1.0, 0.95],
            &[false, true, false, true, true],
        );
        assert_eq!(bins.len(), 3);
        assert_eq!((bins[1].rows, bins[1].observed), (2, 0.5));
        assert!((bins[1].mean_predicted - 0.135).abs() < 1e-15);
        // 1.0 falls in the last bin, closed at 1.
        assert_eq!((bins[2].lower, bins[2].rows), (0.9, 2));
    }
}
