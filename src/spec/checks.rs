//! Whole-spec checks of `[data]` and `[split]`: ranges, names and the
//! combinations of keys that the types alone cannot judge.

use std::collections::BTreeSet;

use super::{
    limits, DataSpec, FamilySpec, IntervalsSpec, MissingPolicy, SpecFile, SplitMethod, SplitSpec,
    Task,
};
use crate::error::SpecError;

pub(super) fn validate_data(
    data: &DataSpec,
    split: &SplitSpec,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if data.table.trim().is_empty() {
        return Err(invalid("data.table", "the table path is empty".into()));
    }
    validate_feature_list(&data.features, "data.features", invalid)?;
    if data.features.contains(&data.target) {
        return Err(invalid(
            "data.features",
            format!("the target \"{}\" cannot also be a feature", data.target),
        ));
    }
    validate_format(data, split, invalid)?;
    validate_categorical(data, invalid)?;
    let ordered = split.method == SplitMethod::Ordered;
    match (&data.order, ordered) {
        (Some(_), false) => {
            return Err(invalid(
                "data.order",
                "only used with [split] method = \"ordered\"".into(),
            ))
        }
        (None, true) => {
            return Err(invalid(
                "split.method",
                "method = \"ordered\" needs `order = \"<time column>\"` in [data]".into(),
            ))
        }
        _ => {}
    }
    if ordered && data.group.is_some() {
        return Err(invalid(
            "data.group",
            "cannot be combined with method = \"ordered\": its blocks follow time, and a group \
             seen at many times would straddle them; remove `group`, or use method = \"kfold\""
                .into(),
        ));
    }
    Ok(())
}

/// `delimiter`, `decimal`, `missing_markers` and `missing = "impute"`.
fn validate_format(
    data: &DataSpec,
    split: &SplitSpec,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if let Some(delimiter) = &data.delimiter {
        if !crate::data::format::DELIMITERS
            .iter()
            .any(|(written, _, _)| written == delimiter)
        {
            return Err(invalid(
                "data.delimiter",
                format!(
                    "{delimiter:?} is not a delimiter heldout reads; use \",\", \";\", \"\\t\" or \"|\""
                ),
            ));
        }
    }
    match data.decimal.as_deref() {
        None | Some(".") => {}
        Some(",") => {
            if data.delimiter.as_deref().unwrap_or(",") == "," {
                return Err(invalid(
                    "data.decimal",
                    "a decimal comma needs another delimiter between cells; set \
                     `delimiter = \";\"` (or the one the table uses)"
                        .into(),
                ));
            }
        }
        Some(other) => {
            return Err(invalid(
                "data.decimal",
                format!("{other:?} is not a decimal mark; use \".\" or \",\""),
            ))
        }
    }
    if let Some(markers) = &data.missing_markers {
        let delimiter = data.delimiter.as_deref().unwrap_or(",");
        if let Some(marker) = markers.iter().find(|m| m.contains(delimiter)) {
            return Err(invalid(
                "data.missing_markers",
                format!("{marker:?} holds the delimiter {delimiter:?}, so no cell can be it"),
            ));
        }
    }
    if data.missing == MissingPolicy::Impute && split.method == SplitMethod::LeaveOneOut {
        return Err(invalid(
            "data.missing",
            "\"impute\" fits its medians inside each training fold, and leave-one-out's \
             shortcuts reuse one fit for every row; use method = \"kfold\", or \
             `missing = \"drop-rows\"`"
                .into(),
        ));
    }
    Ok(())
}

/// `categorical` and `min_level_rows`.
fn validate_categorical(
    data: &DataSpec,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    let mut seen = BTreeSet::new();
    for name in &data.categorical {
        if !seen.insert(name) {
            return Err(invalid(
                "data.categorical",
                format!("\"{name}\" is listed twice"),
            ));
        }
        if name == &data.target {
            return Err(invalid(
                "data.categorical",
                format!(
                    "the target \"{name}\" cannot be a categorical feature; a class target \
                     is declared with `task = \"classification\"`"
                ),
            ));
        }
    }
    if data.min_level_rows == Some(0) {
        return Err(invalid(
            "data.min_level_rows",
            "must be at least 1 (1: every level keeps its own column)".into(),
        ));
    }
    Ok(())
}

pub(super) fn validate_feature_list(
    features: &[String],
    key: &str,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if features.is_empty() {
        return Err(invalid(key, "name at least one feature".into()));
    }
    let mut seen = BTreeSet::new();
    for feature in features {
        if !seen.insert(feature) {
            return Err(invalid(key, format!("\"{feature}\" is listed twice")));
        }
    }
    Ok(())
}

pub(super) fn validate_split(
    split: &SplitSpec,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if !(0.0..0.9).contains(&split.holdout) || !split.holdout.is_finite() {
        return Err(invalid(
            "split.holdout",
            format!(
                "{} is outside [0, 0.9): it is the fraction of rows locked away for the final test",
                split.holdout
            ),
        ));
    }
    limits::at_most(split.repeats, limits::REPEATS, "repeats")
        .map_err(|message| invalid("split.repeats", message))?;
    if let Some(folds) = split.folds {
        limits::at_most(folds, limits::FOLDS, "folds")
            .map_err(|message| invalid("split.folds", message))?;
    }
    if split.repeats == 0 {
        return Err(invalid("split.repeats", "must be at least 1".into()));
    }
    match split.method {
        SplitMethod::Kfold | SplitMethod::Ordered => {
            if let Some(folds) = split.folds {
                if folds < 2 {
                    return Err(invalid(
                        "split.folds",
                        format!("{folds} folds: cross-validation needs at least 2"),
                    ));
                }
            }
            if split.column.is_some() {
                return Err(invalid(
                    "split.column",
                    "only used with method = \"column\"".into(),
                ));
            }
            if split.method == SplitMethod::Ordered && split.repeats != 1 {
                return Err(invalid(
                    "split.repeats",
                    format!(
                        "{} repeats: ordered splits follow time and have no randomness to repeat",
                        split.repeats
                    ),
                ));
            }
        }
        SplitMethod::LeaveOneOut | SplitMethod::Column => {
            if split.repeats != 1 {
                return Err(invalid(
                    "split.repeats",
                    format!(
                        "{} repeats: this method has no randomness to repeat",
                        split.repeats
                    ),
                ));
            }
            if split.folds.is_some() {
                return Err(invalid(
                    "split.folds",
                    "the fold count follows from the method; remove `folds`".into(),
                ));
            }
            let needs_column = split.method == SplitMethod::Column;
            if needs_column && split.column.is_none() {
                return Err(invalid(
                    "split.column",
                    "method = \"column\" needs `column = \"<fold column>\"`".into(),
                ));
            }
            if !needs_column && split.column.is_some() {
                return Err(invalid(
                    "split.column",
                    "only used with method = \"column\"".into(),
                ));
            }
        }
    }
    Ok(())
}

/// `[intervals]`: a level strictly inside (0, 1), and folds that leave every
/// non-test row out exactly once (CV+ needs each row's out-of-fold residual;
/// forward-chaining folds never validate the first block).
pub(super) fn validate_intervals(
    intervals: &IntervalsSpec,
    split: &SplitSpec,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if !(intervals.level > 0.0 && intervals.level < 1.0) {
        return Err(invalid(
            "intervals.level",
            format!(
                "{} is outside (0, 1): it is the intervals' nominal coverage, such as 0.9",
                intervals.level
            ),
        ));
    }
    if split.method == SplitMethod::Ordered {
        return Err(invalid(
            "intervals",
            "CV+ intervals need folds that leave every non-test row out once; ordered \
             (forward-chaining) folds never validate the earliest rows. Use another split \
             method or remove [intervals]"
                .into(),
        ));
    }
    Ok(())
}

/// What a task demands of the rest of the spec: a metric of its kind (when
/// one is named) and families that predict its kind of target, and
/// `positive` only for classification. Used when `[data] task` is declared
/// (before any data is read) and again once the data has decided an inferred
/// task. Returns the offending key and the message.
pub(crate) fn check_task(
    spec: &SpecFile,
    families: &[FamilySpec],
    task: Task,
) -> Result<(), (String, String)> {
    let table = if spec.simulate.is_some() {
        "[simulate]"
    } else {
        "[data]"
    };
    let (kind, others, fix) = match task {
        Task::Classification => (
            "a class target",
            "error-rate, log-loss, brier or auc",
            format!("set `task = \"regression\"` in {table} if the labels are numbers to predict"),
        ),
        Task::Regression => (
            "a numeric target",
            "mse, rmse, mae or r2",
            format!("set `task = \"classification\"` in {table} if the target holds class labels"),
        ),
    };
    if let Some(metric) = spec.choose.metric {
        if metric.for_classes() != (task == Task::Classification) {
            return Err((
                "choose.metric".into(),
                format!(
                    "\"{}\" does not score {kind} ({} task); use {others}, or {fix}",
                    metric.name(),
                    task.name()
                ),
            ));
        }
    }
    for (index, family) in families.iter().enumerate() {
        if !family.def.targets.fits(task) {
            let takes: Vec<&str> = crate::models::FAMILIES
                .iter()
                .filter(|def| def.targets.fits(task))
                .map(|def| def.name)
                .collect();
            return Err((
                format!("candidate[{}] ({}).family", index + 1, family.def.name),
                format!(
                    "family \"{}\" does not predict {kind} ({} task); families that do: {}; or {fix}",
                    family.def.name,
                    task.name(),
                    takes.join(", ")
                ),
            ));
        }
    }
    if let (Task::Regression, Some(data)) = (task, &spec.data) {
        if data.positive.is_some() {
            return Err((
                "data.positive".into(),
                "names the positive class of a class target; a regression target has none".into(),
            ));
        }
    }
    Ok(())
}
