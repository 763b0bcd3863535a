//! Executing a plan: every (candidate, fold) fit of a whole grid, plus one
//! fit per candidate on all non-test rows. Tasks are independent; they run in
//! parallel with rayon and are gathered in task order, so the numbers do not
//! depend on the number of threads. Each task first asks the cache.

use rayon::prelude::*;

use crate::cache::{self, Cache, CacheKey, Lookup};
use crate::error::{CacheError, FitFailure};
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

/// How the cache takes part in a run.
#[derive(Debug, Clone, Copy)]
pub struct CachePolicy<'a> {
    /// Entries may be read (and are checked before use).
    pub read: Option<&'a Cache>,
    /// Computed fits are stored.
    pub write: Option<&'a Cache>,
}

/// A slice of the tasks for one process of a sharded run: 0-based `index` of `count`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    pub index: usize,
    pub count: usize,
}

impl Shard {
    /// Tasks are dealt round-robin in task order.
    pub fn owns(&self, task_number: usize) -> bool {
        task_number % self.count == self.index
    }
}

/// What a run did.
#[derive(Debug, Default, Clone, PartialEq, Eq)]
pub struct Summary {
    pub computed: usize,
    pub reused: usize,
    /// Cache entries that failed their check and were recomputed.
    pub corrupt: Vec<String>,
}

/// Why execution stopped.
#[derive(Debug, thiserror::Error)]
pub enum ExecuteError {
    #[error(transparent)]
    Fit(#[from] FitFailure),
    #[error(transparent)]
    Cache(#[from] CacheError),
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

/// The matrices of one task: training design and target, evaluation design.
struct TaskData {
    x_train: nalgebra::DMatrix<f64>,
    y_train: Vec<f64>,
    x_eval: nalgebra::DMatrix<f64>,
}

fn task_data(plan: &ExperimentPlan, task: Task) -> TaskData {
    let candidate = &plan.candidates[task.candidate];
    let (train, eval) = task_rows(plan, task.rows);
    TaskData {
        x_train: plan.design(candidate, train),
        y_train: plan.target_of(train),
        x_eval: plan.design(candidate, eval),
    }
}

/// The training and evaluation rows of a task.
fn task_rows(plan: &ExperimentPlan, rows: TaskRows) -> (&[usize], &[usize]) {
    match rows {
        TaskRows::Fold(f) => {
            let fold = &plan.assignment.folds[f];
            (&fold.train, &fold.valid)
        }
        TaskRows::Full => (&plan.assignment.train, &plan.assignment.test),
    }
}

/// The cache key of every task, in [`tasks`] order. Row digests are computed
/// once per fold and shared by all candidates.
pub fn task_keys(plan: &ExperimentPlan, tasks: &[Task]) -> Vec<CacheKey> {
    let folds = plan.assignment.folds.len();
    let row_digests: Vec<[u8; 32]> = (0..=folds)
        .into_par_iter()
        .map(|f| {
            let rows = if f < folds {
                TaskRows::Fold(f)
            } else {
                TaskRows::Full
            };
            let (train, eval) = task_rows(plan, rows);
            cache::digest_rows(train, eval)
        })
        .collect();
    let target = &plan.column_digests[&plan.spec.data().target];
    tasks
        .iter()
        .map(|task| {
            let family = plan.candidates[task.candidate].family.as_ref();
            let features: Vec<[u8; 32]> = family
                .features()
                .iter()
                .map(|f| plan.column_digests[f])
                .collect();
            let rows = match task.rows {
                TaskRows::Fold(f) => &row_digests[f],
                TaskRows::Full => &row_digests[folds],
            };
            cache::key(family, task.rows == TaskRows::Full, &features, target, rows)
        })
        .collect()
}

fn describe_rows(plan: &ExperimentPlan, rows: TaskRows) -> String {
    match rows {
        TaskRows::Fold(f) => {
            let fold = &plan.assignment.folds[f];
            if plan.assignment.repeats > 1 {
                format!("fold {} of repeat {}", fold.label, fold.repeat + 1)
            } else {
                format!("fold {}", fold.label)
            }
        }
        TaskRows::Full => "the fit on all non-test rows".to_string(),
    }
}

/// Outcome of one task: its fits and whether they came from the cache.
struct TaskOutcome {
    fits: Vec<SettingFit>,
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
            Lookup::Hit(fits) => {
                return Ok(TaskOutcome {
                    fits,
                    reused: true,
                    corrupt: None,
                })
            }
            Lookup::Miss => {}
            Lookup::Corrupt(why) => corrupt = Some(why),
        }
    }
    let data = task_data(plan, task);
    let candidate = &plan.candidates[task.candidate];
    let mut fits = candidate
        .family
        .fit_path(
            &data.x_train,
            &data.y_train,
            &data.x_eval,
            task.rows == TaskRows::Full,
        )
        .map_err(|source| FitFailure {
            candidate: candidate.stem.clone(),
            fold: describe_rows(plan, task.rows),
            source,
        })?;
    if matches!(task.rows, TaskRows::Fold(_)) {
        // Only validation predictions of a fold are ever used.
        for fit in &mut fits {
            fit.train_pred = Vec::new();
        }
    }
    if let (Some(cache), Some(key)) = (policy.write, key) {
        cache.put(key, &fits)?;
    }
    Ok(TaskOutcome {
        fits,
        reused: false,
        corrupt,
    })
}

/// Runs the tasks (all, or one shard's) in parallel. Returns the gathered
/// fits, or `None` for a shard, which only fills the cache.
/// `on_done` is called once per finished task, from any thread.
pub fn run(
    plan: &ExperimentPlan,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    on_done: &(dyn Fn() + Sync),
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
            on_done();
            outcome
        })
        .collect();

    let mut summary = Summary::default();
    let mut fits: Vec<CandidateFits> = (0..plan.candidates.len())
        .map(|_| CandidateFits {
            fold_predictions: Vec::with_capacity(plan.assignment.folds.len()),
            full: Vec::new(),
        })
        .collect();
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
        match task.rows {
            TaskRows::Fold(_) => target
                .fold_predictions
                .push(outcome.fits.into_iter().map(|fit| fit.eval_pred).collect()),
            TaskRows::Full => target.full = outcome.fits,
        }
    }
    Ok((keep.then_some(fits), summary))
}
