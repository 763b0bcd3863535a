//! Conformal prediction sets for a class target, by the cross-conformal
//! (CV+) construction: the same fold fits and the same finite-sample rank
//! as the CV+ intervals of `crate::intervals`, with a class score in place
//! of the absolute residual. The score, the rule and the guarantee are
//! written out in docs/intervals.md ("Class targets: prediction sets").
//!
//! Score: sᵢ = 1 − p̂₋ₖ₍ᵢ₎(yᵢ | xᵢ), one minus the probability the fold fit
//! that left row i out gives row i's own class (the score of Sadinle, Lei &
//! Wasserman, 2019, "Least ambiguous set-valued classifiers with bounded
//! error levels", JASA 114(525)). Rule (Romano, Sesia & Candès, 2020,
//! "Classification with valid and adaptive coverage", NeurIPS 33, the CV+
//! set; the same comparison as the set form of CV+ in Barber, Candès,
//! Ramdas & Tibshirani, 2021): class y is in the set at x iff
//!
//! ```text
//! #{ i : sᵢ < 1 − p̂₋ₖ₍ᵢ₎(y | x) } < (1 − α)(n + 1)
//! ```
//!
//! For a whole count c, c < (1 − α)(n + 1) ⇔ c < ⌈(1 − α)(n + 1)⌉, the
//! rank `intervals::upper_rank` computes (decimal levels taken as exact).
//! When that rank exceeds n every count passes: every set holds every class.

use crate::error::FitFailure;
use crate::metrics::ClassPrediction;
use crate::plan::{CandidatePlan, ExperimentPlan};

/// What the sets take from cross-validation for one setting: every
/// calibration row's out-of-fold score and the calibration fold that left
/// it out.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct SetCalibration {
    /// sᵢ = 1 − p̂₋ₖ₍ᵢ₎(yᵢ | xᵢ), fold by fold, rows in fold order.
    pub(crate) scores: Vec<f64>,
    /// Position in `folds` of the fold that left row i out.
    pub(crate) fold_of: Vec<usize>,
    /// The folds used (indices into `Assignment::folds`): those of the
    /// first repeat, which leave every non-test row out exactly once.
    pub(crate) folds: Vec<usize>,
}

/// The nonconformity score of class `class` under `probabilities` (one
/// row's class probabilities in class order): 1 − p(class).
pub(crate) fn score(probabilities: &[f64], class: usize) -> f64 {
    1.0 - probabilities[class]
}

/// The calibration of setting `setting` from a candidate's fold predictions
/// (per fold, per setting, class rows at the fold's validation rows): the
/// folds of the first repeat, as for the intervals.
pub(crate) fn calibration(
    plan: &ExperimentPlan,
    fold_predictions: &[Vec<Vec<f64>>],
    setting: usize,
) -> SetCalibration {
    let layout = ClassPrediction {
        classes: plan.task.class_count(),
    };
    let a = &plan.assignment;
    let folds: Vec<usize> = (0..a.folds.len())
        .filter(|&f| a.folds[f].repeat == 0)
        .collect();
    let mut scores = Vec::with_capacity(a.train.len());
    let mut fold_of = Vec::with_capacity(a.train.len());
    for (k, &f) in folds.iter().enumerate() {
        let predicted = &fold_predictions[f][setting];
        for (j, &row) in a.folds[f].valid.iter().enumerate() {
            let class = plan.target[row] as usize;
            scores.push(score(layout.probabilities(predicted, j), class));
            fold_of.push(k);
        }
    }
    SetCalibration {
        scores,
        fold_of,
        folds,
    }
}

/// The prediction set at each of `points` new points, as class indices in
/// class order. `fold_predictions[k]` holds calibration fold k's class rows
/// (probabilities, then the predicted class) at the points; `scores` and
/// `fold_of` as in [`SetCalibration`].
pub(crate) fn sets(
    level: f64,
    scores: &[f64],
    fold_of: &[usize],
    fold_predictions: &[Vec<f64>],
    classes: usize,
    points: usize,
) -> Vec<Vec<usize>> {
    let n = scores.len();
    let rank = crate::intervals::upper_rank(level, n);
    // Each fold's calibration scores, sorted: the count of scores below a
    // value is then one binary search per fold.
    let mut by_fold: Vec<Vec<f64>> = vec![Vec::new(); fold_predictions.len()];
    for (&s, &k) in scores.iter().zip(fold_of) {
        by_fold[k].push(s);
    }
    for fold in &mut by_fold {
        fold.sort_by(f64::total_cmp);
    }
    let layout = ClassPrediction { classes };
    (0..points)
        .map(|j| {
            (0..classes)
                .filter(|&y| {
                    let below: usize = by_fold
                        .iter()
                        .zip(fold_predictions)
                        .map(|(sorted, predicted)| {
                            let t = score(layout.probabilities(predicted, j), y);
                            sorted.partition_point(|&s| s < t)
                        })
                        .sum();
                    below < rank
                })
                .collect()
        })
        .collect()
}

/// How every setting of a candidate's prediction sets fare at rows with
/// known classes (a simulation's test points): per setting, the share of
/// rows whose class is in its set and the mean set size.
pub(crate) fn coverage_by_setting(
    plan: &ExperimentPlan,
    candidate: &CandidatePlan,
    fold_predictions: &[Vec<Vec<f64>>],
    level: f64,
    rows: &[usize],
) -> Result<Vec<(f64, f64)>, FitFailure> {
    let classes = plan.task.class_count();
    let folds = calibration(plan, fold_predictions, 0).folds;
    let grids =
        crate::intervals::fold_grids_at(plan, candidate, &folds, &plan.design(candidate, rows))?;
    Ok((0..candidate.settings.len())
        .map(|s| {
            let calibration = calibration(plan, fold_predictions, s);
            let at: Vec<Vec<f64>> = grids.iter().map(|grid| grid[s].clone()).collect();
            let sets = sets(
                level,
                &calibration.scores,
                &calibration.fold_of,
                &at,
                classes,
                rows.len(),
            );
            let test = crate::results::prediction_sets::summarise(plan, rows, &sets, classes);
            (test.coverage, test.mean_size)
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Two classes, one fold: class rows are (p0, p1, argmax).
    fn row(p1: f64) -> Vec<f64> {
        vec![1.0 - p1, p1, if p1 > 0.5 { 1.0 } else { 0.0 }]
    }

    #[test]
    fn one_fold_gives_the_split_conformal_set() {
        // n = 9 scores, level 0.8: rank ⌈0.8 · 10⌉ = 8. A class is in the
        // set when fewer than 8 scores lie strictly below its score, that
        // is when its score is at most the 8th smallest (0.7), by hand.
        let scores = [0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.9];
        let fold_of = [0; 9];
        // p1 = 0.35: scores 0.35 (class 1, 4 below) and 0.65 (class 0,
        // 7 below) both in. p1 = 0.2: class 0 score 0.2 in; class 1 score
        // 0.8 has 8 below, out. p1 = 0.75: class 1 scores 0.25 (3 below,
        // in), class 0 scores 0.75 (8 below, out).
        let predicted: Vec<f64> = [0.35, 0.2, 0.75].iter().flat_map(|&p| row(p)).collect();
        let got = sets(0.8, &scores, &fold_of, &[predicted], 2, 3);
        assert_eq!(got, vec![vec![0, 1], vec![0], vec![1]]);
    }

    #[test]
    fn ties_count_only_strictly_smaller_scores() {
        // Rank ⌈0.5 · 4⌉ = 2: at most one score strictly below. Class 1's
        // score equals the two smallest (0.25): none below, in (counting
        // ties would make 2 and drop it). Class 0's (0.75) has 2 below.
        // Quarters are exact in binary, so the ties are exact.
        let scores = [0.25, 0.25, 0.75];
        let predicted = row(0.75);
        let got = sets(0.5, &scores, &[0, 0, 0], &[predicted], 2, 1);
        assert_eq!(got, vec![vec![1]]);
    }

    #[test]
    fn too_few_rows_for_the_level_give_every_class() {
        // ⌈0.9 · 8⌉ = 8 > 7 rows: every count passes.
        let predicted = vec![0.0, 0.0, 1.0, 2.0];
        let got = sets(0.9, &[0.0; 7], &[0; 7], &[predicted], 3, 1);
        assert_eq!(got, vec![vec![0, 1, 2]]);
    }

    #[test]
    fn each_row_is_compared_with_its_own_folds_fit() {
        // Two folds; fold 0's fit gives class 1 probability 0.9 at x, fold
        // 1's gives 0.1. Fold 0's rows score 0.5, fold 1's score 0.05.
        // Class 1 at x: fold 0 compares 0.5 < 0.1 (no), fold 1 compares
        // 0.05 < 0.9 (yes, 2 rows): count 2. Class 0: 0.5 < 0.9 (2 rows),
        // 0.05 < 0.1 (2 rows): count 4. Rank ⌈0.6 · 5⌉ = 3: {1}.
        let scores = [0.5, 0.5, 0.05, 0.05];
        let fold_of = [0, 0, 1, 1];
        let got = sets(0.6, &scores, &fold_of, &[row(0.9), row(0.1)], 2, 1);
        assert_eq!(got, vec![vec![1]]);
    }

    /// Sets against a direct implementation of the rule in numpy 2.4.6
    /// (`tests/fixtures/cv_plus_sets/make.py`, Romano, Sesia & Candès,
    /// 2020), on fixed fold tables with tied scores, a rank exactly 1 only
    /// in exact arithmetic and a rank above n.
    #[test]
    fn sets_match_a_direct_implementation_in_numpy() {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/fixtures/cv_plus_sets/expected.json"
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
        let whole = |v: &serde_json::Value| -> Vec<usize> {
            v.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_u64().unwrap() as usize)
                .collect()
        };
        let cases = fixture["cases"].as_array().unwrap();
        assert_eq!(cases.len(), 5);
        let mut sizes_seen = std::collections::BTreeSet::new();
        for case in cases {
            let name = case["name"].as_str().unwrap();
            let level = case["level"].as_f64().unwrap();
            let classes = case["classes"].as_u64().unwrap() as usize;
            let n = case["n"].as_u64().unwrap() as usize;
            assert_eq!(
                crate::intervals::upper_rank(level, n),
                case["rank"].as_u64().unwrap() as usize,
                "{name}"
            );
            let calibration_rows = case["calibration_probabilities"].as_array().unwrap();
            let labels = whole(&case["labels"]);
            let fold_of = whole(&case["fold_of"]);
            // The scores as heldout computes them from the fold rows.
            let layout = ClassPrediction { classes };
            let scores: Vec<f64> = calibration_rows
                .iter()
                .zip(&labels)
                .map(|(p, &y)| {
                    let mut flat = Vec::new();
                    layout.push_argmax(&mut flat, &numbers(p));
                    score(layout.probabilities(&flat, 0), y)
                })
                .collect();
            assert_eq!(scores, numbers(&case["scores"]), "{name}: scores");
            let folds: Vec<Vec<f64>> = case["fold_probabilities"]
                .as_array()
                .unwrap()
                .iter()
                .map(|fold| {
                    let mut flat = Vec::new();
                    for point in fold.as_array().unwrap() {
                        layout.push_argmax(&mut flat, &numbers(point));
                    }
                    flat
                })
                .collect();
            let want: Vec<Vec<usize>> =
                case["sets"].as_array().unwrap().iter().map(whole).collect();
            let got = sets(level, &scores, &fold_of, &folds, classes, want.len());
            assert_eq!(got, want, "{name}");
            sizes_seen.extend(got.iter().map(Vec::len));
        }
        // The fixture exercises empty, partial and full sets.
        assert!(sizes_seen.contains(&0) && sizes_seen.contains(&1) && sizes_seen.contains(&3));
    }
}
