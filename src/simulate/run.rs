//! Running a simulation: for every replicate, draw its training set, fit
//! every candidate's whole grid once (predicting at the test points and the
//! training rows), cross-validate it with the spec's `[split]` and choose by
//! its `[choose]` rule, exactly as on a real table. Replicates are
//! independent tasks: they run in parallel and are gathered in replicate
//! order, so no number depends on the thread count.
//!
//! A replicate is a data source for the ordinary pipeline: its training
//! rows (in folds) and the test points (the locked test set) become an
//! [`ExperimentPlan`] that `execute` fits through the fit cache, with the
//! same task identities and rows digests as a table. A replicate's draws
//! depend only on its number, so raising `replicates` finds the earlier
//! replicates' fits in the cache and computes only the new ones.

use std::collections::BTreeMap;

use nalgebra::DMatrix;
use rayon::prelude::*;

use super::design::Setup;
use crate::assess::{self, SettingScore};
use crate::data::Table;
use crate::digests;
use crate::error::{FitFailure, SpecError};
use crate::execute::{self, CachePolicy, CandidateFits, ExecuteError, Shard, Summary};
use crate::plan::{CandidatePlan, ExperimentPlan, FullFit};
use crate::spec::{LoadedSpec, Metric, SplitMethod, DEFAULT_FOLDS};
use crate::split::{self, Assignment, FoldScheme};

/// A simulation spec resolved: the setup, the candidates bound to their
/// inputs, and the test points.
pub(crate) struct SimulationPlan {
    pub(crate) spec: LoadedSpec,
    pub(crate) setup: Setup,
    pub(crate) candidates: Vec<CandidatePlan>,
    /// Test inputs, points × inputs, and the truth there.
    pub(crate) test_x: DMatrix<f64>,
    pub(crate) test_truth: Vec<f64>,
    pub(crate) scheme: FoldScheme,
}

/// One replicate's simulated data.
pub(crate) struct Replicate {
    /// 0-based replicate number.
    pub(crate) index: usize,
    /// Training inputs, rows × inputs.
    pub(crate) x: DMatrix<f64>,
    pub(crate) y: Vec<f64>,
    /// Noise of the test targets: y₀ = truth + test_noise (for class
    /// labels, y₀ − p, with y₀ in `test_labels`).
    pub(crate) test_noise: Vec<f64>,
    /// Class labels (0 or 1) of the test points, with `task = "classification"`.
    pub(crate) test_labels: Option<Vec<f64>>,
    /// Folds over the training rows (no test rows).
    pub(crate) assignment: Assignment,
}

impl SimulationPlan {
    fn invalid(&self, key: &str, message: String) -> SpecError {
        SpecError::Invalid {
            path: self.spec.path.clone(),
            key: key.to_string(),
            message,
        }
    }

    /// Draws replicate `index` (0-based).
    pub(crate) fn replicate(&self, index: usize) -> Result<Replicate, SpecError> {
        let setup = &self.setup;
        let x = setup.training_inputs(index);
        let truth = setup
            .truth_at(&x, &format!("training inputs of replicate {}", index + 1))
            .map_err(|e| self.invalid("simulate.truth", e.to_string()))?;
        let y: Vec<f64> = if setup.classification {
            setup.labels(index, &truth)
        } else {
            truth
                .iter()
                .zip(setup.noise(index))
                .map(|(f, e)| f + e)
                .collect()
        };
        let n = setup.train_size;
        let row_numbers: Vec<u64> = (1..=n as u64).collect();
        let units: Vec<usize> = (0..n).collect();
        // Class labels are stratified, as a table's are (docs/splits.md).
        let strata: Option<Vec<usize>> = setup
            .classification
            .then(|| y.iter().map(|&label| label as usize).collect());
        let assignment = split::assign_stratified(
            setup.split_seed(index),
            0.0,
            &self.scheme,
            split::Identities::RowNumbers(&row_numbers),
            &units,
            strata.as_deref(),
        )
        .map_err(|e| self.invalid("split", e.to_string()))?;
        let (test_noise, test_labels) = if setup.classification {
            let labels = setup.test_labels(index, &self.test_truth);
            let noise = labels
                .iter()
                .zip(&self.test_truth)
                .map(|(y, p)| y - p)
                .collect();
            (noise, Some(labels))
        } else {
            (setup.test_noise(index), None)
        };
        Ok(Replicate {
            index,
            x,
            y,
            test_noise,
            test_labels,
            assignment,
        })
    }

    /// Test targets of a replicate: truth plus its test noise, or the drawn
    /// class labels.
    pub(crate) fn test_targets(&self, replicate: &Replicate) -> Vec<f64> {
        match &replicate.test_labels {
            Some(labels) => labels.clone(),
            None => self
                .test_truth
                .iter()
                .zip(&replicate.test_noise)
                .map(|(f, e)| f + e)
                .collect(),
        }
    }

    /// The task of every replicate's plan: numbers, or the labels 0 and 1
    /// with 1 the positive class.
    pub(crate) fn task(&self) -> crate::classes::TaskInfo {
        if self.setup.classification {
            crate::classes::TaskInfo {
                task: crate::spec::Task::Classification,
                inferred: None,
                noteworthy: false,
                classes: Some(crate::classes::Classes {
                    labels: vec!["0".to_string(), "1".to_string()],
                    positive: 1,
                }),
            }
        } else {
            crate::classes::TaskInfo::regression(None)
        }
    }

    /// A replicate as an ordinary plan: its training rows (rows 1..n, in
    /// folds) and the test points with their simulated targets (rows
    /// n+1..n+M, the locked test set). Every replicate's full fit also
    /// predicts at its training rows; replicate 1's is a final fit, with
    /// coefficients, for the report.
    pub(crate) fn replicate_plan(&self, replicate: &Replicate) -> ExperimentPlan {
        let n = replicate.y.len();
        let m = self.test_x.nrows();
        let mut numeric = BTreeMap::new();
        for (j, name) in self.setup.names.iter().enumerate() {
            let column: Vec<f64> = replicate
                .x
                .column(j)
                .iter()
                .chain(self.test_x.column(j).iter())
                .copied()
                .collect();
            numeric.insert(name.clone(), column);
        }
        let target: Vec<f64> = replicate
            .y
            .iter()
            .copied()
            .chain(self.test_targets(replicate))
            .collect();
        numeric.insert(self.setup.target.clone(), target.clone());
        let column_digests: BTreeMap<String, [u8; 32]> = numeric
            .iter()
            .map(|(name, values)| (name.clone(), digests::digest_values(values)))
            .collect();
        let rows = n + m;
        let table = Table {
            path: "[simulate]".into(),
            digest: digests::simulated_table_digest(&column_digests),
            numeric,
            text: BTreeMap::new(),
            levels: BTreeMap::new(),
            lines: (2..rows as u64 + 2).collect(),
            row_numbers: (1..=rows as u64).collect(),
            dropped: 0,
            missing_cells: BTreeMap::new(),
            unterminated: false,
        };
        let mut assignment = replicate.assignment.clone();
        assignment.test = (n..rows).collect();
        ExperimentPlan {
            spec: self.spec.clone(),
            table,
            target,
            assignment,
            candidates: self.candidates.clone(),
            column_digests,
            task: self.task(),
            metric: self
                .spec
                .spec
                .choose
                .metric
                .unwrap_or_else(|| crate::plan::default_metric(self.task().task)),
            full_fit: FullFit {
                final_fit: replicate.index == 0,
                training_as_evaluation: true,
            },
            origin: Some(format!("replicate {}", replicate.index + 1)),
        }
    }
}

/// Resolves a validated simulation spec.
pub(crate) fn resolve(spec: LoadedSpec) -> Result<SimulationPlan, SpecError> {
    let sim = spec
        .spec
        .simulate
        .clone()
        .expect("resolve is called on simulation specs");
    let invalid = |key: &str, message: String| SpecError::Invalid {
        path: spec.path.clone(),
        key: key.to_string(),
        message,
    };
    let setup = Setup::new(&sim, spec.spec.experiment.seed)
        .map_err(|e| invalid("simulate.truth", e.to_string()))?;
    let test_x = setup.test_inputs();
    let test_truth = setup
        .truth_at(&test_x, "test points")
        .map_err(|e| invalid("simulate.truth", e.to_string()))?;
    let split = &spec.spec.split;
    let scheme = match split.method {
        SplitMethod::LeaveOneOut => FoldScheme::LeaveOneOut,
        _ => FoldScheme::Kfold {
            folds: split.folds.unwrap_or(DEFAULT_FOLDS),
            repeats: split.repeats,
        },
    };
    let candidates = spec.families.iter().map(CandidatePlan::from_spec).collect();
    let plan = SimulationPlan {
        spec,
        setup,
        candidates,
        test_x,
        test_truth,
        scheme,
    };
    // The folds have the same sizes in every replicate; check them once.
    let first = plan.replicate(0)?;
    if plan.spec.spec.choose.metric == Some(Metric::R2) {
        if let Some(fold) = first.assignment.folds.iter().find(|f| f.valid.len() < 2) {
            return Err(plan.invalid(
                "choose.metric",
                format!(
                    "fold {} validates on {} row(s); R² needs at least 2 per fold \
                     (choose another metric or fewer folds)",
                    fold.label,
                    fold.valid.len()
                ),
            ));
        }
    }
    Ok(plan)
}

/// What one replicate yields for every setting (all candidates, results order).
pub(crate) struct ReplicateOutcome {
    /// Predictions at the test points, per setting (for class labels, the
    /// probability of label 1).
    pub(crate) test_pred: Vec<Vec<f64>>,
    /// Training mean squared error, per setting (for class labels, of the
    /// probability of label 1: the Brier score).
    pub(crate) train_mse: Vec<f64>,
    /// Class labels only, per setting: the error rate the fit's predicted
    /// classes would have in expectation over the test labels (a miss
    /// costs p where it predicts 0 and 1 − p where it predicts 1), and its
    /// error rate on its own training rows.
    pub(crate) test_error_rate: Vec<f64>,
    pub(crate) train_error_rate: Vec<f64>,
    /// Cross-validated score (the spec's metric), per setting.
    pub(crate) cv_score: Vec<f64>,
    pub(crate) effective_df: Vec<f64>,
    /// Index of the setting the spec's rule chose on this replicate.
    pub(crate) chosen: usize,
    pub(crate) test_noise: Vec<f64>,
    /// With `[intervals]`, per setting: the share of test points whose test
    /// target lies inside the setting's CV+ interval, and the mean width
    /// (class labels: inside its prediction set, and the mean set size;
    /// docs/simulation.md); empty otherwise.
    pub(crate) interval_coverage: Vec<(f64, f64)>,
    /// Replicate 1 only: its plan and fits, as the ordinary pipeline holds them.
    pub(crate) first: Option<(ExperimentPlan, Vec<CandidateFits>)>,
}

/// Fits, cross-validates and chooses on one replicate, through the same
/// plan → execute → cache path as a table.
pub(crate) fn run_replicate(
    plan: &SimulationPlan,
    replicate: Replicate,
    policy: CachePolicy<'_>,
    summary: &mut Summary,
) -> Result<ReplicateOutcome, ExecuteError> {
    let experiment = plan.replicate_plan(&replicate);
    let (fits, part) = execute::run_all(&experiment, policy, &|_| {})?;
    summary.absorb(part);
    let metric = experiment.metric;
    let mut outcome = ReplicateOutcome {
        test_pred: Vec::new(),
        train_mse: Vec::new(),
        test_error_rate: Vec::new(),
        train_error_rate: Vec::new(),
        cv_score: Vec::new(),
        effective_df: Vec::new(),
        chosen: 0,
        test_noise: replicate.test_noise.clone(),
        interval_coverage: Vec::new(),
        first: None,
    };
    let fold_targets: Vec<Vec<f64>> = replicate
        .assignment
        .folds
        .iter()
        .map(|f| f.valid.iter().map(|&r| replicate.y[r]).collect())
        .collect();
    let mut scores = Vec::new();
    for (candidate, fitted) in plan.candidates.iter().zip(&fits) {
        for (s, setting) in candidate.settings.iter().enumerate() {
            let fit = &fitted.full[s];
            let mut score = SettingScore::new(
                candidate.id(setting),
                fit.effective_df,
                metric.score(&replicate.y, &fit.train_pred),
                assess::fold_scores(
                    experiment.scorer(),
                    &fitted.fold_predictions,
                    &fold_targets,
                    s,
                ),
            );
            // Infeasible in this replicate: out of its choice; its NaN
            // predictions make the setting's decomposition undefined
            // (docs/simulation.md, "Infeasible settings").
            crate::execute::feasible::set_aside(&mut score, &fitted.infeasible[s]);
            if plan.setup.classification {
                // Rows hold P(0), P(1) and the predicted class.
                let positive =
                    |rows: &[f64]| -> Vec<f64> { rows.chunks_exact(3).map(|row| row[1]).collect() };
                let classes =
                    |rows: &[f64]| -> Vec<f64> { rows.chunks_exact(3).map(|row| row[2]).collect() };
                let expected_misses: f64 = classes(&fit.eval_pred)
                    .iter()
                    .zip(&plan.test_truth)
                    .map(|(&class, &p)| if class == 1.0 { 1.0 - p } else { p })
                    .sum();
                outcome
                    .test_error_rate
                    .push(expected_misses / plan.test_truth.len() as f64);
                let train_classes = classes(&fit.train_pred);
                let train_misses = train_classes
                    .iter()
                    .zip(&replicate.y)
                    .filter(|(class, y)| class != y)
                    .count();
                outcome
                    .train_error_rate
                    .push(train_misses as f64 / replicate.y.len() as f64);
                outcome
                    .train_mse
                    .push(Metric::Mse.score(&replicate.y, &positive(&fit.train_pred)));
                outcome.test_pred.push(positive(&fit.eval_pred));
            } else {
                outcome.test_pred.push(fit.eval_pred.clone());
                outcome
                    .train_mse
                    .push(Metric::Mse.score(&replicate.y, &fit.train_pred));
            }
            outcome.cv_score.push(score.cv_score);
            outcome.effective_df.push(fit.effective_df);
            scores.push(score);
        }
    }
    let infeasible: Vec<_> = fits.iter().map(|fit| fit.infeasible.clone()).collect();
    if crate::execute::feasible::all_infeasible(&infeasible) {
        return Err(FitFailure {
            candidate: "every candidate".into(),
            fold: format!("replicate {}", replicate.index + 1),
            cause: crate::execute::feasible::none_feasible(&experiment, &infeasible),
        }
        .into());
    }
    outcome.chosen = assess::choose(&scores, metric, plan.spec.spec.choose.rule)
        .map_err(|cause| FitFailure {
            candidate: "every candidate".into(),
            fold: format!("replicate {}", replicate.index + 1),
            cause,
        })?
        .chosen;
    if let Some(intervals) = plan.spec.spec.intervals {
        for (candidate, fitted) in plan.candidates.iter().zip(&fits) {
            // Class labels get prediction sets: coverage and mean set size.
            let coverage = if plan.setup.classification {
                crate::prediction_sets::coverage_by_setting
            } else {
                crate::intervals::coverage_by_setting
            };
            outcome.interval_coverage.extend(coverage(
                &experiment,
                candidate,
                &fitted.fold_predictions,
                intervals.level,
                &experiment.assignment.test,
            )?);
        }
    }
    if replicate.index == 0 {
        outcome.first = Some((experiment, fits));
    }
    Ok(outcome)
}

/// Why a simulation stopped: a replicate whose data is not usable (the truth
/// undefined at a drawn input, too few rows for the folds), or a fit.
#[derive(Debug, thiserror::Error)]
pub(crate) enum SimulateError {
    #[error(transparent)]
    Spec(#[from] SpecError),
    #[error(transparent)]
    Execute(#[from] ExecuteError),
}

/// Runs every replicate (or one shard's), in parallel, gathered in order.
/// Returns the outcomes, or `None` for a shard, which only fills the cache.
/// `on_done(cached)` is called once per finished replicate, from any thread,
/// with whether every one of its fits came from the cache.
pub(crate) fn run(
    plan: &SimulationPlan,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    on_done: &(dyn Fn(bool) + Sync),
) -> Result<(Option<Vec<ReplicateOutcome>>, Summary), SimulateError> {
    let selected: Vec<usize> = (0..plan.setup.replicates)
        .filter(|&r| shard.is_none_or(|s| s.owns(r)))
        .collect();
    let keep = shard.is_none();
    let outcomes: Vec<Result<(Option<ReplicateOutcome>, Summary), SimulateError>> = selected
        .par_iter()
        .map(|&r| {
            let mut summary = Summary::default();
            let outcome = plan
                .replicate(r)
                .map_err(SimulateError::from)
                .and_then(|replicate| {
                    run_replicate(plan, replicate, policy, &mut summary)
                        .map_err(SimulateError::from)
                });
            // A replicate counts as cached when none of its fits was computed.
            on_done(outcome.is_ok() && summary.computed == 0);
            outcome.map(|o| (keep.then_some(o), summary))
        })
        .collect();
    let mut summary = Summary::default();
    let mut kept = Vec::with_capacity(selected.len());
    for outcome in outcomes {
        let (outcome, part) = outcome?;
        summary.absorb(part);
        kept.extend(outcome);
    }
    Ok((keep.then_some(kept), summary))
}
