//! Scoring metrics. Regression: mean squared error, its root, mean absolute
//! error and the coefficient of determination (R²). Classification: error
//! rate, log-loss, Brier score and the area under the ROC curve. Sums run in
//! row order so that scores are reproducible to the bit.
//!
//! A classifier's prediction for one row is `K + 1` numbers (see
//! [`ClassPrediction`]): the probability of each class in class order (the
//! sorted labels), then the predicted class's index. The predicted class is
//! carried apart from the probabilities because tied probabilities are broken
//! by a family's own rule (nearest neighbours: the nearest neighbour among the
//! tied classes), which the probabilities alone cannot express.

use crate::spec::Metric;

/// Probabilities are clipped to [`PROBABILITY_FLOOR`, 1 − `PROBABILITY_FLOOR`]
/// before the logarithm of log-loss (docs/spec.md, `[choose]`), so a class
/// given probability 0 (for example one absent from a training fold) costs
/// −ln 10⁻¹⁵ ≈ 34.5 instead of infinity.
pub(crate) const PROBABILITY_FLOOR: f64 = 1e-15;

/// How a set of class predictions is laid out: `classes` probabilities and
/// the predicted class index per row, rows one after another.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct ClassPrediction {
    pub(crate) classes: usize,
}

impl ClassPrediction {
    /// Numbers per row.
    pub(crate) fn width(self) -> usize {
        self.classes + 1
    }

    /// The probabilities of row `i`.
    pub(crate) fn probabilities(self, predicted: &[f64], i: usize) -> &[f64] {
        let start = i * self.width();
        &predicted[start..start + self.classes]
    }

    /// The predicted class of row `i`.
    pub(crate) fn class(self, predicted: &[f64], i: usize) -> usize {
        predicted[i * self.width() + self.classes] as usize
    }

    /// Appends one row: its probabilities and the index of the most probable
    /// class (ties to the first in class order).
    pub(crate) fn push_argmax(self, out: &mut Vec<f64>, probabilities: &[f64]) {
        let mut best = 0;
        for (k, &p) in probabilities.iter().enumerate() {
            if p > probabilities[best] {
                best = k;
            }
        }
        out.extend_from_slice(probabilities);
        out.push(best as f64);
    }
}

/// How a metric reads predictions: numbers (regression), or class
/// predictions with the index of the positive class of a binary target.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Scorer {
    pub(crate) metric: Metric,
    /// `Some((classes, positive))` for a class target.
    pub(crate) classes: Option<(usize, usize)>,
}

impl Scorer {
    /// Scores predictions against observed values (class indices for a class
    /// target). A metric of the other kind of target scores NaN; the spec
    /// checks keep that from happening.
    pub(crate) fn score(&self, observed: &[f64], predicted: &[f64]) -> f64 {
        match self.classes {
            None => self.metric.score(observed, predicted),
            Some((classes, positive)) => {
                let layout = ClassPrediction { classes };
                let truth: Vec<usize> = observed.iter().map(|&y| y as usize).collect();
                debug_assert_eq!(predicted.len(), truth.len() * layout.width());
                classification_score(self.metric, &truth, predicted, layout, positive)
            }
        }
    }
}

impl Metric {
    /// Scores regression predictions against observed values.
    ///
    /// R² on rows whose observed values are all equal is undefined and comes
    /// out as NaN; callers check fold sizes before choosing R².
    pub(crate) fn score(self, observed: &[f64], predicted: &[f64]) -> f64 {
        debug_assert_eq!(observed.len(), predicted.len());
        let n = observed.len() as f64;
        let sse: f64 = observed
            .iter()
            .zip(predicted)
            .map(|(y, p)| (y - p) * (y - p))
            .sum();
        match self {
            Metric::Mse => sse / n,
            Metric::Rmse => (sse / n).sqrt(),
            Metric::Mae => {
                observed
                    .iter()
                    .zip(predicted)
                    .map(|(y, p)| (y - p).abs())
                    .sum::<f64>()
                    / n
            }
            Metric::R2 => {
                let mean = observed.iter().sum::<f64>() / n;
                let sst: f64 = observed.iter().map(|y| (y - mean) * (y - mean)).sum();
                1.0 - sse / sst
            }
            Metric::ErrorRate | Metric::LogLoss | Metric::Brier | Metric::Auc => f64::NAN,
        }
    }

    /// True when larger scores are better (R², AUC).
    pub(crate) fn higher_is_better(self) -> bool {
        matches!(self, Metric::R2 | Metric::Auc)
    }

    /// Whether the metric scores class predictions.
    pub(crate) fn for_classes(self) -> bool {
        matches!(
            self,
            Metric::ErrorRate | Metric::LogLoss | Metric::Brier | Metric::Auc
        )
    }

    /// The metric's name as written in specs.
    pub(crate) fn name(self) -> &'static str {
        match self {
            Metric::Mse => "mse",
            Metric::Rmse => "rmse",
            Metric::Mae => "mae",
            Metric::R2 => "r2",
            Metric::ErrorRate => "error-rate",
            Metric::LogLoss => "log-loss",
            Metric::Brier => "brier",
            Metric::Auc => "auc",
        }
    }

    /// Whether `a` is a strictly better score than `b`.
    pub(crate) fn better(self, a: f64, b: f64) -> bool {
        if self.higher_is_better() {
            a > b
        } else {
            a < b
        }
    }
}

/// A class metric over rows with true classes `truth`.
fn classification_score(
    metric: Metric,
    truth: &[usize],
    predicted: &[f64],
    layout: ClassPrediction,
    positive: usize,
) -> f64 {
    let n = truth.len() as f64;
    let k = layout.classes;
    match metric {
        Metric::ErrorRate => {
            let wrong = truth
                .iter()
                .enumerate()
                .filter(|&(i, &y)| layout.class(predicted, i) != y)
                .count();
            wrong as f64 / n
        }
        Metric::LogLoss => {
            let total: f64 = truth
                .iter()
                .enumerate()
                .map(|(i, &y)| {
                    let p = layout.probabilities(predicted, i)[y]
                        .clamp(PROBABILITY_FLOOR, 1.0 - PROBABILITY_FLOOR);
                    -libm::log(p)
                })
                .sum();
            total / n
        }
        Metric::Brier => {
            // Σ_k (p_k − [y = k])², averaged over rows (Brier 1950); for two
            // classes this is twice the squared error of the positive class's
            // probability, so it is halved to the usual binary score.
            let total: f64 = truth
                .iter()
                .enumerate()
                .map(|(i, &y)| {
                    layout
                        .probabilities(predicted, i)
                        .iter()
                        .enumerate()
                        .map(|(c, &p)| {
                            let hit = if c == y { 1.0 } else { 0.0 };
                            (p - hit) * (p - hit)
                        })
                        .sum::<f64>()
                })
                .sum();
            if k == 2 {
                total / n / 2.0
            } else {
                total / n
            }
        }
        Metric::Auc => {
            if k == 2 {
                let scores: Vec<f64> = (0..truth.len())
                    .map(|i| layout.probabilities(predicted, i)[positive])
                    .collect();
                let is_positive: Vec<bool> = truth.iter().map(|&y| y == positive).collect();
                binary_auc(&scores, &is_positive)
            } else {
                one_vs_rest_auc(truth, predicted, layout)
            }
        }
        Metric::Mse | Metric::Rmse | Metric::Mae | Metric::R2 => f64::NAN,
    }
}

/// The area under the ROC curve of `scores` for the rows marked positive, by
/// the rank formula of the Mann–Whitney statistic with mid-ranks for tied
/// scores (Hanley & McNeil 1982, "The meaning and use of the area under a
/// receiver operating characteristic (ROC) curve"): a tied pair of one
/// positive and one negative row counts one half. NaN when either kind of row
/// is missing.
pub(crate) fn binary_auc(scores: &[f64], is_positive: &[bool]) -> f64 {
    let positives = is_positive.iter().filter(|&&p| p).count();
    let negatives = is_positive.len() - positives;
    if positives == 0 || negatives == 0 {
        return f64::NAN;
    }
    let mut order: Vec<usize> = (0..scores.len()).collect();
    order.sort_by(|&a, &b| scores[a].total_cmp(&scores[b]).then(a.cmp(&b)));
    // Sum of the (1-based, mid-) ranks of the positive rows, doubled so that
    // mid-ranks stay whole numbers.
    let mut twice_rank_sum: u128 = 0;
    let mut start = 0;
    while start < order.len() {
        let mut end = start;
        while end < order.len() && scores[order[end]] == scores[order[start]] {
            end += 1;
        }
        // Ranks start+1 ..= end share the mid-rank (start + 1 + end) / 2.
        let twice_mid = (start + 1 + end) as u128;
        let tied_positives = order[start..end]
            .iter()
            .filter(|&&row| is_positive[row])
            .count() as u128;
        twice_rank_sum += twice_mid * tied_positives;
        start = end;
    }
    let p = positives as u128;
    let twice_u = twice_rank_sum - p * (p + 1);
    twice_u as f64 / 2.0 / (positives as f64 * negatives as f64)
}

/// Multi-class AUC as the unweighted mean over classes of each class's AUC
/// against all others (one-vs-rest), scored by that class's probability.
/// Classes with no row, or with every row, in the evaluation set are left
/// out of the mean; NaN when none is left.
fn one_vs_rest_auc(truth: &[usize], predicted: &[f64], layout: ClassPrediction) -> f64 {
    let mut total = 0.0;
    let mut counted = 0;
    for class in 0..layout.classes {
        let scores: Vec<f64> = (0..truth.len())
            .map(|i| layout.probabilities(predicted, i)[class])
            .collect();
        let is_positive: Vec<bool> = truth.iter().map(|&y| y == class).collect();
        let auc = binary_auc(&scores, &is_positive);
        if auc.is_finite() {
            total += auc;
            counted += 1;
        }
    }
    if counted == 0 {
        f64::NAN
    } else {
        total / counted as f64
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn metrics_on_a_hand_computed_example() {
        // Errors (1, -2, 0, 1): SSE = 6, |e| sum = 4; observed mean 2.5, SST = 5.
        let observed = [1.0, 2.0, 3.0, 4.0];
        let predicted = [0.0, 4.0, 3.0, 3.0];
        assert_eq!(Metric::Mse.score(&observed, &predicted), 1.5);
        assert_eq!(Metric::Rmse.score(&observed, &predicted), 1.5f64.sqrt());
        assert_eq!(Metric::Mae.score(&observed, &predicted), 1.0);
        assert_eq!(Metric::R2.score(&observed, &predicted), 1.0 - 6.0 / 5.0);
    }

    fn binary(probabilities_of_second: &[f64]) -> Vec<f64> {
        let layout = ClassPrediction { classes: 2 };
        let mut out = Vec::new();
        for &p in probabilities_of_second {
            layout.push_argmax(&mut out, &[1.0 - p, p]);
        }
        out
    }

    #[test]
    fn class_metrics_on_a_hand_computed_example() {
        // Hand-computed: truth (0, 1, 1, 0), P(class 1) = (0.2, 0.6, 0.4, 0.5).
        let truth = [0.0, 1.0, 1.0, 0.0];
        let predicted = binary(&[0.2, 0.6, 0.4, 0.5]);
        let score = |metric| {
            Scorer {
                metric,
                classes: Some((2, 1)),
            }
            .score(&truth, &predicted)
        };
        // Predicted classes (0, 1, 0, 0): the third row is wrong; the fourth
        // is a tie, which goes to the first class.
        assert_eq!(score(Metric::ErrorRate), 0.25);
        let log_loss = -(0.8f64.ln() + 0.6f64.ln() + 0.4f64.ln() + 0.5f64.ln()) / 4.0;
        assert!((score(Metric::LogLoss) - log_loss).abs() < 1e-15);
        let brier = (0.04 + 0.16 + 0.36 + 0.25) / 4.0;
        assert!((score(Metric::Brier) - brier).abs() < 1e-15);
        // Pairs (positive, negative): (0.6, 0.2) yes, (0.6, 0.5) yes,
        // (0.4, 0.2) yes, (0.4, 0.5) no: 3 of 4.
        assert_eq!(score(Metric::Auc), 0.75);
    }

    #[test]
    fn auc_counts_a_tied_pair_as_one_half() {
        // Hand-computed: one positive and one negative at the same score.
        assert_eq!(binary_auc(&[0.3, 0.3], &[true, false]), 0.5);
        // Positives (0.5, 0.9), negatives (0.5, 0.1): pairs 0.5/0.5 tie (½),
        // 0.5/0.1 win, 0.9/0.5 win, 0.9/0.1 win: 3.5 of 4.
        assert_eq!(
            binary_auc(&[0.5, 0.9, 0.5, 0.1], &[true, true, false, false]),
            0.875
        );
        assert!(binary_auc(&[0.1, 0.2], &[true, true]).is_nan());
    }

    #[test]
    fn log_loss_clips_a_zero_probability_at_the_floor() {
        let truth = [1.0];
        let predicted = binary(&[0.0]);
        let scorer = Scorer {
            metric: Metric::LogLoss,
            classes: Some((2, 1)),
        };
        assert_eq!(scorer.score(&truth, &predicted), -libm::log(1e-15));
    }
}
