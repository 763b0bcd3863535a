//! Running a simulation: for every replicate, draw its training set, fit
//! every candidate's whole grid once (predicting at the test points and the
//! training rows), cross-validate it with the spec's `[split]` and choose by
//! its `[choose]` rule, exactly as on a real table. Replicates are
//! independent tasks: they run in parallel and are gathered in replicate
//! order, so no number depends on the thread count.
//!
//! Every fit goes through the fit cache, keyed by the digests of the
//! replicate's feature columns and target, the test inputs (or the fold's
//! rows) and the family with its grid. A replicate's draws depend only on
//! its number, so raising `replicates` finds the earlier replicates' fits in
//! the cache and computes only the new ones.

use nalgebra::DMatrix;
use rayon::prelude::*;

use super::design::Setup;
use crate::assess::{self, SettingScore};
use crate::cache::{self, CacheKey, Lookup};
use crate::error::{FitError, FitFailure, SpecError};
use crate::execute::{self, CachePolicy, CandidateFits, ExecuteError, Shard, Summary};
use crate::models::{self, SettingFit};
use crate::plan::CandidatePlan;
use crate::spec::{LoadedSpec, Metric, SplitMethod, DEFAULT_FOLDS};
use crate::split::{self, Assignment, FoldScheme};

/// A simulation spec resolved: the setup, the candidates bound to their
/// inputs, and the test points.
pub struct SimulationPlan {
    pub spec: LoadedSpec,
    pub setup: Setup,
    pub candidates: Vec<CandidatePlan>,
    /// Column (input index) of each candidate's features.
    pub feature_columns: Vec<Vec<usize>>,
    /// Test inputs, points × inputs, and the truth there.
    pub test_x: DMatrix<f64>,
    pub test_truth: Vec<f64>,
    /// Digest of each test input column.
    test_digests: Vec<[u8; 32]>,
    pub scheme: FoldScheme,
}

/// One replicate's simulated data.
pub struct Replicate {
    /// 0-based replicate number.
    pub index: usize,
    /// Training inputs, rows × inputs.
    pub x: DMatrix<f64>,
    pub y: Vec<f64>,
    /// Noise of the test targets: y₀ = truth + test_noise.
    pub test_noise: Vec<f64>,
    /// Folds over the training rows (no test rows).
    pub assignment: Assignment,
}

impl SimulationPlan {
    fn invalid(&self, key: &str, message: String) -> SpecError {
        SpecError::Invalid {
            path: self.spec.path.clone(),
            key: key.to_string(),
            message,
        }
    }

    /// Total number of settings over all candidates.
    pub fn setting_count(&self) -> usize {
        self.candidates.iter().map(|c| c.settings.len()).sum()
    }

    /// The design of one candidate's features for the rows of `x`.
    fn columns(&self, candidate: usize, x: &DMatrix<f64>) -> DMatrix<f64> {
        let columns = &self.feature_columns[candidate];
        DMatrix::from_fn(x.nrows(), columns.len(), |i, j| x[(i, columns[j])])
    }

    /// Draws replicate `index` (0-based).
    pub fn replicate(&self, index: usize) -> Result<Replicate, SpecError> {
        let setup = &self.setup;
        let x = setup.training_inputs(index);
        let truth = setup
            .truth_at(&x, &format!("training inputs of replicate {}", index + 1))
            .map_err(|e| self.invalid("simulate.truth", e.to_string()))?;
        let y: Vec<f64> = truth
            .iter()
            .zip(setup.noise(index))
            .map(|(f, e)| f + e)
            .collect();
        let n = setup.train_size;
        let identities: Vec<String> = (1..=n).map(|i| i.to_string()).collect();
        let units: Vec<usize> = (0..n).collect();
        let assignment = split::assign(
            setup.split_seed(index),
            0.0,
            &self.scheme,
            &identities,
            &units,
        )
        .map_err(|e| self.invalid("split", e.to_string()))?;
        Ok(Replicate {
            index,
            x,
            y,
            test_noise: setup.test_noise(index),
            assignment,
        })
    }

    /// Test targets of a replicate: truth plus its test noise.
    pub fn test_targets(&self, replicate: &Replicate) -> Vec<f64> {
        self.test_truth
            .iter()
            .zip(&replicate.test_noise)
            .map(|(f, e)| f + e)
            .collect()
    }
}

/// Resolves a validated simulation spec.
pub fn resolve(spec: LoadedSpec) -> Result<SimulationPlan, SpecError> {
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
    let mut candidates = Vec::new();
    let mut feature_columns = Vec::new();
    for raw in &spec.families {
        let features = raw.features.clone().unwrap_or_else(|| setup.names.clone());
        feature_columns.push(
            features
                .iter()
                .map(|f| setup.names.iter().position(|n| n == f).unwrap_or(0))
                .collect(),
        );
        let family = models::build(raw, features);
        candidates.push(CandidatePlan {
            stem: raw.stem().to_string(),
            settings: family.settings(),
            family,
        });
    }
    let test_digests = test_x
        .column_iter()
        .map(|c| cache::digest_values(c.as_slice()))
        .collect();
    let plan = SimulationPlan {
        spec,
        setup,
        candidates,
        feature_columns,
        test_x,
        test_truth,
        test_digests,
        scheme,
    };
    // The folds have the same sizes in every replicate; check them once.
    let first = plan.replicate(0)?;
    if plan.spec.spec.choose.metric == Metric::R2 {
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
pub struct ReplicateOutcome {
    /// Predictions at the test points, per setting.
    pub test_pred: Vec<Vec<f64>>,
    /// Training mean squared error, per setting.
    pub train_mse: Vec<f64>,
    /// Cross-validated score (the spec's metric), per setting.
    pub cv_score: Vec<f64>,
    pub effective_df: Vec<f64>,
    /// Index of the setting the spec's rule chose on this replicate.
    pub chosen: usize,
    pub test_noise: Vec<f64>,
    /// Replicate 1 only: its data and fits, as the ordinary pipeline holds them.
    pub first: Option<(Replicate, Vec<CandidateFits>)>,
}

/// A fit through the cache.
struct Fitted {
    fits: Vec<SettingFit>,
    reused: bool,
    corrupt: Option<String>,
}

fn through_cache(
    policy: CachePolicy<'_>,
    key: &CacheKey,
    compute: impl FnOnce() -> Result<Vec<SettingFit>, FitError>,
) -> Result<Result<Fitted, FitError>, ExecuteError> {
    let mut corrupt = None;
    if let Some(cache) = policy.read {
        match cache.get(key) {
            Lookup::Hit(fits) => {
                return Ok(Ok(Fitted {
                    fits,
                    reused: true,
                    corrupt: None,
                }))
            }
            Lookup::Miss => {}
            Lookup::Corrupt(why) => corrupt = Some(why),
        }
    }
    let fits = match compute() {
        Ok(fits) => fits,
        Err(e) => return Ok(Err(e)),
    };
    if let Some(cache) = policy.write {
        cache.put(key, &fits)?;
    }
    Ok(Ok(Fitted {
        fits,
        reused: false,
        corrupt,
    }))
}

/// Digest of a task's rows for the cache key: what kind of fit, and what
/// it evaluates on.
fn rows_digest(kind: &str, parts: &[[u8; 32]]) -> [u8; 32] {
    let mut hasher = blake3::Hasher::new();
    hasher.update(kind.as_bytes());
    for part in parts {
        hasher.update(part);
    }
    *hasher.finalize().as_bytes()
}

/// The cache keys of one replicate's fits, candidate by candidate: the full
/// fit first, then one per fold (or one for a leave-one-out shortcut).
pub fn replicate_keys(plan: &SimulationPlan, replicate: &Replicate) -> Vec<Vec<CacheKey>> {
    let input_digests: Vec<[u8; 32]> = replicate
        .x
        .column_iter()
        .map(|c| cache::digest_values(c.as_slice()))
        .collect();
    let target = cache::digest_values(&replicate.y);
    let single_row_folds = replicate.assignment.single_row_folds;
    plan.candidates
        .iter()
        .enumerate()
        .map(|(c, candidate)| {
            let family = candidate.family.as_ref();
            let columns = &plan.feature_columns[c];
            let features: Vec<[u8; 32]> = columns.iter().map(|&j| input_digests[j]).collect();
            let tests: Vec<[u8; 32]> = columns.iter().map(|&j| plan.test_digests[j]).collect();
            let first = replicate.index == 0;
            let mut keys = vec![cache::key(
                family,
                first,
                &features,
                &target,
                &rows_digest("simulate/full", &tests),
            )];
            if single_row_folds {
                keys.push(cache::key(
                    family,
                    false,
                    &features,
                    &target,
                    &rows_digest("simulate/leave-one-out", &[]),
                ));
            } else {
                for fold in &replicate.assignment.folds {
                    keys.push(cache::key(
                        family,
                        false,
                        &features,
                        &target,
                        &rows_digest("simulate/fold", &[cache::digest_rows(&fold.valid)]),
                    ));
                }
            }
            keys
        })
        .collect()
}

/// Fits, cross-validates and chooses on one replicate.
pub fn run_replicate(
    plan: &SimulationPlan,
    replicate: Replicate,
    policy: CachePolicy<'_>,
    summary: &mut Summary,
) -> Result<ReplicateOutcome, ExecuteError> {
    let keys = replicate_keys(plan, &replicate);
    let metric = plan.spec.spec.choose.metric;
    let m = plan.test_x.nrows();
    let n = replicate.y.len();
    let first = replicate.index == 0;
    let place = |what: String| format!("replicate {}, {what}", replicate.index + 1);
    let mut outcome = ReplicateOutcome {
        test_pred: Vec::new(),
        train_mse: Vec::new(),
        cv_score: Vec::new(),
        effective_df: Vec::new(),
        chosen: 0,
        test_noise: replicate.test_noise.clone(),
        first: None,
    };
    let mut scores = Vec::new();
    let mut first_fits = Vec::new();
    let fold_targets: Vec<Vec<f64>> = replicate
        .assignment
        .folds
        .iter()
        .map(|f| f.valid.iter().map(|&r| replicate.y[r]).collect())
        .collect();
    for (c, candidate) in plan.candidates.iter().enumerate() {
        let family = candidate.family.as_ref();
        let fail = |fold: String, source: FitError| FitFailure {
            candidate: candidate.stem.clone(),
            fold: place(fold),
            cause: source,
        };
        let mut tally = |fitted: &Fitted| {
            if fitted.reused {
                summary.reused += 1;
            } else {
                summary.computed += 1;
            }
            summary.corrupt.extend(fitted.corrupt.clone());
        };
        let x = plan.columns(c, &replicate.x);
        let test_x = plan.columns(c, &plan.test_x);
        // One fit of the grid on all rows, predicting at the test points and
        // then at the training rows.
        let mut stacked = DMatrix::zeros(m + n, x.ncols());
        stacked.rows_mut(0, m).copy_from(&test_x);
        stacked.rows_mut(m, n).copy_from(&x);
        let full = through_cache(policy, &keys[c][0], || {
            family.fit_path(&x, &replicate.y, &stacked, first)
        })?
        .map_err(|e| fail("the fit on all training rows".into(), e))?;
        tally(&full);

        // Validation predictions per fold, per setting.
        let folds = &replicate.assignment.folds;
        let mut fold_predictions: Vec<Vec<Vec<f64>>> = Vec::with_capacity(folds.len());
        if replicate.assignment.single_row_folds {
            let loo = through_cache(policy, &keys[c][1], || {
                execute::leave_one_out(family, &x, &replicate.y)
            })?
            .map_err(|e| fail("leave-one-out".into(), e))?;
            tally(&loo);
            for row in 0..folds.len() {
                fold_predictions.push(loo.fits.iter().map(|f| vec![f.eval_pred[row]]).collect());
            }
        } else {
            for (f, fold) in folds.iter().enumerate() {
                let train_rows = replicate.assignment.fold_train(f);
                let fitted = through_cache(policy, &keys[c][1 + f], || {
                    let x_train = x.select_rows(&train_rows);
                    let y_train: Vec<f64> = train_rows.iter().map(|&r| replicate.y[r]).collect();
                    let x_valid = x.select_rows(&fold.valid);
                    family
                        .fit_path(&x_train, &y_train, &x_valid, false)
                        .map(|fits| {
                            fits.into_iter()
                                .map(|fit| SettingFit {
                                    train_pred: Vec::new(),
                                    coefficients: None,
                                    ..fit
                                })
                                .collect()
                        })
                })?
                .map_err(|e| {
                    let label = if replicate.assignment.repeats > 1 {
                        format!("fold {} of repeat {}", fold.label, fold.repeat + 1)
                    } else {
                        format!("fold {}", fold.label)
                    };
                    fail(label, e)
                })?;
                tally(&fitted);
                fold_predictions.push(fitted.fits.into_iter().map(|fit| fit.eval_pred).collect());
            }
        }

        for (s, setting) in candidate.settings.iter().enumerate() {
            let fit = &full.fits[s];
            let (test_pred, train_pred) = fit.eval_pred.split_at(m);
            let train_mse = Metric::Mse.score(&replicate.y, train_pred);
            let score = SettingScore::new(
                candidate.id(setting),
                fit.effective_df,
                metric.score(&replicate.y, train_pred),
                assess::fold_scores(metric, &fold_predictions, &fold_targets, s),
            );
            outcome.test_pred.push(test_pred.to_vec());
            outcome.train_mse.push(train_mse);
            outcome.cv_score.push(score.cv_score);
            outcome.effective_df.push(fit.effective_df);
            scores.push(score);
        }
        if first {
            first_fits.push(CandidateFits {
                fold_predictions,
                full: full
                    .fits
                    .into_iter()
                    .map(|fit| SettingFit {
                        train_pred: fit.eval_pred[m..].to_vec(),
                        eval_pred: fit.eval_pred[..m].to_vec(),
                        effective_df: fit.effective_df,
                        coefficients: fit.coefficients,
                    })
                    .collect(),
            });
        }
    }
    outcome.chosen = assess::choose(&scores, metric, plan.spec.spec.choose.rule).chosen;
    if first {
        outcome.first = Some((replicate, first_fits));
    }
    Ok(outcome)
}

/// Why a simulation stopped: a replicate whose data is not usable (the truth
/// undefined at a drawn input, too few rows for the folds), or a fit.
#[derive(Debug, thiserror::Error)]
pub enum SimulateError {
    #[error(transparent)]
    Spec(#[from] SpecError),
    #[error(transparent)]
    Execute(#[from] ExecuteError),
}

/// Runs every replicate (or one shard's), in parallel, gathered in order.
/// Returns the outcomes, or `None` for a shard, which only fills the cache.
pub fn run(
    plan: &SimulationPlan,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    on_done: &(dyn Fn() + Sync),
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
            on_done();
            outcome.map(|o| (keep.then_some(o), summary))
        })
        .collect();
    let mut summary = Summary::default();
    let mut kept = Vec::with_capacity(selected.len());
    for outcome in outcomes {
        let (outcome, part) = outcome?;
        summary.computed += part.computed;
        summary.reused += part.reused;
        summary.corrupt.extend(part.corrupt);
        kept.extend(outcome);
    }
    Ok((keep.then_some(kept), summary))
}
