//! The demo spec end to end: the report a person reads is pinned by an insta
//! snapshot, and the validation curve has the U shape the demo promises.

use std::path::Path;

use crate::util;

/// Copies the demo spec, its committed receipt and its data into `dir`, with
/// the repository's relative layout, so tests never write into the tree.
/// An empty `.git` folder marks `dir` as the repository, as a checkout is:
/// data may be read from anywhere inside it, whatever the working folder.
pub fn copy_demo(dir: &Path) {
    std::fs::create_dir_all(dir.join(".git")).unwrap();
    let root = util::crate_root();
    for file in [
        "specs/heat-demand.toml",
        "specs/heat-demand.receipt.toml",
        "demo-data/heat-demand.csv",
    ] {
        let to = dir.join(file);
        std::fs::create_dir_all(to.parent().unwrap()).unwrap();
        std::fs::copy(root.join(file), &to).unwrap();
    }
}

/// Runs a copy of the demo spec in `dir`; outputs go to `dir/out`.
fn run_demo(dir: &Path) -> serde_json::Value {
    copy_demo(dir);
    let output = util::run_in(dir, &["run", "--quiet", "specs/heat-demand.toml"]);
    assert!(output.status.success(), "{}", util::stderr_of(&output));
    util::read_json(&dir.join("out").join("heat-demand").join("results.json"))
}

#[test]
fn demo_report_markdown_is_pinned() {
    let dir = tempfile::tempdir().unwrap();
    run_demo(dir.path());
    let report = std::fs::read_to_string(dir.path().join("out/heat-demand/report.md")).unwrap();
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
    let cv: Vec<f64> = polynomial
        .iter()
        .map(|c| c["cv_score"].as_f64().unwrap())
        .collect();
    let train: Vec<f64> = polynomial
        .iter()
        .map(|c| c["train_score"].as_f64().unwrap())
        .collect();
    let (lowest, _) = cv
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))
        .unwrap();
    assert!(
        lowest > 0 && lowest < cv.len() - 1,
        "minimum inside the grid: {cv:?}"
    );
    assert!(cv[0] > cv[lowest] && cv[cv.len() - 1] > cv[lowest]);
    assert!(
        train.windows(2).all(|w| w[1] <= w[0]),
        "training error only falls: {train:?}"
    );
}

#[test]
fn committed_demo_receipt_verifies() {
    // The receipt in version control must match a fresh computation on this
    // machine, bit for bit; this is what a user's CI runs.
    let dir = tempfile::tempdir().unwrap();
    copy_demo(dir.path());
    let output = util::run_in(dir.path(), &["verify", "specs/heat-demand.toml"]);
    util::assert_success(&output);
}
