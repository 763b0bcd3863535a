//! "The spec as read" (the canonical spec in every report, and the meaning
//! behind the receipt's spec digest) must itself be a spec that runs and
//! means the same thing: each demo, and one spec holding every registered
//! family with its default grid, is run, its spec as read is cut from
//! report.md and run again, and the two results.json must be identical
//! byte for byte.

use std::path::Path;

use crate::util;

/// The fenced TOML block under "The spec as read" in a report.md.
fn spec_as_read(report: &str) -> String {
    let section = report
        .split("### The spec as read")
        .nth(1)
        .expect("report.md has a spec-as-read section");
    let body = section
        .split_once("toml\n")
        .expect("the spec is fenced as TOML")
        .1;
    let end = body.find("\n```").expect("the fence closes");
    body[..=end].to_string()
}

/// Runs `spec` (relative to `dir`) into `out`, then its spec as read, saved
/// beside it, into `again`; returns both results.json texts and the spec as
/// read.
fn run_twice(dir: &Path, spec: &str, name: &str) -> (String, String, String) {
    let run = |spec: &str, out: &str| {
        let output = util::run_in(dir, &["run", spec, "--out", out, "--cache", "cache", "-q"]);
        util::assert_success(&output);
        let folder = dir.join(out).join(name);
        (
            std::fs::read_to_string(folder.join("results.json")).unwrap(),
            std::fs::read_to_string(folder.join("report.md")).unwrap(),
        )
    };
    let (first, report) = run(spec, "out");
    let canonical = spec_as_read(&report);
    let copy = Path::new(spec).with_file_name("as-read.toml");
    std::fs::write(dir.join(&copy), &canonical).unwrap();
    let (second, report_again) = run(copy.to_str().unwrap(), "again");
    assert_eq!(
        spec_as_read(&report_again),
        canonical,
        "reading the spec as read changes it"
    );
    (first, second, canonical)
}

#[test]
fn every_demo_spec_as_read_runs_to_identical_results() {
    let root = util::crate_root();
    for (spec, name) in [
        ("heat-demand.toml", "heat-demand"),
        ("heat-demand-simulation.toml", "heat-demand-simulation"),
    ] {
        let dir = tempfile::tempdir().unwrap();
        std::fs::create_dir_all(dir.path().join("specs")).unwrap();
        std::fs::create_dir_all(dir.path().join("demo-data")).unwrap();
        std::fs::copy(
            root.join("specs").join(spec),
            dir.path().join("specs").join(spec),
        )
        .unwrap();
        std::fs::copy(
            root.join("demo-data/heat-demand.csv"),
            dir.path().join("demo-data/heat-demand.csv"),
        )
        .unwrap();
        let (first, second, canonical) = run_twice(dir.path(), &format!("specs/{spec}"), name);
        assert_eq!(first, second, "{spec}: results differ after the round trip");
        if canonical.contains("family = \"ridge\"") {
            let ridge = canonical.split("family = \"ridge\"").nth(1).unwrap();
            let block = ridge.split("[[candidate]]").next().unwrap();
            assert!(
                !block.contains("intercept"),
                "ridge shows intercept:\n{block}"
            );
        }
    }
}

/// One spec holding every registered family that predicts `task` with its
/// default grid, from the schema's examples; features as many as the schema
/// says the family takes. Returns the spec and how many families it holds.
fn every_family_spec(families: &[serde_json::Value], task: &str, head: &str) -> (String, usize) {
    let mut spec = String::from(head);
    let mut count = 0;
    for family in families {
        let tasks = family["x-tasks"].as_array().unwrap();
        if !tasks.iter().any(|t| t == task) {
            continue;
        }
        count += 1;
        let example = &family["examples"][0];
        let takes = family["properties"]["features"]["maxItems"].as_u64();
        spec.push_str("\n[[candidate]]\n");
        for (key, value) in example.as_object().unwrap() {
            spec.push_str(&format!("{key} = {value}\n"));
        }
        if takes == Some(1) {
            spec.push_str("features = [\"x\"]\n");
        }
    }
    (spec, count)
}

/// Runs `spec` on `table` twice through its spec as read; returns the
/// families reported.
fn round_trip(spec: &str, table: &str) -> std::collections::BTreeSet<String> {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("spec.toml"), spec).unwrap();
    std::fs::write(dir.path().join("data.csv"), table).unwrap();
    let (first, second, canonical) = run_twice(dir.path(), "spec.toml", "every-family");
    assert_eq!(
        first, second,
        "results differ after the round trip of:\n{canonical}"
    );
    let results: serde_json::Value = serde_json::from_str(&first).unwrap();
    results["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["family"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn every_family_spec_as_read_runs_to_identical_results() {
    let schema = util::run_in(&util::crate_root(), &["schema"]);
    util::assert_success(&schema);
    let schema: serde_json::Value = serde_json::from_str(&util::stdout_of(&schema)).unwrap();
    let families = schema["$defs"]["CandidateSpec"]["oneOf"]
        .as_array()
        .unwrap();
    assert!(families.len() >= 10, "{families:?}");
    let head = |task: &str| {
        format!(
            "[experiment]\nname = \"every-family\"\nseed = 11\n\n[data]\ntable = \"data.csv\"\n\
             target = \"y\"\nfeatures = [\"x\", \"z\"]\ntask = \"{task}\"\n\n[split]\n\
             holdout = 0.2\nfolds = 5\n"
        )
    };
    // Numbers: an invented smooth surface with a deterministic wobble as noise.
    let (spec, count) = every_family_spec(families, "regression", &head("regression"));
    let mut table = String::from("x,z,y\n");
    for i in 0..120 {
        let x = f64::from(i) / 12.0;
        let z = f64::from((i * 37) % 120) / 30.0;
        let wobble = f64::from((i * 7919) % 97) / 97.0 - 0.5;
        let y = (x * 0.8).sin() * 3.0 + 0.5 * z + 0.4 * wobble;
        table.push_str(&format!("{x},{z},{y}\n"));
    }
    let reported = round_trip(&spec, &table);
    assert_eq!(reported.len(), count, "{reported:?}");
    // Classes: three labels along a smooth score, with a deterministic
    // wobble so no class is separated from the others.
    let (spec, count) = every_family_spec(families, "classification", &head("classification"));
    assert!(count >= 2, "{spec}");
    let mut table = String::from("x,z,y\n");
    for i in 0..150 {
        let x = f64::from(i) / 15.0;
        let z = f64::from((i * 37) % 150) / 30.0;
        let wobble = f64::from((i * 7919) % 97) / 97.0 * 12.0 - 6.0;
        let score = x + 0.3 * z + wobble;
        let label = ["low", "mid", "high"][usize::from(score > 3.5) + usize::from(score > 7.0)];
        table.push_str(&format!("{x},{z},{label}\n"));
    }
    let reported = round_trip(&spec, &table);
    assert_eq!(reported.len(), count, "{reported:?}");
}
