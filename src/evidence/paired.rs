//! Paired differences between the kept setting and a rival on the same folds
//! (docs/reports.md, "Paired differences").
//!
//! Both settings are scored on the same validation rows, so the fold-wise
//! difference d_j = kept_j − rival_j removes what the folds share. With one
//! partition the standard error of the mean difference is s_d / √J (common
//! practice). With repeated k-fold the J = k·r differences overlap in their
//! training rows and are correlated, and s_d / √J understates the
//! uncertainty; heldout then uses the corrected resampled t of Nadeau &
//! Bengio (2003), "Inference for the generalization error", Machine Learning
//! 52: Var(mean) ≈ (1/J + n₂/n₁) · s_d², where n₂/n₁ is the ratio of
//! validation to training rows.

use crate::spec::Metric;

/// The summary of one paired comparison.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct PairedDifference {
    pub(crate) mean: f64,
    pub(crate) se: f64,
    pub(crate) kept_better: usize,
}

/// How the standard error of the mean difference is estimated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Estimator {
    /// s_d / √J: one partition of the rows.
    FoldStandardError,
    /// √((1/J + ratio) · s_d²), ratio = validation rows / training rows.
    CorrectedResampledT { ratio: f64 },
}

impl Estimator {
    pub(crate) fn name(self) -> &'static str {
        match self {
            Estimator::FoldStandardError => "fold standard error",
            Estimator::CorrectedResampledT { .. } => "corrected resampled t",
        }
    }
}

/// Fold-wise differences `kept − rival` (same fold order), their mean, its
/// standard error by `estimator`, and the folds where `kept` is strictly
/// better by `metric`.
pub(crate) fn compare(
    kept: &[f64],
    rival: &[f64],
    metric: Metric,
    estimator: Estimator,
) -> PairedDifference {
    let differences: Vec<f64> = kept.iter().zip(rival).map(|(a, b)| a - b).collect();
    let j = differences.len() as f64;
    let mean = differences.iter().sum::<f64>() / j;
    let variance = if differences.len() < 2 {
        f64::NAN
    } else {
        differences
            .iter()
            .map(|d| (d - mean) * (d - mean))
            .sum::<f64>()
            / (j - 1.0)
    };
    let se = match estimator {
        Estimator::FoldStandardError => (variance / j).sqrt(),
        Estimator::CorrectedResampledT { ratio } => ((1.0 / j + ratio) * variance).sqrt(),
    };
    let kept_better = kept
        .iter()
        .zip(rival)
        .filter(|(a, b)| metric.better(**a, **b))
        .count();
    PairedDifference {
        mean,
        se,
        kept_better,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A fixed table of fold scores (invented): two repeats of 3-fold.
    const KEPT: [f64; 6] = [1.0, 1.2, 0.9, 1.1, 1.0, 1.3];
    const RIVAL: [f64; 6] = [1.1, 1.0, 1.0, 1.4, 0.9, 1.3];

    #[test]
    fn mean_and_se_equal_a_hand_computation() {
        // d = (−0.1, 0.2, −0.1, −0.3, 0.1, 0.0); Σd = −0.2, mean = −1/30.
        // Σ(d − mean)² = Σd² − 6·mean² = 0.16 − 6/900 = 0.15333…;
        // s² = that / 5 = 0.0306666…; SE = √(s² / 6) = 0.0714920…
        let p = compare(&KEPT, &RIVAL, Metric::Mse, Estimator::FoldStandardError);
        assert!((p.mean - (-1.0 / 30.0)).abs() < 1e-15);
        let s2 = (0.16 - 6.0 / 900.0) / 5.0;
        assert!((p.se - (s2 / 6.0_f64).sqrt()).abs() < 1e-15);
        assert!((p.se - 0.071_492_035_298_4).abs() < 1e-12);
        // Lower mse is better: folds 1, 3 and 4 (−0.1, −0.1, −0.3).
        assert_eq!(p.kept_better, 3);
    }

    #[test]
    fn nadeau_bengio_correction_equals_its_formula() {
        // 3-fold: validation/training = 1/2; J = 6.
        // Var = (1/6 + 1/2) · s² (Nadeau & Bengio 2003, corrected resampled t).
        let p = compare(
            &KEPT,
            &RIVAL,
            Metric::Mse,
            Estimator::CorrectedResampledT { ratio: 0.5 },
        );
        let s2: f64 = (0.16 - 6.0 / 900.0) / 5.0;
        assert!((p.se - ((1.0 / 6.0 + 0.5) * s2).sqrt()).abs() < 1e-15);
        // The correction only ever widens the naive error.
        let naive = compare(&KEPT, &RIVAL, Metric::Mse, Estimator::FoldStandardError);
        // Here (1/6 + 1/2) / (1/6) = 4, so the error exactly doubles.
        assert!((p.se / naive.se - 2.0).abs() < 1e-12);
    }

    #[test]
    fn higher_is_better_counts_the_other_way() {
        let p = compare(&KEPT, &RIVAL, Metric::Auc, Estimator::FoldStandardError);
        assert_eq!(p.kept_better, 2);
    }
}
