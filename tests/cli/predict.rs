//! `heldout predict`: the kept setting applied to new rows. The check is
//! against heldout's own report: new rows equal to the locked test rows must
//! get the final fit's test predictions to the bit (the refit is the same
//! call on the same rows).

use std::path::Path;

use crate::{demo, util};

/// The demo table's lines (header first).
fn demo_lines(dir: &Path) -> Vec<String> {
    table_lines(dir, "heat-demand")
}

/// A demo table's lines (header first).
fn table_lines(dir: &Path, name: &str) -> Vec<String> {
    std::fs::read_to_string(dir.join(format!("demo-data/{name}.csv")))
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect()
}

/// 1-based data rows of the heat-demand demo's locked test set.
fn test_rows(dir: &Path) -> Vec<usize> {
    spec_test_rows(dir, "heat-demand")
}

/// 1-based data rows of a demo spec's locked test set, from `heldout folds`.
fn spec_test_rows(dir: &Path, name: &str) -> Vec<usize> {
    let spec = format!("specs/{name}.toml");
    let output = util::run_in(dir, &["folds", spec.as_str()]);
    util::assert_success(&output);
    let mut rows: Vec<usize> = util::stdout_of(&output)
        .lines()
        .skip(1)
        .filter(|line| line.ends_with(",1,test"))
        .map(|line| line.split(',').next().unwrap().parse().unwrap())
        .collect();
    rows.sort_unstable();
    rows
}

#[test]
fn predictions_for_the_test_rows_equal_the_reports_final_fit_to_the_bit() {
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
    util::assert_success(&util::run_in(
        dir.path(),
        &["run", "--quiet", "specs/heat-demand.toml"],
    ));
    let results = util::read_json(&dir.path().join("out/heat-demand/results.json"));
    let expected: Vec<f64> = results["final"]["predictions"]["test"]["predicted"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let rows = test_rows(dir.path());
    assert_eq!(
        rows.len(),
        expected.len(),
        "every test row is in results.json"
    );

    let lines = demo_lines(dir.path());
    let mut new = format!("{}\n", lines[0]);
    for &row in &rows {
        new.push_str(&lines[row]);
        new.push('\n');
    }
    std::fs::write(dir.path().join("new.csv"), new).unwrap();
    let output = util::run_in(
        dir.path(),
        &[
            "predict",
            "specs/heat-demand.toml",
            "--table",
            "new.csv",
            "--output",
            "predicted.csv",
        ],
    );
    util::assert_success(&output);
    let written = std::fs::read_to_string(dir.path().join("predicted.csv")).unwrap();
    let comments: Vec<&str> = written.lines().filter(|l| l.starts_with('#')).collect();
    let body: Vec<&str> = written.lines().filter(|l| !l.starts_with('#')).collect();
    // The demo spec sets [intervals]: each row's CV+ interval must equal
    // the one results.json reports for that test row, to the bit.
    let bound = |side: &str| -> Vec<f64> {
        results["intervals"]["test"][side]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect()
    };
    let (lower, upper) = (bound("lower"), bound("upper"));
    assert_eq!(lower.len(), expected.len());
    assert_eq!(
        body[0],
        "meter_id,predicted_demand_mwh,lower_demand_mwh,upper_demand_mwh"
    );
    for (i, (line, &row)) in body[1..].iter().zip(&rows).enumerate() {
        let fields: Vec<&str> = line.split(',').collect();
        let key = fields[0];
        assert_eq!(key, lines[row].split(',').nth(2).unwrap());
        for (text, want) in fields[1..].iter().zip([expected[i], lower[i], upper[i]]) {
            let got: f64 = text.parse().unwrap();
            assert_eq!(got.to_bits(), want.to_bits(), "{key}: {got} vs {want}");
        }
        assert!(lower[i] < expected[i] && expected[i] < upper[i], "{key}");
    }
    assert_eq!(body.len(), expected.len() + 1);

    // The header ties the file to the run: the spec's meaning digest as in
    // results.json, the receipt's file digest and the kept setting.
    let spec_digest = results["inputs"]["spec"].as_str().unwrap();
    assert!(
        comments.iter().any(|c| c.contains(spec_digest)),
        "{comments:?}"
    );
    let receipt = std::fs::read(dir.path().join("specs/heat-demand.receipt.toml")).unwrap();
    let receipt_digest = blake3::hash(&receipt).to_hex().to_string();
    assert!(
        comments.iter().any(|c| c.contains(&receipt_digest)),
        "{comments:?}"
    );
    let kept = results["chosen"].as_str().unwrap();
    assert!(comments
        .iter()
        .any(|c| c.contains(&format!("kept: {kept}"))));
    assert!(
        comments
            .iter()
            .any(|c| c.contains("intervals: cv+ at level 0.9")),
        "{comments:?}"
    );
}

#[test]
fn new_rows_outside_the_training_range_are_counted_and_missing_columns_refused() {
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
    let lines = demo_lines(dir.path());
    // Columns: day, week, meter_id, substation, outdoor_c, wind_ms, demand_mwh.
    let new = format!(
        "{}\n{}\n900,129,N1,Lillebakk,99,3,0\n901,129,N2,Lillebakk,-80,3,0\n",
        lines[0], lines[1]
    );
    std::fs::write(dir.path().join("new.csv"), new).unwrap();
    let output = util::run_in(
        dir.path(),
        &["predict", "specs/heat-demand.toml", "--table", "new.csv"],
    );
    util::assert_success(&output);
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("2 of 3 rows lie outside the training range of outdoor_c"),
        "{stderr}"
    );
    let stdout = util::stdout_of(&output);
    assert_eq!(stdout.lines().filter(|l| !l.starts_with('#')).count(), 4);

    // A table without the kept setting's feature: exit 2 naming the column.
    std::fs::write(dir.path().join("short.csv"), "meter_id,wind_ms\nA,3\n").unwrap();
    let output = util::run_in(
        dir.path(),
        &["predict", "specs/heat-demand.toml", "--table", "short.csv"],
    );
    assert_eq!(output.status.code(), Some(2));
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("short.csv") && stderr.contains("no column named \"outdoor_c\""),
        "{stderr}"
    );
}

#[test]
fn class_targets_get_each_class_probability_equal_to_the_reports_final_fit() {
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
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
    // A binary target's final predictions are the positive class's
    // probability (`yes`).
    let expected: Vec<f64> = results["final"]["predictions"]["test"]["predicted"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let rows = spec_test_rows(dir.path(), "substation-descaling");
    assert_eq!(rows.len(), expected.len());
    let lines = table_lines(dir.path(), "substation-descaling");
    let mut new = format!("{}\n", lines[0]);
    for &row in &rows {
        new.push_str(&lines[row]);
        new.push('\n');
    }
    std::fs::write(dir.path().join("new.csv"), new).unwrap();
    let output = util::run_in(
        dir.path(),
        &[
            "predict",
            "specs/substation-descaling.toml",
            "--table",
            "new.csv",
        ],
    );
    util::assert_success(&output);
    let stdout = util::stdout_of(&output);
    let body: Vec<&str> = stdout.lines().filter(|l| !l.starts_with('#')).collect();
    assert_eq!(
        body[0],
        "inspection_id,predicted_descale,probability_no,probability_yes,set_descale"
    );
    assert_eq!(body.len(), expected.len() + 1);
    // The demo spec sets [intervals]: each row's prediction set, tallied
    // like results.json's (covered rows, rows per set size), must give the
    // report's numbers.
    let sets = &results["prediction_sets"]["test"];
    let mut covered = 0;
    let mut sizes = [0_u64; 3];
    for ((line, want), &row) in body[1..].iter().zip(&expected).zip(&rows) {
        let fields: Vec<&str> = line.split(',').collect();
        let no: f64 = fields[2].parse().unwrap();
        let yes: f64 = fields[3].parse().unwrap();
        assert_eq!(yes.to_bits(), want.to_bits(), "{line}");
        assert!((no + yes - 1.0).abs() < 1e-12, "{line}");
        let most = if yes > no { "yes" } else { "no" };
        assert_eq!(fields[1], most, "{line}");
        let members: Vec<&str> = fields[4].split('|').filter(|m| !m.is_empty()).collect();
        assert!(
            members == ["no"]
                || members == ["yes"]
                || members == ["no", "yes"]
                || members.is_empty(),
            "{line}"
        );
        sizes[members.len()] += 1;
        let observed = lines[row].split(',').nth(3).unwrap();
        if members.contains(&observed) {
            covered += 1;
        }
    }
    assert_eq!(Some(covered), sets["covered"].as_u64());
    let reported: Vec<u64> = sets["sizes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    assert_eq!(reported, sizes);
    let comments: Vec<&str> = stdout.lines().filter(|l| l.starts_with('#')).collect();
    assert!(
        comments
            .iter()
            .any(|c| c.contains("sets: cv+ at level 0.9")),
        "{comments:?}"
    );
}
