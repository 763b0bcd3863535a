//! Executing a plan: every (candidate, fold) fit of a whole grid, plus one
//! fit per candidate on all non-test rows. Tasks are independent; they run in
//! parallel with rayon and are gathered in task order, so the numbers do not
//! depend on the number of threads.

use rayon::prelude::*;

use crate::error::FitFailure;
use crate::models::SettingFit;
use crate::plan::ExperimentPlan;

/// Which rows a task trains on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TaskRows {
    /// Cross-validation fold (index into `Assignment::folds`).
    Fold(usize),
    /// All non-test rows; evaluated on the test rows.
    Full,
}

/// One unit of work: one candidate's whole grid on one set of training rows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Task {
    pub candidate: usize,
    pub rows: TaskRows,
}

/// Fitted grids of one candidate.
pub struct CandidateFits {
    /// Per fold (in `Assignment::folds` order), per setting: predictions at the
    /// fold's validation rows.
    pub fold_predictions: Vec<Vec<Vec<f64>>>,
    /// Per setting: the fit on all non-test rows, evaluated on the test rows.
    pub full: Vec<SettingFit>,
}

/// Every task of a plan, candidate-major, folds in order, the full fit last.
pub fn tasks(plan: &ExperimentPlan) -> Vec<Task> {
    (0..plan.candidates.len())
        .flat_map(|candidate| {
            (0..plan.assignment.folds.len())
                .map(TaskRows::Fold)
                .chain(std::iter::once(TaskRows::Full))
                .map(move |rows| Task { candidate, rows })
        })
        .collect()
}

/// Runs one task.
pub fn run_task(plan: &ExperimentPlan, task: Task) -> Result<Vec<SettingFit>, FitFailure> {
    let candidate = &plan.candidates[task.candidate];
    let (train, eval, fold_name) = match task.rows {
        TaskRows::Fold(f) => {
            let fold = &plan.assignment.folds[f];
            let name = if plan.assignment.repeats > 1 {
                format!("fold {} of repeat {}", fold.label, fold.repeat + 1)
            } else {
                format!("fold {}", fold.label)
            };
            (&fold.train, &fold.valid, name)
        }
        TaskRows::Full => (
            &plan.assignment.train,
            &plan.assignment.test,
            "the fit on all non-test rows".to_string(),
        ),
    };
    let x_train = plan.design(candidate, train);
    let y_train = plan.target_of(train);
    let x_eval = plan.design(candidate, eval);
    candidate
        .family
        .fit_path(&x_train, &y_train, &x_eval, task.rows == TaskRows::Full)
        .map_err(|source| FitFailure {
            candidate: candidate.stem.clone(),
            fold: fold_name,
            source,
        })
}

/// Runs every task (in parallel) and gathers the fits per candidate.
/// `on_done` is called once per finished task, from any thread.
pub fn run_all(
    plan: &ExperimentPlan,
    on_done: &(dyn Fn() + Sync),
) -> Result<Vec<CandidateFits>, FitFailure> {
    let all = tasks(plan);
    let outcomes: Vec<(Task, Result<Vec<SettingFit>, FitFailure>)> = all
        .par_iter()
        .map(|&task| {
            let outcome = run_task(plan, task);
            on_done();
            (task, outcome)
        })
        .collect();

    let mut fits: Vec<CandidateFits> = (0..plan.candidates.len())
        .map(|_| CandidateFits {
            fold_predictions: Vec::with_capacity(plan.assignment.folds.len()),
            full: Vec::new(),
        })
        .collect();
    for (task, outcome) in outcomes {
        let grid = outcome?;
        let target = &mut fits[task.candidate];
        match task.rows {
            TaskRows::Fold(_) => target
                .fold_predictions
                .push(grid.into_iter().map(|fit| fit.eval_pred).collect()),
            TaskRows::Full => target.full = grid,
        }
    }
    Ok(fits)
}
