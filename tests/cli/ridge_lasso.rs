//! Ridge and lasso through the binary: ids, effective df and the final fit's
//! coefficients in `results.json`.
//!
//! The numbers themselves are checked against scikit-learn in the library's
//! unit tests (`src/models/penalised_reference.rs`); here the concern is
//! that the families are wired into the spec, the executor and the results.

use std::path::Path;

use serde_json::Value;
use tempfile::TempDir;

use crate::util;

const SPEC: &str = r#"
[experiment]
name = "kiln-penalties"
seed = 424242

[data]
table = "kiln.csv"
target = "gas_m3"
features = ["load_t", "cycle_h", "moisture_pct"]

[split]
holdout = 0.2
method = "kfold"
folds = 5

[[candidate]]
family = "ridge"
penalty = [0.01, 1, 100]

[[candidate]]
family = "lasso"
penalty = [0.001, 0.1]

[choose]
metric = "mse"
rule = "lowest"
"#;

/// An invented kiln's gas use: 50 rows, three features (two correlated),
/// deterministic wiggles standing in for noise.
fn write_table(dir: &Path) {
    let mut text = String::from("load_t,cycle_h,moisture_pct,gas_m3\n");
    for i in 0..50 {
        let t = i as f64;
        let load = 2.0 + (t * 0.37).sin() * 1.5 + t * 0.04;
        let cycle = 5.0 + 0.8 * load + (t * 1.7).cos() * 0.4;
        let moisture = 8.0 + (t * 0.91).sin() * 3.0;
        let gas = 12.0 + 6.0 * load + 2.5 * cycle + 0.7 * moisture + (t * 2.3).sin() * 1.2;
        text.push_str(&format!("{load},{cycle},{moisture},{gas}\n"));
    }
    std::fs::write(dir.join("kiln.csv"), text).expect("cannot write kiln.csv");
}

fn run(dir: &TempDir) -> Value {
    write_table(dir.path());
    std::fs::write(dir.path().join("spec.toml"), SPEC).expect("cannot write spec.toml");
    util::run_results(dir.path(), "kiln-penalties")
}

fn df_of(results: &Value, id: &str) -> f64 {
    util::candidate(results, id)["effective_df"]
        .as_f64()
        .expect("effective_df is a number")
}

#[test]
fn penalised_candidates_get_ids_df_and_coefficients() {
    let dir = TempDir::new().expect("cannot create a temporary directory");
    let results = run(&dir);

    let ids: Vec<&str> = results["candidates"]
        .as_array()
        .expect("candidates")
        .iter()
        .map(|c| c["id"].as_str().expect("id"))
        .collect();
    // Ids are family/setting in spec order (docs/spec.md).
    assert_eq!(
        ids,
        [
            "ridge/penalty=0.01",
            "ridge/penalty=1",
            "ridge/penalty=100",
            "lasso/penalty=0.001",
            "lasso/penalty=0.1",
        ]
    );

    // Ridge df = 1 + Σ d²/(d²+λ) falls strictly with λ and stays inside
    // (1, 1 + features) (ridge df from the SVD, Hoerl & Kennard 1970 form).
    let ridge: Vec<f64> = ["0.01", "1", "100"]
        .iter()
        .map(|p| df_of(&results, &format!("ridge/penalty={p}")))
        .collect();
    assert!(ridge[0] > ridge[1] && ridge[1] > ridge[2], "{ridge:?}");
    assert!(ridge[0] < 4.0 && ridge[2] > 1.0, "{ridge:?}");
    // Lasso df = 1 + non-zero coefficients (common practice):
    // a whole number, not larger at the larger penalty on this data.
    let lasso_small = df_of(&results, "lasso/penalty=0.001");
    let lasso_large = df_of(&results, "lasso/penalty=0.1");
    assert!(lasso_small >= lasso_large, "{lasso_small} vs {lasso_large}");
    for df in [lasso_small, lasso_large] {
        assert!(df.fract() == 0.0 && (1.0..=4.0).contains(&df), "{df}");
    }

    // Only penalised candidates are in the spec, so the chosen one has
    // coefficients: intercept first, then the features in spec order.
    let chosen = results["chosen"].as_str().expect("chosen");
    assert!(
        chosen.starts_with("ridge/") || chosen.starts_with("lasso/"),
        "{chosen}"
    );
    let coefficients = results["final"]["coefficients"]
        .as_object()
        .expect("final.coefficients is present");
    let names: Vec<&str> = coefficients.keys().map(String::as_str).collect();
    assert_eq!(names, ["intercept", "load_t", "cycle_h", "moisture_pct"]);
    // The data rise with every feature; a fit this close to least squares
    // keeps a positive slope on load (common sense check of the raw units).
    assert!(coefficients["load_t"].as_f64().expect("number") > 0.0);
}
