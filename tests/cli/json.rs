//! `--json` on `run`, `verify`, `plan` and `compare`: stdout is exactly one
//! JSON object (also when the command fails), its fields are the ones
//! docs/json.md lists (every documented field appears, no undocumented one
//! does), and each command's object is pinned by an insta snapshot with the
//! temporary folder and the digests redacted.

use std::collections::BTreeSet;
use std::path::Path;
use std::process::Output;

use serde_json::Value;

use crate::util;

// ---------------------------------------------------------------------------
// Small experiments, fast to run.

/// A smooth invented table: `y` follows a curve in `x`, `z` is a second,
/// weakly related feature, `t` a time stamp; the wiggle in `y` is fixed, not
/// random, so every run reads the same bytes.
fn table() -> String {
    let mut text = String::from("id,t,x,z,y\n");
    for i in 0..60 {
        let x = f64::from(i) * 0.1;
        let z = f64::from((i * 7) % 11) / 10.0;
        let y = 2.0 + x - 0.3 * x * x + 0.2 * z + 0.15 * (f64::from(i) * 2.3).sin();
        text.push_str(&format!("r{i:02},{i},{x:.1},{z:.1},{y:.4}\n"));
    }
    text
}

/// A spec reading `table.csv`, its parts given as TOML lines; what the two
/// experiments share (the target, the key, the choice) is written here once.
fn table_spec(name: &str, seed: u64, features: &str, split: &str, candidates: &str) -> String {
    format!(
        r#"
[experiment]
name = "{name}"
seed = {seed}

[data]
table = "table.csv"
target = "y"
features = {features}
key = "id"

[split]
method = "kfold"
{split}

{candidates}

[choose]
metric = "mse"
rule = "one-se"

[report]
formats = ["markdown"]
"#
    )
}

/// The first experiment: four candidates, 4 folds repeated twice.
fn spec_a() -> String {
    table_spec(
        "json-a",
        11,
        r#"["x", "z"]"#,
        "holdout = 0.2\nfolds = 4\nrepeats = 2",
        r#"
[[candidate]]
family = "polynomial"
features = ["x"]
degree = [1, 2, 3]

[[candidate]]
family = "nearest-neighbors"
k = [3, 5]

[[candidate]]
family = "linear"

[[candidate]]
family = "polynomial"
label = "flex"
features = ["x"]
degree = [4]
"#,
    )
}

/// The second experiment differs from the first in every way `compare`
/// names: the seed, the holdout, the folds and repeats, `[data] features`,
/// one candidate's features, one grid, a family removed and one added, and
/// a label (`flex`) kept over another family.
fn spec_b() -> String {
    table_spec(
        "json-b",
        12,
        r#"["x"]"#,
        "holdout = 0.25\nfolds = 5\nrepeats = 1",
        r#"
[[candidate]]
family = "polynomial"
features = ["x"]
degree = [2, 3, 4]

[[candidate]]
family = "nearest-neighbors"
k = [3, 5]

[[candidate]]
family = "ridge"
penalty = [0.1, 1]

[[candidate]]
family = "smoothing-spline"
label = "flex"
features = ["x"]
df = [4]
"#,
    )
}

/// A small simulation spec, for `plan` of a `[simulate]` spec.
const SPEC_SIMULATION: &str = r#"
[experiment]
name = "json-sim"
seed = 5

[simulate]
truth = "1 + x - 0.3*x*x"
target = "y"
inputs = { x = { uniform = [0, 6] } }
noise_sd = 0.5
train_size = 30
replicates = 3
test_grid = 11

[split]
holdout = 0
method = "kfold"
folds = 3

[[candidate]]
family = "polynomial"
degree = [1, 2]

[choose]
metric = "mse"
rule = "lowest"
"#;

/// Writes the table and the specs `a.toml`, `b.toml` and `sim.toml` into `dir`.
fn write_tree(dir: &Path) {
    std::fs::write(dir.join("table.csv"), table()).unwrap();
    std::fs::write(dir.join("a.toml"), spec_a()).unwrap();
    std::fs::write(dir.join("b.toml"), spec_b()).unwrap();
    std::fs::write(dir.join("sim.toml"), SPEC_SIMULATION).unwrap();
}

/// Runs `heldout` in `dir` with the cache inside it, never the caller's.
fn heldout(dir: &Path, args: &[&str]) -> Output {
    util::heldout()
        .current_dir(dir)
        .args(args)
        .env_remove("HELDOUT_CACHE")
        .output()
        .expect("the heldout binary could not be started")
}

/// Stdout parsed as one JSON object: it must hold that object and nothing
/// else (serde_json refuses trailing text), and its exit code must match the
/// process's.
fn object(output: &Output) -> Value {
    let stdout = util::stdout_of(output);
    let value: Value = serde_json::from_str(&stdout).unwrap_or_else(|e| {
        panic!(
            "stdout is not one JSON object ({e}):\n{stdout}\nstderr:\n{}",
            util::stderr_of(output)
        )
    });
    assert!(value.is_object(), "{stdout}");
    assert_eq!(value["schema"], "heldout-summary/1");
    assert_eq!(
        value["exit_code"].as_i64(),
        output.status.code().map(i64::from),
        "{stdout}"
    );
    value
}

/// Replaces the temporary folder in every string of `value` by `[tmp]`.
fn redact_dir(value: &mut Value, dir: &Path) {
    let prefix = dir.display().to_string();
    match value {
        Value::String(text) => *text = text.replace(&prefix, "[tmp]"),
        Value::Array(items) => items.iter_mut().for_each(|v| redact_dir(v, dir)),
        Value::Object(map) => map.values_mut().for_each(|v| redact_dir(v, dir)),
        _ => {}
    }
}

/// `text` with every short digest in a code span (`` `0123456789abcdef` ``)
/// replaced by `` `[digest]` ``: they follow the spec's canonical form and
/// the templates, which other changes move.
fn short_digests_redacted(text: &str) -> String {
    let mut out = String::new();
    let mut rest = text;
    while let Some(at) = rest.find('`') {
        let candidate = rest[at + 1..].get(..17);
        let is_digest = candidate
            .is_some_and(|c| c.ends_with('`') && c[..16].chars().all(|ch| ch.is_ascii_hexdigit()));
        if is_digest {
            out.push_str(&rest[..at]);
            out.push_str("`[digest]`");
            rest = &rest[at + 18..];
        } else {
            out.push_str(&rest[..=at]);
            rest = &rest[at + 1..];
        }
    }
    out.push_str(rest);
    out
}

// ---------------------------------------------------------------------------
// The documented fields.

/// The field paths docs/json.md lists for `command`: the fields of every
/// object, then the command's own section.
fn documented(command: &str) -> Vec<String> {
    let docs = std::fs::read_to_string(util::crate_root().join("docs/json.md")).unwrap();
    let mut fields = Vec::new();
    let mut section = String::new();
    for line in docs.lines() {
        if let Some(heading) = line.strip_prefix("## ") {
            section = heading.to_string();
        } else if let Some(row) = line.strip_prefix("| `") {
            let wanted = section == "Fields of every object" || section == format!("`{command}`");
            if wanted {
                fields.push(row.split('`').next().unwrap().to_string());
            }
        }
    }
    assert!(fields.len() > 6, "no fields documented for {command}");
    fields
}

/// Whether `path` (`a.b`, `a[].b`) leads to a value other than `null` in
/// `value`: `Ok(true)` if it does somewhere, `Ok(false)` if every way there
/// ends at a `null` or an empty list, `Err` if an object on the way lacks
/// the key (documented fields are always present).
fn reaches(value: &Value, path: &str) -> Result<bool, String> {
    fn walk(value: &Value, parts: &[&str]) -> Result<bool, String> {
        let Some((first, rest)) = parts.split_first() else {
            return Ok(!value.is_null());
        };
        if value.is_null() {
            return Ok(false);
        }
        let (key, each) = match first.strip_suffix("[]") {
            Some(key) => (key, true),
            None => (*first, false),
        };
        let field = value
            .get(key)
            .ok_or_else(|| format!("no field `{key}` in {value}"))?;
        if !each {
            return walk(field, rest);
        }
        let items = field
            .as_array()
            .ok_or_else(|| format!("`{key}` is not a list"))?;
        let mut any = false;
        for item in items {
            any |= walk(item, rest)?;
        }
        Ok(any)
    }
    let parts: Vec<&str> = path.split('.').collect();
    walk(value, &parts)
}

/// Every field path in `value`, lists as `[]`, not descending below a
/// documented field that has no documented fields of its own.
fn paths(value: &Value, prefix: &str, documented: &[String], out: &mut BTreeSet<String>) {
    let leaf = !prefix.is_empty()
        && documented.iter().any(|d| d == prefix)
        && !documented
            .iter()
            .any(|d| d.starts_with(&format!("{prefix}.")) || d.starts_with(&format!("{prefix}[]")));
    if leaf {
        return;
    }
    match value {
        Value::Object(map) => {
            for (key, v) in map {
                let path = if prefix.is_empty() {
                    key.clone()
                } else {
                    format!("{prefix}.{key}")
                };
                out.insert(path.clone());
                paths(v, &path, documented, out);
            }
        }
        Value::Array(items) => {
            for item in items {
                paths(item, &format!("{prefix}[]"), documented, out);
            }
        }
        _ => {}
    }
}

/// Every field docs/json.md lists for `command` is present in every object
/// (and not null in at least one), and every field of the objects is listed.
fn assert_documented(command: &str, objects: &[&Value]) {
    let fields = documented(command);
    for field in &fields {
        let mut seen = false;
        for object in objects {
            match reaches(object, field) {
                Ok(found) => seen |= found,
                Err(why) => panic!("{command}: documented field `{field}` missing: {why}"),
            }
        }
        assert!(
            seen,
            "{command}: `{field}` is null or empty in every object tested"
        );
    }
    let mut found = BTreeSet::new();
    for object in objects {
        paths(object, "", &fields, &mut found);
    }
    let undocumented: Vec<&String> = found.iter().filter(|p| !fields.contains(p)).collect();
    assert!(
        undocumented.is_empty(),
        "{command}: fields missing from docs/json.md: {undocumented:?}"
    );
}

// ---------------------------------------------------------------------------
// run

#[test]
fn run_json_names_the_kept_setting_its_scores_and_where_everything_went() {
    let dir = tempfile::tempdir().unwrap();
    write_tree(dir.path());
    // Absolute folders, as a script would pass them: redacted below.
    let (out, cache) = (dir.path().join("out"), dir.path().join("cache"));
    let (out, cache) = (out.to_str().unwrap(), cache.to_str().unwrap());
    let args = ["run", "a.toml", "--json", "--out", out, "--cache", cache];
    let output = heldout(dir.path(), &args);
    util::assert_success(&output);
    let mut first = object(&output);
    // The human table is gone from stdout; the notes stay on stderr.
    assert!(util::stderr_of(&output).contains("fits: "));

    let results = util::read_json(&dir.path().join("out/json-a/results.json"));
    let entry = &first["specs"][0];
    assert_eq!(entry["status"], "done");
    assert_eq!(entry["kept"]["id"], results["chosen"]);
    let kept = util::candidate(&results, results["chosen"].as_str().unwrap());
    assert_eq!(entry["kept"]["cv_score"], kept["cv_score"]);
    assert_eq!(entry["kept"]["cv_se"], kept["cv_se"]);
    assert_eq!(entry["kept"]["test_score"], results["test_score"]);
    assert_eq!(entry["receipt"], "a.receipt.toml");
    assert!(dir.path().join("a.receipt.toml").is_file());
    // 4 candidates × (8 folds + 1 full fit), none cached yet.
    assert_eq!(entry["fits"]["computed"], 36);
    assert_eq!(entry["fits"]["reused"], 0);

    // Again: every fit comes from the cache.
    let again = object(&heldout(dir.path(), &args));
    assert_eq!(again["specs"][0]["fits"]["computed"], 0);
    assert_eq!(again["specs"][0]["fits"]["reused"], 36);

    redact_dir(&mut first, dir.path());
    assert_eq!(first["specs"][0]["output_dir"], "[tmp]/out/json-a");
    insta::assert_json_snapshot!("run_json", first);
}

#[test]
fn run_json_lists_every_spec_and_goes_on_past_the_one_that_fails() {
    let dir = tempfile::tempdir().unwrap();
    write_tree(dir.path());
    std::fs::write(
        dir.path().join("bad.toml"),
        spec_a().replace("folds = 4", "folds = 1"),
    )
    .unwrap();
    let output = heldout(
        dir.path(),
        &[
            "run", "a.toml", "b.toml", "bad.toml", "sim.toml", "--json", "--cache", "cache",
        ],
    );
    assert_eq!(
        output.status.code(),
        Some(2),
        "{}",
        util::stderr_of(&output)
    );
    let ran = object(&output);
    let specs = ran["specs"].as_array().unwrap();
    let status: Vec<(&str, &str)> = specs
        .iter()
        .map(|s| (s["spec"].as_str().unwrap(), s["status"].as_str().unwrap()))
        .collect();
    assert_eq!(
        status,
        [
            ("a.toml", "done"),
            ("b.toml", "done"),
            ("bad.toml", "error"),
            ("sim.toml", "done")
        ]
    );
    let failed = &specs[2]["error"];
    assert_eq!(failed["exit_code"], 2);
    let message = failed["message"].as_str().unwrap();
    assert!(message.starts_with("bad.toml: "), "{message}");
    assert!(message.contains("folds"), "{message}");
    // The command's own error names the failed spec among all of them.
    let closing = ran["error"]["message"].as_str().unwrap();
    assert!(
        closing.starts_with("1 of 4 specs failed: bad.toml"),
        "{closing}"
    );
    assert_eq!(ran["error"]["exit_code"], 2);
    // stderr says what it says without --json.
    assert!(util::stderr_of(&output).contains(&format!("error: {message}")));

    // A shard computes fits and assembles nothing (an empty cache: the run
    // above filled the first one with every fit of sim.toml).
    let sharded = object(&heldout(
        dir.path(),
        &[
            "run",
            "sim.toml",
            "--json",
            "--cache",
            "cache-shard",
            "--shard",
            "2/2",
        ],
    ));
    let entry = &sharded["specs"][0];
    assert_eq!(entry["status"], "shard");
    assert_eq!(entry["shard"]["index"], 2);
    assert_eq!(entry["shard"]["count"], 2);
    assert!(entry["kept"].is_null() && entry["output_dir"].is_null());
    assert!(entry["fits"]["computed"].as_u64().unwrap() > 0);

    // An argument error before any spec: an empty list and the error.
    let output = heldout(
        dir.path(),
        &[
            "run", "a.toml", "--json", "--shard", "3/2", "--cache", "cache",
        ],
    );
    assert_eq!(output.status.code(), Some(2));
    let refused = object(&output);
    assert_eq!(refused["specs"], serde_json::json!([]));
    assert!(refused["error"]["message"]
        .as_str()
        .unwrap()
        .contains("--shard 3/2"));
    assert_documented("run", &[&ran, &sharded, &refused]);
}

// ---------------------------------------------------------------------------
// verify

/// Replaces the `blake3 = "…"` line that follows `marker` in a receipt.
fn set_receipt_digest(receipt: &str, marker: &str, digest: &str) -> String {
    let at = receipt
        .find(marker)
        .unwrap_or_else(|| panic!("{marker} not in the receipt"));
    let line = at + receipt[at..].find("blake3 = \"").unwrap() + "blake3 = \"".len();
    format!("{}{digest}{}", &receipt[..line], &receipt[line + 64..])
}

#[test]
fn verify_json_gives_the_verdict_and_the_first_difference_in_parts() {
    let dir = tempfile::tempdir().unwrap();
    write_tree(dir.path());
    let verify = |specs: &[&str]| {
        let mut args = vec!["verify", "--json", "--cache", "cache"];
        args.extend(specs);
        heldout(dir.path(), &args)
    };
    util::assert_success(&heldout(
        dir.path(),
        &["run", "a.toml", "--cache", "cache", "-q"],
    ));
    let identical = object(&verify(&["a.toml"]));
    assert_eq!(identical["specs"][0]["verdict"], "identical");
    assert_eq!(identical["specs"][0]["differences"], 0);

    // Tamper with one fold score in results.json (position 5: the second fold
    // of the second repeat) and make the receipt agree with the tampered file,
    // so that verify names that number, as it does after a real change.
    let results_path = dir.path().join("out/json-a/results.json");
    let mut results = util::read_json(&results_path);
    let entry = results["candidates"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|c| c["id"] == "polynomial/degree=2")
        .unwrap();
    let before = entry["fold_scores"][5].as_f64().unwrap();
    entry["fold_scores"][5] = Value::from(before * 1.5);
    let text = serde_json::to_string_pretty(&results).unwrap() + "\n";
    std::fs::copy(&results_path, dir.path().join("original.json")).unwrap();
    std::fs::write(&results_path, &text).unwrap();
    let receipt_path = dir.path().join("a.receipt.toml");
    let receipt = std::fs::read_to_string(&receipt_path).unwrap();
    let receipt = set_receipt_digest(
        &receipt,
        "path = \"results.json\"",
        &blake3::hash(text.as_bytes()).to_hex(),
    );
    let receipt = set_receipt_digest(&receipt, "id = \"polynomial/degree=2\"", &"0".repeat(64));
    std::fs::write(&receipt_path, receipt).unwrap();

    let output = verify(&["a.toml"]);
    assert_eq!(
        output.status.code(),
        Some(1),
        "{}",
        util::stderr_of(&output)
    );
    let differs = object(&output);
    assert!(differs["error"].is_null(), "a difference is a verdict");
    let entry = &differs["specs"][0];
    assert_eq!(entry["verdict"], "differs");
    let first = &entry["first_difference"];
    assert_eq!(first["what"], "candidate");
    assert_eq!(first["name"], "polynomial/degree=2");
    assert_eq!(first["number"], "fold_scores");
    assert_eq!(first["place"], "fold 2 of repeat 2");
    assert_eq!(first["before"].as_f64(), Some(before * 1.5));
    assert_eq!(first["after"].as_f64(), Some(before));
    assert!(first["ulps"].as_u64().unwrap() > 1000);
    // The message is the line verify prints without --json.
    let text = util::stdout_of(&heldout(
        dir.path(),
        &["verify", "a.toml", "--cache", "cache"],
    ));
    let line = format!(
        "  first difference: {}\n",
        first["message"].as_str().unwrap()
    );
    assert!(text.contains(&line), "{text}");
    // compare names the fold the same way.
    let compared = object(&heldout(
        dir.path(),
        &[
            "compare",
            "--json",
            "original.json",
            "out/json-a/results.json",
        ],
    ));
    let folds = &compared["comparison"]["fold_scores_moved"][0];
    assert_eq!(folds["setting"], "polynomial/degree=2");
    assert_eq!(folds["largest"]["fold"], "fold 2 of repeat 2");
    assert_eq!(folds["largest"]["position"], 5);
    insta::assert_json_snapshot!("verify_json_differs", differs);

    // A spec without a receipt cannot be checked: verdict `error`, exit 2.
    let output = verify(&["b.toml"]);
    assert_eq!(output.status.code(), Some(2));
    let failed = object(&output);
    let entry = &failed["specs"][0];
    assert_eq!(entry["verdict"], "error");
    assert_eq!(entry["receipt"], "b.receipt.toml");
    let message = entry["error"]["message"].as_str().unwrap();
    assert!(
        message.starts_with("b.toml: receipt: no receipt at b.receipt.toml"),
        "{message}"
    );
    assert_documented("verify", &[&identical, &differs, &failed]);
}

// ---------------------------------------------------------------------------
// plan

#[test]
fn plan_json_counts_fits_and_cached_fits_per_candidate() {
    let dir = tempfile::tempdir().unwrap();
    write_tree(dir.path());
    let plan = |spec: &str| {
        object(&heldout(
            dir.path(),
            &["plan", spec, "--json", "--cache", "cache"],
        ))
    };
    let cold = plan("a.toml");
    let candidates = cold["plan"]["candidates"].as_array().unwrap();
    assert_eq!(candidates.len(), 4);
    for c in candidates {
        assert_eq!(
            (c["fits"].as_u64(), c["cached"].as_u64()),
            (Some(9), Some(0))
        );
        assert_eq!(c["to_fit"], 9);
    }
    assert_eq!(cold["plan"]["total"]["to_fit"], 36);
    // Its text form says the same.
    let text = util::stdout_of(&heldout(
        dir.path(),
        &["plan", "a.toml", "--cache", "cache"],
    ));
    assert!(
        text.contains("36 fits (one per candidate and fold"),
        "{text}"
    );
    insta::assert_json_snapshot!("plan_json", cold);

    util::assert_success(&heldout(
        dir.path(),
        &["run", "a.toml", "--cache", "cache", "-q"],
    ));
    let warm = plan("a.toml");
    assert_eq!(warm["plan"]["total"]["cached"], 36);
    assert_eq!(warm["plan"]["total"]["to_fit"], 0);
    assert_eq!(warm["plan"]["candidates"][0]["work"], 0);

    let simulation = plan("sim.toml");
    assert_eq!(simulation["plan"]["kind"], "simulation");
    assert_eq!(simulation["plan"]["simulation"]["replicates"], 3);
    assert!(simulation["plan"]["rows"].is_null());
    // 3 replicates × (3 folds + 1 full fit).
    assert_eq!(simulation["plan"]["total"]["fits"], 12);

    let missing = plan("missing.toml");
    assert_eq!(missing["exit_code"], 2);
    assert!(missing["plan"].is_null());
    assert!(missing["error"]["message"]
        .as_str()
        .unwrap()
        .starts_with("missing.toml: cannot read the spec"));
    assert_documented("plan", &[&cold, &warm, &simulation, &missing]);
}

// ---------------------------------------------------------------------------
// compare

#[test]
fn compare_names_every_kind_of_setup_change_in_markdown_and_json() {
    let dir = tempfile::tempdir().unwrap();
    write_tree(dir.path());
    for spec in ["a.toml", "b.toml"] {
        util::assert_success(&heldout(
            dir.path(),
            &["run", spec, "--cache", "cache", "-q"],
        ));
    }
    let files = ["out/json-a/results.json", "out/json-b/results.json"];
    let output = heldout(dir.path(), &["compare", files[0], files[1]]);
    util::assert_success(&output);
    let text = util::stdout_of(&output);
    for line in [
        "| split.seed | 11 | 12 |",
        "| split.holdout | 0.2 | 0.25 |",
        "| split.folds | 4 | 5 |",
        "| split.repeats | 2 | 1 |",
        "| data.features | x, z | x |",
        "- Families added: `ridge`, `smoothing-spline`.",
        "- Families removed: `linear`.",
        "- New candidate `ridge` (ridge on x): 2 settings.",
        "- Candidate `linear` removed (linear on x, z): 1 setting.",
        "- `polynomial` grid: added `degree=4`; removed `degree=1`.",
        "- `nearest-neighbors`: features x, z → x.",
        "- `flex`: family `polynomial` → `smoothing-spline`.",
        "- `flex` grid: added `df=4`; removed `degree=4`.",
    ] {
        assert!(text.contains(line), "missing {line:?} in:\n{text}");
    }
    assert!(!text.contains("split.method"), "{text}");
    insta::assert_snapshot!("compare_setup_changes", short_digests_redacted(&text));

    let output = heldout(dir.path(), &["compare", "--json", files[0], files[1]]);
    util::assert_success(&output);
    let mut compared = object(&output);
    let c = &compared["comparison"];
    let settings: Vec<&str> = c["setup_changes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["setting"].as_str().unwrap())
        .collect();
    assert_eq!(
        settings,
        [
            "split.seed",
            "split.holdout",
            "split.folds",
            "split.repeats",
            "data.features"
        ]
    );
    assert_eq!(
        c["families"]["added"],
        serde_json::json!(["ridge", "smoothing-spline"])
    );
    assert_eq!(
        c["candidates"]["changed"][1]["candidate"],
        "nearest-neighbors"
    );
    assert_eq!(
        c["candidates"]["changed"][1]["features"],
        serde_json::json!({"before": ["x", "z"], "after": ["x"]})
    );
    let inputs: Vec<&str> = c["changed_inputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["input"].as_str().unwrap())
        .collect();
    assert_eq!(inputs, ["spec", "folds"]);
    // The Markdown counts the numbers the JSON lists.
    let moved = c["moved"].as_array().unwrap().len();
    assert!(text.contains(&format!("{moved} numbers moved")), "{text}");

    // A file that is not there: the error, and no comparison.
    let output = heldout(dir.path(), &["compare", "--json", "nowhere.json", files[1]]);
    assert_eq!(output.status.code(), Some(2));
    let failed = object(&output);
    assert!(failed["comparison"].is_null());
    assert!(failed["error"]["message"]
        .as_str()
        .unwrap()
        .starts_with("nowhere.json: cannot read the results"));
    assert_eq!(c["fold_scores_compared"], false);
    assert!(c["fold_scores_moved"].as_array().unwrap().is_empty());
    assert!(
        text.contains("Fold scores are not compared fold by fold"),
        "{text}"
    );

    // The same split over slightly other data: fold scores pair up, and the
    // fold that moved most is named within its repeat.
    let mut lines: Vec<String> = table().lines().map(str::to_string).collect();
    for line in lines.iter_mut().skip(1).step_by(5) {
        let (head, y) = line.rsplit_once(',').unwrap();
        let y: f64 = y.parse().unwrap();
        *line = format!("{head},{:.4}", y + 0.05);
    }
    std::fs::write(dir.path().join("table2.csv"), lines.join("\n") + "\n").unwrap();
    let spec = spec_a()
        .replace("name = \"json-a\"", "name = \"json-a2\"")
        .replace("table.csv", "table2.csv");
    std::fs::write(dir.path().join("a2.toml"), spec).unwrap();
    util::assert_success(&heldout(
        dir.path(),
        &["run", "a2.toml", "--cache", "cache", "-q"],
    ));
    let output = heldout(
        dir.path(),
        &["compare", "--json", files[0], "out/json-a2/results.json"],
    );
    let nudged = object(&output);
    let c = &nudged["comparison"];
    assert_eq!(c["fold_scores_compared"], true);
    assert_eq!(c["changed_inputs"][0]["input"], "data");
    let folds = c["fold_scores_moved"].as_array().unwrap();
    assert!(!folds.is_empty());
    for f in folds {
        let position = f["largest"]["position"].as_u64().unwrap();
        let name = format!("fold {} of repeat {}", position % 4 + 1, position / 4 + 1);
        assert_eq!(f["largest"]["fold"], name.as_str());
    }
    assert_documented("compare", &[&compared, &failed, &nudged]);

    // Digests follow the spec's canonical form and the tool; pin the rest.
    for input in compared["comparison"]["changed_inputs"]
        .as_array_mut()
        .unwrap()
    {
        for side in ["before", "after"] {
            assert_eq!(input[side].as_str().unwrap().len(), 64);
            input[side] = Value::from("[digest]");
        }
    }
    insta::assert_json_snapshot!("compare_json", compared);
}
