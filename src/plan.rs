//! The resolved plan: a validated spec bound to its data. Columns are loaded,
//! each candidate becomes a [`Family`] bound to its features, and rows are
//! assigned to the test set and folds. Nothing is fitted here.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use nalgebra::DMatrix;

use crate::classes::{self, TaskInfo};
use crate::data::{self, Table, TableRequest};
use crate::error::DataError;
use crate::metrics::Scorer;
use crate::models::{Family, Setting};
use crate::spec::{FamilySpec, LoadedSpec, Metric, SplitMethod, Task, DEFAULT_FOLDS};
use crate::split::{self, Assignment, FoldScheme, Identities};

pub(crate) mod encode;
mod impute;

/// One candidate of the spec, ready to fit.
#[derive(Clone)]
pub(crate) struct CandidatePlan {
    /// Family name, or the candidate's `label`; the first part of every id.
    pub(crate) stem: String,
    /// The family's spec name, from its registry entry.
    pub(crate) family_name: &'static str,
    /// The features the family is bound to, in design-column order.
    pub(crate) features: Vec<String>,
    pub(crate) family: Arc<dyn Family>,
    pub(crate) settings: Vec<Setting>,
    /// The explicit identity of this candidate's fits (family, algorithm
    /// version, features, every setting as bits): what cache keys name.
    pub(crate) identity: Vec<u8>,
    /// The family's registry entry and the settings it was built from, so
    /// that a part of the grid can be rebuilt (`feasible::restricted`).
    pub(crate) def: &'static crate::models::registry::FamilyDef,
    pub(crate) grid: crate::models::registry::Settings,
    /// The family again, when it is bound to encoded categorical columns
    /// (`encode::EncodedFamily`): a part of its grid is rebuilt through it.
    pub(crate) encoded: Option<Arc<encode::EncodedFamily>>,
}

impl CandidatePlan {
    /// A validated candidate, ready to fit.
    pub(crate) fn from_spec(spec: &FamilySpec) -> Self {
        CandidatePlan {
            stem: spec.stem().to_string(),
            family_name: spec.def.name,
            features: spec.features.clone(),
            family: Arc::clone(&spec.family),
            settings: spec.family.settings(),
            identity: spec.identity(),
            def: spec.def,
            grid: spec.settings.clone(),
            encoded: None,
        }
    }

    /// `polynomial/degree=3`, or the stem alone for a family without settings.
    pub(crate) fn id(&self, setting: &Setting) -> String {
        match setting.param {
            Some(_) => format!("{}/{setting}", self.stem),
            None => self.stem.clone(),
        }
    }
}

/// Everything needed to execute an experiment.
pub(crate) struct ExperimentPlan {
    pub(crate) spec: LoadedSpec,
    pub(crate) table: Table,
    /// The target: numbers, or each row's class index for a class target.
    pub(crate) target: Vec<f64>,
    /// Regression or classification, how that was decided, and the classes.
    pub(crate) task: TaskInfo,
    /// The metric the spec names, or the task's default.
    pub(crate) metric: Metric,
    pub(crate) assignment: Assignment,
    pub(crate) candidates: Vec<CandidatePlan>,
    /// Digest of every numeric column read (for cache keys).
    pub(crate) column_digests: std::collections::BTreeMap<String, [u8; 32]>,
    /// What the fit on all non-test rows yields besides test predictions.
    pub(crate) full_fit: FullFit,
    /// Where these rows come from, when not from the table alone
    /// (`replicate 3`); failures name it before the fold.
    pub(crate) origin: Option<String>,
}

/// What the fit on all non-test rows must yield besides its predictions at
/// the test rows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct FullFit {
    /// The final fit: raw-unit coefficients and the family's own training
    /// predictions (a table; replicate 1 of a simulation).
    pub(crate) final_fit: bool,
    /// Training predictions evaluated as extra rows after the test rows,
    /// without the final-fit work (every simulation replicate needs them).
    pub(crate) training_as_evaluation: bool,
}

impl FullFit {
    /// A table's final fit.
    pub(crate) const FINAL: FullFit = FullFit {
        final_fit: true,
        training_as_evaluation: false,
    };
}

impl ExperimentPlan {
    /// The rows × features matrix of `rows` for one candidate's features.
    pub(crate) fn design(&self, candidate: &CandidatePlan, rows: &[usize]) -> DMatrix<f64> {
        let columns: Vec<&[f64]> = candidate
            .features
            .iter()
            .map(|f| self.table.column(f))
            .collect();
        DMatrix::from_fn(rows.len(), columns.len(), |i, j| columns[j][rows[i]])
    }

    /// Target values of `rows`.
    pub(crate) fn target_of(&self, rows: &[usize]) -> Vec<f64> {
        rows.iter().map(|&r| self.target[r]).collect()
    }

    /// How this plan's predictions are scored.
    pub(crate) fn scorer(&self) -> Scorer {
        Scorer {
            metric: self.metric,
            classes: self
                .task
                .classes
                .as_ref()
                .map(|c| (c.labels.len(), c.positive)),
        }
    }
}

/// The metric used when `[choose] metric` is absent: mean squared error for
/// a numeric target, log-loss (a proper scoring rule that rewards honest
/// probabilities, not only the right side of a threshold) for classes.
pub(crate) fn default_metric(task: Task) -> Metric {
    match task {
        Task::Regression => Metric::Mse,
        Task::Classification => Metric::LogLoss,
    }
}

/// Loads the data and resolves the spec into a plan.
pub(crate) fn resolve(spec: LoadedSpec) -> Result<ExperimentPlan, DataError> {
    resolve_reporting(spec, &|_, _| {})
}

/// [`resolve`], telling `on_read` how far the table has been read (see
/// [`data::load`]).
pub(crate) fn resolve_reporting(
    spec: LoadedSpec,
    on_read: &dyn Fn(u64, u64),
) -> Result<ExperimentPlan, DataError> {
    let data_spec = spec.data().clone();
    let split_spec = spec.spec.split.clone();
    let declared = data_spec.task;
    let labels_as_text = declared == Some(Task::Classification);

    let mut numeric = if labels_as_text {
        Vec::new()
    } else {
        vec![data_spec.target.clone()]
    };
    for candidate in &spec.families {
        for f in &candidate.features {
            if !numeric.contains(f) {
                numeric.push(f.clone());
            }
        }
    }
    for f in &data_spec.features {
        if !numeric.contains(f) {
            numeric.push(f.clone());
        }
    }
    let mut text = if labels_as_text {
        vec![data_spec.target.clone()]
    } else {
        Vec::new()
    };
    for name in [
        &data_spec.key,
        &data_spec.group,
        &split_spec.column,
        &data_spec.order,
    ]
    .into_iter()
    .flatten()
    {
        if !text.contains(name) {
            text.push(name.clone());
        }
    }
    // Features declared categorical are read as labels from the start.
    let categorical: Vec<String> = numeric
        .iter()
        .filter(|name| data_spec.categorical.contains(name) && *name != &data_spec.target)
        .cloned()
        .collect();
    numeric.retain(|name| !categorical.contains(name));
    // Under `missing = "impute"` every numeric column but the target may
    // keep missing cells, to be filled inside each training fold.
    let imputed = numeric
        .iter()
        .filter(|name| *name != &data_spec.target)
        .cloned()
        .collect();
    let mut request = TableRequest {
        numeric,
        text,
        categorical,
        missing: data_spec.missing,
        imputed,
        format: data::TableFormat::of(&data_spec),
    };
    let resolved = data_path(&spec)?;
    let target_name = &data_spec.target;
    // A cell that does not read as a number turns the target into labels
    // (when its task is not declared) and a feature into a categorical one;
    // each turn reads the table again, so there are at most as many reads
    // as used columns. `turned` keeps the error that turned each feature.
    let mut turned: Vec<(String, DataError)> = Vec::new();
    let mut table = loop {
        match data::load(&resolved, &resolved, &request, on_read) {
            Err(DataError::Cell {
                path,
                line,
                column,
                message,
            }) if message.starts_with("cannot read")
                // A number in the other decimal convention is a format
                // mistake, not a label: its message says how to declare
                // the format.
                && !message.contains("decimal")
                && (&column != target_name || declared.is_none()) =>
            {
                request.numeric.retain(|name| name != &column);
                request.imputed.retain(|name| name != &column);
                if &column == target_name {
                    request.text.push(column);
                } else {
                    request.categorical.push(column.clone());
                    let error = DataError::Cell {
                        path,
                        line,
                        column: column.clone(),
                        message,
                    };
                    turned.push((column, error));
                }
            }
            other => break other?,
        }
    };
    // A column of numbers with a stray word is a mistake in the table, not
    // a category: its first word is the error.
    for (column, error) in turned {
        let codes = table.column(&column);
        let levels = &table.levels[&column];
        let numbers = codes
            .iter()
            .filter(|&&c| request.format.parse_number(&levels[c as usize]).is_some())
            .count();
        if 2 * numbers > codes.len() {
            return Err(error);
        }
    }
    let spec_error = |key: &str, message: String| DataError::SpecKey {
        path: spec.path.clone(),
        key: key.to_string(),
        message,
    };
    let table_path = table.path.clone();
    let table_error = |message: String| DataError::Table {
        path: table_path.clone(),
        message,
    };
    // A named metric declares the kind of target it scores.
    let named = spec.spec.choose.metric;
    let (task, target) = read_target(
        &table,
        target_name,
        declared,
        named,
        data_spec.positive.as_deref(),
    )
    .map_err(|(key, message)| match key {
        Some(key) => spec_error(key, message),
        None => table_error(format!("target \"{target_name}\": {message}")),
    })?;
    if task.inferred.is_some() {
        crate::spec::check_task(&spec.spec, &spec.families, task.task)
            .map_err(|(key, message)| spec_error(&key, message))?;
    }
    let metric = spec
        .spec
        .choose
        .metric
        .unwrap_or_else(|| default_metric(task.task));

    // Units for splitting: groups when declared, otherwise rows.
    let mut group_labels: Vec<String> = Vec::new();
    let unit_of_row: Vec<usize> = match (&data_spec.group, &data_spec.key) {
        (Some(group), _) => {
            let labels = table.text_column(group);
            let mut index = std::collections::BTreeMap::new();
            labels
                .iter()
                .map(|label| {
                    *index.entry(label.as_str()).or_insert_with(|| {
                        group_labels.push(label.clone());
                        group_labels.len() - 1
                    })
                })
                .collect()
        }
        (None, Some(key)) => {
            let keys = table.text_column(key);
            // Membership only: no iteration order of the set reaches an output.
            let mut seen = std::collections::HashSet::with_capacity(keys.len());
            if let Some(again) = keys.iter().position(|k| !seen.insert(k.as_str())) {
                let k = &keys[again];
                let first = keys.iter().position(|other| other == k).unwrap_or(again);
                return Err(table_error(format!(
                    "key column \"{key}\" holds \"{k}\" on line {} and again on line {}; \
                     a key must identify one row (use `group` for repeated ids)",
                    table.lines[first], table.lines[again]
                )));
            }
            (0..table.len()).collect()
        }
        (None, None) => (0..table.len()).collect(),
    };
    let identities = match (&data_spec.group, &data_spec.key) {
        (Some(_), _) => Identities::Text(&group_labels),
        (None, Some(key)) => Identities::Text(table.text_column(key)),
        (None, None) => Identities::RowNumbers(&table.row_numbers),
    };
    let scheme = match split_spec.method {
        SplitMethod::Kfold => FoldScheme::Kfold {
            folds: split_spec.folds.unwrap_or(DEFAULT_FOLDS),
            repeats: split_spec.repeats,
        },
        SplitMethod::LeaveOneOut => FoldScheme::LeaveOneOut,
        SplitMethod::Column => FoldScheme::Column {
            labels: table
                .text_column(split_spec.column.as_deref().unwrap_or_default())
                .to_vec(),
        },
        SplitMethod::Ordered => FoldScheme::Ordered {
            folds: split_spec.folds.unwrap_or(DEFAULT_FOLDS),
            time: table
                .text_column(data_spec.order.as_deref().unwrap_or_default())
                .to_vec(),
        },
    };
    // A class target is stratified by class when rows are split one by one
    // (with groups, whole groups move and their classes are mixed).
    let strata: Option<Vec<usize>> = (task.classes.is_some() && data_spec.group.is_none())
        .then(|| target.iter().map(|&c| c as usize).collect());
    let assignment = split::assign_stratified(
        spec.spec.experiment.seed,
        split_spec.holdout,
        &scheme,
        identities,
        &unit_of_row,
        strata.as_deref(),
    )
    .map_err(|e| table_error(e.to_string()))?;

    if metric == Metric::R2 {
        if let Some(fold) = assignment.folds.iter().find(|f| f.valid.len() < 2) {
            return Err(table_error(format!(
                "fold {} validates on {} row(s); R² needs at least 2 per fold \
                 (choose another metric or fewer folds)",
                fold.label,
                fold.valid.len()
            )));
        }
    }

    let mut candidates: Vec<CandidatePlan> =
        spec.families.iter().map(CandidatePlan::from_spec).collect();
    if data_spec.missing == crate::spec::MissingPolicy::Impute {
        impute::bind_indicators(&spec, &mut table, &assignment, &mut candidates)
            .map_err(table_error)?;
    }
    encode::bind(&spec, &table, &mut candidates)
        .map_err(|(key, message)| spec_error(&key, message))?;

    // A feature with no spread over the fitting rows breaks these fits; say so
    // now, naming the column, rather than once per fold.
    for candidate in candidates.iter().filter(|c| c.family.needs_spread()) {
        for feature in candidate
            .features
            .iter()
            .filter(|f| !table.levels.contains_key(*f))
        {
            let column = table.column(feature);
            let first = column[assignment.train[0]];
            if assignment.train.iter().all(|&r| column[r] == first) {
                return Err(table_error(format!(
                    "column \"{feature}\" is constant ({first}) over the {} rows used for \
                     fitting, so candidate {} cannot use it; drop it from the features",
                    assignment.train.len(),
                    candidate.stem
                )));
            }
        }
    }

    let mut column_digests: std::collections::BTreeMap<String, [u8; 32]> = table
        .numeric
        .iter()
        .map(|(name, values)| (name.clone(), crate::digests::digest_values(values)))
        .collect();
    for (name, levels) in &table.levels {
        // The labels as well as the codes: a renamed level changes the
        // names of the encoded columns.
        let mut hasher = blake3::Hasher::new();
        hasher.update(b"categorical");
        for level in levels {
            hasher.update(&(level.len() as u64).to_le_bytes());
            hasher.update(level.as_bytes());
        }
        hasher.update(&crate::digests::digest_values(table.column(name)));
        column_digests.insert(name.clone(), *hasher.finalize().as_bytes());
    }
    if let Some(classes) = &task.classes {
        // Class indices, marked as classes and with the class count, so a fit
        // of a 0/1 column as classes never shares a cache entry with its fit
        // as numbers.
        let mut hasher = blake3::Hasher::new();
        hasher.update(b"classes");
        hasher.update(&(classes.labels.len() as u64).to_le_bytes());
        hasher.update(&crate::digests::digest_values(&target));
        column_digests.insert(target_name.clone(), *hasher.finalize().as_bytes());
    }
    Ok(ExperimentPlan {
        column_digests,
        spec,
        table,
        target,
        task,
        metric,
        assignment,
        candidates,
        full_fit: FullFit::FINAL,
        origin: None,
    })
}

/// The task and the target column as the plan uses it (numbers, or class
/// indices), from the table and `[data] task` and `positive`. Errors carry
/// the spec key they concern, if any.
fn read_target(
    table: &Table,
    name: &str,
    declared: Option<Task>,
    metric: Option<Metric>,
    positive: Option<&str>,
) -> Result<(TaskInfo, Vec<f64>), classes::TargetProblem> {
    let (labels, inferred) = if table.text.contains_key(name) {
        let labels = table.text_column(name).to_vec();
        let inferred = declared.is_none().then(|| {
            let at = labels.iter().position(|l| l.parse::<f64>().is_err());
            match at {
                Some(i) => format!(
                    "the target holds text labels (\"{}\" on line {} is not a number)",
                    labels[i], table.lines[i]
                ),
                None => "the target holds text labels".to_string(),
            }
        });
        (labels, inferred)
    } else {
        let values = table.column(name).to_vec();
        if declared.is_some() {
            return Ok((TaskInfo::regression(None), values));
        }
        match (classes::infer_from_numbers(&values), metric) {
            ((Task::Classification, why), Some(metric)) if !metric.for_classes() => {
                let mut task = TaskInfo::regression(Some(format!(
                    "[choose] metric \"{}\" scores numbers (without it, {why})",
                    metric.name()
                )));
                task.noteworthy = true;
                return Ok((task, values));
            }
            ((Task::Regression, why), _) => return Ok((TaskInfo::regression(Some(why)), values)),
            ((Task::Classification, why), _) => (
                values.iter().map(|&v| classes::number_label(v)).collect(),
                Some(why),
            ),
        }
    };
    let (classes, encoded) = classes::encode(&labels, positive)?;
    Ok((
        TaskInfo {
            task: Task::Classification,
            noteworthy: inferred.is_some(),
            inferred,
            classes: Some(classes),
        },
        encoded,
    ))
}

/// The `[data] table` of `spec`, resolved against the spec's folder and
/// confined to the spec's repository unless `spec.allow_outside`: a spec
/// that arrives in a pull request must not make CI read the runner's files.
/// The repository is the nearest folder above the spec that holds `.git`,
/// or, where there is none, the current working directory. Symbolic links
/// are followed before the check. A path that does not resolve is left to
/// the reader, whose error names it.
pub(crate) fn data_path(spec: &LoadedSpec) -> Result<PathBuf, DataError> {
    let table = &spec.data().table;
    let resolved = resolve_relative(spec.base_dir(), Path::new(table));
    if spec.allow_outside {
        return Ok(resolved);
    }
    let Ok(real) = resolved.canonicalize() else {
        return Ok(resolved);
    };
    let Some(root) = repository_of(&spec.path) else {
        return Ok(resolved);
    };
    if real.starts_with(&root) {
        return Ok(resolved);
    }
    Err(DataError::Table {
        path: resolved,
        message: format!(
            "[data] table = \"{table}\" in {} resolves to {}, outside the repository {}; \
             heldout reads data only inside the spec's repository (the nearest folder above \
             the spec holding .git, else the current folder); pass --allow-outside if this \
             file is meant",
            spec.path.display(),
            real.display(),
            root.display()
        ),
    })
}

/// The repository a spec belongs to, as a canonical path: the nearest
/// ancestor of the spec holding `.git` (a folder, or a file in a worktree),
/// else the current working directory.
fn repository_of(spec_path: &Path) -> Option<PathBuf> {
    let spec = spec_path.canonicalize().ok()?;
    let from_git = spec
        .ancestors()
        .skip(1)
        .find(|folder| folder.join(".git").exists())
        .map(Path::to_path_buf);
    match from_git {
        Some(root) => Some(root),
        None => std::env::current_dir().ok()?.canonicalize().ok(),
    }
}

/// `path` resolved against the spec's folder when relative.
pub(crate) fn resolve_relative(base: &Path, path: &Path) -> PathBuf {
    if path.is_absolute() {
        path.to_path_buf()
    } else {
        base.join(path)
    }
}
