//! `heldout report`: re-rendering from stored results gives the bytes `run`
//! wrote, fits nothing, and refuses stored results that no longer belong to
//! the spec or its data. Stored results read back bit for bit.

use std::path::{Path, PathBuf};

use crate::{demo, simulation, util};

/// Every file under `dir`, as (path relative to `dir`, bytes), sorted.
fn files(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut found = Vec::new();
    let mut pending = vec![dir.to_path_buf()];
    while let Some(folder) = pending.pop() {
        for entry in std::fs::read_dir(&folder).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                pending.push(path);
            } else {
                let bytes = std::fs::read(&path).unwrap();
                found.push((path.strip_prefix(dir).unwrap().to_path_buf(), bytes));
            }
        }
    }
    found.sort();
    found
}

/// Deletes the reports and figures of an output folder, keeping results.json.
fn delete_reports(out: &Path) {
    std::fs::remove_file(out.join("report.md")).unwrap();
    std::fs::remove_file(out.join("report.html")).unwrap();
    std::fs::remove_dir_all(out.join("figures")).unwrap();
}

#[test]
fn report_recreates_deleted_reports_byte_for_byte() {
    // The demo (a table, into a non-default --out) and the simulation demo.
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
    let run = util::run_in(
        dir.path(),
        &[
            "run",
            "--quiet",
            "--out",
            "elsewhere",
            "specs/heat-demand.toml",
        ],
    );
    assert!(run.status.success(), "{}", util::stderr_of(&run));
    simulation::demo_spec(dir.path(), "sim.toml", 5);
    simulation::heldout_ok(dir.path(), &["run", "--quiet", "specs/sim.toml"]);

    for (spec, out, extra) in [
        (
            "specs/heat-demand.toml",
            "elsewhere/heat-demand",
            &["--out", "elsewhere"][..],
        ),
        ("specs/sim.toml", "out/heat-demand-simulation", &[][..]),
    ] {
        let out = dir.path().join(out);
        let before = files(&out);
        assert!(before.len() >= 6, "{spec}: {} output files", before.len());
        let receipt_path = dir.path().join(spec.replace(".toml", ".receipt.toml"));
        let receipt = std::fs::read(&receipt_path).unwrap();
        delete_reports(&out);

        let mut args = vec!["report", spec];
        args.extend_from_slice(extra);
        let output = util::run_in(dir.path(), &args);
        assert_eq!(
            output.status.code(),
            Some(0),
            "{spec}: {}",
            util::stderr_of(&output)
        );
        assert!(
            util::stdout_of(&output).contains("from results.json (nothing fitted)"),
            "{}",
            util::stdout_of(&output)
        );
        // Nothing to note: same tool, same templates.
        assert_eq!(util::stderr_of(&output), "", "{spec}");
        let after = files(&out);
        let names = |list: &[(PathBuf, Vec<u8>)]| -> Vec<PathBuf> {
            list.iter().map(|(p, _)| p.clone()).collect()
        };
        assert_eq!(names(&after), names(&before), "{spec}: the same files");
        for ((name, old), (_, new)) in before.iter().zip(&after) {
            assert!(old == new, "{spec}: {} differs", name.display());
        }
        assert_eq!(std::fs::read(&receipt_path).unwrap(), receipt, "{spec}");
    }
}

#[test]
fn report_without_stored_results_says_to_run_first() {
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
    let output = util::run_in(dir.path(), &["report", "specs/heat-demand.toml"]);
    assert_eq!(output.status.code(), Some(2));
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("out/heat-demand/results.json: there are no stored results for specs/heat-demand.toml; run `heldout run specs/heat-demand.toml` first"),
        "{stderr}"
    );
    assert!(!dir.path().join("out").exists(), "nothing written");
}

#[test]
fn report_refuses_stale_results_and_names_what_changed() {
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
    let run = util::run_in(dir.path(), &["run", "--quiet", "specs/heat-demand.toml"]);
    assert!(run.status.success(), "{}", util::stderr_of(&run));
    let out = dir.path().join("out/heat-demand");
    let report_md = std::fs::read(out.join("report.md")).unwrap();

    // The spec's meaning changed (its title): stale.
    let spec = dir.path().join("specs/heat-demand.toml");
    let text = std::fs::read_to_string(&spec).unwrap();
    let retitled = text.replacen("title = \"", "title = \"Revised: ", 1);
    assert_ne!(retitled, text);
    std::fs::write(&spec, &retitled).unwrap();
    let output = util::run_in(dir.path(), &["report", "specs/heat-demand.toml"]);
    assert_eq!(output.status.code(), Some(2));
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("results.json: the stored results are stale: the spec specs/heat-demand.toml changed meaning since the run"),
        "{stderr}"
    );
    assert!(
        stderr.contains("run `heldout run specs/heat-demand.toml` (cached fits are reused)"),
        "{stderr}"
    );
    assert!(!stderr.contains("data file"), "{stderr}");

    // A comment is not meaning: with only a comment added, reports render.
    std::fs::write(&spec, format!("# reviewed\n{text}")).unwrap();
    let output = util::run_in(dir.path(), &["report", "--quiet", "specs/heat-demand.toml"]);
    assert_eq!(
        output.status.code(),
        Some(0),
        "{}",
        util::stderr_of(&output)
    );
    assert_eq!(std::fs::read(out.join("report.md")).unwrap(), report_md);

    // The data changed (one target value): stale, and the data file is named.
    let table = dir.path().join("demo-data/heat-demand.csv");
    let data = std::fs::read_to_string(&table).unwrap();
    let edited = data.replacen(
        "4,1,M0004,Stormyra,-3.9,3.3,10.007\n",
        "4,1,M0004,Stormyra,-3.9,3.3,10.307\n",
        1,
    );
    assert_ne!(edited, data, "the demo table changed: pick another value");
    std::fs::write(&table, edited).unwrap();
    std::fs::remove_file(out.join("report.md")).unwrap();
    let output = util::run_in(dir.path(), &["report", "specs/heat-demand.toml"]);
    assert_eq!(output.status.code(), Some(2));
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains(
            "the stored results are stale: the data file ../demo-data/heat-demand.csv changed \
             since the run"
        ),
        "{stderr}"
    );
    assert!(!stderr.contains("changed meaning"), "{stderr}");
    assert!(
        !out.join("report.md").exists(),
        "stale results render nothing"
    );
}

#[test]
fn stored_results_read_back_bit_for_bit_with_nulls_as_nan() {
    let dir = tempfile::tempdir().unwrap();
    simulation::demo_spec(dir.path(), "sim.toml", 4);
    simulation::heldout_ok(dir.path(), &["run", "--quiet", "specs/sim.toml"]);
    let path = dir.path().join("out/heat-demand-simulation/results.json");
    let text = std::fs::read_to_string(&path).unwrap();
    let results = heldout::results::from_json(&text).unwrap();
    assert_eq!(heldout::results::to_json(&results), text);
    assert!(results.simulation.is_some());

    // JSON has no NaN: a NaN is written as null and must read back as NaN,
    // and an absent test score or threshold that was computed as Some(NaN).
    let mut value: serde_json::Value = serde_json::from_str(&text).unwrap();
    value["candidates"][0]["cv_se"] = serde_json::Value::Null;
    value["candidates"][1]["fold_scores"][2] = serde_json::Value::Null;
    value["choice"]["threshold"] = serde_json::Value::Null;
    value["test_score"] = serde_json::Value::Null;
    value["final"]["test_score"] = serde_json::Value::Null;
    value["final"]["coefficients"]["intercept"] = serde_json::Value::Null;
    value["simulation"][3]["bias_sq_se"] = serde_json::Value::Null;
    let mut nulled = serde_json::to_string_pretty(&value).unwrap();
    nulled.push('\n');
    let read = heldout::results::from_json(&nulled).unwrap();
    assert!(read.candidates[0].cv_se.is_nan());
    assert!(read.candidates[1].fold_scores[2].is_nan());
    assert!(read.choice.threshold.unwrap().is_nan());
    assert!(read.test_score.unwrap().is_nan());
    assert!(read.final_fit.test_score.unwrap().is_nan());
    let coefficients = read.final_fit.coefficients.as_ref().unwrap();
    assert_eq!(coefficients[0].0, "intercept");
    assert!(coefficients[0].1.is_nan());
    assert!(read.simulation.as_ref().unwrap().simulation[3]
        .bias_sq_se
        .is_nan());
    assert_eq!(heldout::results::to_json(&read), nulled);

    // A malformed simulation section is an error, never silently dropped.
    value["simulation_summary"]["oracle"] = serde_json::Value::from(7);
    let broken = serde_json::to_string(&value).unwrap();
    assert!(heldout::results::from_json(&broken).is_err());
    // And another schema is refused.
    value["schema"] = serde_json::Value::from("heldout-results/0");
    let error = heldout::results::from_json(&serde_json::to_string(&value).unwrap()).unwrap_err();
    assert!(error.to_string().contains("heldout-results/0"), "{error}");
}
