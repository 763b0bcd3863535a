//! Same inputs, same bytes: outputs and receipts do not depend on the machine's
//! state (thread count, working directory, spec format, what the cache holds,
//! interrupted or concurrent runs, sharding), and the cache only ever saves
//! work, never changes a number.

use std::path::{Path, PathBuf};
use std::process::{Command, ExitStatus, Stdio};
use std::time::{Duration, Instant};

use tempfile::TempDir;

use crate::{demo, util};

/// Every task of the demo spec: 5 candidates × 341 (below).
const DEMO_FITS: usize = 1705;
/// The main selection's tasks alone: 5 candidates × (30 folds + 1 full fit);
/// the rest are nested cross-validation's.
const MAIN_FITS: usize = 155;
/// One demo candidate's fits: 10 folds × 3 repeats + 1 full fit, and the
/// same again inside each of the 10 outer folds of nested cross-validation:
/// 31 + 10 × 31.
const DEMO_FITS_PER_CANDIDATE: usize = 341;
/// Every task of the generated spec: 2 candidates × (30 folds + 1 full fit).
const SYNTHETIC_FITS: usize = 62;

/// A `heldout` command in `dir` that cannot pick up a cache folder from the
/// caller's environment (a test must never write outside its temporary dir).
fn command_in(dir: &Path, args: &[&str]) -> Command {
    let mut command = util::heldout();
    command
        .current_dir(dir)
        .args(args)
        .env_remove("HELDOUT_CACHE");
    command
}

/// Runs `heldout` with `args` in `dir`: (status, stdout, stderr).
fn heldout(dir: &Path, args: &[&str]) -> (ExitStatus, String, String) {
    let output = command_in(dir, args)
        .output()
        .expect("the heldout binary could not be started");
    (
        output.status,
        String::from_utf8_lossy(&output.stdout).into_owned(),
        String::from_utf8_lossy(&output.stderr).into_owned(),
    )
}

/// Runs `heldout` and insists that it succeeded; returns stderr.
fn heldout_ok(dir: &Path, args: &[&str]) -> String {
    let (status, stdout, stderr) = heldout(dir, args);
    assert!(
        status.success(),
        "heldout {args:?} in {} failed ({status}):\n{stdout}{stderr}",
        dir.display()
    );
    stderr
}

/// The demo spec and data in `dir` (repository layout), without the committed
/// receipt, so that a receipt found later was written by the test's own run.
fn demo_tree(dir: &Path) {
    demo::copy_demo(dir);
    std::fs::remove_file(dir.join("specs/heat-demand.receipt.toml")).unwrap();
}

/// The three files a run writes, as text.
#[derive(Debug, PartialEq, Eq)]
struct Artifacts {
    results: String,
    report: String,
    receipt: String,
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()))
}

/// Reads the outputs of experiment `name` under `out` and the receipt `receipt`.
fn artifacts(out: &Path, name: &str, receipt: &Path) -> Artifacts {
    Artifacts {
        results: read(&out.join(name).join("results.json")),
        report: read(&out.join(name).join("report.md")),
        receipt: read(receipt),
    }
}

/// The demo's artifacts in a tree laid out like the repository.
fn demo_artifacts(dir: &Path) -> Artifacts {
    artifacts(
        &dir.join("out"),
        "heat-demand",
        &dir.join("specs/heat-demand.receipt.toml"),
    )
}

/// A fresh tree with the demo, run once from its root with default settings.
fn demo_baseline() -> (TempDir, Artifacts) {
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    let stderr = heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]);
    assert_eq!(util::fit_counts(&stderr), (DEMO_FITS, 0), "a fresh cache");
    let found = demo_artifacts(dir.path());
    (dir, found)
}

/// Anything in a cache folder that is not a whole pack (left-over
/// temporaries, or files of another layout).
fn cache_strays(cache: &Path) -> Vec<PathBuf> {
    let mut found = Vec::new();
    for item in std::fs::read_dir(cache).unwrap() {
        let path = item.unwrap().path();
        if path.file_name().is_some_and(|n| n == "packs") {
            for file in std::fs::read_dir(&path).unwrap() {
                let file = file.unwrap().path();
                if file.extension().is_none_or(|e| e != "pack") {
                    found.push(file);
                }
            }
        } else {
            found.push(path);
        }
    }
    found
}

/// Writes an invented regression table of `rows` rows (a wavy curve plus
/// noise, from a fixed integer generator) and a spec using it as
/// `specs/wavy.toml` under `dir`. Degrees 1..12 and k ∈ {1, 5, 25} on one
/// feature, 10 × 3 folds: 62 fits whose cost grows with `rows`.
fn synthetic_tree(dir: &Path, rows: usize) {
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut uniform = move || {
        // xorshift64*: the same numbers on every platform.
        state ^= state >> 12;
        state ^= state << 25;
        state ^= state >> 27;
        (state.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut csv = String::with_capacity(rows * 24);
    csv.push_str("site,slope_deg,runoff_mm\n");
    for row in 0..rows {
        let x = uniform() * 40.0 - 20.0;
        let y = 12.0 + 3.0 * (x / 4.0).sin() + 0.02 * x * x + (uniform() - 0.5) * 2.0;
        csv.push_str(&format!("S{row:06},{x:.4},{y:.4}\n"));
    }
    std::fs::create_dir_all(dir.join("data")).unwrap();
    std::fs::write(dir.join("data/wavy.csv"), csv).unwrap();
    std::fs::create_dir_all(dir.join("specs")).unwrap();
    std::fs::write(
        dir.join("specs/wavy.toml"),
        r#"[experiment]
name = "wavy"
seed = 4242

[data]
table = "../data/wavy.csv"
target = "runoff_mm"
features = ["slope_deg"]
key = "site"

[split]
holdout = 0.2
folds = 10
repeats = 3

[[candidate]]
family = "polynomial"
degree = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12]

[[candidate]]
family = "nearest-neighbors"
k = [1, 5, 25]

[choose]
rule = "lowest"
"#,
    )
    .unwrap();
}

fn synthetic_artifacts(dir: &Path) -> Artifacts {
    artifacts(
        &dir.join("out"),
        "wavy",
        &dir.join("specs/wavy.receipt.toml"),
    )
}

// ---------------------------------------------------------------------------
// 1. Same inputs, same bytes.

#[test]
fn two_fresh_runs_write_identical_bytes() {
    let (_first, baseline) = demo_baseline();
    let (_second, again) = demo_baseline();
    assert_eq!(baseline, again);
    assert!(baseline.receipt.contains("[[candidates]]"));
}

#[test]
fn thread_count_does_not_change_a_byte() {
    let (_base, baseline) = demo_baseline();
    for jobs in ["1", "2"] {
        let dir = tempfile::tempdir().unwrap();
        demo_tree(dir.path());
        heldout_ok(
            dir.path(),
            &["run", "--jobs", jobs, "specs/heat-demand.toml"],
        );
        assert_eq!(demo_artifacts(dir.path()), baseline, "--jobs {jobs}");
    }
}

#[test]
fn working_directory_does_not_change_a_byte() {
    let (_base, baseline) = demo_baseline();
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    let specs = dir.path().join("specs");
    let stderr = heldout_ok(&specs, &["run", "heat-demand.toml", "--out", "../out"]);
    assert_eq!(util::fit_counts(&stderr), (DEMO_FITS, 0));
    assert_eq!(demo_artifacts(dir.path()), baseline);
    // The default cache is relative to the working directory.
    assert_eq!(
        util::cache_entry_count(&specs.join(".heldout/cache")),
        DEMO_FITS
    );
}

/// The demo spec, by hand, in YAML: the same meaning as specs/heat-demand.toml.
const DEMO_YAML: &str = r#"# The heat-demand experiment, written in YAML.
experiment:
  name: heat-demand
  title: "How flexible should the heat-demand curve be?"
  seed: 20261201
data:
  table: ../demo-data/heat-demand.csv
  target: demand_mwh
  features: [outdoor_c, wind_ms]
  key: meter_id
  group: week
  missing: impute
split:
  holdout: 0.2
  method: kfold
  folds: 10
  repeats: 3
candidate:
  - family: polynomial
    features: [outdoor_c]
    degree: [1, 2, 3, 4, 5, 6, 8, 10, 12]
  - family: nearest-neighbors
    k: [1, 2, 3, 5, 10, 20, 40, 80]
  - family: linear
  - family: smoothing-spline
    features: [outdoor_c]
    df: [2.5, 3, 4, 6, 9, 14, 20, 40]
  - family: ridge
    features: [outdoor_c, wind_ms, substation]
    penalty: [0.1, 10, 100, 1000]
choose:
  metric: mse
  rule: one-se
  nested: true
report:
  formats: [markdown, html]
intervals:
  level: 0.9
"#;

#[test]
fn yaml_twin_of_the_spec_writes_identical_bytes_but_for_the_file_it_names() {
    let (_base, baseline) = demo_baseline();
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    std::fs::remove_file(dir.path().join("specs/heat-demand.toml")).unwrap();
    std::fs::write(dir.path().join("specs/heat-demand.yaml"), DEMO_YAML).unwrap();
    heldout_ok(dir.path(), &["run", "specs/heat-demand.yaml"]);
    // Same stem, so the same receipt name; the numbers and figures match.
    let twin = demo_artifacts(dir.path());
    assert_eq!(twin.results, baseline.results);
    // The report's regeneration commands name the file that was run, which
    // is the only difference in its text ...
    let toml_commands = "heldout verify heat-demand.toml\nheldout run heat-demand.toml";
    let yaml_commands = "heldout verify heat-demand.yaml\nheldout run heat-demand.yaml";
    assert!(
        baseline.report.contains(toml_commands),
        "{}",
        baseline.report
    );
    assert!(twin.report.contains(yaml_commands), "{}", twin.report);
    assert_eq!(
        twin.report.replace(yaml_commands, toml_commands),
        baseline.report
    );
    // ... and so the receipt differs in the two reports' digests alone.
    let other_entries = |receipt: &str| -> Vec<String> {
        receipt
            .split("\n\n")
            .filter(|entry| !entry.contains("path = \"report."))
            .map(str::to_owned)
            .collect()
    };
    assert_eq!(
        other_entries(&twin.receipt),
        other_entries(&baseline.receipt)
    );
    assert_ne!(twin.receipt, baseline.receipt);
}

// ---------------------------------------------------------------------------
// 2. The cache saves exactly the work that is still valid.

#[test]
fn cache_recomputes_only_what_a_spec_change_touches() {
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    let spec_path = dir.path().join("specs/heat-demand.toml");
    let spec = read(&spec_path);
    let run = || util::fit_counts(&heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]));

    assert_eq!(run(), (DEMO_FITS, 0), "cold");
    assert_eq!(run(), (0, DEMO_FITS), "warm rerun");

    let extra = "\n[[candidate]]\nfamily = \"polynomial\"\nlabel = \"extra\"\n\
                 features = [\"wind_ms\"]\ndegree = [1, 2]\n";
    std::fs::write(&spec_path, format!("{spec}{extra}")).unwrap();
    assert_eq!(
        run(),
        (DEMO_FITS_PER_CANDIDATE, DEMO_FITS),
        "only the added candidate is fitted"
    );
    let results = util::read_json(&dir.path().join("out/heat-demand/results.json"));
    let ids: Vec<&str> = results["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["id"].as_str().unwrap())
        .collect();
    assert!(ids.contains(&"extra/degree=2"), "{ids:?}");

    let old_title = "title = \"How flexible should the heat-demand curve be?\"";
    assert!(spec.contains(old_title));
    let retitled = spec.replace(old_title, "title = \"Heat demand, retitled\"");
    std::fs::write(&spec_path, format!("{retitled}{extra}")).unwrap();
    assert_eq!(
        run(),
        (0, DEMO_FITS + DEMO_FITS_PER_CANDIDATE),
        "a title is not a fit input"
    );
    let results = util::read_json(&dir.path().join("out/heat-demand/results.json"));
    assert_eq!(results["title"], "Heat demand, retitled");
}

// ---------------------------------------------------------------------------
// 3. `verify` recomputes, and names what changed.

#[test]
fn verify_passes_untouched_and_names_a_changed_data_file() {
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]);
    let (status, stdout, stderr) = heldout(dir.path(), &["verify", "specs/heat-demand.toml"]);
    assert_eq!(status.code(), Some(0), "{stdout}{stderr}");
    assert!(!stdout.contains("MISMATCH"), "{stdout}");

    // One digit of one value: 9.636 -> 9.637 on the first data row.
    let csv_path = dir.path().join("demo-data/heat-demand.csv");
    let csv = read(&csv_path);
    let row = "1,M0001,Lillebakk,-0.7,6.2,9.636\n";
    assert!(csv.contains(row), "the demo data changed; pick another row");
    std::fs::write(
        &csv_path,
        csv.replacen(row, "1,M0001,Lillebakk,-0.7,6.2,9.637\n", 1),
    )
    .unwrap();
    let (status, stdout, stderr) = heldout(dir.path(), &["verify", "specs/heat-demand.toml"]);
    assert_eq!(status.code(), Some(1), "{stdout}{stderr}");
    assert!(stdout.contains("MISMATCH"), "{stdout}");
    let first = stdout
        .lines()
        .find(|l| l.contains("first difference:"))
        .unwrap_or_else(|| panic!("no first difference in:\n{stdout}"));
    assert!(first.contains("heat-demand.csv"), "{first}");
}

#[test]
fn verify_ignores_a_tampered_cache_and_run_repairs_it() {
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]);
    let before = demo_artifacts(dir.path());

    let cache = dir.path().join(".heldout/cache");
    assert_eq!(util::cache_entry_count(&cache), DEMO_FITS);
    // The last payload byte of one entry in the middle of a pack.
    let packs = util::cache_packs(&cache);
    let victim = &packs[packs.len() / 2];
    let mut bytes = std::fs::read(victim).unwrap();
    let records = util::pack_records(&bytes);
    let (key, offset, length) = records[records.len() / 2];
    bytes[(offset + length) as usize - 1] ^= 0x10;
    std::fs::write(victim, &bytes).unwrap();

    let (status, stdout, stderr) = heldout(dir.path(), &["verify", "specs/heat-demand.toml"]);
    assert_eq!(status.code(), Some(0), "{stdout}{stderr}");

    let stderr = heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]);
    let name = blake3::Hash::from_bytes(key).to_hex()[..12].to_string();
    let warning = stderr
        .lines()
        .find(|l| l.starts_with("warning:"))
        .unwrap_or_else(|| panic!("no warning about the tampered entry:\n{stderr}"));
    assert!(warning.contains(&name), "{warning}");
    assert_eq!(util::fit_counts(&stderr), (1, DEMO_FITS - 1));
    assert_eq!(demo_artifacts(dir.path()), before);

    // The entry was rewritten whole: the next run reuses everything quietly.
    let stderr = heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]);
    assert!(!stderr.contains("warning"), "{stderr}");
    assert_eq!(util::fit_counts(&stderr), (0, DEMO_FITS));
}

// ---------------------------------------------------------------------------
// 4. An interrupted run leaves nothing that could change a later one.

/// Rows of the generated table for the kill test: enough for a run of about
/// a second on a laptop in the test profile.
const KILL_ROWS: usize = 40_000;

#[test]
fn run_killed_part_way_then_rerun_matches_an_uninterrupted_run() {
    let clean = tempfile::tempdir().unwrap();
    synthetic_tree(clean.path(), KILL_ROWS);
    let started = Instant::now();
    let stderr = heldout_ok(clean.path(), &["run", "specs/wavy.toml"]);
    let full_run = started.elapsed();
    assert_eq!(util::fit_counts(&stderr), (SYNTHETIC_FITS, 0));
    let expected = synthetic_artifacts(clean.path());

    // Kill after about a third of an uninterrupted run, once at least one
    // entry is in the cache. Should the run still win the race (a much
    // faster or idle machine), try again sooner in a fresh tree.
    let mut delay = full_run.mul_f64(0.35);
    for attempt in 1.. {
        assert!(attempt <= 5, "could not interrupt a run of {full_run:?}");
        let dir = tempfile::tempdir().unwrap();
        synthetic_tree(dir.path(), KILL_ROWS);
        let cache = dir.path().join(".heldout/cache");
        let mut child = command_in(dir.path(), &["run", "--quiet", "specs/wavy.toml"])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        let spawned = Instant::now();
        std::thread::sleep(delay);
        while util::cache_packs(&cache).is_empty() && child.try_wait().unwrap().is_none() {
            std::thread::sleep(Duration::from_millis(2));
        }
        if child.try_wait().unwrap().is_none() {
            child.kill().unwrap();
        }
        let status = child.wait().unwrap();
        let killed_after = spawned.elapsed();
        let left = util::cache_entry_count(&cache);
        if status.success() || left == SYNTHETIC_FITS {
            // Too late to interrupt the fitting: try again, sooner.
            delay /= 2;
            continue;
        }
        #[cfg(unix)]
        {
            use std::os::unix::process::ExitStatusExt;
            assert_eq!(status.signal(), Some(9), "{status}");
        }
        let receipt = dir.path().join("specs/wavy.receipt.toml");
        assert!(!receipt.exists(), "the killed run wrote its receipt");
        assert!(left > 0, "the killed run had cached a fit");

        let stderr = heldout_ok(dir.path(), &["run", "specs/wavy.toml"]);
        assert!(!stderr.contains("warning"), "{stderr}");
        assert_eq!(
            util::fit_counts(&stderr),
            (SYNTHETIC_FITS - left, left),
            "every whole entry left by the killed run is reused"
        );
        assert_eq!(synthetic_artifacts(dir.path()), expected);
        eprintln!(
            "uninterrupted run {full_run:?}; killed after {killed_after:?} \
             (attempt {attempt}) with {left}/{SYNTHETIC_FITS} fits cached"
        );
        break;
    }
}

// ---------------------------------------------------------------------------
// 5. Concurrent runs sharing one cache.

#[test]
fn concurrent_runs_on_one_cache_agree() {
    let dir = tempfile::tempdir().unwrap();
    let cache = dir.path().join("shared-cache");
    let cache_arg = cache.to_str().unwrap();
    let trees = [dir.path().join("a"), dir.path().join("b")];
    for tree in &trees {
        synthetic_tree(tree, 8_000);
    }
    let children: Vec<_> = trees
        .iter()
        .map(|tree| {
            command_in(tree, &["run", "--cache", cache_arg, "specs/wavy.toml"])
                .stdout(Stdio::piped())
                .stderr(Stdio::piped())
                .spawn()
                .unwrap()
        })
        .collect();
    let mut computed = 0;
    for (tree, child) in trees.iter().zip(children) {
        let output = child.wait_with_output().unwrap();
        let stderr = util::stderr_of(&output);
        assert!(output.status.success(), "{}: {stderr}", tree.display());
        assert!(!stderr.contains("warning"), "{stderr}");
        let (fresh, reused) = util::fit_counts(&stderr);
        assert_eq!(fresh + reused, SYNTHETIC_FITS);
        computed += fresh;
    }
    assert!(computed >= SYNTHETIC_FITS, "someone computed every fit");
    assert_eq!(
        synthetic_artifacts(&trees[0]),
        synthetic_artifacts(&trees[1])
    );
    assert_eq!(util::cache_entry_count(&cache), SYNTHETIC_FITS);
    assert_eq!(cache_strays(&cache), Vec::<PathBuf>::new());

    // Whatever the interleaving, the entries are whole and the same bytes result.
    let stderr = heldout_ok(&trees[0], &["run", "--cache", cache_arg, "specs/wavy.toml"]);
    assert!(!stderr.contains("warning"), "{stderr}");
    assert_eq!(util::fit_counts(&stderr), (0, SYNTHETIC_FITS));
    assert_eq!(
        synthetic_artifacts(&trees[0]),
        synthetic_artifacts(&trees[1])
    );
}

// ---------------------------------------------------------------------------
// 6. Sharding.

#[test]
fn three_shards_then_assembly_match_a_single_run() {
    let (_single, expected) = demo_baseline();
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    let shards: Vec<_> = ["1/3", "2/3", "3/3"]
        .into_iter()
        .map(|shard| {
            let child = command_in(
                dir.path(),
                &["run", "--shard", shard, "specs/heat-demand.toml"],
            )
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
            (shard, child)
        })
        .collect();
    for (shard, child) in shards {
        let output = child.wait_with_output().unwrap();
        let stderr = util::stderr_of(&output);
        assert!(output.status.success(), "shard {shard}: {stderr}");
        // The main selection's 155 tasks dealt round-robin to 3 shards (task
        // i to shard i mod 3): 52, 52 and 51, none shared. Shards skip nested
        // cross-validation; the assembling run computes it.
        let expected = if shard.starts_with('3') { 51 } else { 52 };
        assert!(
            stderr.contains(&format!(
                "shard {shard}: {expected} fits computed, 0 reused"
            )),
            "{stderr}"
        );
    }
    assert!(!dir.path().join("out").exists(), "shards write no outputs");
    assert!(!dir.path().join("specs/heat-demand.receipt.toml").exists());
    assert_eq!(
        util::cache_entry_count(&dir.path().join(".heldout/cache")),
        MAIN_FITS
    );

    let stderr = heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]);
    assert_eq!(
        util::fit_counts(&stderr),
        (DEMO_FITS - MAIN_FITS, MAIN_FITS)
    );
    assert_eq!(demo_artifacts(dir.path()), expected);
}

// ---------------------------------------------------------------------------
// 7. `plan` tells what a run would compute.

/// (fits, cached, to compute) from the summary line of `heldout plan`.
fn plan_summary(dir: &Path) -> (usize, usize, usize) {
    let (status, stdout, stderr) = heldout(dir, &["plan", "specs/heat-demand.toml"]);
    assert!(status.success(), "{stdout}{stderr}");
    let line = stdout
        .lines()
        .find(|l| l.contains(" fits (") && l.contains("to compute"))
        .unwrap_or_else(|| panic!("no summary line in:\n{stdout}"));
    let (head, tail) = line.split_once("):").unwrap();
    let fits = head.split_whitespace().next().unwrap().parse().unwrap();
    let numbers: Vec<usize> = tail
        .split(';')
        .next()
        .unwrap()
        .split(|c: char| !c.is_ascii_digit())
        .filter_map(|w| w.parse().ok())
        .collect();
    assert_eq!(numbers.len(), 2, "{line}");
    (fits, numbers[0], numbers[1])
}

#[test]
fn plan_counts_cached_and_missing_fits() {
    let dir = tempfile::tempdir().unwrap();
    demo_tree(dir.path());
    assert_eq!(plan_summary(dir.path()), (DEMO_FITS, 0, DEMO_FITS));
    assert!(!dir.path().join("out").exists(), "plan fits nothing");

    heldout_ok(
        dir.path(),
        &["run", "--shard", "2/3", "specs/heat-demand.toml"],
    );
    // Shard 2/3 owns tasks 1, 4, …, 154: 52 of the main selection's 155;
    // plan counts nested cross-validation's fits as well.
    assert_eq!(plan_summary(dir.path()), (DEMO_FITS, 52, DEMO_FITS - 52));

    heldout_ok(dir.path(), &["run", "specs/heat-demand.toml"]);
    assert_eq!(plan_summary(dir.path()), (DEMO_FITS, DEMO_FITS, 0));
}
