//! Class targets end to end: the task declared or inferred, located errors
//! for values that contradict it, per-fold scores against scikit-learn on a
//! fold column, and the descaling demo's receipt.

use std::path::Path;

use crate::util;

/// A two-class table: `x`, `z` and a label `y` that depends on them with
/// a deterministic wobble (no separation), and a fold column.
fn class_table(labels: [&str; 2]) -> String {
    let mut table = String::from("x,z,y,fold\n");
    for i in 0..120 {
        let x = f64::from(i) / 12.0;
        let z = f64::from((i * 37) % 120) / 30.0;
        let wobble = f64::from((i * 7919) % 97) / 97.0 * 8.0 - 4.0;
        let label = labels[usize::from(x + 0.4 * z + wobble > 6.0)];
        table.push_str(&format!("{x},{z},{label},{}\n", i % 4 + 1));
    }
    table
}

fn spec(data_extra: &str, candidates: &str, choose: &str) -> String {
    format!(
        "[experiment]\nname = \"classes\"\nseed = 5\n\n[data]\ntable = \"data.csv\"\n\
         target = \"y\"\nfeatures = [\"x\", \"z\"]\n{data_extra}\n[split]\nholdout = 0.25\n\
         folds = 4\n\n{candidates}\n{choose}"
    )
}

const LOGISTIC: &str = "[[candidate]]\nfamily = \"logistic\"\n";

fn write(dir: &Path, spec: &str, table: &str) {
    std::fs::write(dir.join("spec.toml"), spec).unwrap();
    std::fs::write(dir.join("data.csv"), table).unwrap();
}

#[test]
fn a_zero_one_target_is_inferred_as_classes_and_scored_by_log_loss() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        &spec("", LOGISTIC, ""),
        &class_table(["0", "1"]),
    );
    let output = util::run_in(
        dir.path(),
        &["run", "spec.toml", "--out", "out", "--cache", "cache"],
    );
    util::assert_success(&output);
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("task inferred as classification: the target holds whole numbers with 2 distinct values"),
        "{stderr}"
    );
    let results = util::read_json(&dir.path().join("out/classes/results.json"));
    assert_eq!(results["metric"], "log-loss");
    let classes = &results["classification"];
    assert_eq!(classes["labels"], serde_json::json!(["0", "1"]));
    assert_eq!(classes["positive"], "1");
    assert!(classes["inferred"]
        .as_str()
        .unwrap()
        .contains("2 distinct values"));
    // The confusion matrix counts every locked test row once.
    let confusion: u64 = classes["test"]["confusion"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|row| row.as_array().unwrap().iter().map(|n| n.as_u64().unwrap()))
        .sum();
    assert_eq!(confusion, results["rows"]["test"].as_u64().unwrap());
    let report = std::fs::read_to_string(dir.path().join("out/classes/report.md")).unwrap();
    assert!(report.contains("## Classes"), "{report}");
    assert!(report.contains("read as class labels because"), "{report}");
    assert!(report.contains("policy decision"), "{report}");
    assert!(dir.path().join("out/classes/figures/roc.svg").is_file());
    assert!(dir
        .path()
        .join("out/classes/figures/calibration.svg")
        .is_file());
}

/// Runs the spec, which must fail with exit code 2 and a message naming
/// the spec file and `key`, and containing `words`.
fn refused(spec_text: &str, table: &str, key: &str, words: &str) {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), spec_text, table);
    let output = util::run_spec(dir.path(), "run");
    let stderr = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains(&format!("spec.toml: {key}: ")), "{stderr}");
    assert!(stderr.contains(words), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
}

#[test]
fn values_that_contradict_the_task_are_refused_naming_the_key() {
    let table = class_table(["no", "yes"]);
    refused(
        &spec("positive = \"maybe\"\n", LOGISTIC, ""),
        &table,
        "data.positive",
        "\"maybe\" is not among the target's labels (\"no\", \"yes\")",
    );
    // A regression metric for text labels (inferred classes).
    refused(
        &spec("", LOGISTIC, "[choose]\nmetric = \"mse\"\n"),
        &table,
        "choose.metric",
        "\"mse\" does not score a class target",
    );
    // Declared: checked before the data is read.
    refused(
        &spec(
            "task = \"classification\"\n",
            "[[candidate]]\nfamily = \"ridge\"\npenalty = [1.0]\n",
            "",
        ),
        &table,
        "candidate[1] (ridge).family",
        "family \"ridge\" does not predict a class target",
    );
    refused(
        &spec("task = \"regression\"\n", LOGISTIC, ""),
        &class_table(["0", "1"]),
        "candidate[1] (logistic).family",
        "does not predict a numeric target",
    );
    refused(
        &spec(
            "task = \"regression\"\n",
            LOGISTIC.replace("logistic", "linear").as_str(),
            "[choose]\nmetric = \"auc\"\n",
        ),
        &class_table(["0", "1"]),
        "choose.metric",
        "\"auc\" does not score a numeric target",
    );
}

#[test]
fn separated_classes_name_the_candidate_and_fold() {
    // y is "yes" exactly when x > 5: perfectly separated.
    let mut table = String::from("x,z,y\n");
    for i in 0..60 {
        let x = f64::from(i) / 6.0;
        let z = f64::from((i * 13) % 60) / 6.0;
        table.push_str(&format!("{x},{z},{}\n", if x > 5.0 { "yes" } else { "no" }));
    }
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), &spec("", LOGISTIC, ""), &table);
    let output = util::run_spec(dir.path(), "run");
    let stderr = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    // The one setting is infeasible in some fold, so nothing is left to
    // choose from (docs/spec.md, "Infeasible settings").
    assert!(
        stderr.contains("no setting of any candidate can be fitted"),
        "{stderr}"
    );
    assert!(stderr.contains("logistic (fold "), "{stderr}");
    assert!(stderr.contains("separated"), "{stderr}");
    // With a penalty grid the same data fits.
    let penalised = spec(
        "",
        "[[candidate]]\nfamily = \"logistic\"\npenalty = [0.1, 1.0]\n",
        "",
    );
    write(dir.path(), &penalised, &table);
    util::assert_success(&util::run_spec(dir.path(), "run"));
}

#[test]
fn per_fold_log_loss_on_a_fold_column_equals_scikit_learn() {
    // reference: tests/fixtures/classification/expected.json, per-fold
    // sklearn.metrics.log_loss of LogisticRegression(C=inf) fitted on the
    // other folds of binary.csv and multiclass.csv (scikit-learn 1.9.1).
    let fixtures = util::crate_root().join("tests/fixtures/classification");
    let expected = util::read_json(&fixtures.join("expected.json"));
    for (kind, file) in [("binary", "binary.csv"), ("multiclass", "multiclass.csv")] {
        let dir = tempfile::tempdir().unwrap();
        std::fs::copy(fixtures.join(file), dir.path().join("data.csv")).unwrap();
        let text = "[experiment]\nname = \"folds\"\nseed = 1\n\n[data]\ntable = \"data.csv\"\n\
                    target = \"class\"\nfeatures = [\"x1\", \"x2\"]\n\n[split]\nholdout = 0\n\
                    method = \"column\"\ncolumn = \"fold\"\n\n[[candidate]]\nfamily = \"logistic\"\n\n\
                    [choose]\nmetric = \"log-loss\"\n";
        std::fs::write(dir.path().join("spec.toml"), text).unwrap();
        let results = util::run_results(dir.path(), "folds");
        let scores = util::candidate(&results, "logistic")["fold_scores"]
            .as_array()
            .unwrap()
            .clone();
        let reference = expected["logistic"][kind]["folds"].as_array().unwrap();
        assert_eq!(scores.len(), reference.len());
        for (score, fold) in scores.iter().zip(reference) {
            let (got, want) = (score.as_f64().unwrap(), fold["log_loss"].as_f64().unwrap());
            assert!(
                (got - want).abs() <= 1e-6 * want,
                "{kind}, fold {}: heldout {got}, scikit-learn {want}",
                fold["fold"]
            );
        }
    }
}

#[test]
fn the_descaling_demo_verifies_against_its_receipt() {
    let root = util::crate_root();
    let dir = tempfile::tempdir().unwrap();
    for (folder, file) in [
        ("specs", "substation-descaling.toml"),
        ("specs", "substation-descaling.receipt.toml"),
        ("demo-data", "substation-descaling.csv"),
    ] {
        std::fs::create_dir_all(dir.path().join(folder)).unwrap();
        std::fs::copy(
            root.join(folder).join(file),
            dir.path().join(folder).join(file),
        )
        .unwrap();
    }
    let output = util::run_in(dir.path(), &["verify", "specs/substation-descaling.toml"]);
    util::assert_success(&output);
    assert!(util::stdout_of(&output).contains("identical to its receipt"));
}

#[test]
fn new_on_a_table_with_a_class_target_writes_a_classification_spec_that_runs() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), class_table(["low", "high"])).unwrap();
    let output = util::run_in(
        dir.path(),
        &[
            "new",
            "--table",
            "data.csv",
            "--target",
            "y",
            "-o",
            "spec.toml",
        ],
    );
    util::assert_success(&output);
    let text = std::fs::read_to_string(dir.path().join("spec.toml")).unwrap();
    assert!(text.contains("\ntask = \"classification\"\n"), "{text}");
    assert!(text.contains("family = \"logistic\""), "{text}");
    assert!(text.contains("metric = \"log-loss\""), "{text}");
    assert!(!text.contains("family = \"ridge\""), "{text}");
    let name = text
        .lines()
        .find_map(|l| l.strip_prefix("name = \""))
        .unwrap()
        .trim_end_matches('"')
        .to_string();
    let results = util::run_results(dir.path(), &name);
    assert_eq!(
        results["classification"]["labels"],
        serde_json::json!(["high", "low"])
    );
}

#[test]
fn breast_cancer_folds_equal_scikit_learn_cross_validation() {
    // reference: tests/fixtures/breast_cancer/expected.json, per-fold
    // sklearn.metrics.log_loss and 1 - accuracy_score of
    // LogisticRegression(C=inf) fitted on the other folds (scikit-learn
    // 1.9.1; data: UCI Wisconsin Diagnostic Breast Cancer, as bundled in
    // scikit-learn).
    let fixtures = util::crate_root().join("tests/fixtures/breast_cancer");
    let expected = util::read_json(&fixtures.join("expected.json"));
    let reference = expected["folds"].as_array().unwrap();
    for (metric, field, tolerance) in [
        ("log-loss", "log_loss", 1e-6),
        ("error-rate", "error_rate", 1e-12),
    ] {
        let dir = tempfile::tempdir().unwrap();
        std::fs::copy(fixtures.join("data.csv"), dir.path().join("data.csv")).unwrap();
        let text = format!(
            "[experiment]\nname = \"diagnosis\"\nseed = 1\n\n[data]\ntable = \"data.csv\"\n\
             target = \"diagnosis\"\nfeatures = [\"mean_radius\", \"mean_texture\", \
             \"mean_smoothness\"]\n\n[split]\nholdout = 0\nmethod = \"column\"\n\
             column = \"fold\"\n\n[[candidate]]\nfamily = \"logistic\"\n\n[choose]\n\
             metric = \"{metric}\"\n"
        );
        std::fs::write(dir.path().join("spec.toml"), text).unwrap();
        let results = util::run_results(dir.path(), "diagnosis");
        assert_eq!(results["classification"]["positive"], "malignant");
        let scores = util::candidate(&results, "logistic")["fold_scores"]
            .as_array()
            .unwrap()
            .clone();
        assert_eq!(scores.len(), reference.len());
        for (score, fold) in scores.iter().zip(reference) {
            let (got, want) = (score.as_f64().unwrap(), fold[field].as_f64().unwrap());
            assert!(
                (got - want).abs() <= tolerance * want,
                "{metric}, fold {}: heldout {got}, scikit-learn {want}",
                fold["fold"]
            );
        }
    }
}

#[test]
fn descaling_report_and_class_figures_are_pinned() {
    let root = util::crate_root();
    let dir = tempfile::tempdir().unwrap();
    for (folder, file) in [
        ("specs", "substation-descaling.toml"),
        ("demo-data", "substation-descaling.csv"),
    ] {
        std::fs::create_dir_all(dir.path().join(folder)).unwrap();
        std::fs::copy(
            root.join(folder).join(file),
            dir.path().join(folder).join(file),
        )
        .unwrap();
    }
    let output = util::run_in(
        dir.path(),
        &["run", "--quiet", "specs/substation-descaling.toml"],
    );
    util::assert_success(&output);
    let out = dir.path().join("out/substation-descaling");
    let read = |path: &Path| std::fs::read_to_string(path).unwrap();
    insta::assert_snapshot!("descaling_report_md", read(&out.join("report.md")));
    for file in ["roc.svg", "calibration.svg"] {
        let name = format!("descaling_figure_{}", file.trim_end_matches(".svg"));
        insta::assert_snapshot!(name, read(&out.join("figures").join(file)));
    }
}
