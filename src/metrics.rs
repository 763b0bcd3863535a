//! Scoring metrics for regression: mean squared error, its root, mean
//! absolute error and the coefficient of determination (R²). Sums run in row
//! order so that scores are reproducible to the bit.

use crate::spec::Metric;

impl Metric {
    /// Scores predictions against observed values.
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
        }
    }

    /// True when larger scores are better (R²).
    pub(crate) fn higher_is_better(self) -> bool {
        matches!(self, Metric::R2)
    }

    /// The metric's name as written in specs.
    pub(crate) fn name(self) -> &'static str {
        match self {
            Metric::Mse => "mse",
            Metric::Rmse => "rmse",
            Metric::Mae => "mae",
            Metric::R2 => "r2",
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
}
