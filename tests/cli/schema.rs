//! `heldout schema`: the JSON Schema accepts the demo specs and rejects a
//! misspelt key, checked by a general-purpose validator (the `jsonschema`
//! package from PyPI, see tests/fixtures/schema/check_specs.py); its text is
//! pinned by an insta snapshot so changes to the spec's shape are reviewed.

use std::process::Command;

use crate::util;

fn schema_text() -> String {
    let output = util::run_in(&util::crate_root(), &["schema"]);
    assert_eq!(
        output.status.code(),
        Some(0),
        "{}",
        util::stderr_of(&output)
    );
    util::stdout_of(&output)
}

#[test]
fn schema_names_every_family_and_forbids_unknown_keys() {
    let schema: serde_json::Value = serde_json::from_str(&schema_text()).unwrap();
    assert_eq!(schema["additionalProperties"], false);
    let alternatives = schema["$defs"]["CandidateSpec"]["oneOf"]
        .as_array()
        .unwrap();
    let families: Vec<&str> = alternatives
        .iter()
        .map(|a| {
            assert_eq!(a["additionalProperties"], false, "{a}");
            a["properties"]["family"]["const"].as_str().unwrap()
        })
        .collect();
    for family in [
        "linear",
        "polynomial",
        "nearest-neighbors",
        "smoothing-spline",
        "spline",
        "thin-plate",
        "ridge",
        "lasso",
    ] {
        assert!(families.contains(&family), "{family} missing: {families:?}");
    }
    insta::assert_snapshot!("spec_schema", schema_text());
}

#[test]
fn a_general_purpose_validator_accepts_the_demo_specs_and_rejects_a_typo() {
    if let Some(why) = util::python_missing(
        "tomllib, jsonschema",
        "python3 -m pip install jsonschema==4.26.0",
    ) {
        util::skip_reference("schema: the jsonschema validation", &why);
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let schema = dir.path().join("schema.json");
    std::fs::write(&schema, schema_text()).unwrap();
    let root = util::crate_root();
    let demo = std::fs::read_to_string(root.join("specs/heat-demand.toml")).unwrap();
    let typo = dir.path().join("typo.toml");
    std::fs::write(&typo, demo.replacen("repeats = 3", "repeat = 3", 1)).unwrap();
    let specs = [
        root.join("specs/heat-demand.toml"),
        root.join("specs/heat-demand-simulation.toml"),
        typo.clone(),
    ];
    let output = Command::new("python3")
        .arg(root.join("tests/fixtures/schema/check_specs.py"))
        .arg(&schema)
        .args(&specs)
        .output()
        .expect("python3 could not be started");
    assert!(output.status.success(), "{}", util::stderr_of(&output));
    let lines: Vec<String> = util::stdout_of(&output).lines().map(String::from).collect();
    assert_eq!(lines.len(), 3, "{lines:?}");
    assert!(lines[0].starts_with("ok "), "{}", lines[0]);
    assert!(lines[1].starts_with("ok "), "{}", lines[1]);
    assert!(
        lines[2].starts_with("invalid ") && lines[2].contains("'repeat'"),
        "the misspelt key must be named: {}",
        lines[2]
    );
}
