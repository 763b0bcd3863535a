//! Evidence about the choice itself, computed from a plan and its fits after
//! assessment: the locked test score's interval, paired differences between
//! the kept setting and its rivals, and a leakage inspection of the rows.
//! Each part documents its method in docs/reports.md.

pub(crate) mod interval;
pub(crate) mod leakage;
pub(crate) mod nested;
pub(crate) mod paired;

use crate::assess::SettingScore;
use crate::execute::CandidateFits;
use crate::plan::ExperimentPlan;
use crate::results::{Leakage, Paired, PairedComparison, TestInterval};

/// The evidence about one choice, for `results.json`.
pub(crate) struct SelectionEvidence {
    pub(crate) test_interval: Option<TestInterval>,
    pub(crate) paired: Option<Paired>,
    pub(crate) leakage: Leakage,
    /// Per setting (in `scores` order), its locked test score: only with
    /// `[choose] peek = true`.
    pub(crate) test_scores: Option<Vec<f64>>,
}

/// Gathers the evidence about the choice of `chosen` (best cross-validated:
/// `best`) among `scores`, whose settings sit at `locate` (candidate,
/// setting) in `fits`.
pub(crate) fn gather(
    plan: &ExperimentPlan,
    fits: &[CandidateFits],
    scores: &[SettingScore],
    locate: &[(usize, usize)],
    chosen: usize,
    best: usize,
) -> SelectionEvidence {
    let scorer = plan.scorer();
    let assignment = &plan.assignment;
    let test_target = plan.target_of(&assignment.test);
    // The full fit's predictions at the test rows (a simulation's also hold
    // the training rows after them).
    let width = plan.task.prediction_width();
    let at_test = |c: usize, s: usize| &fits[c].full[s].eval_pred[..test_target.len() * width];
    let (c, s) = locate[chosen];
    let test_interval = (!assignment.test.is_empty())
        .then(|| interval::test_interval(scorer, &test_target, at_test(c, s)))
        .flatten()
        .map(|i| TestInterval {
            method: i.method.name().to_string(),
            level: interval::LEVEL,
            low: i.low,
            high: i.high,
            rows_to_halve: i.rows_to_halve,
        });
    let test_scores = (plan.spec.spec.choose.peek && !assignment.test.is_empty()).then(|| {
        locate
            .iter()
            .map(|&(c, s)| scorer.score(&test_target, at_test(c, s)))
            .collect()
    });
    let leakage = leakage::of_plan(plan);
    SelectionEvidence {
        test_interval,
        paired: paired_table(plan, scores, locate, chosen, best),
        leakage,
        test_scores,
    }
}

/// The kept setting against the best cross-validated setting and against
/// the least flexible setting of each candidate (smallest effective df, the
/// earlier on ties); a rival named twice is listed once with both reasons.
fn paired_table(
    plan: &ExperimentPlan,
    scores: &[SettingScore],
    locate: &[(usize, usize)],
    chosen: usize,
    best: usize,
) -> Option<Paired> {
    let a = &plan.assignment;
    if a.folds.len() < 2 {
        return None;
    }
    let mut rivals: Vec<(usize, Vec<String>)> = Vec::new();
    let mut add = |rival: usize, reason: String| {
        if rival == chosen {
            return;
        }
        match rivals.iter_mut().find(|(r, _)| *r == rival) {
            Some((_, reasons)) => reasons.push(reason),
            None => rivals.push((rival, vec![reason])),
        }
    };
    add(best, "lowest cv".to_string());
    for (c, candidate) in plan.candidates.iter().enumerate() {
        let mut least: Option<usize> = None;
        for (i, &(ci, _)) in locate.iter().enumerate() {
            // An infeasible setting (no finite score) is no rival.
            if ci == c
                && scores[i].cv_score.is_finite()
                && least.is_none_or(|l| scores[i].effective_df < scores[l].effective_df)
            {
                least = Some(i);
            }
        }
        if let Some(l) = least {
            add(l, format!("least flexible {}", candidate.family_name));
        }
    }
    let repeated = a.repeats > 1;
    let (valid_rows, train_rows) = (0..a.folds.len()).fold((0usize, 0usize), |(v, t), f| {
        (v + a.folds[f].valid.len(), t + a.fold_train_len(f))
    });
    let ratio = valid_rows as f64 / train_rows as f64;
    let estimator = if repeated {
        paired::Estimator::CorrectedResampledT { ratio }
    } else {
        paired::Estimator::FoldStandardError
    };
    let kept = &scores[chosen];
    let comparisons = rivals
        .into_iter()
        .map(|(rival, reasons)| {
            let d = paired::compare(
                &kept.fold_scores,
                &scores[rival].fold_scores,
                plan.metric,
                estimator,
            );
            PairedComparison {
                against: scores[rival].id.clone(),
                reasons,
                mean_difference: d.mean,
                se: d.se,
                t: d.mean / d.se,
                kept_better_folds: d.kept_better,
                kept_better_share: d.kept_better as f64 / kept.fold_scores.len() as f64,
            }
        })
        .collect();
    Some(Paired {
        kept: kept.id.clone(),
        estimator: estimator.name().to_string(),
        folds: kept.fold_scores.len(),
        test_train_ratio: ratio,
        comparisons,
    })
}
