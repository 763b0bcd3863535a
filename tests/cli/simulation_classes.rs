//! Simulation specs of class labels (`[simulate] task = "classification"`):
//! the Bayes error rate against its closed form, the identities that hold
//! for every setting, reproducibility, and the errors of such specs.

use std::path::Path;

use serde_json::Value;

use super::simulation::{heldout, heldout_ok, number};
use crate::util;

/// Two equally likely classes with x | class 0 ~ N(−μ, 1) and
/// x | class 1 ~ N(μ, 1), so P(1 | x) = 1 / (1 + exp(−2μx)).
fn two_classes(dir: &Path, mu: f64, replicates: usize, test: &str) {
    let spec = format!(
        r#"[experiment]
name = "two-classes"
seed = 11

[simulate]
task = "classification"
truth = "1/(1 + exp(-{two_mu}*x))"
target = "label"
inputs = {{ x = {{ normal_pair = [-{mu}, {mu}, 1] }} }}
train_size = 120
replicates = {replicates}
{test}

[split]
holdout = 0
method = "kfold"
folds = 4

[[candidate]]
family = "logistic"
degree = [1]

[[candidate]]
family = "nearest-neighbors"
k = [1, 9, 31]

[choose]
metric = "error-rate"
rule = "lowest"
"#,
        two_mu = 2.0 * mu
    );
    std::fs::write(dir.join("sim.toml"), spec).unwrap();
}

fn results(dir: &Path) -> Value {
    util::read_json(&dir.join("out/two-classes/results.json"))
}

#[test]
fn bayes_error_of_two_normal_classes_matches_the_normal_cdf() {
    // Closed form (common practice in pattern recognition, e.g. Fukunaga,
    // 1990, "Introduction to Statistical Pattern Recognition", §3.3; from
    // memory): two equally likely classes with normal densities of equal
    // variance whose means are 2μ standard deviations apart have Bayes error
    // Φ(−μ). Φ(−1) = 0.15865525393145707 (scipy.stats.norm.cdf(-1), from
    // memory), computed here through the complementary error function.
    let dir = tempfile::tempdir().unwrap();
    two_classes(dir.path(), 1.0, 6, "test_points = 20000");
    heldout_ok(dir.path(), &["run", "--quiet", "sim.toml"]);
    let r = results(dir.path());
    let summary = &r["simulation_summary"];
    let classes = &summary["classes"];
    let bayes = number(classes, "bayes_error");
    let se = number(classes, "bayes_error_se");
    let closed_form = 0.5 * libm::erfc(1.0 / std::f64::consts::SQRT_2);
    assert!((closed_form - 0.15865525393145707).abs() < 1e-15);
    assert!(
        (bayes - closed_form).abs() < 4.0 * se,
        "Bayes error {bayes} ± {se} against Φ(−1) = {closed_form}"
    );
    // The Monte-Carlo error of 20 000 test points is small enough for the
    // check above to mean something.
    assert!(se < 0.002, "{se}");
    assert_eq!(classes["labels"], serde_json::json!(["0", "1"]));
    assert!(summary.get("noise_sd").is_none());

    for s in r["simulation"].as_array().unwrap() {
        let id = s["id"].as_str().unwrap();
        // At every test point a classifier misses with probability p or
        // 1 − p, never less than min(p, 1 − p): its expected error rate
        // cannot fall below the Bayes error on the same points (identity).
        let rate = number(s, "expected_error_rate");
        assert!(rate >= bayes, "{id}: {rate} below the Bayes error {bayes}");
        // Brier decomposition of the probability of label 1: the simulated
        // expected score equals bias² + variance + floor up to the
        // Monte-Carlo error of the test labels.
        let gap = number(s, "identity_gap");
        let gap_se = number(s, "identity_gap_se");
        assert!(gap.abs() < 4.0 * gap_se, "{id}: gap {gap} ± {gap_se}");
        assert!(
            (number(s, "decomposition_sum") - number(s, "expected_mse")).abs()
                < 4.0 * gap_se + 1e-12
        );
        // The floor is a mean of p(1 − p), which lies in (0, ¼] for
        // 0 < p < 1 (identity), and here p is never exactly ½ everywhere.
        assert!(number(s, "noise") > 0.0 && number(s, "noise") < 0.25);
    }
    // The oracle has the lowest expected error rate, and the choice table
    // measures excess in error rate.
    let oracle = summary["oracle"].as_str().unwrap();
    let rates: Vec<(String, f64)> = r["simulation"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            (
                s["id"].as_str().unwrap().to_string(),
                number(s, "expected_error_rate"),
            )
        })
        .collect();
    let best = rates.iter().map(|(_, v)| *v).fold(f64::INFINITY, f64::min);
    let oracle_rate = rates.iter().find(|(id, _)| id == oracle).unwrap().1;
    assert_eq!(oracle_rate, best);
    assert_eq!(number(classes, "oracle_expected_error_rate"), best);
    for row in summary["cv"]["choices"].as_array().unwrap() {
        let excess = number(row, "excess");
        assert!(
            (excess - (number(row, "expected_error_rate") - best)).abs() < 1e-15,
            "{row}"
        );
    }
    // One nearest neighbour memorises its training labels.
    let one = r["simulation"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["id"] == "nearest-neighbors/k=1")
        .unwrap();
    assert_eq!(number(one, "train_error_rate"), 0.0);
}

#[test]
fn a_constant_probability_gives_exact_floors_and_verifies() {
    // With P(1) = 0.3 everywhere the Bayes error is exactly 0.3 and the
    // Brier floor p(1 − p) = 0.21 (definitions); a test grid is an
    // integration rule, so the Bayes error carries no sampling error.
    let dir = tempfile::tempdir().unwrap();
    let spec = r#"[experiment]
name = "two-classes"
seed = 3

[simulate]
task = "classification"
truth = "0.3"
target = "label"
inputs = { x = { uniform = [0, 1] } }
train_size = 60
replicates = 5
test_grid = 11

[split]
holdout = 0
folds = 3

[[candidate]]
family = "nearest-neighbors"
k = [5, 20]
"#;
    std::fs::write(dir.path().join("sim.toml"), spec).unwrap();
    heldout_ok(dir.path(), &["run", "--quiet", "sim.toml"]);
    let first = std::fs::read(dir.path().join("out/two-classes/results.json")).unwrap();
    let r = results(dir.path());
    let classes = &r["simulation_summary"]["classes"];
    let bayes = number(classes, "bayes_error");
    assert!((bayes - 0.3).abs() < 1e-15, "{bayes}");
    assert!(classes.get("bayes_error_se").is_none());
    let floor = number(&r["simulation_summary"], "noise");
    assert!((floor - 0.21).abs() < 1e-15, "{floor}");
    // The default metric of a class target is log-loss.
    assert_eq!(r["metric"], "log-loss");
    // No classifier beats the Bayes error on the same points (identity).
    for s in r["simulation"].as_array().unwrap() {
        assert!(number(s, "expected_error_rate") >= bayes);
    }
    heldout_ok(dir.path(), &["verify", "sim.toml"]);
    // A second run from the cache gives the same bytes.
    heldout_ok(dir.path(), &["run", "--quiet", "sim.toml"]);
    let second = std::fs::read(dir.path().join("out/two-classes/results.json")).unwrap();
    assert_eq!(first, second);
}

#[test]
fn class_simulations_refuse_noise_and_probabilities_outside_the_unit_interval() {
    let dir = tempfile::tempdir().unwrap();
    two_classes(dir.path(), 1.0, 3, "test_points = 50\nnoise_sd = 1");
    let out = heldout(dir.path(), &["run", "sim.toml"]);
    assert_eq!(out.status.code(), Some(2));
    let err = util::stderr_of(&out);
    assert!(err.contains("sim.toml: simulate.noise_sd"), "{err}");
    assert!(err.contains("remove the noise"), "{err}");

    let text = std::fs::read_to_string(dir.path().join("sim.toml"))
        .unwrap()
        .replace("noise_sd = 1\n", "")
        .replace("1/(1 + exp(-2*x))", "0.5 + x");
    std::fs::write(dir.path().join("sim.toml"), text).unwrap();
    let out = heldout(dir.path(), &["run", "sim.toml"]);
    assert_eq!(out.status.code(), Some(2));
    let err = util::stderr_of(&out);
    assert!(err.contains("simulate.truth"), "{err}");
    assert!(err.contains("between 0 and 1"), "{err}");

    let text = std::fs::read_to_string(dir.path().join("sim.toml"))
        .unwrap()
        .replace("0.5 + x", "1/(1 + exp(-2*x))")
        .replace(
            "family = \"logistic\"\ndegree = [1]",
            "family = \"polynomial\"\ndegree = [1]",
        );
    std::fs::write(dir.path().join("sim.toml"), text).unwrap();
    let out = heldout(dir.path(), &["run", "sim.toml"]);
    assert_eq!(out.status.code(), Some(2));
    let err = util::stderr_of(&out);
    assert!(err.contains("candidate[1] (polynomial).family"), "{err}");
    assert!(err.contains("in [simulate]"), "{err}");
}
