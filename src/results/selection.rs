//! The evidence about the choice in `results.json` (computed in
//! `src/evidence/`, methods in docs/reports.md): the locked test score's
//! interval, paired differences against the kept setting's rivals, the
//! leakage inspection, and whether the test set was scored for every setting.

use serde::{Deserialize, Serialize};

use super::lenient;

/// The locked test score's 95% confidence interval.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct TestInterval {
    /// `t` (mean of per-row losses), `root of t` (rmse: the roots of the
    /// mse interval's ends) or `wilson` (error rate).
    pub method: String,
    #[serde(deserialize_with = "lenient::number")]
    pub level: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub low: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub high: f64,
    /// Test rows whose interval, from the same estimate, would be at most
    /// half as wide.
    pub rows_to_halve: Option<usize>,
}

/// Fold-wise differences between the kept setting and its rivals.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Paired {
    pub kept: String,
    /// `fold standard error` (one partition) or `corrected resampled t`
    /// (repeated k-fold; Nadeau & Bengio 2003).
    pub estimator: String,
    /// Folds compared (every repeat's folds).
    pub folds: usize,
    /// Validation rows over training rows, summed over the folds (the
    /// n₂/n₁ of the corrected variance).
    #[serde(deserialize_with = "lenient::number")]
    pub test_train_ratio: f64,
    pub comparisons: Vec<PairedComparison>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct PairedComparison {
    pub against: String,
    /// Why this rival: `lowest cv`, `least flexible <family>`.
    pub reasons: Vec<String>,
    /// Mean over folds of (kept − rival), in the metric's units.
    #[serde(deserialize_with = "lenient::number")]
    pub mean_difference: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub se: f64,
    /// mean / se.
    #[serde(deserialize_with = "lenient::number")]
    pub t: f64,
    /// Folds where the kept setting scored strictly better.
    pub kept_better_folds: usize,
    #[serde(deserialize_with = "lenient::number")]
    pub kept_better_share: f64,
}

/// What the leakage inspection found (docs/reports.md, "Leakage").
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
pub struct Leakage {
    /// Rows identical in features and target, one copy validated while
    /// another trains.
    pub duplicates_across_folds: Duplicates,
    /// Rows identical in features and target, in the locked test set and
    /// among the rest.
    pub duplicates_across_test: Duplicates,
    /// Features that nearly copy the target.
    pub target_copies: Vec<TargetCopy>,
    /// Groups with rows validated while others of the group train.
    pub groups_across_folds: SharedGroups,
    /// Groups with rows in the test set and among the rest.
    pub groups_across_test: SharedGroups,
}

impl Leakage {
    /// Whether anything was found.
    pub fn found(&self) -> bool {
        self.duplicates_across_folds.sets > 0
            || self.duplicates_across_test.sets > 0
            || !self.target_copies.is_empty()
            || self.groups_across_folds.groups > 0
            || self.groups_across_test.groups > 0
    }
}

#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
pub struct Duplicates {
    /// Distinct (features, target) rows seen on both sides.
    pub sets: usize,
    /// Rows holding one of them.
    pub rows: usize,
    /// File lines of the first (up to five) rows involved, ascending.
    pub lines: Vec<u64>,
}

#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct TargetCopy {
    pub feature: String,
    /// Pearson correlation with the target over every row.
    #[serde(deserialize_with = "lenient::number")]
    pub correlation: f64,
    /// Sorting the rows by the feature sorts the target too (either way).
    pub same_order: bool,
}

#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
pub struct SharedGroups {
    pub groups: usize,
    /// The first (up to five) such groups in sorted order.
    pub examples: Vec<String>,
}

/// Nested cross-validation: the whole selection rerun in each outer fold.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Nested {
    pub outer_folds: usize,
    /// Per outer fold, the score of the setting its selection kept, on its
    /// validation rows.
    #[serde(deserialize_with = "lenient::numbers")]
    pub scores: Vec<f64>,
    /// The nested estimate: the mean of `scores`.
    #[serde(deserialize_with = "lenient::number")]
    pub mean: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub se: f64,
    /// Per outer fold, the setting its selection kept.
    pub chosen: Vec<String>,
    /// The kept setting's ordinary cross-validated score.
    #[serde(deserialize_with = "lenient::number")]
    pub kept_cv_score: f64,
    /// `mean − kept_cv_score`: the optimism of choosing, in the metric's
    /// units (positive means the ordinary score flatters a lower-is-better
    /// metric).
    #[serde(deserialize_with = "lenient::number")]
    pub optimism: f64,
}
