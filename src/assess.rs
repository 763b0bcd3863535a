//! Assessment: fold scores, cross-validated score and its standard error,
//! training score, and the choice by the spec's rule.
//!
//! The standard error of the cross-validated mean is the sample standard
//! deviation of the fold scores divided by √F (F folds × repeats), as is common
//! practice. With repeats the folds are not independent, so this understates
//! the uncertainty somewhat; the report says so.

use crate::error::FitError;
use crate::metrics::Scorer;
use crate::spec::{Metric, Rule};

/// Scores of one candidate setting.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct SettingScore {
    pub(crate) id: String,
    pub(crate) effective_df: f64,
    pub(crate) train_score: f64,
    pub(crate) fold_scores: Vec<f64>,
    pub(crate) cv_score: f64,
    pub(crate) cv_se: f64,
}

impl SettingScore {
    /// Summarises fold scores (in fold order, repeats concatenated).
    pub(crate) fn new(
        id: String,
        effective_df: f64,
        train_score: f64,
        fold_scores: Vec<f64>,
    ) -> Self {
        let (cv_score, cv_se) = mean_and_standard_error(&fold_scores);
        SettingScore {
            id,
            effective_df,
            train_score,
            fold_scores,
            cv_score,
            cv_se,
        }
    }
}

/// The score of setting `setting` on each fold, in fold order, from
/// `fold_predictions` (per fold, per setting: predictions at the fold's
/// validation rows) and `fold_targets` (per fold: the observed values there).
pub(crate) fn fold_scores(
    scorer: Scorer,
    fold_predictions: &[Vec<Vec<f64>>],
    fold_targets: &[Vec<f64>],
    setting: usize,
) -> Vec<f64> {
    fold_predictions
        .iter()
        .zip(fold_targets)
        .map(|(grid, observed)| scorer.score(observed, &grid[setting]))
        .collect()
}

/// Mean and standard error of the mean (sample SD / √n), summed in order.
pub(crate) fn mean_and_standard_error(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    if values.len() < 2 {
        return (mean, f64::NAN);
    }
    let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
    (mean, (ss / (n - 1.0)).sqrt() / n.sqrt())
}

/// The outcome of a choice, with what a reviewer needs to follow it.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Choice {
    /// Index of the chosen setting.
    pub(crate) chosen: usize,
    /// Index of the setting with the best cross-validated score.
    pub(crate) best: usize,
    /// Scores no worse than this were eligible (one-se rule only).
    pub(crate) threshold: Option<f64>,
}

/// Chooses among `scores` by `rule`. Ties on the score go to the earlier
/// setting in spec order; ties on effective df under one-se go to the better
/// score, then the earlier setting.
pub(crate) fn choose(
    scores: &[SettingScore],
    metric: Metric,
    rule: Rule,
) -> Result<Choice, FitError> {
    // Only finite scores compete; with none there is no choice to make.
    let Some(mut best) = scores.iter().position(|s| s.cv_score.is_finite()) else {
        let ids: Vec<&str> = scores.iter().take(3).map(|s| s.id.as_str()).collect();
        let more = scores.len().saturating_sub(ids.len());
        return Err(FitError::NoFiniteScore {
            metric: metric_name(metric),
            settings: if more > 0 {
                format!("{} and {more} more", ids.join(", "))
            } else {
                ids.join(", ")
            },
        });
    };
    for (i, s) in scores.iter().enumerate() {
        if s.cv_score.is_finite() && metric.better(s.cv_score, scores[best].cv_score) {
            best = i;
        }
    }
    match rule {
        Rule::Lowest => Ok(Choice {
            chosen: best,
            best,
            threshold: None,
        }),
        Rule::OneSe => {
            let se = if scores[best].cv_se.is_finite() {
                scores[best].cv_se
            } else {
                0.0
            };
            let threshold = if metric.higher_is_better() {
                scores[best].cv_score - se
            } else {
                scores[best].cv_score + se
            };
            let eligible = |s: &SettingScore| {
                if metric.higher_is_better() {
                    s.cv_score >= threshold
                } else {
                    s.cv_score <= threshold
                }
            };
            let mut chosen = best;
            for (i, s) in scores.iter().enumerate() {
                if !eligible(s) {
                    continue;
                }
                let current = &scores[chosen];
                let simpler = s.effective_df < current.effective_df;
                let as_simple_but_better = s.effective_df == current.effective_df
                    && metric.better(s.cv_score, current.cv_score);
                if simpler || as_simple_but_better {
                    chosen = i;
                }
            }
            Ok(Choice {
                chosen,
                best,
                threshold: Some(threshold),
            })
        }
    }
}

/// The metric's name as a spec writes it.
fn metric_name(metric: Metric) -> String {
    serde_json::to_value(metric)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(id: &str, df: f64, cv: f64, se: f64) -> SettingScore {
        SettingScore {
            id: id.into(),
            effective_df: df,
            train_score: 0.0,
            fold_scores: vec![],
            cv_score: cv,
            cv_se: se,
        }
    }

    /// A hand-made table: degree 4 is best (0.90 ± 0.05); degrees 2 and 3 lie
    /// within one SE (≤ 0.95), degree 1 does not. The one-standard-error rule
    /// (common practice) picks the least flexible eligible setting: degree 2.
    fn table() -> Vec<SettingScore> {
        vec![
            row("p/degree=1", 2.0, 1.40, 0.08),
            row("p/degree=2", 3.0, 0.95, 0.06),
            row("p/degree=3", 4.0, 0.93, 0.05),
            row("p/degree=4", 5.0, 0.90, 0.05),
            row("p/degree=8", 9.0, 0.97, 0.07),
            row("knn/k=3", 33.3, 0.92, 0.04),
        ]
    }

    #[test]
    fn one_se_picks_the_least_flexible_within_one_se() {
        let choice = choose(&table(), Metric::Mse, Rule::OneSe).unwrap();
        assert_eq!(choice.best, 3);
        assert_eq!(choice.chosen, 1);
        assert_eq!(choice.threshold, Some(0.90 + 0.05));
    }

    #[test]
    fn lowest_picks_the_minimum() {
        let choice = choose(&table(), Metric::Mse, Rule::Lowest).unwrap();
        assert_eq!(choice.chosen, 3);
    }

    #[test]
    fn higher_is_better_for_r2() {
        let scores = vec![
            row("a", 2.0, 0.60, 0.02),
            row("b", 4.0, 0.71, 0.02),
            row("c", 8.0, 0.72, 0.02),
        ];
        assert_eq!(choose(&scores, Metric::R2, Rule::Lowest).unwrap().chosen, 2);
        assert_eq!(choose(&scores, Metric::R2, Rule::OneSe).unwrap().chosen, 1);
    }

    #[test]
    fn standard_error_of_the_mean() {
        // Sample SD of (1, 2, 3, 4) is sqrt(5/3); SE = that / 2 (definition).
        let (mean, se) = mean_and_standard_error(&[1.0, 2.0, 3.0, 4.0]);
        assert_eq!(mean, 2.5);
        assert!((se - (5.0f64 / 3.0).sqrt() / 2.0).abs() < 1e-15);
    }

    #[test]
    fn non_finite_scores_never_win_and_all_non_finite_is_an_error() {
        let scores = vec![
            row("a", 1.0, f64::NAN, 0.1),
            row("b", 2.0, 3.0, 0.1),
            row("c", 3.0, f64::INFINITY, 0.0),
        ];
        for rule in [Rule::Lowest, Rule::OneSe] {
            assert_eq!(choose(&scores, Metric::Mse, rule).unwrap().chosen, 1);
        }
        let none = vec![
            row("a", 1.0, f64::NAN, 0.1),
            row("b", 2.0, f64::INFINITY, 0.1),
        ];
        let err = choose(&none, Metric::R2, Rule::OneSe)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("no setting has a finite cross-validated r2 (a, b)"),
            "{err}"
        );
    }
}
