//! Settings that cannot be fitted on some training rows (k nearest
//! neighbours with fewer than k rows, a spline df beyond the distinct values
//! of a feature) are infeasible there: they are set aside with their reason
//! instead of stopping the run, and the choice is made among the others
//! (docs/spec.md, "Infeasible settings").
//!
//! Two ways to find one: before fitting, from what the family can tell of
//! the training rows' shape ([`Family::infeasible`]); and while fitting, when
//! the family's fit fails ([`FitError`]: always about the data and the
//! setting, never an I/O error). A grid that fails as a whole is refitted one
//! setting at a time, so one bad setting never takes the others with it.

use std::sync::Arc;

use nalgebra::DMatrix;
use serde::{Deserialize, Serialize};

use crate::error::FitError;
use crate::models::{Family, SettingFit, TrainingShape};
use crate::plan::{CandidatePlan, ExperimentPlan};

/// What one setting's fit on one task's rows gave: its fit, or why it could
/// not be fitted. This is what the fit cache stores per setting, so a failure
/// is never read back as a fit.
pub(crate) type SettingOutcome = Result<SettingFit, String>;

/// A setting that could not be fitted on the training rows of `fold`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Infeasible {
    /// The training rows, as failures name them (`fold 3`, `the fit on all
    /// non-test rows`).
    pub fold: String,
    /// Why, in the family's words.
    pub reason: String,
}

/// The family of `candidate` with only the settings at `keep` (indices into
/// its grid, in grid order). A family without a tuning parameter has one
/// setting, and is returned as it is.
pub(crate) fn restricted(
    candidate: &CandidatePlan,
    keep: &[usize],
) -> Result<Arc<dyn Family>, String> {
    let Some(key) = candidate
        .settings
        .first()
        .and_then(|s| s.param)
        .map(|p| p.0)
    else {
        return Ok(Arc::clone(&candidate.family));
    };
    let values: Vec<_> = keep
        .iter()
        .filter_map(|&s| candidate.settings[s].param.map(|p| p.1))
        .collect();
    let settings = candidate.grid.narrowed(key, &values);
    match &candidate.encoded {
        Some(encoded) => encoded.narrowed(&settings),
        None => (candidate.def.build)(&settings, candidate.features.clone()).map(Arc::from),
    }
    .map_err(|problem| format!("{}: {}", problem.key, problem.message))
}

/// Per setting of `candidate`, why it cannot be fitted on `x_train` (the
/// fits that leave one row out, with `leave_one_out`), as far as the family
/// can tell before fitting.
pub(crate) fn known_before_fitting(
    candidate: &CandidatePlan,
    x_train: &DMatrix<f64>,
    leave_one_out: bool,
) -> Vec<Option<String>> {
    let shape = TrainingShape::new(x_train, leave_one_out);
    (0..candidate.settings.len())
        .map(|s| candidate.family.infeasible(s, &shape))
        .collect()
}

/// Fits `candidate`'s grid through `fit` (which fits whichever family it is
/// given on the task's rows), leaving out the settings known to be
/// infeasible on `x_train`; when the fit of the remaining grid fails, each
/// of its settings is fitted alone, and those that fail are infeasible with
/// the fit's own message. Returns one outcome per setting, in grid order.
pub(crate) fn fit_tolerant(
    candidate: &CandidatePlan,
    x_train: &DMatrix<f64>,
    leave_one_out: bool,
    fit: impl Fn(&dyn Family) -> Result<Vec<SettingFit>, FitError>,
) -> Vec<SettingOutcome> {
    let count = candidate.settings.len();
    let mut outcomes: Vec<Option<SettingOutcome>> =
        known_before_fitting(candidate, x_train, leave_one_out)
            .into_iter()
            .map(|why| why.map(Err))
            .collect();
    let open: Vec<usize> = (0..count).filter(|&s| outcomes[s].is_none()).collect();
    if !open.is_empty() {
        let family = if open.len() == count {
            Ok(Arc::clone(&candidate.family))
        } else {
            restricted(candidate, &open)
        };
        let whole = family.and_then(|family| fit(family.as_ref()).map_err(|e| e.to_string()));
        match whole {
            Ok(fits) if fits.len() == open.len() => {
                for (&s, fit) in open.iter().zip(fits) {
                    outcomes[s] = Some(Ok(fit));
                }
            }
            Err(reason) if open.len() == 1 => outcomes[open[0]] = Some(Err(reason)),
            _ => {
                for &s in &open {
                    let alone = restricted(candidate, &[s]).and_then(|family| {
                        fit(family.as_ref())
                            .map_err(|e| e.to_string())
                            .and_then(|mut fits| match fits.len() {
                                1 => Ok(fits.remove(0)),
                                n => Err(format!("the fit gave {n} settings instead of 1")),
                            })
                    });
                    outcomes[s] = Some(alone);
                }
            }
        }
    }
    outcomes
        .into_iter()
        .map(|o| o.unwrap_or_else(|| Err("not fitted".to_string())))
        .collect()
}

/// A stand-in for an infeasible setting's fit, with every prediction NaN and
/// the lengths a feasible fit would have (`eval` and `train` rows of `width`
/// numbers each), so that no later stage indexes out of bounds; its scores
/// are NaN, which never compete in a choice.
pub(crate) fn placeholder(eval: usize, train: usize, width: usize) -> SettingFit {
    SettingFit {
        train_pred: vec![f64::NAN; train * width],
        eval_pred: vec![f64::NAN; eval * width],
        effective_df: f64::NAN,
        coefficients: None,
    }
}

/// The failure when no setting of any candidate could be fitted: every
/// candidate's first reason, so the message says what to change.
pub(crate) fn none_feasible(
    plan: &ExperimentPlan,
    infeasible: &[Vec<Vec<Infeasible>>],
) -> FitError {
    let reasons: Vec<String> = plan
        .candidates
        .iter()
        .zip(infeasible)
        .flat_map(|(candidate, settings)| {
            candidate
                .settings
                .iter()
                .zip(settings)
                .filter_map(|(setting, found)| {
                    found.first().map(|first| {
                        format!(
                            "{} ({}): {}",
                            candidate.id(setting),
                            first.fold,
                            first.reason
                        )
                    })
                })
        })
        .collect();
    FitError::NoFeasibleSetting {
        reasons: reasons.join("; "),
    }
}

/// Takes a setting infeasible anywhere (`found` not empty) out of the
/// choice: its cross-validated score becomes NaN, which never competes,
/// even when only the fit on all non-test rows failed.
pub(crate) fn set_aside(score: &mut crate::assess::SettingScore, found: &[Infeasible]) {
    if !found.is_empty() {
        score.cv_score = f64::NAN;
        score.cv_se = f64::NAN;
    }
}

/// Whether every setting of every candidate is infeasible somewhere.
pub(crate) fn all_infeasible(infeasible: &[Vec<Vec<Infeasible>>]) -> bool {
    infeasible.iter().flatten().all(|found| !found.is_empty())
}

/// Per candidate and setting, the fits of `plan` in which the setting is
/// known to be infeasible before anything is fitted (`heldout plan`), in
/// task order. Fits that fail only while fitting are not foreseen here.
pub(crate) fn before_fitting(plan: &ExperimentPlan) -> Vec<Vec<Vec<Infeasible>>> {
    let mut found: Vec<Vec<Vec<Infeasible>>> = plan
        .candidates
        .iter()
        .map(|candidate| vec![Vec::new(); candidate.settings.len()])
        .collect();
    for task in super::tasks(plan) {
        let candidate = &plan.candidates[task.candidate];
        let data = super::task_data(plan, task);
        let by_row = task.rows == super::TaskRows::LeaveOneOut;
        for (s, why) in known_before_fitting(candidate, &data.x_train, by_row)
            .into_iter()
            .enumerate()
        {
            if let Some(reason) = why {
                found[task.candidate][s].push(Infeasible {
                    fold: super::describe_rows(plan, task.rows),
                    reason,
                });
            }
        }
    }
    found
}
