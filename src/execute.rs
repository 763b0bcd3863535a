//! Executing a plan: every (candidate, fold) fit of a whole grid, plus one
//! fit per candidate on all non-test rows. Tasks are independent; they run in
//! parallel with rayon and are gathered in task order, so the numbers do not
//! depend on the number of threads. Each task first asks the cache.
//!
//! This is the one fit pipeline: a table's plan and every simulation
//! replicate's plan come through here, so both share one cache read-through,
//! one task identity and one rows-digest recipe.

use nalgebra::DMatrix;
use rayon::prelude::*;

use crate::cache::{self, Cache, CacheKey, Lookup};
use crate::digests;
use crate::error::FitError;
use crate::error::{CacheError, FitFailure};
use crate::models::{Family, SettingFit};
use crate::plan::ExperimentPlan;

pub(crate) mod feasible;
use feasible::{Infeasible, SettingOutcome};

/// Which rows a task trains on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum TaskRows {
    /// Cross-validation fold (index into `Assignment::folds`).
    Fold(usize),
    /// Every fold of a single-row leave-one-out split at once: the hat-diagonal
    /// shortcut for linear smoothers, refits otherwise.
    LeaveOneOut,
    /// All non-test rows; evaluated on the test rows.
    Full,
}

/// One unit of work: one candidate's whole grid on one set of training rows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Task {
    pub(crate) candidate: usize,
    pub(crate) rows: TaskRows,
}

/// Fitted grids of one candidate.
pub(crate) struct CandidateFits {
    /// Per fold (in `Assignment::folds` order), per setting: predictions at the
    /// fold's validation rows.
    pub(crate) fold_predictions: Vec<Vec<Vec<f64>>>,
    /// Per setting: the fit on all non-test rows, evaluated on the test rows.
    pub(crate) full: Vec<SettingFit>,
    /// Per setting: where and why it could not be fitted, in task order
    /// (empty for a feasible setting). An infeasible setting's predictions
    /// above are NaN placeholders (`feasible::placeholder`).
    pub(crate) infeasible: Vec<Vec<Infeasible>>,
}

/// How the cache takes part in a run.
#[derive(Debug, Clone, Copy)]
pub(crate) struct CachePolicy<'a> {
    /// Entries may be read (and are checked before use).
    pub(crate) read: Option<&'a Cache>,
    /// Computed fits are stored.
    pub(crate) write: Option<&'a Cache>,
}

/// A slice of the tasks for one process of a sharded run: 0-based `index` of `count`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Shard {
    pub(crate) index: usize,
    pub(crate) count: usize,
}

impl Shard {
    /// Tasks are dealt round-robin in task order.
    pub(crate) fn owns(&self, task_number: usize) -> bool {
        task_number % self.count == self.index
    }
}

/// What a run did.
#[derive(Debug, Default, Clone, PartialEq, Eq)]
pub(crate) struct Summary {
    pub(crate) computed: usize,
    pub(crate) reused: usize,
    /// Cache entries that failed their check and were recomputed.
    pub(crate) corrupt: Vec<String>,
}

impl Summary {
    /// Adds another part's counts and warnings to this one.
    pub(crate) fn absorb(&mut self, part: Summary) {
        self.computed += part.computed;
        self.reused += part.reused;
        self.corrupt.extend(part.corrupt);
    }
}

/// Why execution stopped.
#[derive(Debug, thiserror::Error)]
pub(crate) enum ExecuteError {
    #[error(transparent)]
    Fit(#[from] FitFailure),
    #[error(transparent)]
    Cache(#[from] CacheError),
}

/// Every task of a plan, candidate-major, folds in order, the full fit last.
/// A single-row leave-one-out split is one task per candidate.
pub(crate) fn tasks(plan: &ExperimentPlan) -> Vec<Task> {
    let folds: Vec<TaskRows> = if plan.assignment.single_row_folds {
        vec![TaskRows::LeaveOneOut]
    } else {
        (0..plan.assignment.folds.len())
            .map(TaskRows::Fold)
            .collect()
    };
    (0..plan.candidates.len())
        .flat_map(|candidate| {
            folds
                .iter()
                .copied()
                .chain(std::iter::once(TaskRows::Full))
                .map(move |rows| Task { candidate, rows })
        })
        .collect()
}

/// The matrices of one task: training design and target, evaluation design.
struct TaskData {
    x_train: DMatrix<f64>,
    y_train: Vec<f64>,
    x_eval: DMatrix<f64>,
}

fn task_data(plan: &ExperimentPlan, task: Task) -> TaskData {
    let candidate = &plan.candidates[task.candidate];
    let a = &plan.assignment;
    let (train, eval) = match task.rows {
        TaskRows::Fold(f) => (a.fold_train(f), a.folds[f].valid.clone()),
        TaskRows::LeaveOneOut => (a.train.clone(), a.train.clone()),
        TaskRows::Full if plan.full_fit.training_as_evaluation => {
            (a.train.clone(), [&a.test[..], &a.train[..]].concat())
        }
        TaskRows::Full => (a.train.clone(), a.test.clone()),
    };
    let mut x_train = plan.design(candidate, &train);
    let mut x_eval = plan.design(candidate, &eval);
    if plan.spec.data().missing == crate::spec::MissingPolicy::Impute {
        // Medians of this task's training rows only; the plan checked that
        // every training fold has a value of each gappy feature.
        crate::data::missing::fill_with_training_medians(&mut x_train, &mut x_eval)
            .expect("the plan checked that every training fold has values");
    }
    TaskData {
        x_train,
        y_train: plan.target_of(&train),
        x_eval,
    }
}

/// Digest of what a task's rows are: the non-test rows (hashed once) and the
/// rows it evaluates on, plus what kind of task it is.
fn rows_digest(plan: &ExperimentPlan, non_test: &[u8; 32], rows: TaskRows) -> [u8; 32] {
    let a = &plan.assignment;
    let (kind, eval): (&[u8], &[usize]) = match rows {
        TaskRows::Fold(f) => (b"fold", &a.folds[f].valid),
        TaskRows::LeaveOneOut => (b"leave-one-out", &[]),
        TaskRows::Full if plan.full_fit.training_as_evaluation => (b"full+training", &a.test),
        TaskRows::Full => (b"full", &a.test),
    };
    let mut hasher = blake3::Hasher::new();
    hasher.update(kind);
    hasher.update(non_test);
    hasher.update(&digests::digest_rows(eval));
    *hasher.finalize().as_bytes()
}

/// The cache key of every task, in [`tasks`] order.
pub(crate) fn task_keys(plan: &ExperimentPlan, tasks: &[Task]) -> Vec<CacheKey> {
    let non_test = digests::digest_rows(&plan.assignment.train);
    let target = &plan.column_digests[&plan.spec.data().target];
    tasks
        .iter()
        .map(|task| {
            let candidate = &plan.candidates[task.candidate];
            let features: Vec<[u8; 32]> = candidate
                .features
                .iter()
                .map(|f| plan.column_digests[f])
                .collect();
            let rows = rows_digest(plan, &non_test, task.rows);
            cache::key(
                &candidate.identity,
                task.rows == TaskRows::Full && plan.full_fit.final_fit,
                &features,
                target,
                &rows,
            )
        })
        .collect()
}

fn describe_rows(plan: &ExperimentPlan, rows: TaskRows) -> String {
    let rows = describe_fold(plan, rows);
    match &plan.origin {
        Some(origin) => format!("{origin}, {rows}"),
        None => rows,
    }
}

fn describe_fold(plan: &ExperimentPlan, rows: TaskRows) -> String {
    match rows {
        TaskRows::Fold(f) => plan.assignment.describe_fold(f),
        TaskRows::LeaveOneOut => "leave-one-out".to_string(),
        TaskRows::Full => "the fit on all non-test rows".to_string(),
    }
}

/// Outcome of one task: its fits (or why a setting could not be fitted)
/// and whether they came from the cache.
struct TaskOutcome {
    fits: Vec<SettingOutcome>,
    reused: bool,
    corrupt: Option<String>,
}

fn run_task(
    plan: &ExperimentPlan,
    task: Task,
    key: Option<&CacheKey>,
    policy: CachePolicy<'_>,
) -> Result<TaskOutcome, ExecuteError> {
    let mut corrupt = None;
    if let (Some(cache), Some(key)) = (policy.read, key) {
        match cache.get(key) {
            Lookup::Hit(bytes) => match postcard::from_bytes::<Vec<SettingOutcome>>(&bytes) {
                Ok(fits) if fits_match_task(plan, task, &fits) => {
                    return Ok(TaskOutcome {
                        fits,
                        reused: true,
                        corrupt: None,
                    })
                }
                Ok(_) => {
                    corrupt = Some(format!(
                        "{}: holds fits of another shape than this task",
                        cache.describe(key)
                    ));
                }
                Err(e) => {
                    corrupt = Some(format!("{}: cannot decode: {e}", cache.describe(key)));
                }
            },
            Lookup::Miss => {}
            Lookup::Corrupt(why) => corrupt = Some(why),
        }
    }
    let data = task_data(plan, task);
    let candidate = &plan.candidates[task.candidate];
    let classes = plan.task.class_count();
    let by_row = task.rows == TaskRows::LeaveOneOut;
    let final_fit = task.rows == TaskRows::Full && plan.full_fit.final_fit;
    // A setting that cannot be fitted here is set aside with its reason;
    // the others are fitted as one grid where they can be.
    let mut fits = feasible::fit_tolerant(candidate, &data.x_train, by_row, |family| {
        if by_row {
            leave_one_out(family, &data.x_train, &data.y_train, classes)
        } else {
            family.fit_classes(
                &data.x_train,
                &data.y_train,
                &data.x_eval,
                final_fit,
                classes,
            )
        }
    });
    for fit in fits.iter_mut().flatten() {
        if task.rows != TaskRows::Full {
            // Only validation predictions of a fold are ever used.
            fit.train_pred = Vec::new();
            fit.coefficients = None;
        } else if plan.full_fit.training_as_evaluation {
            // The rows after the test rows are the training rows.
            let tests = plan.assignment.test.len();
            let width = plan.task.prediction_width();
            fit.train_pred = fit.eval_pred.split_off(tests * width);
        }
    }
    if let (Some(cache), Some(key)) = (policy.write, key) {
        let bytes = postcard::to_allocvec(&fits).map_err(|e| CacheError::Encode(e.to_string()))?;
        cache.put(key, &bytes)?;
    }
    Ok(TaskOutcome {
        fits,
        reused: false,
        corrupt,
    })
}

/// Whether fits read from the cache have the shape this task needs: one per
/// setting, each predicting every evaluation row (and, for a full fit that
/// predicts its training rows too, every training row). A cache entry is
/// checked against its key already; this keeps a read that passes that check
/// from ever indexing out of bounds.
fn fits_match_task(plan: &ExperimentPlan, task: Task, fits: &[SettingOutcome]) -> bool {
    let a = &plan.assignment;
    let (eval, train) = match task.rows {
        TaskRows::Fold(f) => (a.folds[f].valid.len(), None),
        TaskRows::LeaveOneOut => (a.train.len(), None),
        TaskRows::Full if plan.full_fit.training_as_evaluation => {
            (a.test.len(), Some(a.train.len()))
        }
        TaskRows::Full => (a.test.len(), None),
    };
    let width = plan.task.prediction_width();
    fits.len() == plan.candidates[task.candidate].settings.len()
        && fits.iter().flatten().all(|fit| {
            fit.eval_pred.len() == eval * width
                && train.is_none_or(|rows| fit.train_pred.len() == rows * width)
        })
}

/// Leave-one-out predictions for every training row and setting, as
/// `SettingFit`s whose `eval_pred` holds them in row order: the family's
/// shortcut when it has one (hat diagonal, neighbour exclusion), otherwise
/// one refit per left-out row (in parallel, gathered in order). Shared by
/// table specs and simulation replicates. A class target (`classes` > 0) is
/// always refitted, and each row's prediction is its `classes + 1` numbers.
pub(crate) fn leave_one_out(
    family: &dyn Family,
    x_train: &DMatrix<f64>,
    y_train: &[f64],
    classes: usize,
) -> Result<Vec<SettingFit>, FitError> {
    let width = if classes > 0 { classes + 1 } else { 1 };
    let shortcut = if classes > 0 {
        None
    } else {
        family.leave_one_out(x_train, y_train)
    };
    let predictions = match shortcut {
        Some(shortcut) => shortcut?,
        None => {
            let n = y_train.len();
            let per_row: Vec<Vec<Vec<f64>>> = (0..n)
                .into_par_iter()
                .map(|i| {
                    let keep: Vec<usize> = (0..n).filter(|&r| r != i).collect();
                    let x_rest = x_train.select_rows(&keep);
                    let y_rest: Vec<f64> = keep.iter().map(|&r| y_train[r]).collect();
                    let fits = family.fit_classes(
                        &x_rest,
                        &y_rest,
                        &x_train.rows(i, 1).into_owned(),
                        false,
                        classes,
                    )?;
                    Ok(fits.into_iter().map(|f| f.eval_pred).collect())
                })
                .collect::<Vec<Result<Vec<Vec<f64>>, FitError>>>()
                .into_iter()
                .collect::<Result<_, _>>()?;
            (0..family.settings().len())
                .map(|s| {
                    per_row
                        .iter()
                        .flat_map(|row| row[s][..width].iter().copied())
                        .collect()
                })
                .collect()
        }
    };
    Ok(predictions
        .into_iter()
        .map(|eval_pred| SettingFit {
            train_pred: Vec::new(),
            eval_pred,
            effective_df: f64::NAN,
            coefficients: None,
        })
        .collect())
}

/// Runs every task in parallel and returns the gathered fits.
/// `on_done(reused)` is called once per finished task, from any thread, with
/// whether its fits came from the cache.
pub(crate) fn run_all(
    plan: &ExperimentPlan,
    policy: CachePolicy<'_>,
    on_done: &(dyn Fn(bool) + Sync),
) -> Result<(Vec<CandidateFits>, Summary), ExecuteError> {
    let (fits, summary) = run(plan, policy, None, on_done)?;
    Ok((fits.unwrap_or_default(), summary))
}

/// Runs the tasks (all, or one shard's) in parallel. Returns the gathered
/// fits, or `None` for a shard, which only fills the cache.
/// `on_done(reused)` is called once per finished task, from any thread, with
/// whether its fits came from the cache (a failed task counts as computed).
pub(crate) fn run(
    plan: &ExperimentPlan,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    on_done: &(dyn Fn(bool) + Sync),
) -> Result<(Option<Vec<CandidateFits>>, Summary), ExecuteError> {
    let selected: Vec<Task> = tasks(plan)
        .into_iter()
        .enumerate()
        .filter(|(number, _)| shard.is_none_or(|s| s.owns(*number)))
        .map(|(_, task)| task)
        .collect();
    // Under a shard, fits are not kept in memory: they go to the cache.
    let keep = shard.is_none();
    let keys =
        (policy.read.is_some() || policy.write.is_some()).then(|| task_keys(plan, &selected));
    let outcomes: Vec<Result<TaskOutcome, ExecuteError>> = selected
        .par_iter()
        .enumerate()
        .map(|(number, &task)| {
            let key = keys.as_ref().map(|k| &k[number]);
            let outcome = run_task(plan, task, key, policy).map(|mut o| {
                if !keep {
                    o.fits = Vec::new();
                }
                o
            });
            on_done(outcome.as_ref().is_ok_and(|o| o.reused));
            outcome
        })
        .collect();

    let mut summary = Summary::default();
    let mut fits: Vec<CandidateFits> = plan
        .candidates
        .iter()
        .map(|candidate| CandidateFits {
            fold_predictions: Vec::with_capacity(plan.assignment.folds.len()),
            full: Vec::new(),
            infeasible: vec![Vec::new(); candidate.settings.len()],
        })
        .collect();
    let width = plan.task.prediction_width();
    for (task, outcome) in selected.iter().zip(outcomes) {
        let outcome = outcome?;
        if outcome.reused {
            summary.reused += 1;
        } else {
            summary.computed += 1;
        }
        summary.corrupt.extend(outcome.corrupt);
        if !keep {
            continue;
        }
        let target = &mut fits[task.candidate];
        let a = &plan.assignment;
        let (eval, train) = match task.rows {
            TaskRows::Fold(f) => (a.folds[f].valid.len(), 0),
            TaskRows::LeaveOneOut => (a.train.len(), 0),
            TaskRows::Full if plan.full_fit.final_fit || plan.full_fit.training_as_evaluation => {
                (a.test.len(), a.train.len())
            }
            TaskRows::Full => (a.test.len(), 0),
        };
        let outcome_fits: Vec<SettingFit> = outcome
            .fits
            .into_iter()
            .enumerate()
            .map(|(s, fit)| {
                fit.unwrap_or_else(|reason| {
                    target.infeasible[s].push(Infeasible {
                        fold: describe_rows(plan, task.rows),
                        reason,
                    });
                    feasible::placeholder(eval, train, width)
                })
            })
            .collect();
        match task.rows {
            TaskRows::Fold(_) => target
                .fold_predictions
                .push(outcome_fits.into_iter().map(|fit| fit.eval_pred).collect()),
            TaskRows::LeaveOneOut => {
                // Fold i of a single-row split validates on non-test row i.
                for row in 0..plan.assignment.folds.len() {
                    let grid = outcome_fits
                        .iter()
                        .map(|fit| fit.eval_pred[row * width..(row + 1) * width].to_vec())
                        .collect();
                    target.fold_predictions.push(grid);
                }
            }
            TaskRows::Full => target.full = outcome_fits,
        }
    }
    Ok((keep.then_some(fits), summary))
}

#[cfg(test)]
mod impute_tests;
