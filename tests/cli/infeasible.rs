//! Infeasible settings: a setting that cannot be fitted on some training
//! rows is set aside with its reason, the choice is made among the others,
//! and only a spec with no feasible setting at all fails (docs/spec.md,
//! "Infeasible settings").
//!
//! The tables are invented here (a fixed arithmetic sequence, no random
//! draws); the expected facts follow from the fold sizes alone.

use std::path::Path;

use serde_json::Value;

use crate::util;

/// 30 rows: `x` spread over 0..10, a 0/1 column `flag`, and `y` a curve in
/// `x` plus a step in `flag` plus a deterministic wobble.
fn write_table(dir: &Path) {
    let mut text = String::from("id,x,flag,y\n");
    for i in 0..30 {
        let x = (i * 7 % 30) as f64 / 3.0;
        let flag = i % 3 == 0;
        let wobble = ((i * 13 % 11) as f64 - 5.0) / 5.0;
        let y = (x - 5.0) * (x - 5.0) / 5.0 + if flag { 2.0 } else { 0.0 } + wobble;
        text.push_str(&format!("{i},{x},{},{y}\n", u8::from(flag)));
    }
    std::fs::write(dir.join("table.csv"), text).unwrap();
}

/// 24 rows for cross-validation in 5 folds: each training fold holds 19 or
/// 20 rows, so k = 20 fails in some folds, k ≥ 21 in all.
fn write_spec(dir: &Path, name: &str, candidates: &str) {
    let spec = format!(
        "[experiment]\nname = \"{name}\"\nseed = 7\n\n[data]\ntable = \"table.csv\"\n\
         target = \"y\"\nfeatures = [\"x\"]\nkey = \"id\"\n\n[split]\nholdout = 0.2\n\
         method = \"kfold\"\nfolds = 5\n\n[report]\nformats = [\"markdown\", \"html\"]\n\n\
         {candidates}"
    );
    std::fs::write(dir.join("spec.toml"), spec).unwrap();
}

const KNN_ALL: &str = "[[candidate]]\nfamily = \"nearest-neighbors\"\n\
                       k = [1, 2, 3, 5, 8, 12, 19, 20, 25, 40]\n";
const KNN_FEASIBLE: &str = "[[candidate]]\nfamily = \"nearest-neighbors\"\n\
                            k = [1, 2, 3, 5, 8, 12, 19]\n";

fn reasons(candidate: &Value) -> Vec<(String, String)> {
    candidate["infeasible"]
        .as_array()
        .map(|list| {
            list.iter()
                .map(|i| {
                    (
                        i["fold"].as_str().unwrap().to_string(),
                        i["reason"].as_str().unwrap().to_string(),
                    )
                })
                .collect()
        })
        .unwrap_or_default()
}

#[test]
fn k_beyond_the_training_fold_is_set_aside_and_the_rest_choose_as_alone() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    write_spec(dir.path(), "all-k", KNN_ALL);
    let results = util::run_results(dir.path(), "all-k");

    // Fold training sizes: 24 rows less each fold's validation rows.
    let fold_rows = results["split"]["fold_rows"].as_array().unwrap();
    let smallest_training = 24 - fold_rows[1].as_u64().unwrap() as usize;
    let largest_training = 24 - fold_rows[0].as_u64().unwrap() as usize;
    assert_eq!((smallest_training, largest_training), (19, 20));

    for k in [1, 2, 3, 5, 8, 12, 19] {
        let c = util::candidate(&results, &format!("nearest-neighbors/k={k}"));
        assert!(c.get("infeasible").is_none(), "k={k} is feasible");
        assert!(c["cv_score"].as_f64().unwrap().is_finite(), "k={k}");
    }
    for k in [20, 25, 40] {
        let c = util::candidate(&results, &format!("nearest-neighbors/k={k}"));
        let found = reasons(c);
        assert!(!found.is_empty(), "k={k} must be infeasible");
        assert!(c["cv_score"].is_null(), "k={k}: no cv score");
        for (fold, reason) in &found {
            assert!(
                fold.starts_with("fold ") || fold.contains("non-test"),
                "{fold}"
            );
            assert!(
                reason.starts_with(&format!("k={k} needs at least {k} training rows")),
                "{reason}"
            );
        }
        // k = 25 and 40 fail in every fold and on all 24 non-test rows.
        // k = 20 fails only where a fold trains on 19 rows: 24 rows in 5
        // folds of 4 or 5 validation rows (fold_rows above) are four folds
        // of 5, so four fits of 19 training rows.
        let expected = if k == 20 { 4 } else { 6 };
        assert_eq!(found.len(), expected, "k={k}: {found:?}");
    }
    let chosen = results["chosen"].as_str().unwrap();
    assert!(
        !["k=20", "k=25", "k=40"].iter().any(|k| chosen.ends_with(k)),
        "{chosen}"
    );

    // The same choice and the same bits as a spec listing only the feasible k.
    let alone = tempfile::tempdir().unwrap();
    write_table(alone.path());
    write_spec(alone.path(), "feasible-k", KNN_FEASIBLE);
    let feasible = util::run_results(alone.path(), "feasible-k");
    assert_eq!(results["chosen"], feasible["chosen"]);
    assert_eq!(results["choice"], feasible["choice"]);
    for k in [1, 2, 3, 5, 8, 12, 19] {
        let id = format!("nearest-neighbors/k={k}");
        assert_eq!(
            util::candidate(&results, &id)["fold_scores"],
            util::candidate(&feasible, &id)["fold_scores"],
            "{id}"
        );
    }

    // Every report and the terminal table name the reason.
    let report = std::fs::read_to_string(dir.path().join("out/all-k/report.md")).unwrap();
    assert!(
        report
            .contains("| nearest-neighbors/k=40 | x | – | – | infeasible: k=40 needs at least 40"),
        "{report}"
    );
    let page = std::fs::read_to_string(dir.path().join("out/all-k/report.html")).unwrap();
    assert!(page.contains("infeasible: k=40 needs at least 40"), "html");
    let shown = util::run_in(
        dir.path(),
        &["run", "spec.toml", "--out", "out", "--cache", "cache"],
    );
    util::assert_success(&shown);
    let table = util::stdout_of(&shown);
    assert!(
        table.contains("nearest-neighbors/k=25  infeasible: k=25 needs at least 25"),
        "{table}"
    );
}

#[test]
fn a_warm_run_reads_the_set_aside_settings_from_the_cache_and_agrees() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    write_spec(dir.path(), "warm", KNN_ALL);
    let first = util::run_spec(dir.path(), "run");
    util::assert_success(&first);
    let cold = std::fs::read(dir.path().join("out/warm/results.json")).unwrap();
    let again = util::run_in(
        dir.path(),
        &["run", "spec.toml", "--out", "out", "--cache", "cache"],
    );
    util::assert_success(&again);
    let (computed, reused) = util::fit_counts(&util::stderr_of(&again));
    assert_eq!((computed, reused), (0, 6), "every fit, infeasible ones too");
    let warm = std::fs::read(dir.path().join("out/warm/results.json")).unwrap();
    assert_eq!(cold, warm, "same bytes from the cache");
    // The receipt verifies from scratch.
    util::assert_success(&util::run_in(
        dir.path(),
        &["verify", "spec.toml", "--out", "out", "--cache", "cache"],
    ));
}

#[test]
fn plan_lists_infeasible_settings_before_fitting() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    write_spec(
        dir.path(),
        "planned",
        &format!(
            "{KNN_ALL}\n[[candidate]]\nfamily = \"polynomial\"\nfeatures = [\"flag\"]\n\
             degree = [1, 2]\n"
        ),
    );
    let output = util::run_in(dir.path(), &["plan", "spec.toml", "--cache", "cache"]);
    util::assert_success(&output);
    let text = util::stdout_of(&output);
    assert!(
        text.contains("infeasible before fitting (4 setting(s)"),
        "{text}"
    );
    assert!(
        text.contains("nearest-neighbors/k=40: k=40 needs at least 40 training rows, the fit has 19 (fold 1, and 5 more fit(s))"),
        "{text}"
    );
    assert!(
        text.contains(
            "polynomial/degree=2: degree=2 needs at least 3 distinct values of feature \"flag\""
        ),
        "{text}"
    );
    assert!(!text.contains("k=19:"), "{text}");
    // k = 20 fits the one fold that trains on 20 rows and the full fit.
    assert!(
        text.contains(
            "nearest-neighbors/k=20: k=20 needs at least 20 training rows, the fit has 19 (fold "
        ),
        "{text}"
    );
    assert!(
        text.contains(", and 3 more fit(s))\n  nearest-neighbors/k=25"),
        "{text}"
    );
    assert!(
        !dir.path().join("out").exists(),
        "plan fits and writes nothing"
    );
}

#[test]
fn no_feasible_setting_at_all_is_bad_input_listing_the_reasons() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    write_spec(
        dir.path(),
        "none",
        "[[candidate]]\nfamily = \"nearest-neighbors\"\nk = [25, 40]\n\n\
         [[candidate]]\nfamily = \"smoothing-spline\"\nfeatures = [\"flag\"]\ndf = [3, 4]\n",
    );
    let output = util::run_spec(dir.path(), "run");
    assert_eq!(output.status.code(), Some(2));
    let err = util::stderr_of(&output);
    assert!(
        err.contains("no setting of any candidate can be fitted"),
        "{err}"
    );
    for part in [
        "nearest-neighbors/k=25 (fold 1): k=25 needs at least 25 training rows",
        "nearest-neighbors/k=40 (fold 1)",
        "smoothing-spline/df=3 (fold 1): df=3 exceeds the 2 distinct values of feature \"flag\"",
        "smoothing-spline/df=4 (fold 1)",
    ] {
        assert!(err.contains(part), "{part}\n{err}");
    }
    assert!(!err.contains("panicked"), "{err}");
}

#[test]
fn a_setting_that_fails_only_while_fitting_is_set_aside_with_the_fits_message() {
    // 70% of `x` is 0, so a spline's knots at training quantiles coincide
    // from df = 2 on: nothing foreseeable from counts, the fit says so.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("id,x,y\n");
    for i in 0..60 {
        let x = if i % 10 < 7 {
            0.0
        } else {
            1.0 + (i * 7 % 13) as f64 * 0.7
        };
        text.push_str(&format!(
            "{i},{x},{}\n",
            x / 3.0 + ((i * 5 % 7) as f64 - 3.0) / 3.0
        ));
    }
    std::fs::write(dir.path().join("table.csv"), text).unwrap();
    write_spec(
        dir.path(),
        "ties",
        "[[candidate]]\nfamily = \"spline\"\ndf = [1, 2, 3]\n",
    );
    let results = util::run_results(dir.path(), "ties");
    assert_eq!(results["chosen"], "spline/df=1");
    for df in [2, 3] {
        let found = reasons(util::candidate(&results, &format!("spline/df={df}")));
        assert_eq!(found.len(), 6, "every fold and the full fit");
        assert!(found[0].1.contains("needs distinct knots"), "{found:?}");
    }
}

#[test]
fn a_simulation_with_a_setting_infeasible_in_its_replicates_runs() {
    let dir = tempfile::tempdir().unwrap();
    let spec = "[experiment]\nname = \"sim\"\nseed = 3\n\n[simulate]\n\
                truth = \"x*x\"\ntarget = \"y\"\ninputs = { x = { uniform = [-1, 1] } }\n\
                noise_sd = 0.5\ntrain_size = 20\nreplicates = 6\ntest_grid = 9\n\n\
                [split]\nholdout = 0\nmethod = \"kfold\"\nfolds = 5\n\n\
                [[candidate]]\nfamily = \"nearest-neighbors\"\nk = [1, 3, 16, 30]\n";
    std::fs::write(dir.path().join("spec.toml"), spec).unwrap();
    let output = util::run_spec(dir.path(), "run");
    util::assert_success(&output);
    let results = util::read_json(&dir.path().join("out/sim/results.json"));
    let text = results.to_string();
    assert!(
        text.contains("k=30 needs at least 30 training rows"),
        "{text}"
    );
    // k = 16 fits every fold of 16 training rows; k = 30 none.
    assert!(util::candidate(&results, "nearest-neighbors/k=16")
        .get("infeasible")
        .is_none());
}
