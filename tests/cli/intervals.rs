//! `[intervals]` end to end on small invented tables (docs/intervals.md):
//! jackknife+ under leave-one-out, a level too high for the rows (infinite
//! bounds, said in the report and written by `predict`), and the splits and
//! targets that are refused. The end points themselves are checked against
//! numpy in `src/intervals.rs`.

use std::path::Path;

use crate::util;

/// A smooth invented table: y = 1 + 0.5 x + a deterministic wiggle, 30 rows.
fn write_table(dir: &Path) {
    std::fs::create_dir_all(dir.join(".git")).unwrap();
    let mut text = String::from("x,y,day,label\n");
    for i in 0..30 {
        let x = i as f64 * 0.37;
        let y = 1.0 + 0.5 * x + ((i * 7 % 11) as f64 - 5.0) * 0.1;
        let label = if y > 3.0 { "high" } else { "low" };
        text.push_str(&format!("{x},{y},{i},{label}\n"));
    }
    std::fs::write(dir.join("data.csv"), text).unwrap();
}

fn write_spec(dir: &Path, split: &str, level: f64, target: &str) {
    let spec = format!(
        "[experiment]\nname = \"iv\"\nseed = 5\n\n[data]\ntable = \"data.csv\"\n\
         target = \"{target}\"\nfeatures = [\"x\"]\n\n[split]\n{split}\n\n\
         [[candidate]]\nfamily = \"nearest-neighbors\"\nk = [3, 7]\n\n\
         [intervals]\nlevel = {level}\n"
    );
    std::fs::write(dir.join("spec.toml"), spec).unwrap();
}

#[test]
fn leave_one_out_gives_jackknife_plus_with_ranks_from_the_row_count() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    write_spec(
        dir.path(),
        "holdout = 0.2\nmethod = \"leave-one-out\"",
        0.8,
        "y",
    );
    util::assert_success(&util::run_spec(dir.path(), "run"));
    let results = util::run_results(dir.path(), "iv");
    let iv = &results["intervals"];
    assert_eq!(iv["method"], "jackknife+");
    let n = iv["calibration_rows"].as_u64().unwrap();
    assert_eq!(n, results["rows"]["train"].as_u64().unwrap());
    assert_eq!(iv["folds"].as_u64().unwrap(), n);
    // ⌈0.8 · (n + 1)⌉ computed here by hand in integers: ⌈4(n + 1)/5⌉.
    assert_eq!(iv["rank"].as_u64().unwrap(), (4 * (n + 1)).div_ceil(5));
    assert_eq!(iv["bounded"], true);
    let test = &iv["test"];
    let rows = test["rows"].as_u64().unwrap();
    let covered = test["covered"].as_u64().unwrap();
    assert_eq!(rows, results["rows"]["test"].as_u64().unwrap());
    assert_eq!(
        test["coverage"].as_f64().unwrap(),
        covered as f64 / rows as f64
    );
    let (low, high) = (
        test["coverage_low"].as_f64().unwrap(),
        test["coverage_high"].as_f64().unwrap(),
    );
    assert!(low <= covered as f64 / rows as f64 && covered as f64 / rows as f64 <= high);
    // Each interval has positive width.
    let lower = test["lower"].as_array().unwrap();
    let upper = test["upper"].as_array().unwrap();
    for (l, u) in lower.iter().zip(upper) {
        assert!(l.as_f64().unwrap() < u.as_f64().unwrap());
    }
}

#[test]
fn a_level_too_high_for_the_rows_gives_infinite_bounds_said_plainly() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    // 24 non-test rows: ⌈0.99 · 25⌉ = 25 > 24.
    write_spec(dir.path(), "holdout = 0.2\nfolds = 4", 0.99, "y");
    util::assert_success(&util::run_spec(dir.path(), "run"));
    let results = util::run_results(dir.path(), "iv");
    let iv = &results["intervals"];
    assert_eq!(iv["calibration_rows"], 24);
    assert_eq!(iv["rank"], 25);
    assert_eq!(iv["bounded"], false);
    assert_eq!(iv["test"]["coverage"].as_f64(), Some(1.0));
    assert!(iv["test"]["mean_width"].is_null());
    let report = std::fs::read_to_string(dir.path().join("out/iv/report.md")).unwrap();
    assert!(
        report.contains("every interval is the whole line"),
        "{report}"
    );
    std::fs::write(dir.path().join("new.csv"), "x\n1.5\n").unwrap();
    let output = util::run_in(
        dir.path(),
        &[
            "predict",
            "spec.toml",
            "--table",
            "new.csv",
            "--cache",
            "cache",
        ],
    );
    util::assert_success(&output);
    let stdout = util::stdout_of(&output);
    let last = stdout.lines().last().unwrap();
    assert!(last.ends_with(",-inf,inf"), "{stdout}");
}

/// A class target gets prediction sets (tests/cli/prediction_sets.rs), so
/// only the ordered split is refused.
#[test]
fn ordered_splits_are_refused_naming_the_key() {
    let dir = tempfile::tempdir().unwrap();
    write_table(dir.path());
    let cases = [(
        "holdout = 0.2\nmethod = \"ordered\"\nfolds = 3",
        "y",
        "ordered",
    )];
    for (split, target, words) in cases {
        write_spec(dir.path(), split, 0.9, target);
        if split.contains("ordered") {
            // An ordered split needs its time column.
            let spec = std::fs::read_to_string(dir.path().join("spec.toml")).unwrap();
            let spec = spec.replace("features = [\"x\"]", "features = [\"x\"]\norder = \"day\"");
            std::fs::write(dir.path().join("spec.toml"), spec).unwrap();
        }
        let output = util::run_spec(dir.path(), "run");
        assert_eq!(output.status.code(), Some(2), "{words}");
        let stderr = util::stderr_of(&output);
        assert!(
            stderr.contains("spec.toml: intervals:") && stderr.contains(words),
            "{words}: {stderr}"
        );
    }
}
