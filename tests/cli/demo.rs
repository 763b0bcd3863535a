//! The demo spec end to end: the report a person reads is pinned by an insta
//! snapshot, and the validation curve has the U shape the demo promises.

use std::path::Path;

use crate::util;

/// Runs the demo spec from the repository into a temporary output folder.
fn run_demo(out: &Path) -> serde_json::Value {
    let spec = util::crate_root().join("specs").join("heat-demand.toml");
    let output = util::heldout()
        .args(["run", "--quiet", "--out"])
        .arg(out)
        .arg(&spec)
        .output()
        .expect("heldout starts");
    assert!(output.status.success(), "{}", util::stderr_of(&output));
    util::read_json(&out.join("heat-demand").join("results.json"))
}

#[test]
fn demo_report_markdown_is_pinned() {
    let dir = tempfile::tempdir().unwrap();
    run_demo(dir.path());
    let report = std::fs::read_to_string(dir.path().join("heat-demand").join("report.md")).unwrap();
    insta::assert_snapshot!("demo_report_md", report);
}

#[test]
fn demo_polynomial_curve_is_u_shaped() {
    // The demo's promise (common practice for a noisy nonlinear truth): the
    // cross-validated error falls from degree 1 to a minimum and rises again
    // at the highest degree, while the training error only falls.
    let dir = tempfile::tempdir().unwrap();
    let results = run_demo(dir.path());
    let polynomial: Vec<&serde_json::Value> = results["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["family"] == "polynomial")
        .collect();
    let cv: Vec<f64> = polynomial.iter().map(|c| c["cv_score"].as_f64().unwrap()).collect();
    let train: Vec<f64> = polynomial.iter().map(|c| c["train_score"].as_f64().unwrap()).collect();
    let (lowest, _) = cv
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))
        .unwrap();
    assert!(lowest > 0 && lowest < cv.len() - 1, "minimum inside the grid: {cv:?}");
    assert!(cv[0] > cv[lowest] && cv[cv.len() - 1] > cv[lowest]);
    assert!(train.windows(2).all(|w| w[1] <= w[0]), "training error only falls: {train:?}");
}
