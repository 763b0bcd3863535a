//! The results of an experiment as written to `results.json`
//! (schema `heldout-results/1`, DESIGN.md §2.3), and their assembly from a
//! plan and its fits. Numbers are serialised with shortest round-trip
//! formatting, so the JSON holds the exact bits.

use serde::{Serialize, Serializer};

use crate::assess::{self, Choice, SettingScore};
use crate::execute::CandidateFits;
use crate::plan::ExperimentPlan;
use crate::spec::{Metric, Rule, SplitMethod};

pub const SCHEMA: &str = "heldout-results/1";

#[derive(Debug, Clone, Serialize)]
pub struct Results {
    pub schema: &'static str,
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
    #[serde(rename = "final")]
    pub final_fit: FinalFit,
    /// Simulation specs only: `simulation` (the bias–variance decomposition
    /// of every setting) and `simulation_summary` (setup, oracle and
    /// cross-validation's choices), flattened into the top level.
    #[serde(flatten)]
    pub simulation: Option<crate::simulate::SimulationOutput>,
}

#[derive(Debug, Clone, Serialize)]
pub struct Inputs {
    pub tool: String,
    /// blake3 of the spec's meaning (see `receipt::spec_digest`).
    pub spec: String,
    pub templates: String,
    /// blake3 of the test set and fold assignment (see `receipt::folds_digest`).
    pub folds: String,
}

#[derive(Debug, Clone, Serialize)]
pub struct RowCounts {
    /// Rows kept after dropping rows with missing cells.
    pub total: usize,
    pub train: usize,
    pub test: usize,
    pub dropped: usize,
}

#[derive(Debug, Clone, Serialize)]
pub struct DataSummary {
    /// The table path as written in the spec.
    pub table: String,
    /// blake3 of the table file's bytes.
    pub digest: String,
    pub target: String,
    pub features: Vec<String>,
    pub key: Option<String>,
    pub group: Option<String>,
}

#[derive(Debug, Clone, Serialize)]
pub struct SplitSummary {
    pub method: SplitMethod,
    pub seed: u64,
    pub holdout: f64,
    /// Folds per repeat.
    pub folds: usize,
    pub repeats: usize,
    /// Smallest and largest number of validation rows in a fold.
    pub fold_rows: [usize; 2],
}

#[derive(Debug, Clone, Serialize)]
pub struct CandidateResult {
    pub id: String,
    pub family: String,
    pub features: Vec<String>,
    pub setting: serde_json::Map<String, serde_json::Value>,
    pub effective_df: f64,
    pub train_score: f64,
    pub cv_score: f64,
    pub cv_se: f64,
    pub fold_scores: Vec<f64>,
}

#[derive(Debug, Clone, Serialize)]
pub struct ChoiceSummary {
    /// The setting with the best cross-validated score.
    pub best: String,
    pub best_cv_score: f64,
    pub best_cv_se: f64,
    /// one-se: scores no worse than this were eligible.
    pub threshold: Option<f64>,
    /// How many settings were eligible under the rule.
    pub eligible: usize,
}

#[derive(Debug, Clone, Serialize)]
pub struct FinalFit {
    pub id: String,
    /// Score on the locked test set; absent without a test set.
    pub test_score: Option<f64>,
    /// Training score of the refit on all non-test rows.
    pub train_score: f64,
    /// Name → value in the raw units of the features, intercept first.
    #[serde(
        serialize_with = "ordered_map",
        skip_serializing_if = "Option::is_none"
    )]
    pub coefficients: Option<Vec<(String, f64)>>,
    /// The final fit beside the data, for the report's data figure.
    pub predictions: Predictions,
}

/// Observed and predicted target values of the final fit (the chosen setting
/// refitted on all non-test rows), at the training rows and at the locked
/// test rows. At most [`PREDICTION_POINTS`] rows of each set are kept, evenly
/// spaced in row order, so `results.json` stays small.
#[derive(Debug, Clone, Serialize)]
pub struct Predictions {
    /// The one feature the chosen fit uses; absent when it uses several (the
    /// report then plots observed against predicted).
    pub feature: Option<String>,
    pub train: PredictionSet,
    /// Absent without a locked test set.
    pub test: Option<PredictionSet>,
}

#[derive(Debug, Clone, Serialize)]
pub struct PredictionSet {
    /// Rows in the set; the arrays hold at most [`PREDICTION_POINTS`] of them.
    pub rows: usize,
    /// Values of `feature`, when there is one feature.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub x: Option<Vec<f64>>,
    pub observed: Vec<f64>,
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
pub fn assemble(plan: &ExperimentPlan, fits: &[CandidateFits]) -> Results {
    let spec = &plan.spec.spec;
    let data = plan.spec.data();
    let metric = spec.choose.metric;
    let assignment = &plan.assignment;
    let train_target = plan.target_of(&assignment.train);
    let test_target = plan.target_of(&assignment.test);
    let fold_targets: Vec<Vec<f64>> = assignment
        .folds
        .iter()
        .map(|f| plan.target_of(&f.valid))
        .collect();

    let mut scores = Vec::new();
    let mut candidates = Vec::new();
    let mut locate = Vec::new();
    for (c, (candidate, fit)) in plan.candidates.iter().zip(fits).enumerate() {
        for (s, setting) in candidate.settings.iter().enumerate() {
            let full = &fit.full[s];
            let score = SettingScore::new(
                candidate.id(setting),
                full.effective_df,
                metric.score(&train_target, &full.train_pred),
                assess::fold_scores(metric, &fit.fold_predictions, &fold_targets, s),
            );
            let mut setting_map = serde_json::Map::new();
            if let Some((name, value)) = setting.param {
                setting_map.insert(name.into(), setting_value_json(value));
            }
            candidates.push(CandidateResult {
                id: score.id.clone(),
                family: candidate.family.family().to_string(),
                features: candidate.family.features().to_vec(),
                setting: setting_map,
                effective_df: score.effective_df,
                train_score: score.train_score,
                cv_score: score.cv_score,
                cv_se: score.cv_se,
                fold_scores: score.fold_scores.clone(),
            });
            scores.push(score);
            locate.push((c, s));
        }
    }

    let Choice {
        chosen,
        best,
        threshold,
    } = assess::choose(&scores, metric, spec.choose.rule);
    let eligible = match threshold {
        Some(t) => scores
            .iter()
            .filter(|s| !metric.better(t, s.cv_score))
            .count(),
        None => 1,
    };
    let (c, s) = locate[chosen];
    let chosen_fit = &fits[c].full[s];
    let chosen_features = plan.candidates[c].family.features();
    let feature = match chosen_features {
        [one] => Some(one.as_str()),
        _ => None,
    };
    let predictions = Predictions {
        feature: feature.map(str::to_string),
        train: prediction_set(plan, feature, &assignment.train, &chosen_fit.train_pred),
        test: (!assignment.test.is_empty())
            .then(|| prediction_set(plan, feature, &assignment.test, &chosen_fit.eval_pred)),
    };
    let test_score =
        (!assignment.test.is_empty()).then(|| metric.score(&test_target, &chosen_fit.eval_pred));

    let fold_sizes = assignment.folds.iter().map(|f| f.valid.len());
    let fold_rows = [
        fold_sizes.clone().min().unwrap_or(0),
        fold_sizes.max().unwrap_or(0),
    ];
    Results {
        schema: SCHEMA,
        experiment: spec.experiment.name.clone(),
        title: spec.experiment.title.clone(),
        inputs: Inputs {
            tool: crate::receipt::tool_version(),
            spec: crate::receipt::spec_digest(spec),
            templates: crate::report::templates_digest(),
            folds: crate::receipt::folds_digest(plan),
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
        },
        split: SplitSummary {
            method: spec.split.method,
            seed: spec.experiment.seed,
            holdout: spec.split.holdout,
            folds: assignment.folds.len() / assignment.repeats,
            repeats: assignment.repeats,
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
        final_fit: FinalFit {
            id: scores[chosen].id.clone(),
            test_score,
            train_score: scores[chosen].train_score,
            coefficients: chosen_fit.coefficients.clone(),
            predictions,
        },
        candidates,
        simulation: None,
    }
}

fn setting_value_json(value: crate::models::SettingValue) -> serde_json::Value {
    match value {
        crate::models::SettingValue::Count(n) => serde_json::Value::from(n),
        crate::models::SettingValue::Real(v) => serde_json::Value::from(v),
    }
}

/// Serialises results as pretty JSON with a final newline.
pub fn to_json(results: &Results) -> String {
    let mut text = serde_json::to_string_pretty(results).expect("results always serialise");
    text.push('\n');
    text
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
