//! The `spline` and `thin-plate` families through the binary: a spec with
//! both, five-fold cross-validation on a small invented table with two
//! features, and the ids, effective df and scores that land in `results.json`.

use serde_json::Value;
use tempfile::TempDir;

use crate::util;

const SPEC: &str = r#"
[experiment]
name = "orchard"
title = "Spline flexibility on an invented orchard"
seed = 4242

[data]
table = "orchard.csv"
target = "sugar_brix"
features = ["sun_hours", "slope_deg"]

[split]
holdout = 0
method = "kfold"
folds = 5

[[candidate]]
family = "spline"
df = [1, 3, 6]

[[candidate]]
family = "thin-plate"
df = [3.5, 6, 12]

[choose]
metric = "mse"
rule = "lowest"
"#;

/// Invented: sugar content of 60 fictional orchard rows, curved in sun hours
/// and in slope, with a deterministic wobble standing in for noise.
fn orchard_csv() -> String {
    let mut csv = String::from("sun_hours,slope_deg,sugar_brix\n");
    for i in 0..60 {
        let t = (i + 1) as f64;
        let sun = 4.0 + 6.0 * (t * 0.618_033_988_7).fract();
        let slope = 20.0 * (t * 0.754_877_666_2).fract();
        let sugar = 12.0
            + 2.0 * libm::sin(1.5 * sun)
            + 0.01 * (slope - 10.0) * (slope - 10.0)
            + 0.1 * libm::sin(17.0 * t);
        csv.push_str(&format!("{sun},{slope},{sugar}\n"));
    }
    csv
}

fn number(candidate: &Value, key: &str) -> f64 {
    candidate[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} is not a number in {candidate}"))
}

#[test]
fn spline_and_thin_plate_run_under_five_fold_cross_validation() {
    let dir = TempDir::new().unwrap();
    std::fs::write(dir.path().join("spec.toml"), SPEC).unwrap();
    std::fs::write(dir.path().join("orchard.csv"), orchard_csv()).unwrap();
    let results = util::run_results(dir.path(), "orchard");

    // Effective df: 1 + 2·df basis columns for the additive spline; the
    // requested trace for the thin plate (root finding, to 1e-8 here).
    for (id, df) in [
        ("spline/df=1", 3.0),
        ("spline/df=3", 7.0),
        ("spline/df=6", 13.0),
        ("thin-plate/df=3.5", 3.5),
        ("thin-plate/df=6", 6.0),
        ("thin-plate/df=12", 12.0),
    ] {
        let c = util::candidate(&results, id);
        let got = number(c, "effective_df");
        assert!(
            (got - df).abs() <= 1e-8 * df,
            "{id}: effective_df {got}, want {df}"
        );
        let folds = c["fold_scores"].as_array().expect("fold_scores");
        assert_eq!(folds.len(), 5, "{id}");
        assert!(number(c, "cv_score").is_finite(), "{id}");
    }
    assert_eq!(util::candidate(&results, "spline/df=3")["family"], "spline");
    assert_eq!(
        util::candidate(&results, "thin-plate/df=6")["family"],
        "thin-plate"
    );

    // The truth is curved in both features, so the straight additive fit
    // (df = 1) and the nearly flat surface (df = 3.5) must lose to their more
    // flexible settings (common practice: underfitting shows in held-out error).
    let cv = |id: &str| number(util::candidate(&results, id), "cv_score");
    assert!(cv("spline/df=6") < cv("spline/df=1"));
    assert!(cv("thin-plate/df=12") < cv("thin-plate/df=3.5"));
}
