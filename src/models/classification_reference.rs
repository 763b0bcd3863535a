//! Classification metrics, logistic regression and discriminant analysis
//! against scikit-learn on invented data.
//!
//! Reference: `tests/fixtures/classification/expected.json`, made by
//! `tests/fixtures/classification/make_fixture.py` with numpy 2.4.6 and
//! scikit-learn 1.9.1; the data are the CSV files beside it. Every check
//! below names the scikit-learn function that produced its value.

use std::path::PathBuf;

use nalgebra::DMatrix;
use serde_json::Value;

use super::discriminant::Discriminant;
use super::logistic::{Label, Logistic};
use super::Family;
use crate::metrics::{ClassPrediction, Scorer};
use crate::spec::Metric;

/// Logistic coefficients and log-loss against scikit-learn, relative.
const LOGISTIC_TOL: f64 = 1e-6;
/// Discriminant posteriors against scikit-learn, absolute.
const POSTERIOR_TOL: f64 = 1e-10;
/// Metrics against scikit-learn, relative.
const METRIC_TOL: f64 = 1e-12;

fn dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("fixtures")
        .join("classification")
}

fn expected() -> Value {
    let text = std::fs::read_to_string(dir().join("expected.json")).expect("expected.json");
    serde_json::from_str(&text).expect("expected.json is JSON")
}

/// Features x1, x2, the class index (labels in sorted order) and the last
/// column's text of each row of a fixture table.
struct Table {
    x: Vec<[f64; 2]>,
    class: Vec<f64>,
    part: Vec<String>,
}

fn table(name: &str) -> Table {
    let mut reader = csv::Reader::from_path(dir().join(name)).expect("fixture table");
    let mut rows = Vec::new();
    for record in reader.records() {
        let record = record.expect("record");
        rows.push((
            [record[0].parse().unwrap(), record[1].parse().unwrap()],
            record[2].to_string(),
            record[3].to_string(),
        ));
    }
    let mut labels: Vec<String> = rows.iter().map(|r| r.1.clone()).collect();
    labels.sort();
    labels.dedup();
    Table {
        x: rows.iter().map(|r| r.0).collect(),
        class: rows
            .iter()
            .map(|r| labels.iter().position(|l| *l == r.1).unwrap() as f64)
            .collect(),
        part: rows.into_iter().map(|r| r.2).collect(),
    }
}

impl Table {
    fn rows(&self, keep: impl Fn(&str) -> bool) -> (DMatrix<f64>, Vec<f64>) {
        let chosen: Vec<usize> = (0..self.x.len()).filter(|&i| keep(&self.part[i])).collect();
        (
            DMatrix::from_fn(chosen.len(), 2, |i, j| self.x[chosen[i]][j]),
            chosen.iter().map(|&i| self.class[i]).collect(),
        )
    }
}

fn numbers(value: &Value) -> Vec<f64> {
    value
        .as_array()
        .expect("array")
        .iter()
        .flat_map(|v| match v.as_array() {
            Some(inner) => inner.iter().map(|n| n.as_f64().unwrap()).collect(),
            None => vec![v.as_f64().unwrap()],
        })
        .collect()
}

fn close(what: &str, computed: f64, expected: f64, relative: f64) {
    let error = (computed - expected).abs() / expected.abs().max(1e-300);
    assert!(
        error <= relative,
        "{what}: heldout {computed}, scikit-learn {expected} (relative error {error:e})"
    );
}

#[test]
fn metrics_match_scikit_learn_with_tied_scores() {
    for case in expected()["metrics"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let classes = case["classes"].as_u64().unwrap() as usize;
        let truth = numbers(&case["truth"]);
        let layout = ClassPrediction { classes };
        let mut predicted = Vec::new();
        for row in case["probabilities"].as_array().unwrap() {
            layout.push_argmax(&mut predicted, &numbers(row));
        }
        let score = |metric| {
            Scorer {
                metric,
                classes: Some((classes, 1)),
            }
            .score(&truth, &predicted)
        };
        // reference: sklearn.metrics.roc_auc_score (binary; multi_class="ovr", average="macro")
        close(
            &format!("{name}: auc"),
            score(Metric::Auc),
            case["auc"].as_f64().unwrap(),
            METRIC_TOL,
        );
        // reference: sklearn.metrics.log_loss
        close(
            &format!("{name}: log-loss"),
            score(Metric::LogLoss),
            case["log_loss"].as_f64().unwrap(),
            METRIC_TOL,
        );
        // reference: 1 - sklearn.metrics.accuracy_score of the most probable class
        close(
            &format!("{name}: error rate"),
            score(Metric::ErrorRate),
            case["error_rate"].as_f64().unwrap(),
            METRIC_TOL,
        );
        if let Some(brier) = case.get("brier") {
            // reference: sklearn.metrics.brier_score_loss(pos_label = second label)
            close(
                &format!("{name}: brier"),
                score(Metric::Brier),
                brier.as_f64().unwrap(),
                METRIC_TOL,
            );
        }
    }
}

/// heldout's logistic coefficients, as scikit-learn lays them out: one row
/// per class for three classes (the symmetric, sum-to-zero form), one row
/// for the second class of two; intercepts apart.
fn sklearn_layout(coefficients: &[(String, f64)], classes: usize) -> (Vec<f64>, Vec<f64>) {
    let per_class = 3; // intercept, x1, x2
    let reference: Vec<Vec<f64>> = std::iter::once(vec![0.0; per_class])
        .chain(
            coefficients
                .chunks(per_class)
                .map(|c| c.iter().map(|(_, v)| *v).collect()),
        )
        .collect();
    let rows: Vec<Vec<f64>> = if classes == 2 {
        vec![reference[1].clone()]
    } else {
        (0..classes)
            .map(|k| {
                (0..per_class)
                    .map(|j| {
                        let mean = reference.iter().map(|r| r[j]).sum::<f64>() / classes as f64;
                        reference[k][j] - mean
                    })
                    .collect()
            })
            .collect()
    };
    (
        rows.iter().flat_map(|r| r[1..].to_vec()).collect(),
        rows.iter().map(|r| r[0]).collect(),
    )
}

fn check_logistic(kind: &str, file: &str, classes: usize) {
    let reference = &expected()["logistic"][kind];
    let data = table(file);
    let model = Logistic {
        features: vec!["x1".into(), "x2".into()],
        grid: vec![(1, 0.0)],
        label: Label::None,
        plain: 0,
    };
    let (x, y) = data.rows(|_| true);
    let fit = model
        .fit_classes(&x, &y, &x, true, classes)
        .unwrap()
        .remove(0);
    let (coef, intercept) = sklearn_layout(fit.coefficients.as_ref().unwrap(), classes);
    // reference: sklearn LogisticRegression(C=inf, solver="newton-cg") .coef_ / .intercept_
    for (what, computed, expected) in [
        ("coef", coef, numbers(&reference["coef"])),
        ("intercept", intercept, numbers(&reference["intercept"])),
    ] {
        assert_eq!(computed.len(), expected.len());
        for (c, e) in computed.iter().zip(&expected) {
            close(&format!("{kind} {what}"), *c, *e, LOGISTIC_TOL);
        }
    }
    for fold in reference["folds"].as_array().unwrap() {
        let label = fold["fold"].as_u64().unwrap().to_string();
        let (x_train, y_train) = data.rows(|part| part != label);
        let (x_valid, y_valid) = data.rows(|part| part == label);
        let fit = model
            .fit_classes(&x_train, &y_train, &x_valid, false, classes)
            .unwrap()
            .remove(0);
        let log_loss = Scorer {
            metric: Metric::LogLoss,
            classes: Some((classes, 1)),
        }
        .score(&y_valid, &fit.eval_pred);
        // reference: sklearn.metrics.log_loss of the fold's LogisticRegression fit
        close(
            &format!("{kind} fold {label} log-loss"),
            log_loss,
            fold["log_loss"].as_f64().unwrap(),
            LOGISTIC_TOL,
        );
    }
}

#[test]
fn binary_logistic_matches_scikit_learn() {
    check_logistic("binary", "binary.csv", 2);
}

#[test]
fn multinomial_logistic_matches_scikit_learn() {
    check_logistic("multiclass", "multiclass.csv", 3);
}

#[test]
fn discriminant_posteriors_match_scikit_learn() {
    let reference = &expected()["discriminant"];
    let data = table("gaussian.csv");
    let (x_train, y_train) = data.rows(|part| part == "train");
    let (x_eval, _) = data.rows(|part| part == "eval");
    for shape in ["linear", "quadratic"] {
        let model = Discriminant {
            features: vec!["x1".into(), "x2".into()],
            shapes: vec![if shape == "linear" {
                "linear"
            } else {
                "quadratic"
            }],
        };
        let fit = model
            .fit_classes(&x_train, &y_train, &x_eval, false, 3)
            .unwrap()
            .remove(0);
        // reference: sklearn LinearDiscriminantAnalysis / QuadraticDiscriminantAnalysis .predict_proba
        let expected = numbers(&reference[shape]);
        let layout = ClassPrediction { classes: 3 };
        for row in 0..x_eval.nrows() {
            for class in 0..3 {
                let got = layout.probabilities(&fit.eval_pred, row)[class];
                let want = expected[row * 3 + class];
                assert!(
                    (got - want).abs() <= POSTERIOR_TOL,
                    "{shape}, row {row}, class {class}: heldout {got}, scikit-learn {want}"
                );
            }
        }
    }
}
