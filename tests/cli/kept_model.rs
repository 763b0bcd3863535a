//! `final.model` in results.json: the kept setting as data
//! (docs/predict.md, "The kept model as data"). Applying its terms by hand,
//! in plain arithmetic here, to the locked test rows must give the report's
//! test predictions (`final.predictions.test`); fits that are no sum of
//! raw-unit coefficients must say that they need the training rows.

use std::path::Path;

use serde_json::Value;

use crate::util;

/// The invented sites of the table's text column.
const SITES: [&str; 3] = ["north", "south", "west"];

/// An invented table: two features on different scales, a cubic trend in
/// the first, a slope in the second and a deterministic wobble as noise.
fn write_table(dir: &Path) -> Vec<(f64, f64)> {
    let mut text = String::from("id,x1,x2,site,y\n");
    let mut rows = Vec::new();
    for i in 0..150_u32 {
        let x1 = f64::from((i * 37) % 101) / 10.0 - 5.0;
        let x2 = f64::from((i * 53) % 89) * 12.5;
        let site = SITES[(i % 7 % 3) as usize];
        let y = 10.0 + 0.5 * x1 - 0.2 * x1 * x1
            + 0.03 * x1 * x1 * x1
            + 0.002 * x2
            + if site == "south" { 0.8 + 0.1 * x1 } else { 0.0 }
            + 0.3 * (f64::from(i) * 1.7).sin();
        text.push_str(&format!("r{i},{x1},{x2},{site},{y}\n"));
        rows.push((x1, x2));
    }
    std::fs::write(dir.join("table.csv"), text).unwrap();
    rows
}

fn write_spec(dir: &Path, candidate: &str) {
    write_spec_with(dir, candidate, r#"["x1", "x2"]"#);
}

fn write_spec_with(dir: &Path, candidate: &str, features: &str) {
    let spec = format!(
        r#"[experiment]
name = "kept"
seed = 7

[data]
table = "table.csv"
target = "y"
features = {features}
key = "id"

[split]
holdout = 0.2
method = "kfold"
folds = 5

[[candidate]]
{candidate}

[choose]
metric = "mse"
rule = "lowest"

[report]
formats = []
"#
    );
    std::fs::write(dir.join("spec.toml"), spec).unwrap();
}

/// Runs the spec; returns results.json and the locked test rows (0-based,
/// in the order of `final.predictions.test`) from `heldout folds`.
fn run(dir: &Path) -> (Value, Vec<usize>) {
    util::assert_success(&util::run_in(dir, &["run", "--quiet", "spec.toml"]));
    let output = util::run_in(dir, &["folds", "spec.toml"]);
    util::assert_success(&output);
    let mut test: Vec<usize> = util::stdout_of(&output)
        .lines()
        .skip(1)
        .filter(|line| line.ends_with(",1,test"))
        .map(|line| line.split(',').next().unwrap().parse::<usize>().unwrap() - 1)
        .collect();
    test.sort_unstable();
    (util::read_json(&dir.join("out/kept/results.json")), test)
}

/// The terms' sum at one row, by hand: Σ coefficient × feature^power.
fn apply(terms: &[Value], x1: f64, x2: f64) -> f64 {
    terms
        .iter()
        .map(|term| {
            let value = match term["feature"].as_str() {
                None => 1.0,
                Some("x1") => x1,
                Some("x2") => x2,
                Some(other) => panic!("unexpected feature {other}"),
            };
            let power = term["power"].as_u64().unwrap() as i32;
            term["coefficient"].as_f64().unwrap() * value.powi(power)
        })
        .sum()
}

fn check_by_hand(candidate: &str, family: &str, expected_terms: &[(&str, u64)]) {
    let dir = tempfile::tempdir().unwrap();
    let rows = write_table(dir.path());
    write_spec(dir.path(), candidate);
    let (results, test) = run(dir.path());
    let model = &results["final"]["model"];
    assert_eq!(model["family"], family);
    assert_eq!(model["form"], "coefficients");
    let terms = model["terms"].as_array().unwrap();
    let named: Vec<(&str, u64)> = terms
        .iter()
        .map(|t| {
            (
                t["feature"].as_str().unwrap_or("intercept"),
                t["power"].as_u64().unwrap(),
            )
        })
        .collect();
    assert_eq!(named, expected_terms);
    // The same numbers as `final.coefficients`, in the same order.
    let coefficients = results["final"]["coefficients"].as_object().unwrap();
    for (term, (name, value)) in terms.iter().zip(coefficients) {
        assert_eq!(term["name"].as_str(), Some(name.as_str()));
        assert_eq!(term["coefficient"].as_f64(), value.as_f64());
    }
    let predicted = results["final"]["predictions"]["test"]["predicted"]
        .as_array()
        .unwrap();
    assert_eq!(predicted.len(), test.len());
    assert_eq!(test.len(), 30);
    for (&row, want) in test.iter().zip(predicted) {
        let want = want.as_f64().unwrap();
        let (x1, x2) = rows[row];
        let got = apply(terms, x1, x2);
        assert!(
            (got - want).abs() <= 1e-9 * want.abs(),
            "{family}, row {row}: {got} by hand against the report's {want}"
        );
    }
}

#[test]
fn polynomial_terms_applied_by_hand_give_the_reports_test_predictions() {
    check_by_hand(
        "family = \"polynomial\"\nfeatures = [\"x1\"]\ndegree = [3]",
        "polynomial",
        &[("intercept", 0), ("x1", 1), ("x1", 2), ("x1", 3)],
    );
}

#[test]
fn ridge_terms_applied_by_hand_give_the_reports_test_predictions() {
    check_by_hand(
        "family = \"ridge\"\npenalty = [2.5]",
        "ridge",
        &[("intercept", 0), ("x1", 1), ("x2", 1)],
    );
}

#[test]
fn categorical_and_interaction_terms_applied_by_hand_give_the_reports_test_predictions() {
    // Intercept, x1, two level indicators, two slopes per level.
    let terms = check_categorical_by_hand(
        "family = \"ridge\"\npenalty = [2.5]\ninteractions = [[\"x1\", \"site\"]]",
    );
    assert_eq!(terms.len(), 6);
}

#[test]
fn a_polynomials_powers_levels_and_slopes_applied_by_hand_give_the_reports_test_predictions() {
    // The indicators and the slopes per level enter once; only x1 is raised
    // to powers (docs/spec.md, "Categorical features").
    let terms = check_categorical_by_hand(
        "family = \"polynomial\"\ndegree = [3]\ninteractions = [[\"x1\", \"site\"]]",
    );
    let shape: Vec<(Option<&str>, u64, bool, bool)> = terms
        .iter()
        .map(|t| {
            (
                t["feature"].as_str(),
                t["power"].as_u64().unwrap(),
                t.get("level").is_some(),
                t.get("times").is_some(),
            )
        })
        .collect();
    assert_eq!(
        shape,
        [
            (None, 0, false, false),
            (Some("x1"), 1, false, false),
            (Some("x1"), 2, false, false),
            (Some("x1"), 3, false, false),
            (Some("site"), 1, true, false),
            (Some("site"), 1, true, false),
            (Some("x1"), 1, false, true),
            (Some("x1"), 1, false, true),
        ]
    );
}

/// Runs `candidate` on x1 and the site, checks the kept model's terms by
/// hand against the report's test predictions (1e-9), returns the terms.
fn check_categorical_by_hand(candidate: &str) -> Vec<Value> {
    // A level's term counts 1 on rows of that level; the reference level
    // (the most frequent in the training rows) has no term and scores 0.
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    let table = std::fs::read_to_string(dir.path().join("table.csv")).unwrap();
    let cells: Vec<Vec<&str>> = table
        .lines()
        .skip(1)
        .map(|line| line.split(',').collect())
        .collect();
    let x1: Vec<f64> = cells.iter().map(|c| c[1].parse().unwrap()).collect();
    let sites: Vec<&str> = cells.iter().map(|c| c[3]).collect();
    write_spec_with(dir.path(), candidate, r#"["x1", "site"]"#);
    let (results, test) = run(dir.path());
    let model = &results["final"]["model"];
    assert_eq!(model["form"], "coefficients", "{model}");
    let encoding = &model["encodings"][0];
    assert_eq!(encoding["column"], "site");
    assert_eq!(encoding["levels"], serde_json::json!(SITES));
    let reference = encoding["reference"].as_str().unwrap();
    let terms = model["terms"].as_array().unwrap();
    assert!(terms.iter().all(|t| t["level"] != reference));
    let factor = |feature: &Value, level: &Value, row: usize| -> f64 {
        match (feature.as_str(), level.as_str()) {
            (None, _) => 1.0,
            (Some("x1"), None) => x1[row],
            (Some("site"), Some(level)) => f64::from(u8::from(sites[row] == level)),
            other => panic!("unexpected factor {other:?}"),
        }
    };
    let predicted = results["final"]["predictions"]["test"]["predicted"]
        .as_array()
        .unwrap();
    assert_eq!(predicted.len(), test.len());
    for (&row, want) in test.iter().zip(predicted) {
        let want = want.as_f64().unwrap();
        let got: f64 = terms
            .iter()
            .map(|t| {
                let second = match t.get("times") {
                    Some(times) => factor(&times["feature"], &times["level"], row),
                    None => 1.0,
                };
                let power = t["power"].as_u64().unwrap() as i32;
                t["coefficient"].as_f64().unwrap()
                    * factor(&t["feature"], &t["level"], row).powi(power)
                    * second
            })
            .sum();
        assert!(
            (got - want).abs() <= 1e-9 * want.abs(),
            "row {row}: {got} by hand against the report's {want}"
        );
    }
    terms.clone()
}

#[test]
fn neighbours_are_stated_to_need_the_training_rows() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    write_spec(dir.path(), "family = \"nearest-neighbors\"\nk = [5]");
    let (results, _) = run(dir.path());
    let model = &results["final"]["model"];
    assert_eq!(model["form"], "training-rows");
    assert!(model.get("terms").is_none());
    assert!(results["final"].get("coefficients").is_none());
    assert!(
        model["prediction"]
            .as_str()
            .unwrap()
            .contains("needs the training rows"),
        "{model}"
    );
}

/// Logistic regression's terms give each class's score; with two classes
/// the positive class's probability is 1 / (1 + exp(−score)), which the
/// report keeps as the test prediction. The demo's class spec.
#[test]
fn logistic_terms_give_the_reports_test_probabilities() {
    let dir = tempfile::tempdir().unwrap();
    crate::demo::copy_demo(dir.path());
    let root = util::crate_root();
    for file in [
        "specs/substation-descaling.toml",
        "demo-data/substation-descaling.csv",
    ] {
        std::fs::copy(root.join(file), dir.path().join(file)).unwrap();
    }
    util::assert_success(&util::run_in(
        dir.path(),
        &["run", "--quiet", "specs/substation-descaling.toml"],
    ));
    let results = util::read_json(&dir.path().join("out/substation-descaling/results.json"));
    assert_eq!(results["chosen"], "logistic/degree=1");
    let model = &results["final"]["model"];
    assert_eq!(model["form"], "coefficients");
    let terms = model["terms"].as_array().unwrap();
    assert!(terms.iter().all(|t| t["class"] == "yes"), "{model}");
    let output = util::run_in(dir.path(), &["folds", "specs/substation-descaling.toml"]);
    util::assert_success(&output);
    let mut test: Vec<usize> = util::stdout_of(&output)
        .lines()
        .skip(1)
        .filter(|line| line.ends_with(",1,test"))
        .map(|line| line.split(',').next().unwrap().parse().unwrap())
        .collect();
    test.sort_unstable();
    let table =
        std::fs::read_to_string(dir.path().join("demo-data/substation-descaling.csv")).unwrap();
    let lines: Vec<&str> = table.lines().collect();
    // Columns: inspection_id, approach_k, flow_m3h, descale.
    let predicted = results["final"]["predictions"]["test"]["predicted"]
        .as_array()
        .unwrap();
    assert_eq!(predicted.len(), test.len());
    for (&row, want) in test.iter().zip(predicted) {
        let fields: Vec<f64> = lines[row]
            .split(',')
            .skip(1)
            .take(2)
            .map(|v| v.parse().unwrap())
            .collect();
        let score: f64 = terms
            .iter()
            .map(|t| {
                let value = match t["feature"].as_str() {
                    None => 1.0,
                    Some("approach_k") => fields[0],
                    Some("flow_m3h") => fields[1],
                    Some(other) => panic!("unexpected feature {other}"),
                };
                t["coefficient"].as_f64().unwrap() * value.powi(t["power"].as_u64().unwrap() as i32)
            })
            .sum();
        let got = 1.0 / (1.0 + (-score).exp());
        let want = want.as_f64().unwrap();
        assert!(
            (got - want).abs() <= 1e-9 * want,
            "row {row}: {got} by hand against the report's {want}"
        );
    }
}
