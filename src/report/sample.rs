//! Invented results for the report's unit tests: a `Results` value built
//! from a few numbers per setting, with the choice worked out by the one-SE
//! rule, so a test states only what it is about.

use crate::results::{
    CandidateResult, ChoiceSummary, DataSummary, FinalFit, Inputs, PredictionSet, Predictions,
    Results, RowCounts, SplitSummary,
};
use crate::spec::{Metric, Rule, SplitMethod};

/// One setting: (id, effective df, training score, cross-validated score,
/// its standard error).
pub(crate) type Setting<'a> = (&'a str, f64, f64, f64, f64);

/// Results of `settings` scored by mean squared error and chosen by the
/// one-SE rule: the best is the lowest cross-validated score, the kept one
/// the least flexible setting within one SE of it.
pub(crate) fn results(settings: &[Setting<'_>]) -> Results {
    let candidates: Vec<CandidateResult> = settings
        .iter()
        .map(|&(id, df, train, cv, se)| CandidateResult {
            id: id.to_string(),
            family: crate::report::figures::stem(id).to_string(),
            features: vec!["x".to_string()],
            setting: serde_json::Map::new(),
            effective_df: df,
            train_score: train,
            cv_score: cv,
            cv_se: se,
            fold_scores: vec![cv; 5],
            test_score: None,
            infeasible: Vec::new(),
        })
        .collect();
    let best = candidates
        .iter()
        .min_by(|a, b| a.cv_score.total_cmp(&b.cv_score))
        .expect("at least one setting");
    let threshold = best.cv_score + best.cv_se;
    let eligible: Vec<&CandidateResult> = candidates
        .iter()
        .filter(|c| c.cv_score <= threshold)
        .collect();
    let kept = eligible
        .iter()
        .min_by(|a, b| a.effective_df.total_cmp(&b.effective_df))
        .expect("the best is eligible");
    let choice = ChoiceSummary {
        best: best.id.clone(),
        best_cv_score: best.cv_score,
        best_cv_se: best.cv_se,
        threshold: Some(threshold),
        eligible: eligible.len(),
    };
    let chosen = kept.id.clone();
    let rows = RowCounts {
        total: 100,
        train: 80,
        test: 20,
        dropped: 0,
    };
    let set = |rows: usize| PredictionSet {
        rows,
        x: Some(vec![0.0, 1.0]),
        observed: vec![0.0, 1.0],
        predicted: vec![0.0, 1.0],
    };
    Results {
        schema: crate::results::SCHEMA.to_string(),
        experiment: "sample".to_string(),
        title: None,
        inputs: Inputs {
            tool: "heldout test".to_string(),
            spec: String::new(),
            templates: String::new(),
            folds: String::new(),
        },
        metric: Metric::Mse,
        rule: Rule::OneSe,
        rows,
        data: DataSummary {
            table: "sample.csv".to_string(),
            digest: String::new(),
            target: "y".to_string(),
            features: vec!["x".to_string()],
            key: None,
            group: None,
            order: None,
            unterminated: false,
            missing: Vec::new(),
            categorical: Vec::new(),
        },
        split: SplitSummary {
            method: SplitMethod::Kfold,
            seed: 1,
            holdout: 0.2,
            folds: 5,
            repeats: 1,
            identical_repeats: 0,
            fold_rows: [16, 16],
        },
        final_fit: FinalFit {
            id: chosen.clone(),
            test_score: Some(1.0),
            train_score: kept.train_score,
            coefficients: None,
            model: None,
            predictions: Predictions {
                feature: Some("x".to_string()),
                train: set(80),
                test: Some(set(20)),
            },
        },
        candidates,
        chosen,
        choice,
        test_score: Some(1.0),
        test_interval: None,
        peek: false,
        paired: None,
        leakage: None,
        nested: None,
        classification: None,
        intervals: None,
        prediction_sets: None,
        simulation: None,
    }
}
