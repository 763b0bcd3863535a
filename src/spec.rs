//! The spec file: serde mirrors of its TOML/YAML text, and validation of the
//! values as a whole before any data is read or any model is fitted.
//!
//! This module only reads and checks. Binding columns, expanding grids and
//! assigning folds happen later, in `plan`; nothing downstream looks at the raw
//! text again. Unknown keys are errors (`deny_unknown_fields`), reported with
//! the file, line and column and a "did you mean" hint.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::error::SpecError;
pub use crate::simulate::spec::{Design, InputSpec, NoiseSpec, SimulateSpec};

/// The whole spec file as written.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SpecFile {
    pub experiment: ExperimentSpec,
    pub data: Option<DataSpec>,
    /// A simulation spec declares a truth, inputs and noise instead of `[data]`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub simulate: Option<SimulateSpec>,
    #[serde(default)]
    pub split: SplitSpec,
    #[serde(rename = "candidate")]
    pub candidates: Vec<CandidateSpec>,
    #[serde(default)]
    pub choose: ChooseSpec,
    #[serde(default)]
    pub report: ReportSpec,
}

#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ExperimentSpec {
    /// Names the output folder: lower-case letters, digits and `-`.
    pub name: String,
    #[serde(default)]
    pub title: Option<String>,
    /// Master seed: every random stream derives from it.
    pub seed: u64,
}

#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct DataSpec {
    /// CSV file, relative to the spec file.
    pub table: String,
    pub target: String,
    pub features: Vec<String>,
    /// Row identity used for split assignment (stable under row reordering).
    #[serde(default)]
    pub key: Option<String>,
    /// Rows of one group never straddle folds or the test set.
    #[serde(default)]
    pub group: Option<String>,
    /// The time column of ordered splits (`method = "ordered"`): numbers, or
    /// text that sorts in time order such as ISO 8601 dates.
    #[serde(default)]
    pub order: Option<String>,
    #[serde(default)]
    pub missing: MissingPolicy,
}

#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum MissingPolicy {
    /// An empty cell in a used column is an error.
    #[default]
    Error,
    /// Rows with an empty cell in a used column are dropped and counted.
    DropRows,
}

#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SplitSpec {
    /// Fraction of rows locked away as the final test set; 0 = none.
    #[serde(default = "default_holdout")]
    pub holdout: f64,
    #[serde(default)]
    pub method: SplitMethod,
    #[serde(default)]
    pub folds: Option<usize>,
    #[serde(default = "default_repeats")]
    pub repeats: usize,
    /// With `method = "column"`: the column holding each row's fold label.
    #[serde(default)]
    pub column: Option<String>,
}

fn default_holdout() -> f64 {
    0.2
}

fn default_repeats() -> usize {
    1
}

/// Folds used when `folds` is not given (common practice: 10-fold).
pub const DEFAULT_FOLDS: usize = 10;

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

/// One `[[candidate]]` table as written: a model family and its grid.
///
/// The table is read flat (every family's keys in one struct) so that an
/// unknown key is reported at its own line and column; [`validate`] then
/// checks that each key belongs to the family and builds a [`FamilySpec`].
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(
    description = "One model family and its grid of settings; each family takes only its own \
                   grid keys (see docs/spec.md)."
)]
pub struct CandidateSpec {
    pub family: FamilyName,
    /// Tells apart two candidates of one family in ids: a-z, 0-9 and `-`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// Columns this candidate uses instead of `[data] features`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub features: Option<Vec<String>>,
    /// linear, polynomial: fit an intercept (default true).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub intercept: Option<bool>,
    /// polynomial: the degrees to compare.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub degree: Option<Vec<usize>>,
    /// nearest-neighbors: the neighbour counts to compare.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub k: Option<Vec<usize>>,
    /// ridge, lasso, smoothing-spline, thin-plate: the penalties to compare.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub penalty: Option<Vec<f64>>,
    /// spline (whole numbers), smoothing-spline and thin-plate: effective
    /// degrees of freedom to compare.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub df: Option<Vec<f64>>,
    /// thin-plate: knots of the low-rank fit used above `exact_limit` rows.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub knots: Option<usize>,
    /// thin-plate: largest training fold fitted exactly.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub exact_limit: Option<usize>,
}

/// The model families a candidate may name.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum FamilyName {
    Linear,
    Polynomial,
    NearestNeighbors,
    SmoothingSpline,
    Spline,
    ThinPlate,
    Ridge,
    Lasso,
}

/// The grid of a penalised smoother: penalties, or target degrees of freedom
/// (each turned into a penalty by root finding on the smoother's trace).
#[derive(Debug, Clone, PartialEq)]
pub enum SmootherGrid {
    Penalty(Vec<f64>),
    Df(Vec<f64>),
}

/// Thin-plate defaults: exact up to this many training rows, then low rank.
pub const THIN_PLATE_EXACT_LIMIT: usize = 2000;
/// Thin-plate defaults: knots of the low-rank fit.
pub const THIN_PLATE_KNOTS: usize = 300;
/// Thin-plate bounds: fewest knots (a surface beyond the plane needs four).
pub const THIN_PLATE_MIN_KNOTS: usize = 4;
/// Thin-plate bounds: most knots, and the largest `exact_limit`.
pub const THIN_PLATE_MAX_ROWS: usize = 5000;

/// A validated candidate: what every family shares (its label and its own
/// feature list) and, in [`FamilyKind`], the family with its settings.
#[derive(Debug, Clone, PartialEq)]
pub struct FamilySpec {
    /// Replaces the family name in candidate ids.
    pub label: Option<String>,
    /// The candidate's own feature list, when it overrides `[data] features`.
    pub features: Option<Vec<String>>,
    pub kind: FamilyKind,
}

/// One variant per family, with that family's own settings and grid.
#[derive(Debug, Clone, PartialEq)]
pub enum FamilyKind {
    Linear {
        intercept: bool,
    },
    Polynomial {
        intercept: bool,
        degree: Vec<usize>,
    },
    NearestNeighbors {
        k: Vec<usize>,
    },
    SmoothingSpline {
        grid: SmootherGrid,
    },
    Spline {
        df: Vec<usize>,
    },
    ThinPlate {
        grid: SmootherGrid,
        knots: usize,
        exact_limit: usize,
    },
    Ridge {
        penalty: Vec<f64>,
    },
    Lasso {
        penalty: Vec<f64>,
    },
}

impl CandidateSpec {
    /// The keys given that only some families take, by name.
    fn family_keys(&self) -> Vec<&'static str> {
        let given = [
            ("intercept", self.intercept.is_some()),
            ("degree", self.degree.is_some()),
            ("k", self.k.is_some()),
            ("penalty", self.penalty.is_some()),
            ("df", self.df.is_some()),
            ("knots", self.knots.is_some()),
            ("exact_limit", self.exact_limit.is_some()),
        ];
        given
            .into_iter()
            .filter(|(_, present)| *present)
            .map(|(name, _)| name)
            .collect()
    }

    /// Checks that every key belongs to the family and builds its [`FamilySpec`].
    fn to_family(&self) -> Result<FamilySpec, (String, String)> {
        let allowed: &[&str] = match self.family {
            FamilyName::Linear => &["intercept"],
            FamilyName::Polynomial => &["intercept", "degree"],
            FamilyName::NearestNeighbors => &["k"],
            FamilyName::SmoothingSpline => &["penalty", "df"],
            FamilyName::Spline => &["df"],
            FamilyName::ThinPlate => &["penalty", "df", "knots", "exact_limit"],
            FamilyName::Ridge | FamilyName::Lasso => &["penalty"],
        };
        let family = self.family.as_str();
        if let Some(stray) = self
            .family_keys()
            .into_iter()
            .find(|k| !allowed.contains(k))
        {
            return Err((
                stray.to_string(),
                format!(
                    "`{stray}` is not a setting of family \"{family}\" (it takes: {})",
                    if allowed.is_empty() {
                        "none".to_string()
                    } else {
                        allowed.join(", ")
                    }
                ),
            ));
        }
        let required = |grid: &Option<Vec<usize>>, key: &str| {
            grid.clone().ok_or_else(|| {
                (
                    key.to_string(),
                    format!("family \"{family}\" needs a grid: `{key} = [...]`"),
                )
            })
        };
        let required_reals = |grid: &Option<Vec<f64>>, key: &str| {
            grid.clone().ok_or_else(|| {
                (
                    key.to_string(),
                    format!("family \"{family}\" needs a grid: `{key} = [...]`"),
                )
            })
        };
        let smoother_grid = || match (&self.penalty, &self.df) {
            (Some(p), None) => Ok(SmootherGrid::Penalty(p.clone())),
            (None, Some(d)) => Ok(SmootherGrid::Df(d.clone())),
            _ => Err((
                "penalty".to_string(),
                format!(
                    "family \"{family}\" needs exactly one grid: `penalty = [...]` or `df = [...]`"
                ),
            )),
        };
        let kind = match self.family {
            FamilyName::Linear => FamilyKind::Linear {
                intercept: self.intercept.unwrap_or(true),
            },
            FamilyName::Polynomial => FamilyKind::Polynomial {
                intercept: self.intercept.unwrap_or(true),
                degree: required(&self.degree, "degree")?,
            },
            FamilyName::NearestNeighbors => FamilyKind::NearestNeighbors {
                k: required(&self.k, "k")?,
            },
            FamilyName::SmoothingSpline => FamilyKind::SmoothingSpline {
                grid: smoother_grid()?,
            },
            FamilyName::Spline => {
                let df = required_reals(&self.df, "df")?;
                let whole: Option<Vec<usize>> = df
                    .iter()
                    .map(|&d| (d.fract() == 0.0 && d >= 1.0).then_some(d as usize))
                    .collect();
                FamilyKind::Spline {
                    df: whole.ok_or_else(|| {
                        (
                            "df".to_string(),
                            "spline df must be whole numbers ≥ 1 (basis columns per feature)"
                                .to_string(),
                        )
                    })?,
                }
            }
            FamilyName::ThinPlate => FamilyKind::ThinPlate {
                grid: smoother_grid()?,
                knots: self.knots.unwrap_or(THIN_PLATE_KNOTS),
                exact_limit: self.exact_limit.unwrap_or(THIN_PLATE_EXACT_LIMIT),
            },
            FamilyName::Ridge => FamilyKind::Ridge {
                penalty: required_reals(&self.penalty, "penalty")?,
            },
            FamilyName::Lasso => FamilyKind::Lasso {
                penalty: required_reals(&self.penalty, "penalty")?,
            },
        };
        Ok(FamilySpec {
            label: self.label.clone(),
            features: self.features.clone(),
            kind,
        })
    }
}

impl FamilyName {
    /// The family's name as written in the spec.
    fn as_str(self) -> &'static str {
        match self {
            FamilyName::Linear => "linear",
            FamilyName::Polynomial => "polynomial",
            FamilyName::NearestNeighbors => "nearest-neighbors",
            FamilyName::SmoothingSpline => "smoothing-spline",
            FamilyName::Spline => "spline",
            FamilyName::ThinPlate => "thin-plate",
            FamilyName::Ridge => "ridge",
            FamilyName::Lasso => "lasso",
        }
    }
}

impl FamilyKind {
    fn name(&self) -> FamilyName {
        match self {
            FamilyKind::Linear { .. } => FamilyName::Linear,
            FamilyKind::Polynomial { .. } => FamilyName::Polynomial,
            FamilyKind::NearestNeighbors { .. } => FamilyName::NearestNeighbors,
            FamilyKind::SmoothingSpline { .. } => FamilyName::SmoothingSpline,
            FamilyKind::Spline { .. } => FamilyName::Spline,
            FamilyKind::ThinPlate { .. } => FamilyName::ThinPlate,
            FamilyKind::Ridge { .. } => FamilyName::Ridge,
            FamilyKind::Lasso { .. } => FamilyName::Lasso,
        }
    }
}

impl FamilySpec {
    /// The family's name as written in the spec.
    pub fn family_name(&self) -> &'static str {
        self.kind.name().as_str()
    }

    /// The stem of the candidate's ids: its label, or else its family name.
    pub fn stem(&self) -> &str {
        self.label.as_deref().unwrap_or(self.family_name())
    }
}

#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ChooseSpec {
    #[serde(default)]
    pub metric: Metric,
    #[serde(default)]
    pub rule: Rule,
}

/// Scoring metric for regression targets.
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Metric {
    #[default]
    Mse,
    Rmse,
    Mae,
    R2,
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
pub struct ReportSpec {
    #[serde(default = "default_formats")]
    pub formats: Vec<ReportFormat>,
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
pub enum ReportFormat {
    Markdown,
    Html,
}

/// A spec read from disk, with the path it came from.
#[derive(Debug, Clone)]
pub struct LoadedSpec {
    pub path: PathBuf,
    pub spec: SpecFile,
    /// The validated candidates, in spec order.
    pub families: Vec<FamilySpec>,
    /// For a simulation spec: the `[data]` it stands in for (the inputs as
    /// features, the simulated target), so later stages read both alike.
    pub simulated_data: Option<DataSpec>,
}

impl LoadedSpec {
    /// The folder relative paths in the spec are resolved against.
    pub fn base_dir(&self) -> &Path {
        self.path.parent().unwrap_or(Path::new(""))
    }

    /// The `[data]` table: present on every validated non-simulation spec;
    /// for a simulation spec, the stand-in described at [`Self::simulated_data`].
    pub fn data(&self) -> &DataSpec {
        self.spec
            .data
            .as_ref()
            .or(self.simulated_data.as_ref())
            .expect("validation guarantees a [data] or [simulate] table")
    }

    /// Whether this is a simulation spec.
    pub fn is_simulation(&self) -> bool {
        self.spec.simulate.is_some()
    }
}

/// Reads, parses and validates a spec file (TOML or YAML, chosen by extension).
pub fn load(path: &Path) -> Result<LoadedSpec, SpecError> {
    let text = std::fs::read_to_string(path).map_err(|error| SpecError::Read {
        path: path.to_path_buf(),
        error,
    })?;
    let spec = parse(path, &text)?;
    let families = validate(path, &spec)?;
    let simulated_data = spec.simulate.as_ref().map(|sim| DataSpec {
        table: "[simulate]".to_string(),
        target: sim.target.clone(),
        features: sim.input_names(),
        key: None,
        group: None,
        order: None,
        missing: MissingPolicy::Error,
    });
    Ok(LoadedSpec {
        path: path.to_path_buf(),
        spec,
        families,
        simulated_data,
    })
}

/// Parses spec text; the format follows the file extension.
pub fn parse(path: &Path, text: &str) -> Result<SpecFile, SpecError> {
    match path.extension().and_then(|e| e.to_str()) {
        Some("toml") => parse_toml(path, text),
        Some("yaml") | Some("yml") => parse_yaml(path, text),
        _ => Err(SpecError::UnknownFormat {
            path: path.to_path_buf(),
        }),
    }
}

fn parse_toml(path: &Path, text: &str) -> Result<SpecFile, SpecError> {
    toml::from_str(text).map_err(|err| {
        let (line, column) = match err.span() {
            Some(span) => line_and_column(text, span.start),
            None => (1, 1),
        };
        let message = err.message().trim().to_string();
        SpecError::Parse {
            location: format!("{}:{line}:{column}", path.display()),
            hint: did_you_mean(&message),
            message,
        }
    })
}

fn parse_yaml(path: &Path, text: &str) -> Result<SpecFile, SpecError> {
    serde_yaml_ng::from_str(text).map_err(|err| {
        let (line, column) = err
            .location()
            .map(|l| (l.line(), l.column()))
            .unwrap_or((1, 1));
        let mut message = err.to_string();
        // The YAML library appends its own position; ours is in front already.
        if let Some(cut) = message.find(" at line ") {
            message.truncate(cut);
        }
        SpecError::Parse {
            location: format!("{}:{line}:{column}", path.display()),
            hint: did_you_mean(&message),
            message,
        }
    })
}

/// 1-based line and column (in characters) of a byte offset.
fn line_and_column(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let column = before[line_start..].chars().count() + 1;
    (line, column)
}

/// Turns serde's "unknown field `x`, expected one of `a`, `b`" (or "unknown
/// variant") into a hint naming the closest allowed word, when one is close.
fn did_you_mean(message: &str) -> String {
    let unknown = ["unknown field `", "unknown variant `"]
        .iter()
        .find_map(|prefix| message.find(prefix).map(|at| at + prefix.len()));
    let Some(start) = unknown else {
        return String::new();
    };
    let Some(len) = message[start..].find('`') else {
        return String::new();
    };
    let typed = &message[start..start + len];
    let rest = &message[start + len + 1..];
    let allowed: Vec<&str> = rest.split('`').skip(1).step_by(2).collect();
    closest(typed, &allowed)
        .map(|word| format!(" (did you mean `{word}`?)"))
        .unwrap_or_default()
}

/// The allowed word nearest to `typed`, if it is near enough to be a typo.
pub fn closest<'a>(typed: &str, allowed: &[&'a str]) -> Option<&'a str> {
    allowed
        .iter()
        .map(|word| (strsim::damerau_levenshtein(typed, word), *word))
        .filter(|(distance, word)| *distance <= 1.max(typed.len().max(word.len()) / 4))
        .min_by_key(|(distance, _)| *distance)
        .map(|(_, word)| word)
}

/// Checks values that the types alone cannot: ranges, names, grids, and the
/// combinations of keys. Fails on the first problem, naming the key. Returns
/// the candidates as validated family specs.
pub fn validate(path: &Path, spec: &SpecFile) -> Result<Vec<FamilySpec>, SpecError> {
    let invalid = |key: &str, message: String| SpecError::Invalid {
        path: path.to_path_buf(),
        key: key.to_string(),
        message,
    };

    let name = &spec.experiment.name;
    if name.is_empty()
        || !name
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-')
    {
        return Err(invalid(
            "experiment.name",
            format!("\"{name}\" must use only a-z, 0-9 and '-' (it names the output folder)"),
        ));
    }

    let default_features = match (&spec.data, &spec.simulate) {
        (Some(data), None) => {
            validate_data(data, &spec.split, &invalid)?;
            data.features.clone()
        }
        (None, Some(sim)) => {
            crate::simulate::spec::validate(sim, &spec.split, &invalid)?;
            sim.input_names()
        }
        (Some(_), Some(_)) => {
            return Err(invalid(
                "simulate",
                "a spec declares either [data] (a table) or [simulate] (a declared truth), \
                 not both"
                    .into(),
            ))
        }
        (None, None) => {
            return Err(invalid(
                "data",
                "the spec needs a [data] table (or a [simulate] table)".into(),
            ))
        }
    };
    validate_split(&spec.split, &invalid)?;

    if spec.candidates.is_empty() {
        return Err(invalid(
            "candidate",
            "declare at least one [[candidate]]".into(),
        ));
    }
    let mut ids = BTreeSet::new();
    let mut families = Vec::with_capacity(spec.candidates.len());
    for (index, raw) in spec.candidates.iter().enumerate() {
        let key = format!("candidate[{}] ({})", index + 1, raw.family.as_str());
        let candidate = raw
            .to_family()
            .map_err(|(sub, message)| invalid(&format!("{key}.{sub}"), message))?;
        validate_candidate(&candidate, &key, &invalid)?;
        let wanted = match candidate.kind {
            FamilyKind::SmoothingSpline { .. } => Some(1),
            FamilyKind::ThinPlate { .. } => Some(2),
            _ => None,
        };
        let features = candidate.features.as_deref().unwrap_or(&default_features);
        if let (Some(sim), Some(own)) = (&spec.simulate, candidate.features.as_deref()) {
            let inputs = sim.input_names();
            if let Some(unknown) = own.iter().find(|f| !inputs.contains(f)) {
                let names: Vec<&str> = inputs.iter().map(String::as_str).collect();
                let hint = closest(unknown, &names)
                    .map(|w| format!(" (did you mean `{w}`?)"))
                    .unwrap_or_default();
                return Err(invalid(
                    &format!("{key}.features"),
                    format!(
                        "\"{unknown}\" is not an input of [simulate] (inputs: {}){hint}",
                        inputs.join(", ")
                    ),
                ));
            }
        }
        if let Some(wanted) = wanted.filter(|&w| w != features.len()) {
            return Err(invalid(
                &format!("{key}.features"),
                format!(
                    "{} takes exactly {wanted} feature(s), got {} ({}); set `features = [...]` on the candidate",
                    candidate.family_name(),
                    features.len(),
                    features.join(", ")
                ),
            ));
        }
        let stem = candidate.stem();
        if !ids.insert(stem.to_string()) {
            return Err(invalid(
                &key,
                format!(
                    "a second candidate named \"{stem}\" would give duplicate ids; \
                     add `label = \"...\"` to tell them apart"
                ),
            ));
        }
        families.push(candidate);
    }

    Ok(families)
}

fn validate_data(
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

fn validate_feature_list(
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

fn validate_split(
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

fn validate_candidate(
    candidate: &FamilySpec,
    key: &str,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if let Some(label) = &candidate.label {
        let ok = !label.is_empty()
            && label
                .chars()
                .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-');
        if !ok {
            return Err(invalid(
                &format!("{key}.label"),
                format!("\"{label}\" must use only a-z, 0-9 and '-'"),
            ));
        }
    }
    if let Some(features) = &candidate.features {
        validate_feature_list(features, &format!("{key}.features"), invalid)?;
    }
    match &candidate.kind {
        FamilyKind::Linear { .. } => Ok(()),
        FamilyKind::Polynomial { degree, .. } => {
            check_grid(degree, 1, 30, &format!("{key}.degree"), "degree", invalid)
        }
        FamilyKind::NearestNeighbors { k } => {
            check_grid(k, 1, usize::MAX, &format!("{key}.k"), "k", invalid)
        }
        FamilyKind::Spline { df } => check_grid(df, 1, 50, &format!("{key}.df"), "df", invalid),
        FamilyKind::SmoothingSpline { grid } => {
            check_smoother_grid(grid, key, invalid)?;
            if let SmootherGrid::Df(values) = grid {
                if let Some(df) = values.iter().find(|&&d| d < 2.0) {
                    return Err(invalid(
                        &format!("{key}.df"),
                        format!(
                            "df = {df} is below 2: every smoothing spline contains the \
                             least-squares line (df = 2, the limit of an unbounded penalty)"
                        ),
                    ));
                }
            }
            Ok(())
        }
        FamilyKind::ThinPlate {
            grid,
            knots,
            exact_limit,
        } => {
            check_smoother_grid(grid, key, invalid)?;
            if let SmootherGrid::Df(values) = grid {
                if let Some(df) = values.iter().find(|&&d| d <= 3.0) {
                    return Err(invalid(
                        &format!("{key}.df"),
                        format!(
                            "df = {df} must be above 3: every thin-plate surface contains the \
                             plane (3 df), reached only as the penalty grows without bound"
                        ),
                    ));
                }
            }
            if !(THIN_PLATE_MIN_KNOTS..=THIN_PLATE_MAX_ROWS).contains(knots) {
                return Err(invalid(
                    &format!("{key}.knots"),
                    format!(
                        "knots = {knots} is outside [{THIN_PLATE_MIN_KNOTS}, {THIN_PLATE_MAX_ROWS}]"
                    ),
                ));
            }
            if *exact_limit > THIN_PLATE_MAX_ROWS {
                return Err(invalid(
                    &format!("{key}.exact_limit"),
                    format!(
                        "exact_limit = {exact_limit} is above {THIN_PLATE_MAX_ROWS}: the exact fit \
                         takes time growing as rows³ and memory as rows²; use knots instead"
                    ),
                ));
            }
            Ok(())
        }
        FamilyKind::Ridge { penalty } | FamilyKind::Lasso { penalty } => {
            check_real_grid(penalty, 0.0, &format!("{key}.penalty"), "penalty", invalid)
        }
    }
}

/// A penalty grid (≥ 0) or a df grid (≥ 1) of a penalised smoother.
fn check_smoother_grid(
    grid: &SmootherGrid,
    key: &str,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    let (name, values, lowest) = match grid {
        SmootherGrid::Penalty(v) => ("penalty", v, 0.0),
        SmootherGrid::Df(v) => ("df", v, 1.0),
    };
    check_real_grid(values, lowest, &format!("{key}.{name}"), name, invalid)
}

/// A real-valued grid must be non-empty, finite, at least `lowest`, without repeats.
fn check_real_grid(
    values: &[f64],
    lowest: f64,
    key: &str,
    what: &str,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if values.is_empty() {
        return Err(invalid(key, format!("list at least one {what}")));
    }
    for (i, &value) in values.iter().enumerate() {
        if !value.is_finite() || value < lowest {
            return Err(invalid(
                key,
                format!("{what} = {value} must be a finite number ≥ {lowest}"),
            ));
        }
        if values[..i].contains(&value) {
            return Err(invalid(key, format!("{what} = {value} is listed twice")));
        }
    }
    Ok(())
}

/// A grid must be non-empty, within bounds and free of repeats.
fn check_grid(
    values: &[usize],
    min: usize,
    max: usize,
    key: &str,
    what: &str,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    if values.is_empty() {
        return Err(invalid(key, format!("list at least one {what}")));
    }
    let mut seen = BTreeSet::new();
    for &value in values {
        if value < min || value > max {
            return Err(invalid(
                key,
                format!("{what} = {value} is outside [{min}, {max}]"),
            ));
        }
        if !seen.insert(value) {
            return Err(invalid(key, format!("{what} = {value} is listed twice")));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    const MINIMAL: &str = r#"
[experiment]
name = "t"
seed = 1

[data]
table = "d.csv"
target = "y"
features = ["x"]

[[candidate]]
family = "polynomial"
degree = [1, 2]
"#;

    /// Parses and validates `text` as `s.toml`; the error's text on failure.
    fn check(text: &str) -> Result<Vec<FamilySpec>, String> {
        let spec = parse(Path::new("s.toml"), text).map_err(|e| e.to_string())?;
        validate(Path::new("s.toml"), &spec).map_err(|e| e.to_string())
    }

    #[test]
    fn minimal_spec_takes_defaults() {
        let spec = parse(Path::new("s.toml"), MINIMAL).unwrap();
        validate(Path::new("s.toml"), &spec).unwrap();
        assert_eq!(spec.split.holdout, 0.2);
        assert_eq!(spec.split.method, SplitMethod::Kfold);
        assert_eq!(spec.choose.rule, Rule::OneSe);
        assert_eq!(spec.choose.metric, Metric::Mse);
    }

    #[test]
    fn unknown_candidate_key_suggests_the_near_one() {
        let err = check(&MINIMAL.replace("degree = [1, 2]", "degre = [1, 2]")).unwrap_err();
        assert!(err.contains("did you mean `degree`"), "{err}");
        assert!(err.starts_with("s.toml:"), "{err}");
    }

    #[test]
    fn unknown_top_level_key_has_line_and_column() {
        let err = check(&MINIMAL.replace("seed = 1", "seed = 1\nsed = 2")).unwrap_err();
        assert!(err.starts_with("s.toml:5:1:"), "{err}");
        assert!(err.contains("did you mean `seed`"), "{err}");
    }

    #[test]
    fn yaml_and_toml_parse_to_the_same_spec() {
        let yaml = r#"
experiment: {name: t, seed: 1}
data: {table: d.csv, target: y, features: [x]}
candidate:
  - {family: polynomial, degree: [1, 2]}
"#;
        let from_yaml = parse(Path::new("s.yaml"), yaml).unwrap();
        let from_toml = parse(Path::new("s.toml"), MINIMAL).unwrap();
        assert_eq!(from_yaml, from_toml);
    }

    #[test]
    fn bad_values_name_their_key() {
        let err = check(&MINIMAL.replace("degree = [1, 2]", "degree = [0, 2]")).unwrap_err();
        assert!(err.contains("candidate[1] (polynomial).degree"), "{err}");
        assert!(err.contains("degree = 0"), "{err}");
    }

    #[test]
    fn smoothing_spline_df_below_two_is_refused_and_two_is_allowed() {
        let with = |settings: &str| {
            let text = MINIMAL.replace("family = \"polynomial\"\ndegree = [1, 2]", settings);
            let spec = parse(Path::new("s.toml"), &text).unwrap();
            validate(Path::new("s.toml"), &spec).map_err(|e| e.to_string())
        };
        with("family = \"smoothing-spline\"\ndf = [2, 3, 5, 8, 12, 20]").unwrap();
        let err = with("family = \"smoothing-spline\"\ndf = [1.5, 3]").unwrap_err();
        assert!(err.contains("candidate[1] (smoothing-spline).df"), "{err}");
        assert!(err.contains("df = 1.5 is below 2"), "{err}");
    }

    #[test]
    fn thin_plate_settings_are_checked_before_fitting() {
        let two = MINIMAL.replace(r#"features = ["x"]"#, r#"features = ["x", "z"]"#);
        let with = |settings: &str| {
            check(&two.replace("family = \"polynomial\"\ndegree = [1, 2]", settings))
        };
        with("family = \"thin-plate\"\ndf = [3.5, 8]\nknots = 50\nexact_limit = 100").unwrap();
        let err = with("family = \"thin-plate\"\ndf = [5, 3]").unwrap_err();
        assert!(err.contains("candidate[1] (thin-plate).df"), "{err}");
        assert!(err.contains("df = 3 must be above 3"), "{err}");
        let err = with("family = \"thin-plate\"\npenalty = [1]\nknots = 3").unwrap_err();
        assert!(
            err.contains(".knots: knots = 3 is outside [4, 5000]"),
            "{err}"
        );
        let err = with("family = \"thin-plate\"\npenalty = [1]\nexact_limit = 5001").unwrap_err();
        assert!(err.contains(".exact_limit: exact_limit = 5001"), "{err}");
    }

    #[test]
    fn closest_ignores_far_words() {
        assert_eq!(closest("folds", &["folds", "fold"]), Some("folds"));
        assert_eq!(closest("zzzzzz", &["holdout", "method"]), None);
    }
}
