//! The spec's tables as serde mirrors of the file: only types, defaults and
//! `deny_unknown_fields`. Values the types cannot judge are checked in
//! `checks`, candidates in `candidate`, `[simulate]` in `simulation`.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::{CandidateSpec, SimulateSpec};

/// The whole spec file as written.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct SpecFile {
    pub(crate) experiment: ExperimentSpec,
    pub(crate) data: Option<DataSpec>,
    /// A simulation spec declares a truth, inputs and noise instead of `[data]`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) simulate: Option<SimulateSpec>,
    #[serde(default)]
    pub(crate) split: SplitSpec,
    #[serde(rename = "candidate")]
    pub(crate) candidates: Vec<CandidateSpec>,
    #[serde(default)]
    pub(crate) choose: ChooseSpec,
    #[serde(default)]
    pub(crate) report: ReportSpec,
    /// Prediction intervals for the kept setting (CV+ / jackknife+); off
    /// when absent (docs/intervals.md).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) intervals: Option<IntervalsSpec>,
}

/// `[intervals]`: the nominal coverage of the prediction intervals.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct IntervalsSpec {
    /// Nominal coverage 1 − α, strictly between 0 and 1 (e.g. 0.9).
    pub(crate) level: f64,
}

#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct ExperimentSpec {
    /// Names the output folder: lower-case letters, digits and `-`.
    pub(crate) name: String,
    #[serde(default)]
    pub(crate) title: Option<String>,
    /// Master seed: every random stream derives from it.
    pub(crate) seed: u64,
}

#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct DataSpec {
    /// CSV file, relative to the spec file.
    pub(crate) table: String,
    pub(crate) target: String,
    pub(crate) features: Vec<String>,
    /// Row identity used for split assignment (stable under row reordering).
    #[serde(default)]
    pub(crate) key: Option<String>,
    /// Rows of one group never straddle folds or the test set.
    #[serde(default)]
    pub(crate) group: Option<String>,
    /// The time column of ordered splits (`method = "ordered"`): numbers, or
    /// text that sorts in time order such as ISO 8601 dates.
    #[serde(default)]
    pub(crate) order: Option<String>,
    #[serde(default)]
    pub(crate) missing: MissingPolicy,
    /// The character between cells: `","` (default), `";"`, `"\t"` or `"|"`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) delimiter: Option<String>,
    /// The decimal mark of numeric cells: `"."` (default) or `","`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) decimal: Option<String>,
    /// Cell texts that mean "no value" (default: `""`, `"NA"`, `"N/A"`,
    /// `"NaN"`, `"nan"`, `"null"`, matched exactly after trimming).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) missing_markers: Option<Vec<String>>,
    /// Numeric columns (integer codes) to treat as categorical features; a
    /// feature column holding text is categorical without being listed
    /// (docs/spec.md, "Categorical features").
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub(crate) categorical: Vec<String>,
    /// Levels with fewer training rows than this are pooled into one level,
    /// "other", inside each fit (default 1: no pooling).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) min_level_rows: Option<usize>,
    /// `classification` or `regression`; inferred from the target when absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) task: Option<Task>,
    /// The positive class of a binary target (default: the second label in
    /// sorted order).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) positive: Option<String>,
}

/// What the target is: a number to predict or a class label.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Task {
    Regression,
    Classification,
}

impl Task {
    /// The task's name as written in specs.
    pub(crate) fn name(self) -> &'static str {
        match self {
            Task::Regression => "regression",
            Task::Classification => "classification",
        }
    }
}

#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum MissingPolicy {
    /// An empty cell in a used column is an error.
    #[default]
    Error,
    /// Rows with an empty cell in a used column are dropped and counted.
    DropRows,
    /// Missing feature cells are filled inside each training fold (median,
    /// plus a 0/1 indicator column); see `data::missing`.
    Impute,
}

#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct SplitSpec {
    /// Fraction of rows locked away as the final test set; 0 = none.
    #[serde(default = "default_holdout")]
    pub(crate) holdout: f64,
    #[serde(default)]
    pub(crate) method: SplitMethod,
    #[serde(default)]
    pub(crate) folds: Option<usize>,
    #[serde(default = "default_repeats")]
    pub(crate) repeats: usize,
    /// With `method = "column"`: the column holding each row's fold label.
    #[serde(default)]
    pub(crate) column: Option<String>,
}

fn default_holdout() -> f64 {
    0.2
}

fn default_repeats() -> usize {
    1
}

/// Folds used when `folds` is not given (common practice: 10-fold).
pub(crate) const DEFAULT_FOLDS: usize = 10;

impl Default for SplitSpec {
    fn default() -> Self {
        SplitSpec {
            holdout: default_holdout(),
            method: SplitMethod::default(),
            folds: None,
            repeats: default_repeats(),
            column: None,
        }
    }
}

#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum SplitMethod {
    #[default]
    Kfold,
    LeaveOneOut,
    Column,
    Ordered,
}

#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct ChooseSpec {
    /// Default: `mse` for regression, `log-loss` for classification.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) metric: Option<Metric>,
    #[serde(default)]
    pub(crate) rule: Rule,
    /// Score every setting on the locked test set, not only the kept one.
    /// The test score is then no longer an unbiased estimate (the report
    /// and the summary say so).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub(crate) peek: bool,
    /// What a leakage finding does: `warn` (default) or `error` (exit 2).
    #[serde(default, skip_serializing_if = "LeakagePolicy::is_warn")]
    pub(crate) leakage: LeakagePolicy,
    /// Nested cross-validation: outer folds each rerun the whole selection.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub(crate) nested: bool,
}

/// What a leakage finding does (docs/reports.md, "Leakage").
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum LeakagePolicy {
    /// Warn on stderr and in the report.
    #[default]
    Warn,
    /// Stop with exit code 2, naming the rows.
    Error,
}

impl LeakagePolicy {
    fn is_warn(&self) -> bool {
        *self == LeakagePolicy::Warn
    }
}

/// Scoring metric: `mse`, `rmse`, `mae`, `r2` for regression targets;
/// `error-rate`, `log-loss`, `brier`, `auc` for class targets.
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Metric {
    #[default]
    Mse,
    Rmse,
    Mae,
    R2,
    ErrorRate,
    LogLoss,
    Brier,
    Auc,
}

/// How the winner is chosen from the cross-validated scores.
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Rule {
    /// The best cross-validated score.
    Lowest,
    /// The one-standard-error rule: the least flexible setting within one
    /// standard error of the best.
    #[default]
    OneSe,
}

#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct ReportSpec {
    #[serde(default = "default_formats")]
    pub(crate) formats: Vec<ReportFormat>,
}

impl Default for ReportSpec {
    fn default() -> Self {
        ReportSpec {
            formats: default_formats(),
        }
    }
}

fn default_formats() -> Vec<ReportFormat> {
    vec![ReportFormat::Markdown]
}

#[derive(
    Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq, PartialOrd, Ord, JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum ReportFormat {
    Markdown,
    Html,
}
