//! Parquet tables: the same rows as a CSV file give the same numbers, nulls
//! are missing cells, and a damaged or mistyped file is bad input naming
//! the file (docs/spec.md, "Parquet tables").
//!
//! Fixture: `tests/fixtures/parquet/`, one invented table written as CSV and
//! as Parquet (plain and Snappy-compressed, plus a truncated copy) by its
//! `make_fixture.py` with pyarrow 22.0.0.

use std::path::Path;

use serde_json::Value;

use crate::util;

fn copy_fixture(dir: &Path) {
    let fixture = util::crate_root().join("tests/fixtures/parquet");
    for name in [
        "table.csv",
        "table.parquet",
        "snappy.parquet",
        "truncated.parquet",
    ] {
        std::fs::copy(fixture.join(name), dir.join(name))
            .unwrap_or_else(|e| panic!("cannot copy {name}: {e}"));
    }
}

fn write_spec(dir: &Path, table: &str, features: &str) {
    let spec = format!(
        "[experiment]\nname = \"orchard\"\nseed = 11\n\n[data]\ntable = \"{table}\"\n\
         target = \"yield_kg\"\nfeatures = {features}\nkey = \"tree\"\nmissing = \"drop-rows\"\n\n\
         [split]\nholdout = 0.25\nmethod = \"kfold\"\nfolds = 4\n\n\
         [[candidate]]\nfamily = \"polynomial\"\nfeatures = [\"sun_h\"]\ndegree = [1, 2, 3]\n\n\
         [[candidate]]\nfamily = \"linear\"\n\n\
         [[candidate]]\nfamily = \"nearest-neighbors\"\nk = [1, 3, 5]\n"
    );
    std::fs::write(dir.join("spec.toml"), spec).unwrap();
}

const FEATURES: &str = "[\"sun_h\", \"leaf_m2\", \"shaded\"]";

fn run_on(table: &str) -> (Value, String) {
    let dir = tempfile::tempdir().unwrap();
    copy_fixture(dir.path());
    write_spec(dir.path(), table, FEATURES);
    let results = util::run_results(dir.path(), "orchard");
    let report = std::fs::read_to_string(dir.path().join("out/orchard/report.md")).unwrap();
    (results, report)
}

#[test]
fn parquet_and_csv_of_the_same_rows_give_the_same_numbers() {
    let (csv, _) = run_on("table.csv");
    let (parquet, report) = run_on("table.parquet");
    let (snappy, _) = run_on("snappy.parquet");
    for other in [&parquet, &snappy] {
        // Every number of the selection, bit for bit (shortest round-trip
        // JSON), and the same rows kept: the two nulls of `sun_h` are missing
        // cells, dropped as the CSV's empty cells are.
        for field in [
            "candidates",
            "chosen",
            "choice",
            "test_score",
            "final",
            "rows",
            "split",
        ] {
            assert_eq!(csv[field], other[field], "{field}");
        }
        assert_eq!(csv["rows"]["dropped"], 2);
        assert_eq!(csv["data"]["missing"], other["data"]["missing"]);
    }
    // The data digest is of each file's own bytes.
    let digest = |name: &str| {
        blake3::hash(
            &std::fs::read(util::crate_root().join("tests/fixtures/parquet").join(name)).unwrap(),
        )
        .to_hex()
        .to_string()
    };
    assert_eq!(csv["data"]["digest"], digest("table.csv"));
    assert_eq!(parquet["data"]["digest"], digest("table.parquet"));
    assert_eq!(snappy["data"]["digest"], digest("snappy.parquet"));
    assert_eq!(parquet["data"]["table"], "table.parquet");
    assert!(
        report.contains("table.parquet"),
        "the report names the file"
    );
}

#[test]
fn a_truncated_parquet_file_is_bad_input_naming_it() {
    let dir = tempfile::tempdir().unwrap();
    copy_fixture(dir.path());
    write_spec(dir.path(), "truncated.parquet", FEATURES);
    let output = util::run_spec(dir.path(), "run");
    let err = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(2), "{err}");
    assert!(err.contains("truncated.parquet"), "{err}");
    assert!(err.contains("cannot read the Parquet file"), "{err}");
    assert!(!err.contains("panicked"), "{err}");
}

#[test]
fn a_text_column_of_parquet_is_categorical_as_in_csv() {
    // A text column named among the features is read as categorical labels
    // from either format (docs/spec.md, "Categorical features"): the 48
    // distinct tree names give 47 indicator columns, more than a fold of 25
    // training rows can fit: linear is set aside as infeasible, with the
    // same reason and every other number the same, from both formats.
    let mut said = Vec::new();
    for table in ["table.csv", "table.parquet"] {
        let dir = tempfile::tempdir().unwrap();
        copy_fixture(dir.path());
        write_spec(dir.path(), table, "[\"sun_h\", \"tree\"]");
        std::fs::write(
            dir.path().join("spec.toml"),
            std::fs::read_to_string(dir.path().join("spec.toml"))
                .unwrap()
                .replace("key = \"tree\"", "key = \"row_id\""),
        )
        .unwrap();
        let results = util::run_results(dir.path(), "orchard");
        let linear = util::candidate(&results, "linear");
        let reason = linear["infeasible"][0]["reason"]
            .as_str()
            .unwrap_or_default();
        assert!(
            reason.contains("needs at least 26 training rows"),
            "{linear}"
        );
        said.push(results["candidates"].clone());
    }
    assert_eq!(said[0], said[1]);
}

#[test]
fn the_scaffold_reads_a_parquet_table_and_its_spec_runs() {
    let dir = tempfile::tempdir().unwrap();
    copy_fixture(dir.path());
    let output = util::run_in(
        dir.path(),
        &[
            "new",
            "--table",
            "table.parquet",
            "--target",
            "yield_kg",
            "--output",
            "new.toml",
        ],
    );
    util::assert_success(&output);
    let spec = std::fs::read_to_string(dir.path().join("new.toml")).unwrap();
    assert!(spec.contains("table = \"table.parquet\""), "{spec}");
    assert!(spec.contains("target = \"yield_kg\""), "{spec}");
    assert!(spec.contains("\"leaf_m2\""), "{spec}");
    util::assert_success(&util::run_in(
        dir.path(),
        &[
            "run", "new.toml", "--out", "out", "--cache", "cache", "--quiet",
        ],
    ));
}
