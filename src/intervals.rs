//! Prediction intervals for a fitted setting: CV+, and jackknife+ when the
//! split is leave-one-out, from Barber, Candès, Ramdas & Tibshirani (2021),
//! "Predictive inference with the jackknife+", The Annals of Statistics
//! 49(1), 486–507. The method, the quantile index convention, what happens
//! when the index exceeds n, and the choice of folds under repeated k-fold
//! are written out in docs/intervals.md.
//!
//! The fold fits cross-validation already made give each non-test row its
//! out-of-fold residual Rᵢ = |yᵢ − μ̂₋ₖ₍ᵢ₎(xᵢ)|. For a new point x the same
//! fold fits are evaluated at x (one more call of each fold's fit, with x
//! among the rows to predict), and the interval is
//!
//! ```text
//! lower = the ⌊α(n+1)⌋-th smallest of μ̂₋ₖ₍ᵢ₎(x) − Rᵢ,  i = 1…n
//! upper = the ⌈(1−α)(n+1)⌉-th smallest of μ̂₋ₖ₍ᵢ₎(x) + Rᵢ
//! ```
//!
//! with α = 1 − level; an index above n (or below 1) makes the bound
//! infinite.

use nalgebra::DMatrix;
use rayon::prelude::*;

use crate::error::FitFailure;
use crate::plan::{CandidatePlan, ExperimentPlan};

/// What CV+ takes from cross-validation for one setting: every calibration
/// row's out-of-fold absolute residual and the calibration fold that left it
/// out.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Calibration {
    /// |yᵢ − μ̂₋ₖ₍ᵢ₎(xᵢ)|, fold by fold, rows in fold order.
    pub(crate) residuals: Vec<f64>,
    /// Position in `folds` of the fold that left row i out.
    pub(crate) fold_of: Vec<usize>,
    /// The folds used (indices into `Assignment::folds`): those of the
    /// first repeat, which leave every non-test row out exactly once.
    pub(crate) folds: Vec<usize>,
}

/// Relative tolerance under which level·(n + 1) counts as a whole number.
/// Levels are written as decimals (0.9) that binary floating point cannot
/// hold exactly: 0.9 · 10 must give the index 9, and (1 − 0.9) · 10 the
/// index 1, not 0 (the product is 0.9999999999999998).
const WHOLE_TOLERANCE: f64 = 1e-9;

/// The 1-based rank of the upper bound, ⌈level·(n + 1)⌉, with products
/// within [`WHOLE_TOLERANCE`] of a whole number taken as that number. The
/// lower bound's rank is ⌊α(n + 1)⌋ = n + 1 − this rank. A rank above n
/// means infinite bounds.
pub(crate) fn upper_rank(level: f64, n: usize) -> usize {
    let product = level * (n as f64 + 1.0);
    let nearest = product.round();
    if (product - nearest).abs() <= WHOLE_TOLERANCE * (n as f64 + 1.0) {
        nearest as usize
    } else {
        product.ceil() as usize
    }
}

/// The CV+ interval at each of `points` new points. `fold_predictions[k][j]`
/// is calibration fold k's prediction at point j; `residuals` and `fold_of`
/// as in [`Calibration`]. Returns (lower, upper) per point; both infinite
/// when the rank exceeds n (too few calibration rows for the level).
pub(crate) fn bounds(
    level: f64,
    residuals: &[f64],
    fold_of: &[usize],
    fold_predictions: &[Vec<f64>],
    points: usize,
) -> Vec<(f64, f64)> {
    let n = residuals.len();
    let rank = upper_rank(level, n);
    if rank > n || rank == 0 {
        return vec![(f64::NEG_INFINITY, f64::INFINITY); points];
    }
    let lower_rank = n + 1 - rank;
    let mut low = vec![0.0; n];
    let mut high = vec![0.0; n];
    (0..points)
        .map(|j| {
            for i in 0..n {
                let centre = fold_predictions[fold_of[i]][j];
                low[i] = centre - residuals[i];
                high[i] = centre + residuals[i];
            }
            let lower = if lower_rank == 0 {
                f64::NEG_INFINITY
            } else {
                *low.select_nth_unstable_by(lower_rank - 1, f64::total_cmp).1
            };
            let upper = *high.select_nth_unstable_by(rank - 1, f64::total_cmp).1;
            (lower, upper)
        })
        .collect()
}

/// The calibration of setting `setting` of a candidate from its fold
/// predictions (per fold, per setting, at the fold's validation rows): the
/// folds of the first repeat.
pub(crate) fn calibration(
    plan: &ExperimentPlan,
    fold_predictions: &[Vec<Vec<f64>>],
    setting: usize,
) -> Calibration {
    let a = &plan.assignment;
    let folds: Vec<usize> = (0..a.folds.len())
        .filter(|&f| a.folds[f].repeat == 0)
        .collect();
    let mut residuals = Vec::with_capacity(a.train.len());
    let mut fold_of = Vec::with_capacity(a.train.len());
    for (k, &f) in folds.iter().enumerate() {
        let predicted = &fold_predictions[f][setting];
        for (j, &row) in a.folds[f].valid.iter().enumerate() {
            residuals.push((plan.target[row] - predicted[j]).abs());
            fold_of.push(k);
        }
    }
    Calibration {
        residuals,
        fold_of,
        folds,
    }
}

/// Each of `folds`' fit of `candidate` (its whole grid, on the fold's
/// training rows, exactly as the fold task fits it: class targets as
/// classes, missing cells under `impute` filled with the fold's training
/// medians, in `x_eval` too) evaluated at the rows of `x_eval`: per fold,
/// per setting, per point (a class target's points are class rows). The
/// fits run in parallel and are gathered in fold order.
pub(crate) fn fold_grids_at(
    plan: &ExperimentPlan,
    candidate: &CandidatePlan,
    folds: &[usize],
    x_eval: &DMatrix<f64>,
) -> Result<Vec<Vec<Vec<f64>>>, FitFailure> {
    let a = &plan.assignment;
    let impute = plan.spec.data().missing == crate::spec::MissingPolicy::Impute;
    folds
        .par_iter()
        .map(|&f| {
            let train = a.fold_train(f);
            let mut x_train = plan.design(candidate, &train);
            let mut x_at = x_eval.clone();
            if impute {
                // As `execute::task_data` fills a fold's validation rows.
                crate::data::missing::fill_with_training_medians(&mut x_train, &mut x_at)
                    .expect("the plan checked that every training fold has values");
            }
            let y_train = plan.target_of(&train);
            let classes = plan.task.class_count();
            let width = plan.task.prediction_width();
            // A setting infeasible on this fold predicts NaN (it is never
            // kept, so only a simulation's coverage of every setting sees it).
            let fits =
                crate::execute::feasible::fit_tolerant(candidate, &x_train, false, |family| {
                    family.fit_classes(&x_train, &y_train, &x_at, false, classes)
                });
            Ok::<_, crate::error::FitError>(
                fits.into_iter()
                    .map(|fit| {
                        fit.map_or_else(
                            |_| vec![f64::NAN; x_at.nrows() * width],
                            |fit| fit.eval_pred,
                        )
                    })
                    .collect(),
            )
            .map_err(|cause| FitFailure {
                candidate: candidate.stem.clone(),
                fold: match &plan.origin {
                    Some(origin) => format!(
                        "{origin}, {} (refitted for the intervals)",
                        a.describe_fold(f)
                    ),
                    None => format!("{} (refitted for the intervals)", a.describe_fold(f)),
                },
                cause,
            })
        })
        .collect::<Vec<_>>()
        .into_iter()
        .collect()
}

/// Setting `setting`'s predictions at the rows of `x_eval`, per calibration
/// fold (see [`fold_grids_at`]).
pub(crate) fn fold_predictions_at(
    plan: &ExperimentPlan,
    candidate: &CandidatePlan,
    setting: usize,
    folds: &[usize],
    x_eval: &DMatrix<f64>,
) -> Result<Vec<Vec<f64>>, FitFailure> {
    Ok(fold_grids_at(plan, candidate, folds, x_eval)?
        .into_iter()
        .map(|mut grid| std::mem::take(&mut grid[setting]))
        .collect())
}

/// How every setting of a candidate's intervals fare at points with known
/// targets (a simulation's test points): per setting, the share of points
/// covered and the mean width (infinite when unbounded).
pub(crate) fn coverage_by_setting(
    plan: &ExperimentPlan,
    candidate: &CandidatePlan,
    fold_predictions: &[Vec<Vec<f64>>],
    level: f64,
    rows: &[usize],
) -> Result<Vec<(f64, f64)>, FitFailure> {
    let first = calibration(plan, fold_predictions, 0);
    let grids = fold_grids_at(plan, candidate, &first.folds, &plan.design(candidate, rows))?;
    Ok((0..candidate.settings.len())
        .map(|s| {
            let calibration = calibration(plan, fold_predictions, s);
            let at: Vec<Vec<f64>> = grids.iter().map(|grid| grid[s].clone()).collect();
            let ends = bounds(
                level,
                &calibration.residuals,
                &calibration.fold_of,
                &at,
                rows.len(),
            );
            let covered = rows
                .iter()
                .zip(&ends)
                .filter(|(&row, &(low, high))| low <= plan.target[row] && plan.target[row] <= high)
                .count();
            // Summed in point order (determinism).
            let width: f64 = ends.iter().map(|(low, high)| high - low).sum();
            (
                covered as f64 / rows.len() as f64,
                width / rows.len() as f64,
            )
        })
        .collect())
}

/// The intervals of `candidate`'s setting `setting` at the rows of `x_eval`.
pub(crate) fn intervals_at(
    plan: &ExperimentPlan,
    candidate: &CandidatePlan,
    setting: usize,
    fold_predictions: &[Vec<Vec<f64>>],
    level: f64,
    x_eval: &DMatrix<f64>,
) -> Result<(Calibration, Vec<(f64, f64)>), FitFailure> {
    let calibration = calibration(plan, fold_predictions, setting);
    let at = fold_predictions_at(plan, candidate, setting, &calibration.folds, x_eval)?;
    let bounds = bounds(
        level,
        &calibration.residuals,
        &calibration.fold_of,
        &at,
        x_eval.nrows(),
    );
    Ok((calibration, bounds))
}

/// The Wilson score interval (Wilson, 1927, "Probable inference, the law of
/// succession, and statistical inference", JASA 22(158)) for a binomial
/// proportion of `successes` in `trials`, at 95 %: (low, high).
pub(crate) fn wilson(successes: usize, trials: usize) -> (f64, f64) {
    if trials == 0 {
        return (f64::NAN, f64::NAN);
    }
    // The 0.975 quantile of the standard normal distribution.
    const Z: f64 = 1.959963984540054;
    let m = trials as f64;
    let p = successes as f64 / m;
    let z2 = Z * Z;
    let denominator = 1.0 + z2 / m;
    let centre = (p + z2 / (2.0 * m)) / denominator;
    let half = Z / denominator * (p * (1.0 - p) / m + z2 / (4.0 * m * m)).sqrt();
    ((centre - half).max(0.0), (centre + half).min(1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranks_treat_decimal_levels_as_exact() {
        // 0.9 · 10 is 9 and (1 − 0.9) · 10 is 1 in exact arithmetic.
        assert_eq!(upper_rank(0.9, 9), 9);
        assert_eq!(upper_rank(0.9, 10), 10);
        assert_eq!(upper_rank(0.9, 8), 9);
        assert_eq!(upper_rank(0.95, 19), 19);
        assert_eq!(upper_rank(0.5, 4), 3);
    }

    #[test]
    fn too_few_rows_for_the_level_give_infinite_bounds() {
        // ⌈0.9 · 8⌉ = 8 > 7 rows.
        let b = bounds(0.9, &[1.0; 7], &[0; 7], &[vec![0.0]], 1);
        assert_eq!(b, vec![(f64::NEG_INFINITY, f64::INFINITY)]);
    }

    #[test]
    fn one_fold_gives_the_split_conformal_interval() {
        // One fold: μ̂(x) ± the ⌈0.6 · 6⌉ = 4th smallest residual (by hand).
        let b = bounds(0.6, &[3.0, 1.0, 4.0, 1.5, 9.0], &[0; 5], &[vec![10.0]], 1);
        assert_eq!(b, vec![(6.0, 14.0)]);
    }

    /// End points against a direct implementation of the paper's formula in
    /// numpy 2.4.6 with exact rational indices
    /// (`tests/fixtures/cv_plus/make.py`, Barber et al., 2021), on fixed
    /// fold tables, including an index that is exactly 1 only in exact
    /// arithmetic and one above n.
    #[test]
    fn end_points_match_the_papers_formula_in_numpy() {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/fixtures/cv_plus/expected.json"
        );
        let text = std::fs::read_to_string(path).expect("the fixture is committed");
        let fixture: serde_json::Value = serde_json::from_str(&text).unwrap();
        let numbers = |v: &serde_json::Value| -> Vec<f64> {
            v.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        };
        let bound = |v: &serde_json::Value, infinite: f64| v.as_f64().unwrap_or(infinite);
        let cases = fixture["cases"].as_array().unwrap();
        assert_eq!(cases.len(), 5);
        for case in cases {
            let name = case["name"].as_str().unwrap();
            let level = case["level"].as_f64().unwrap();
            let n = case["n"].as_u64().unwrap() as usize;
            assert_eq!(
                upper_rank(level, n),
                case["upper_rank"].as_u64().unwrap() as usize,
                "{name}"
            );
            let residuals = numbers(&case["residuals"]);
            let fold_of: Vec<usize> = case["fold_of"]
                .as_array()
                .unwrap()
                .iter()
                .map(|k| k.as_u64().unwrap() as usize)
                .collect();
            let folds: Vec<Vec<f64>> = case["fold_predictions"]
                .as_array()
                .unwrap()
                .iter()
                .map(numbers)
                .collect();
            let lower = case["lower"].as_array().unwrap();
            let upper = case["upper"].as_array().unwrap();
            let got = bounds(level, &residuals, &fold_of, &folds, lower.len());
            for (j, (low, high)) in got.iter().enumerate() {
                let (want_low, want_high) = (
                    bound(&lower[j], f64::NEG_INFINITY),
                    bound(&upper[j], f64::INFINITY),
                );
                for (g, w) in [(*low, want_low), (*high, want_high)] {
                    assert!(
                        g == w || (g - w).abs() <= 1e-12,
                        "{name}, point {j}: {g} against numpy's {w}"
                    );
                }
            }
        }
    }

    #[test]
    fn wilson_matches_a_hand_computation() {
        // 45 of 50: p = 0.9; by hand (common practice formula) [0.7864, 0.9565].
        let (low, high) = wilson(45, 50);
        assert!((low - 0.786_4).abs() < 1e-4, "{low}");
        assert!((high - 0.956_5).abs() < 1e-4, "{high}");
    }
}
