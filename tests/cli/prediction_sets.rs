//! CV+ prediction sets for class targets (Romano, Sesia & Candès, 2020,
//! "Classification with valid and adaptive coverage"; docs/intervals.md):
//! their coverage in a class simulation with many replicates, and their
//! section in results.json and the reports. The sets themselves are checked
//! against a direct numpy implementation of the rule in
//! `src/prediction_sets.rs`; `predict`'s sets against the report's in
//! `tests/cli/predict.rs`.

use super::simulation::{heldout_ok, number};
use crate::util;

/// Two equally likely classes with x | class ~ N(∓0.8, 1), so
/// P(1 | x) = 1 / (1 + exp(−1.6x)); every candidate carries 90 % sets.
const SET_COVERAGE_SPEC: &str = r#"[experiment]
name = "set-coverage"
seed = 16

[simulate]
task = "classification"
truth = "1/(1 + exp(-1.6*x))"
target = "label"
inputs = { x = { normal_pair = [-0.8, 0.8, 1] } }
train_size = 60
replicates = 400
test_points = 200

[split]
holdout = 0
method = "kfold"
folds = 5

[[candidate]]
family = "logistic"
degree = [1]

[[candidate]]
family = "nearest-neighbors"
k = [1, 9, 31]

[choose]
metric = "error-rate"
rule = "lowest"

[intervals]
level = 0.9

[report]
formats = ["markdown", "html"]
"#;

/// Coverage of 90 % CV+ sets at 200 test points with freshly drawn labels,
/// averaged over 400 replicates of 60 training rows in 5 folds. The theorem
/// guarantees at least 1 − 2α = 0.8 (less a small fold term); in practice
/// coverage is close to 1 − α. Measured (coverage ± Monte-Carlo SE over
/// replicates, mean set size): logistic 0.9052 ± 0.0022, 1.336; k = 31
/// 0.9202 ± 0.0021, 1.482; k = 9 0.9387 ± 0.0023, 1.513; k = 1 1 ± 0, 2.
/// The 1-nearest-neighbour fit gives probabilities 0 or 1 only, so about a
/// third of the calibration scores tie at 1 and every class ties below
/// them: the rule then keeps both classes everywhere, as it must.
#[test]
fn cv_plus_sets_cover_as_promised_in_a_class_simulation() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(dir.path().join("specs")).unwrap();
    std::fs::write(dir.path().join("specs/sets.toml"), SET_COVERAGE_SPEC).unwrap();
    heldout_ok(dir.path(), &["run", "--quiet", "specs/sets.toml"]);
    let results = util::read_json(&dir.path().join("out/set-coverage/results.json"));
    assert_eq!(
        results["simulation_summary"]["interval_level"].as_f64(),
        Some(0.9)
    );
    let settings = results["simulation"].as_array().unwrap();
    assert_eq!(settings.len(), 4);
    for setting in settings {
        let id = setting["id"].as_str().unwrap();
        let coverage = number(setting, "interval_coverage");
        let se = number(setting, "interval_coverage_se");
        let size = number(setting, "interval_width");
        assert!((1.0..=2.0).contains(&size), "{id}: mean set size {size}");
        if id == "nearest-neighbors/k=1" {
            assert_eq!((coverage, size), (1.0, 2.0), "{id}");
            continue;
        }
        assert!(se > 0.0 && se < 0.01, "{id}: standard error {se}");
        // The guarantee, and the nominal level, within 3 standard errors.
        assert!(coverage >= 0.8 - 3.0 * se, "{id}: {coverage} ± {se}");
        assert!(coverage >= 0.9 - 3.0 * se, "{id}: {coverage} ± {se}");
        // Sets that still discriminate: not every set holds both classes.
        assert!(coverage < 0.96 && size < 1.7, "{id}: {coverage}, {size}");
    }
    // The logistic fit (the true model) is the sharpest: closest to 0.9.
    let logistic = &settings
        .iter()
        .find(|s| s["id"] == "logistic/degree=1")
        .unwrap();
    assert!((number(logistic, "interval_coverage") - 0.9).abs() < 0.015);
    let report = std::fs::read_to_string(dir.path().join("out/set-coverage/report.md")).unwrap();
    assert!(
        report.contains("### Coverage of the prediction sets") && report.contains("mean set size"),
        "{report}"
    );
    let html = std::fs::read_to_string(dir.path().join("out/set-coverage/report.html")).unwrap();
    assert!(html.contains("Coverage of the prediction sets"));
}

/// The `prediction_sets` section of a class table's results: counts that
/// add up, the Wilson interval around the coverage, the rank of the rule,
/// and no regression `intervals` section.
#[test]
fn class_targets_report_prediction_sets_on_the_locked_test_set() {
    let dir = tempfile::tempdir().unwrap();
    crate::demo::copy_demo(dir.path());
    let root = util::crate_root();
    for file in [
        "specs/substation-descaling.toml",
        "demo-data/substation-descaling.csv",
    ] {
        std::fs::copy(root.join(file), dir.path().join(file)).unwrap();
    }
    heldout_ok(
        dir.path(),
        &["run", "--quiet", "specs/substation-descaling.toml"],
    );
    let results = util::read_json(&dir.path().join("out/substation-descaling/results.json"));
    assert!(results.get("intervals").is_none());
    let sets = &results["prediction_sets"];
    assert_eq!(sets["method"], "cv+");
    assert_eq!(sets["score"], "1 - p(y|x)");
    let n = sets["calibration_rows"].as_u64().unwrap();
    assert_eq!(Some(n), results["rows"]["train"].as_u64());
    // ⌈0.9 · (n + 1)⌉, by hand for n = 320: 288.9 → 289.
    assert_eq!(n, 320);
    assert_eq!(sets["rank"].as_u64(), Some(289));
    let test = &sets["test"];
    let rows = test["rows"].as_u64().unwrap();
    assert_eq!(Some(rows), results["rows"]["test"].as_u64());
    let sizes: Vec<u64> = test["sizes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    assert_eq!(sizes.len(), 3, "sizes 0, 1 and 2 of two classes");
    assert_eq!(sizes.iter().sum::<u64>(), rows);
    let mean_size = (sizes[1] + 2 * sizes[2]) as f64 / rows as f64;
    assert_eq!(number(test, "mean_size"), mean_size);
    assert_eq!(number(test, "empty_share"), sizes[0] as f64 / rows as f64);
    assert_eq!(
        number(test, "all_classes_share"),
        sizes[2] as f64 / rows as f64
    );
    let covered = test["covered"].as_u64().unwrap();
    let coverage = number(test, "coverage");
    assert_eq!(coverage, covered as f64 / rows as f64);
    // Every full set covers; a set of one class covers at most its rows.
    assert!(covered >= sizes[2] && covered <= sizes[1] + sizes[2]);
    let (low, high) = (number(test, "coverage_low"), number(test, "coverage_high"));
    assert!(low < coverage && coverage < high, "{low} {coverage} {high}");
    let report =
        std::fs::read_to_string(dir.path().join("out/substation-descaling/report.md")).unwrap();
    assert!(report.contains("## Prediction sets"), "{report}");
    assert!(
        report.contains(&format!("the observed class of {covered} lies in its set")),
        "{report}"
    );
}
