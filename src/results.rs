//! The results of an experiment as written to `results.json`
//! (schema `heldout-results/1`; docs/architecture.md, "Stages of a run"),
//! their assembly from a plan
//! and its fits, and reading them back (`heldout report`). Numbers are
//! serialised with shortest round-trip formatting, so the JSON holds the
//! exact bits; JSON has no NaN or infinity, so those are written as `null`
//! and read back as NaN (see [`lenient`]).

use serde::{Deserialize, Serialize, Serializer};

use crate::assess::{self, Choice, SettingScore};
use crate::execute::CandidateFits;
use crate::plan::ExperimentPlan;
use crate::spec::{Metric, Rule, SplitMethod};

mod categorical;
mod classification;
pub(crate) mod intervals;
pub mod kept_model;
pub(crate) mod prediction_sets;
mod selection;
pub use classification::{
    AbsentClasses, CalibrationBin, Classification, TestEvidence, CALIBRATION_BINS,
};
pub use intervals::{IntervalTest, Intervals};
pub use kept_model::{KeptModel, Term};
pub use prediction_sets::{PredictionSets, SetTest};
pub use selection::{
    Duplicates, Leakage, Nested, Paired, PairedComparison, SharedGroups, TargetCopy, TestInterval,
};

pub const SCHEMA: &str = "heldout-results/1";

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Results {
    pub schema: String,
    pub experiment: String,
    pub title: Option<String>,
    /// Digests of what produced these numbers (also in the receipt).
    pub inputs: Inputs,
    pub metric: Metric,
    pub rule: Rule,
    pub rows: RowCounts,
    pub data: DataSummary,
    pub split: SplitSummary,
    pub candidates: Vec<CandidateResult>,
    pub chosen: String,
    pub choice: ChoiceSummary,
    pub test_score: Option<f64>,
    /// The locked test score's 95% interval (absent for r2 and auc, or
    /// without a test set).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub test_interval: Option<TestInterval>,
    /// `[choose] peek = true`: every setting was scored on the test set, so
    /// the kept setting's test score is no longer unbiased.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub peek: bool,
    /// Fold-wise differences between the kept setting and its rivals.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub paired: Option<Paired>,
    /// The leakage inspection (always run; empty lists when clean).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub leakage: Option<Leakage>,
    /// `[choose] nested = true`: the whole selection rerun in outer folds.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub nested: Option<Nested>,
    #[serde(rename = "final")]
    pub final_fit: FinalFit,
    /// Class targets only: classes, folds lacking a class, and the kept
    /// setting's confusion matrix, ROC curve and calibration on the test set.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub classification: Option<Classification>,
    /// With `[intervals]`: the kept setting's prediction intervals and
    /// their coverage on the locked test set (docs/intervals.md).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub intervals: Option<Intervals>,
    /// With `[intervals]` and a class target: the kept setting's CV+
    /// prediction sets and their coverage on the locked test set
    /// (docs/intervals.md, "Class targets: prediction sets").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub prediction_sets: Option<PredictionSets>,
    /// Simulation specs only: `simulation` (the bias–variance decomposition
    /// of every setting) and `simulation_summary` (setup, oracle and
    /// cross-validation's choices), flattened into the top level.
    /// (Read back by [`from_json`], not by the derived deserialiser, so that
    /// a malformed section is an error rather than silently absent.)
    #[serde(flatten, skip_deserializing)]
    pub simulation: Option<crate::simulate::SimulationOutput>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Inputs {
    pub tool: String,
    /// blake3 of the spec's meaning (see `digests::spec_digest`).
    pub spec: String,
    pub templates: String,
    /// blake3 of the test set and fold assignment (see `digests::folds_digest`).
    pub folds: String,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RowCounts {
    /// Rows kept after dropping rows with missing cells.
    pub total: usize,
    pub train: usize,
    pub test: usize,
    pub dropped: usize,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct DataSummary {
    /// The table path as written in the spec.
    pub table: String,
    /// blake3 of the table file's bytes.
    pub digest: String,
    pub target: String,
    pub features: Vec<String>,
    pub key: Option<String>,
    pub group: Option<String>,
    /// The time column of an ordered split (absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub order: Option<String>,
    /// The file's last line had no line break, so it may have been cut
    /// inside its last value (written only when true).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub unterminated: bool,
    /// Each used column with missing cells: how many and what was done
    /// (written only when some column has any).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub missing: Vec<MissingColumn>,
    /// Each categorical feature column: its levels and the rows predicted
    /// with a level their fit's training rows never held (written only when
    /// some feature is categorical; `results/categorical.rs`).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub categorical: Vec<categorical::CategoricalColumn>,
}

/// The missing cells of one used column and what was done with them.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct MissingColumn {
    pub column: String,
    /// Missing cells over every data row of the file.
    pub cells: usize,
    /// `"drop-rows"`: their rows were dropped; `"impute"`: filled with the
    /// median of each fit's training rows, with an indicator column for the
    /// families that take any number of features; `"level"`: a categorical
    /// column's cells read as the level "missing".
    pub handling: String,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SplitSummary {
    pub method: SplitMethod,
    pub seed: u64,
    #[serde(deserialize_with = "lenient::number")]
    pub holdout: f64,
    /// Folds per repeat.
    pub folds: usize,
    pub repeats: usize,
    /// Repeats the spec asked for that dealt the same folds as an earlier
    /// one and were counted once (written only when there were any).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub identical_repeats: usize,
    /// Smallest and largest number of validation rows in a fold.
    pub fold_rows: [usize; 2],
}

fn is_zero(count: &usize) -> bool {
    *count == 0
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CandidateResult {
    pub id: String,
    pub family: String,
    pub features: Vec<String>,
    pub setting: serde_json::Map<String, serde_json::Value>,
    #[serde(deserialize_with = "lenient::number")]
    pub effective_df: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub train_score: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub cv_score: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub cv_se: f64,
    #[serde(deserialize_with = "lenient::numbers")]
    pub fold_scores: Vec<f64>,
    /// Score on the locked test set: only with `[choose] peek = true`.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub test_score: Option<f64>,
    /// Where and why the setting could not be fitted, in task order (absent
    /// for a feasible setting). An infeasible setting's scores are `null`;
    /// it takes no part in the choice (docs/spec.md, "Infeasible settings").
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub infeasible: Vec<crate::execute::feasible::Infeasible>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ChoiceSummary {
    /// The setting with the best cross-validated score.
    pub best: String,
    #[serde(deserialize_with = "lenient::number")]
    pub best_cv_score: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub best_cv_se: f64,
    /// one-se: scores no worse than this were eligible.
    pub threshold: Option<f64>,
    /// How many settings were eligible under the rule.
    pub eligible: usize,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct FinalFit {
    pub id: String,
    /// Score on the locked test set; absent without a test set.
    pub test_score: Option<f64>,
    /// Training score of the refit on all non-test rows.
    #[serde(deserialize_with = "lenient::number")]
    pub train_score: f64,
    /// Name → value in the raw units of the features, intercept first.
    #[serde(
        default,
        serialize_with = "ordered_map",
        deserialize_with = "lenient::ordered_pairs",
        skip_serializing_if = "Option::is_none"
    )]
    pub coefficients: Option<Vec<(String, f64)>>,
    /// The kept setting as data: its terms (feature, power, coefficient)
    /// when it is a sum of raw-unit coefficients, or the statement that it
    /// needs the training rows (docs/predict.md, "The kept model as data").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub model: Option<KeptModel>,
    /// The final fit beside the data, for the report's data figure.
    pub predictions: Predictions,
}

/// Observed and predicted target values of the final fit (the chosen setting
/// refitted on all non-test rows), at the training rows and at the locked
/// test rows. At most [`PREDICTION_POINTS`] rows of each set are kept, evenly
/// spaced in row order, so `results.json` stays small.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Predictions {
    /// The one feature the chosen fit uses; absent when it uses several (the
    /// report then plots observed against predicted).
    pub feature: Option<String>,
    pub train: PredictionSet,
    /// Absent without a locked test set.
    pub test: Option<PredictionSet>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct PredictionSet {
    /// Rows in the set; the arrays hold at most [`PREDICTION_POINTS`] of them.
    pub rows: usize,
    /// Values of `feature`, when there is one feature.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_numbers"
    )]
    pub x: Option<Vec<f64>>,
    #[serde(deserialize_with = "lenient::numbers")]
    pub observed: Vec<f64>,
    #[serde(deserialize_with = "lenient::numbers")]
    pub predicted: Vec<f64>,
}

/// Most rows of one set kept in [`Predictions`].
pub const PREDICTION_POINTS: usize = 1000;

/// Positions of at most `cap` of `len` items, evenly spaced, first included.
fn thin(len: usize, cap: usize) -> Vec<usize> {
    if len <= cap {
        (0..len).collect()
    } else {
        (0..cap).map(|i| i * len / cap).collect()
    }
}

fn prediction_set(
    plan: &ExperimentPlan,
    feature: Option<&str>,
    rows: &[usize],
    predicted: &[f64],
) -> PredictionSet {
    let keep = thin(rows.len(), PREDICTION_POINTS);
    PredictionSet {
        rows: rows.len(),
        x: feature.map(|name| {
            let column = plan.table.column(name);
            keep.iter().map(|&i| column[rows[i]]).collect()
        }),
        observed: keep.iter().map(|&i| plan.target[rows[i]]).collect(),
        predicted: keep.iter().map(|&i| predicted[i]).collect(),
    }
}

fn ordered_map<S: Serializer>(
    pairs: &Option<Vec<(String, f64)>>,
    serializer: S,
) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeMap;
    let pairs = pairs.as_deref().unwrap_or_default();
    let mut map = serializer.serialize_map(Some(pairs.len()))?;
    for (name, value) in pairs {
        map.serialize_entry(name, value)?;
    }
    map.end()
}

/// Scores every setting, applies the rule and assembles the results.
pub(crate) fn assemble(
    plan: &ExperimentPlan,
    fits: &[CandidateFits],
) -> Result<Results, crate::error::FitError> {
    let spec = &plan.spec.spec;
    let data = plan.spec.data();
    let metric = plan.metric;
    let scorer = plan.scorer();
    let assignment = &plan.assignment;
    let train_target = plan.target_of(&assignment.train);
    let test_target = plan.target_of(&assignment.test);
    let fold_targets: Vec<Vec<f64>> = assignment
        .folds
        .iter()
        .map(|f| plan.target_of(&f.valid))
        .collect();

    let infeasible: Vec<Vec<Vec<crate::execute::feasible::Infeasible>>> =
        fits.iter().map(|fit| fit.infeasible.clone()).collect();
    if crate::execute::feasible::all_infeasible(&infeasible) {
        return Err(crate::execute::feasible::none_feasible(plan, &infeasible));
    }
    let mut scores = Vec::new();
    let mut candidates = Vec::new();
    let mut locate = Vec::new();
    for (c, (candidate, fit)) in plan.candidates.iter().zip(fits).enumerate() {
        for (s, setting) in candidate.settings.iter().enumerate() {
            let full = &fit.full[s];
            let mut score = SettingScore::new(
                candidate.id(setting),
                full.effective_df,
                scorer.score(&train_target, &full.train_pred),
                assess::fold_scores(scorer, &fit.fold_predictions, &fold_targets, s),
            );
            crate::execute::feasible::set_aside(&mut score, &fit.infeasible[s]);
            let mut setting_map = serde_json::Map::new();
            if let Some((name, value)) = setting.param {
                setting_map.insert(name.into(), setting_value_json(value));
            }
            candidates.push(CandidateResult {
                id: score.id.clone(),
                family: candidate.family_name.to_string(),
                features: candidate.features.clone(),
                setting: setting_map,
                effective_df: score.effective_df,
                train_score: score.train_score,
                cv_score: score.cv_score,
                cv_se: score.cv_se,
                fold_scores: score.fold_scores.clone(),
                test_score: None,
                infeasible: fit.infeasible[s].clone(),
            });
            scores.push(score);
            locate.push((c, s));
        }
    }

    let Choice {
        chosen,
        best,
        threshold,
    } = assess::choose(&scores, metric, spec.choose.rule)?;
    let eligible = match threshold {
        Some(t) => scores
            .iter()
            .filter(|s| s.cv_score.is_finite() && !metric.better(t, s.cv_score))
            .count(),
        None => 1,
    };
    let evidence = crate::evidence::gather(plan, fits, &scores, &locate, chosen, best);
    if let Some(test_scores) = &evidence.test_scores {
        for (candidate, score) in candidates.iter_mut().zip(test_scores) {
            candidate.test_score = Some(*score);
        }
    }
    let (c, s) = locate[chosen];
    let chosen_fit = &fits[c].full[s];
    let chosen_features = plan.candidates[c].features.as_slice();
    let feature = match chosen_features {
        [one] => Some(one.as_str()),
        _ => None,
    };
    // A class target's predictions, one number per row: the positive
    // class's probability (two classes) or the predicted class.
    let per_row = |predicted: &[f64]| -> Vec<f64> {
        match &plan.task.classes {
            None => predicted.to_vec(),
            Some(classes) => {
                let layout = crate::metrics::ClassPrediction {
                    classes: classes.labels.len(),
                };
                (0..predicted.len() / layout.width())
                    .map(|i| match classes.labels.len() {
                        2 => layout.probabilities(predicted, i)[classes.positive],
                        _ => layout.class(predicted, i) as f64,
                    })
                    .collect()
            }
        }
    };
    let predictions = Predictions {
        feature: feature.map(str::to_string),
        train: prediction_set(
            plan,
            feature,
            &assignment.train,
            &per_row(&chosen_fit.train_pred),
        ),
        test: (!assignment.test.is_empty()).then(|| {
            prediction_set(
                plan,
                feature,
                &assignment.test,
                &per_row(&chosen_fit.eval_pred),
            )
        }),
    };
    let classification = plan
        .task
        .classes
        .as_ref()
        .map(|classes| classification::summarise(plan, classes, &chosen_fit.eval_pred));
    let test_score =
        (!assignment.test.is_empty()).then(|| scorer.score(&test_target, &chosen_fit.eval_pred));

    let fold_sizes = assignment.folds.iter().map(|f| f.valid.len());
    let fold_rows = [
        fold_sizes.clone().min().unwrap_or(0),
        fold_sizes.max().unwrap_or(0),
    ];
    // Counting unseen levels walks every fold: once, for the data section
    // and the kept model's encodings alike.
    let categorical_columns = categorical::columns(plan);
    Ok(Results {
        schema: SCHEMA.to_string(),
        experiment: spec.experiment.name.clone(),
        title: spec.experiment.title.clone(),
        inputs: Inputs {
            tool: crate::receipt::tool_version(),
            spec: crate::digests::spec_digest(spec),
            templates: crate::digests::templates_digest(),
            folds: crate::digests::folds_digest(plan),
        },
        metric,
        rule: spec.choose.rule,
        rows: RowCounts {
            total: plan.table.len(),
            train: assignment.train.len(),
            test: assignment.test.len(),
            dropped: plan.table.dropped,
        },
        data: DataSummary {
            table: data.table.clone(),
            digest: plan.table.digest.clone(),
            target: data.target.clone(),
            features: data.features.clone(),
            key: data.key.clone(),
            group: data.group.clone(),
            order: data.order.clone(),
            unterminated: plan.table.unterminated,
            missing: missing_columns(plan),
            categorical: categorical_columns.clone(),
        },
        split: SplitSummary {
            method: spec.split.method,
            seed: spec.experiment.seed,
            holdout: spec.split.holdout,
            folds: assignment.folds.len() / assignment.repeats,
            repeats: assignment.repeats,
            identical_repeats: assignment.identical_repeats,
            fold_rows,
        },
        chosen: scores[chosen].id.clone(),
        choice: ChoiceSummary {
            best: scores[best].id.clone(),
            best_cv_score: scores[best].cv_score,
            best_cv_se: scores[best].cv_se,
            threshold,
            eligible,
        },
        test_score,
        test_interval: evidence.test_interval,
        peek: evidence.test_scores.is_some(),
        paired: evidence.paired,
        leakage: Some(evidence.leakage),
        nested: None,
        final_fit: FinalFit {
            id: scores[chosen].id.clone(),
            test_score,
            train_score: scores[chosen].train_score,
            coefficients: chosen_fit.coefficients.clone(),
            model: plan.full_fit.final_fit.then(|| {
                kept_model::describe(
                    plan,
                    &plan.candidates[c],
                    chosen_fit.coefficients.as_deref(),
                    categorical_columns
                        .into_iter()
                        .filter(|column| plan.candidates[c].features.contains(&column.column))
                        .map(|column| kept_model::Encoding {
                            column: column.column,
                            levels: column.levels,
                            reference: column.reference,
                            pooled: column.pooled,
                        })
                        .collect(),
                )
            }),
            predictions,
        },
        classification,
        intervals: None,
        prediction_sets: None,
        candidates,
        simulation: None,
    })
}

fn setting_value_json(value: crate::models::SettingValue) -> serde_json::Value {
    match value {
        crate::models::SettingValue::Count(n) => serde_json::Value::from(n),
        crate::models::SettingValue::Real(v) => serde_json::Value::from(v),
        crate::models::SettingValue::Word(w) => serde_json::Value::from(w),
    }
}

/// Why stored results cannot be read back.
#[derive(Debug, thiserror::Error)]
pub enum ReadError {
    #[error("not JSON: {0}")]
    Json(#[from] serde_json::Error),
    #[error("schema {found:?}, but this heldout reads {SCHEMA:?}")]
    Schema { found: String },
}

/// Reads results written by [`to_json`]. Numbers come back bit for bit;
/// `null` (a NaN or infinity when written) comes back as NaN, and an absent
/// test score or one-SE threshold that the rest of the results say was
/// computed comes back as `Some(NaN)`.
pub fn from_json(text: &str) -> Result<Results, ReadError> {
    let mut value: serde_json::Value = serde_json::from_str(text)?;
    let found = value["schema"].as_str().unwrap_or_default().to_string();
    if found != SCHEMA {
        return Err(ReadError::Schema { found });
    }
    let simulation = match value.as_object_mut() {
        Some(object) if object.contains_key("simulation") => {
            let mut part = serde_json::Map::new();
            for key in ["simulation", "simulation_summary"] {
                if let Some(v) = object.remove(key) {
                    part.insert(key.to_string(), v);
                }
            }
            Some(crate::simulate::SimulationOutput::deserialize(
                serde_json::Value::Object(part),
            )?)
        }
        _ => None,
    };
    let mut results = Results::deserialize(value)?;
    results.simulation = simulation;
    if results.rows.test > 0 {
        results.test_score.get_or_insert(f64::NAN);
        results.final_fit.test_score.get_or_insert(f64::NAN);
    }
    if results.rule == Rule::OneSe {
        results.choice.threshold.get_or_insert(f64::NAN);
    }
    Ok(results)
}

/// Deserialisers for numbers that may have been written as `null`.
pub mod lenient {
    use serde::{Deserialize, Deserializer};

    fn or_nan(value: Option<f64>) -> f64 {
        value.unwrap_or(f64::NAN)
    }

    pub(crate) fn number<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
        Ok(or_nan(Option::deserialize(d)?))
    }

    /// A number that may be absent (`None`, with `#[serde(default)]`) or
    /// `null` (NaN): called only when the key is present.
    pub(crate) fn optional_number<'de, D: Deserializer<'de>>(
        d: D,
    ) -> Result<Option<f64>, D::Error> {
        Ok(Some(or_nan(Option::deserialize(d)?)))
    }

    pub(crate) fn numbers<'de, D: Deserializer<'de>>(d: D) -> Result<Vec<f64>, D::Error> {
        let values: Vec<Option<f64>> = Vec::deserialize(d)?;
        Ok(values.into_iter().map(or_nan).collect())
    }

    pub(crate) fn optional_numbers<'de, D: Deserializer<'de>>(
        d: D,
    ) -> Result<Option<Vec<f64>>, D::Error> {
        let values: Option<Vec<Option<f64>>> = Option::deserialize(d)?;
        Ok(values.map(|v| v.into_iter().map(or_nan).collect()))
    }

    /// A JSON object of numbers, in the order it is written.
    pub(crate) fn ordered_pairs<'de, D: Deserializer<'de>>(
        d: D,
    ) -> Result<Option<Vec<(String, f64)>>, D::Error> {
        let map: Option<serde_json::Map<String, serde_json::Value>> = Option::deserialize(d)?;
        map.map(|m| {
            m.into_iter()
                .map(|(name, v)| match v {
                    serde_json::Value::Null => Ok((name, f64::NAN)),
                    serde_json::Value::Number(n) => n
                        .as_f64()
                        .map(|x| (name, x))
                        .ok_or_else(|| serde::de::Error::custom("a coefficient is not a double")),
                    _ => Err(serde::de::Error::custom("a coefficient is not a number")),
                })
                .collect()
        })
        .transpose()
    }
}

/// Serialises results as pretty JSON with a final newline.
pub fn to_json(results: &Results) -> String {
    let mut text = serde_json::to_string_pretty(results).expect("results always serialise");
    text.push('\n');
    text
}

/// [`DataSummary::missing`]: every used column with missing cells, in name
/// order. Under `impute` only feature cells are filled; a missing target (or
/// key, group, fold or time) drops its row.
fn missing_columns(plan: &ExperimentPlan) -> Vec<MissingColumn> {
    let data = plan.spec.data();
    plan.table
        .missing_cells
        .iter()
        .map(|(column, &cells)| {
            let filled = data.missing == crate::spec::MissingPolicy::Impute
                && plan.table.numeric.contains_key(column)
                && column != &data.target;
            let handling = match (filled, plan.table.levels.contains_key(column)) {
                (true, true) => "level",
                (true, false) => "impute",
                (false, _) => "drop-rows",
            };
            MissingColumn {
                column: column.clone(),
                cells,
                handling: handling.to_string(),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::thin;

    #[test]
    fn thinning_keeps_evenly_spaced_rows() {
        assert_eq!(thin(3, 5), vec![0, 1, 2]);
        assert_eq!(thin(10, 4), vec![0, 2, 5, 7]);
        assert_eq!(thin(2500, 1000).len(), 1000);
    }
}
