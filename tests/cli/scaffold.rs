//! `heldout new`: the scaffolded spec loads and runs as written, reads the
//! table the way its comments say, and refuses bad requests with exit 2.

use std::path::Path;

use crate::util;

/// 60 invented rows: a unique text id, an ISO date, two numeric features, a
/// constant column, and the target with one empty cell (line 11). The noise
/// keeps |correlation| of temp and load below 0.99 (0.964), which the
/// scaffold would take for a leak.
fn table() -> String {
    let mut text = String::from("site_id,reading_date,temp,wind,unit,load\n");
    for row in 0..60 {
        let temp = -5.0 + (row * 13 % 60) as f64 * 0.4;
        let wind = (row * 7 % 11) as f64 * 0.9;
        let load = if row == 9 {
            String::new()
        } else {
            format!(
                "{:.3}",
                40.0 - 1.2 * temp + 0.3 * wind + (row * 7 % 5) as f64 * 1.5
            )
        };
        text.push_str(&format!(
            "S{row:03},2026-01-{:02},{temp:.1},{wind:.1},1,{load}\n",
            row % 28 + 1
        ));
    }
    text
}

fn new_in(dir: &Path, args: &[&str]) -> std::process::Output {
    let mut all = vec!["new", "--table", "data.csv"];
    all.extend_from_slice(args);
    util::run_in(dir, &all)
}

#[test]
fn the_scaffold_reads_the_table_as_its_comments_say_and_runs() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), table()).unwrap();
    let output = new_in(
        dir.path(),
        &["--target", "load", "--output", "specs/first.toml"],
    );
    assert_eq!(
        output.status.code(),
        Some(0),
        "{}",
        util::stderr_of(&output)
    );
    let spec = std::fs::read_to_string(dir.path().join("specs/first.toml")).unwrap();
    for line in [
        "name = \"data\"",
        "table = \"../data.csv\"",
        "target = \"load\"",
        "features = [\"temp\", \"wind\"]",
        "key = \"site_id\"",
        "# order = \"reading_date\"",
        "missing = \"drop-rows\"",
        "holdout = 0.2",
        "folds = 5",
        "family = \"ridge\"",
    ] {
        assert!(spec.contains(line), "the spec lacks {line:?}:\n{spec}");
    }
    assert!(spec.contains("unit (constant)"), "{spec}");

    let run = util::run_in(
        dir.path(),
        &["run", "specs/first.toml", "--out", "out", "--quiet"],
    );
    assert_eq!(run.status.code(), Some(0), "{}", util::stderr_of(&run));
    let results = util::read_json(&dir.path().join("out/data/results.json"));
    assert_eq!(results["rows"]["total"], 59);
    assert_eq!(results["rows"]["dropped"], 1);
    let families: Vec<&str> = results["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["family"].as_str().unwrap())
        .collect();
    for family in [
        "linear",
        "polynomial",
        "smoothing-spline",
        "nearest-neighbors",
        "ridge",
    ] {
        assert!(
            families.contains(&family),
            "{family} missing from {families:?}"
        );
    }
}

#[test]
fn printing_twice_gives_the_same_bytes_and_matches_the_written_file() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), table()).unwrap();
    let first = new_in(dir.path(), &["--target", "load"]);
    let second = new_in(dir.path(), &["--target", "load"]);
    assert_eq!(first.status.code(), Some(0));
    assert_eq!(first.stdout, second.stdout);
    let written = new_in(dir.path(), &["--target", "load", "-o", "here.toml"]);
    assert_eq!(written.status.code(), Some(0));
    assert_eq!(
        std::fs::read(dir.path().join("here.toml")).unwrap(),
        first.stdout
    );
}

#[test]
fn bad_requests_exit_2_and_keep_existing_files() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), table()).unwrap();

    let misspelt = new_in(dir.path(), &["--target", "lod"]);
    assert_eq!(misspelt.status.code(), Some(2));
    let stderr = util::stderr_of(&misspelt);
    assert!(
        stderr.contains("no column named \"lod\" (did you mean \"load\"?)"),
        "{stderr}"
    );

    let text_target = new_in(dir.path(), &["--target", "site_id"]);
    assert_eq!(text_target.status.code(), Some(2));
    assert!(util::stderr_of(&text_target).contains("holds a different text on every row"));

    std::fs::write(dir.path().join("kept.toml"), "mine").unwrap();
    let clash = new_in(dir.path(), &["--target", "load", "-o", "kept.toml"]);
    assert_eq!(clash.status.code(), Some(2));
    assert!(util::stderr_of(&clash).contains("pass --force"));
    assert_eq!(
        std::fs::read_to_string(dir.path().join("kept.toml")).unwrap(),
        "mine"
    );

    let missing = util::run_in(
        dir.path(),
        &["new", "--table", "nope.csv", "--target", "load"],
    );
    assert_eq!(missing.status.code(), Some(2));
    assert!(util::stderr_of(&missing).contains("nope.csv: cannot read the data table"));
}

/// 60 invented rows of a cold store: an ISO date per row (distinct), the
/// site as text of three levels, the outdoor temperature, the door openings
/// and the energy used (the target).
fn cold_store_table() -> String {
    let mut text = String::from("logged_on,site,outdoor_c,openings,energy_kwh\n");
    let sites = ["harbour", "airport", "hill"];
    for row in 0..60 {
        let site = sites[row * 7 % 3];
        let outdoor = -4.0 + (row * 11 % 60) as f64 * 0.45;
        let openings = (row * 5 % 13) as f64;
        let site_load = [30.0, 12.0, 0.0][row * 7 % 3];
        let energy = 200.0 + 3.5 * outdoor + 1.5 * openings + site_load + (row * 3 % 7) as f64;
        text.push_str(&format!(
            "2026-{:02}-{:02},{site},{outdoor:.2},{openings},{energy:.2}\n",
            row / 28 + 1,
            row % 28 + 1
        ));
    }
    text
}

#[test]
fn text_of_few_levels_becomes_a_categorical_feature_and_dates_an_order() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("data.csv"), cold_store_table()).unwrap();
    let output = new_in(
        dir.path(),
        &["--target", "energy_kwh", "--output", "first.toml"],
    );
    assert_eq!(
        output.status.code(),
        Some(0),
        "{}",
        util::stderr_of(&output)
    );
    let spec = std::fs::read_to_string(dir.path().join("first.toml")).unwrap();
    for line in [
        "features = [\"site\", \"outdoor_c\", \"openings\"]",
        "# Text of few levels, so categorical: site.",
        // A distinct date on every row is a time, not a row key.
        "# order = \"logged_on\"",
        "logged_on (looks like time; add it for a trend)",
    ] {
        assert!(spec.contains(line), "the spec lacks {line:?}:\n{spec}");
    }
    assert!(!spec.contains("key = "), "{spec}");
    // The one-feature candidates take a numeric feature.
    assert!(!spec.contains("features = [\"site\"]"), "{spec}");
    let run = util::run_in(
        dir.path(),
        &["run", "first.toml", "--out", "out", "--quiet"],
    );
    assert_eq!(run.status.code(), Some(0), "{}", util::stderr_of(&run));
    let results = util::read_json(&dir.path().join("out/data/results.json"));
    assert_eq!(results["data"]["categorical"][0]["column"], "site");
    assert_eq!(
        results["data"]["categorical"][0]["levels"],
        serde_json::json!(["airport", "harbour", "hill"])
    );
}
