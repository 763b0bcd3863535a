//! Hostile and careless inputs from the trust catalogue: each must end with
//! exit 2 and a message that names the place (or be handled as stated),
//! never a panic, an abort, a hang or a runaway allocation. Each test breaks
//! one thing of a small valid spec and table.

use std::path::Path;
use std::process::Output;

use crate::{simulation, util};

const SPEC: &str = "[experiment]\nname = \"hostile\"\nseed = 3\n\n[data]\ntable = \"data.csv\"\n\
target = \"y\"\nfeatures = [\"x\"]\n\n[split]\nholdout = 0\nfolds = 3\n\n[[candidate]]\n\
family = \"polynomial\"\ndegree = [1, 2]\n";

/// Invented rows: y close to 2x.
fn table() -> String {
    let mut text = String::from("x,y\n");
    for i in 1..=12 {
        text.push_str(&format!(
            "{i},{}\n",
            2.0 * f64::from(i) + 0.1 * f64::from(i % 3)
        ));
    }
    text
}

/// Writes `spec` and `data` into a fresh folder and runs `heldout run`.
fn run_with(spec: &str, data: &str, extra: &[&str]) -> (tempfile::TempDir, Output) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("spec.toml"), spec).unwrap();
    std::fs::write(dir.path().join("data.csv"), data).unwrap();
    let mut args = vec![
        "run",
        "spec.toml",
        "--out",
        "out",
        "--cache",
        "cache",
        "--quiet",
    ];
    args.extend_from_slice(extra);
    let output = util::run_in(dir.path(), &args);
    (dir, output)
}

/// Asserts exit 2 and that stderr names every one of `places`.
fn refused(output: &Output, places: &[&str]) {
    let stderr = util::stderr_of(output);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    for place in places {
        assert!(stderr.contains(place), "{place:?} missing in:\n{stderr}");
    }
    assert!(!stderr.contains("panicked"), "{stderr}");
}

#[test]
fn a_huge_target_cell_is_refused_with_its_line_and_column() {
    // Catalogue row 3 (1e155 in the target) and row 10 (1e308 in a feature).
    let data = table().replace("5,10.2", "5,1e155");
    refused(
        &run_with(SPEC, &data, &[]).1,
        &["data.csv", "line 6", "y", "1e155"],
    );
    let data = table().replace("7,14.1", "1e308,14.1");
    refused(&run_with(SPEC, &data, &[]).1, &["line 8", "x", "1e308"]);
}

#[test]
fn all_non_finite_scores_are_refused_instead_of_chosen() {
    // Catalogue row 4: a constant target has no R².
    let spec = format!("{SPEC}\n[choose]\nmetric = \"r2\"\n");
    let mut data = String::from("x,y\n");
    for i in 1..=12 {
        data.push_str(&format!("{i},5\n"));
    }
    refused(
        &run_with(&spec, &data, &[]).1,
        &["no setting has a finite cross-validated r2"],
    );
}

#[test]
fn sizes_past_their_limits_are_refused_by_key_before_any_work() {
    // Catalogue row 5.
    let dir = tempfile::tempdir().unwrap();
    simulation::demo_spec(dir.path(), "sim.toml", 10);
    let path = dir.path().join("specs/sim.toml");
    let demo = std::fs::read_to_string(&path).unwrap();
    let deep = format!(
        "truth = \"{}outdoor_c{}\"",
        "(".repeat(2000),
        ")".repeat(2000)
    );
    for (from, to, key) in [
        (
            "replicates = 10",
            "replicates = 20261202",
            "simulate.replicates",
        ),
        (
            "replicates = 10",
            "replicates = 1000000",
            "simulate.replicates",
        ),
        (
            "train_size = 60",
            "train_size = 999999999",
            "simulate.train_size",
        ),
    ] {
        assert!(demo.contains(from), "{from}");
        std::fs::write(&path, demo.replace(from, to)).unwrap();
        let output = simulation::heldout(dir.path(), &["run", "-q", "specs/sim.toml"]);
        refused(&output, &[key, "limit"]);
    }
    let truth_line = demo.lines().find(|l| l.starts_with("truth = ")).unwrap();
    std::fs::write(&path, demo.replace(truth_line, &deep)).unwrap();
    let output = simulation::heldout(dir.path(), &["run", "-q", "specs/sim.toml"]);
    refused(&output, &["simulate.truth", "limit"]);
    let repeats = SPEC.replace("folds = 3\n", "folds = 3\nrepeats = 9999999999\n");
    refused(
        &run_with(&repeats, &table(), &[]).1,
        &["split.repeats", "limit of 1000"],
    );
}

#[test]
fn deeply_nested_spec_text_is_refused_quickly() {
    // Catalogue row 15: YAML nested 100 000 deep took 52 s.
    let dir = tempfile::tempdir().unwrap();
    let yaml = format!(
        "experiment: {}1{}\n",
        "[".repeat(100_000),
        "]".repeat(100_000)
    );
    std::fs::write(dir.path().join("spec.yaml"), yaml).unwrap();
    let started = std::time::Instant::now();
    let output = util::run_in(dir.path(), &["run", "spec.yaml", "--quiet"]);
    refused(&output, &["spec.yaml", "nested brackets", "limit of 32"]);
    // Not a timing claim, a hang guard: quadratic parsing took 52 s.
    assert!(started.elapsed().as_secs() < 20);
}

#[test]
fn a_data_path_that_is_not_a_regular_file_is_refused() {
    // Catalogue row 6: a FIFO blocked forever, /dev/zero ate memory.
    let spec = SPEC.replace("table = \"data.csv\"", "table = \"/dev/zero\"");
    refused(
        &run_with(&spec, &table(), &[]).1,
        &["/dev/zero", "outside the repository"],
    );
    refused(
        &run_with(&spec, &table(), &["--allow-outside"]).1,
        &["/dev/zero", "not a regular file"],
    );
    let (dir, _) = run_with(SPEC, &table(), &[]);
    let fifo = dir.path().join("pipe.csv");
    let made = std::process::Command::new("mkfifo").arg(&fifo).status();
    if made.is_ok_and(|s| s.success()) {
        let spec = SPEC.replace("data.csv", "pipe.csv");
        std::fs::write(dir.path().join("fifo.toml"), spec).unwrap();
        let output = util::run_in(dir.path(), &["run", "fifo.toml", "--quiet", "--cache", "c"]);
        refused(&output, &["pipe.csv", "not a regular file"]);
    }
}

#[test]
fn a_duplicate_header_name_is_refused() {
    // Catalogue row 8: the first of two `x` columns was used silently.
    let data: String = table()
        .lines()
        .map(|line| format!("{line},{}\n", if line == "x,y" { "x" } else { "0" }))
        .collect();
    refused(
        &run_with(SPEC, &data, &[]).1,
        &["data.csv", "line 1", "\"x\" twice", "columns 1 and 3"],
    );
}

#[test]
fn a_table_without_a_final_line_break_warns() {
    // Catalogue row 9: a table cut inside its last value ran silently.
    let data = table().trim_end().to_string();
    let (dir, output) = run_with(SPEC, &data, &[]);
    util::assert_success(&output);
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("warning: data.csv: the last line ends without a line break"),
        "{stderr}"
    );
    // The report's data section says it too, and results.json records it.
    let report = std::fs::read_to_string(dir.path().join("out/hostile/report.md")).unwrap();
    assert!(
        report.contains("**Warning:** the table's last line ends without a line break"),
        "{report}"
    );
    let results = util::read_json(&dir.path().join("out/hostile/results.json"));
    assert_eq!(results["data"]["unterminated"], true);

    let (dir, output) = run_with(SPEC, &table(), &[]);
    assert!(!util::stderr_of(&output).contains("line break"));
    let report = std::fs::read_to_string(dir.path().join("out/hostile/report.md")).unwrap();
    assert!(!report.contains("line break"));
    let results = util::read_json(&dir.path().join("out/hostile/results.json"));
    assert!(results["data"].get("unterminated").is_none());
}

#[test]
fn out_or_cache_naming_a_file_is_bad_input() {
    // Catalogue row 11: exit 3 before.
    let (dir, _) = run_with(SPEC, &table(), &[]);
    std::fs::write(dir.path().join("a-file"), "x").unwrap();
    for option in ["--out", "--cache"] {
        let output = util::run_in(dir.path(), &["run", "spec.toml", option, "a-file", "-q"]);
        refused(&output, &[option, "a-file", "not a folder"]);
    }
    let output = util::run_in(dir.path(), &["verify", "spec.toml", "--cache", "a-file"]);
    refused(&output, &["--cache", "a-file"]);
}

#[test]
fn swapped_cache_entries_are_recomputed_and_outputs_equal_a_cold_run() {
    // Catalogue row 2: two valid entries swapped changed the kept model
    // silently, and an entry overwritten by another panicked.
    let (dir, output) = run_with(SPEC, &table(), &[]);
    util::assert_success(&output);
    let cold = std::fs::read(dir.path().join("out/hostile/results.json")).unwrap();
    let packs = util::cache_packs(&dir.path().join("cache"));
    assert!(!packs.is_empty());
    swap_first_two_entries(&packs[0]);
    // A verification told to trust this cache fails, naming the entry.
    let output = util::run_in(
        dir.path(),
        &["verify", "spec.toml", "--trust-cache", "--cache", "cache"],
    );
    let stdout = util::stdout_of(&output);
    assert_eq!(output.status.code(), Some(1), "{stdout}");
    assert!(
        stdout.contains("--trust-cache: a cache entry failed its check")
            && stdout.contains("written under another key"),
        "{stdout}"
    );
    let output = util::run_in(
        dir.path(),
        &["run", "spec.toml", "--out", "out", "--cache", "cache"],
    );
    util::assert_success(&output);
    let stderr = util::stderr_of(&output);
    assert_eq!(
        stderr.matches("written under another key").count(),
        2,
        "{stderr}"
    );
    assert_eq!(util::fit_counts(&stderr).0, 2, "{stderr}");
    let warm = std::fs::read(dir.path().join("out/hostile/results.json")).unwrap();
    assert_eq!(cold, warm);
}

/// Rewrites a pack so that its index sends the first two keys to each
/// other's entries: both entries stay whole and match their own digests, and
/// the index matches its digest, but each sits under the other's key (the
/// layout in docs/reproducibility.md).
fn swap_first_two_entries(pack: &Path) {
    let bytes = std::fs::read(pack).unwrap();
    let records = util::pack_records(&bytes);
    assert!(records.len() >= 2, "{} entries", records.len());
    let body = |i: usize| {
        let (_, offset, length) = records[i];
        &bytes[offset as usize..(offset + length) as usize]
    };
    let order: Vec<usize> = [1, 0].into_iter().chain(2..records.len()).collect();
    let mut out = bytes[..16].to_vec();
    let mut index = (records.len() as u64).to_le_bytes().to_vec();
    for (slot, &from) in order.iter().enumerate() {
        index.extend_from_slice(&records[slot].0);
        index.extend_from_slice(&(out.len() as u64).to_le_bytes());
        index.extend_from_slice(&(body(from).len() as u64).to_le_bytes());
        out.extend_from_slice(body(from));
    }
    let index_offset = out.len() as u64;
    out.extend_from_slice(&index);
    out.extend_from_slice(&index_offset.to_le_bytes());
    out.extend_from_slice(blake3::hash(&index).as_bytes());
    out.extend_from_slice(&bytes[..16]);
    std::fs::write(pack, out).unwrap();
}

/// Replaces the first occurrence of `from` in the file at `path`.
fn edit(path: &Path, from: &str, to: &str) {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.contains(from), "{from:?} not in {}", path.display());
    std::fs::write(path, text.replacen(from, to, 1)).unwrap();
}

#[test]
fn edited_results_or_reports_fail_verify_and_report_refuses_them() {
    // Catalogue row 1: a number edited in results.json was re-rendered by
    // `report`, and `verify` said "identical to its receipt".
    let (dir, output) = run_with(SPEC, &table(), &[]);
    util::assert_success(&output);
    let out = dir.path().join("out/hostile");
    let verify = || util::run_in(dir.path(), &["verify", "spec.toml"]);
    util::assert_success(&verify());

    // A number in report.md.
    let report_md = out.join("report.md");
    let pristine_md = std::fs::read(&report_md).unwrap();
    edit(&report_md, "polynomial/degree=", "polynomial/degree=9");
    let output = verify();
    let stdout = util::stdout_of(&output);
    assert_eq!(output.status.code(), Some(1), "{stdout}");
    assert!(
        stdout.contains("first difference: out/hostile/report.md on disk is not the file"),
        "{stdout}"
    );
    std::fs::write(&report_md, pristine_md).unwrap();

    // `chosen` in results.json.
    let results = out.join("results.json");
    let chosen = util::read_json(&results)["chosen"]
        .as_str()
        .unwrap()
        .to_string();
    let other = if chosen.ends_with("=1") {
        "polynomial/degree=2"
    } else {
        "polynomial/degree=1"
    };
    edit(
        &results,
        &format!("\"chosen\": \"{chosen}\""),
        &format!("\"chosen\": \"{other}\""),
    );
    let output = verify();
    let stdout = util::stdout_of(&output);
    assert_eq!(output.status.code(), Some(1), "{stdout}");
    assert!(
        stdout.contains("first difference: out/hostile/results.json on disk is not the file"),
        "{stdout}"
    );
    // `report` refuses to re-render it ...
    let output = util::run_in(dir.path(), &["report", "spec.toml"]);
    let stderr = util::stderr_of(&output);
    assert_eq!(output.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.contains("out/hostile/results.json is not the results.json its receipt"),
        "{stderr}"
    );
    assert!(stderr.contains("--unverified"), "{stderr}");
    // ... unless told, and then the reports say so first.
    let output = util::run_in(dir.path(), &["report", "spec.toml", "--unverified"]);
    util::assert_success(&output);
    let markdown = std::fs::read_to_string(&report_md).unwrap();
    assert!(markdown.starts_with("**UNVERIFIED: "), "{markdown}");
    assert!(markdown.contains(other));
    // Without a receipt nothing vouches for the results either.
    std::fs::remove_file(dir.path().join("spec.receipt.toml")).unwrap();
    let output = util::run_in(dir.path(), &["report", "spec.toml"]);
    assert_eq!(output.status.code(), Some(1));
    assert!(util::stderr_of(&output).contains("there is no receipt"));
}

#[test]
fn data_outside_the_repository_is_refused_unless_allowed() {
    // Catalogue row 7: `/etc/passwd` and `../` paths were read, and the
    // error message printed the file's first line.
    let dir = tempfile::tempdir().unwrap();
    let repo = dir.path().join("repo");
    std::fs::create_dir_all(repo.join(".git")).unwrap();
    std::fs::create_dir_all(repo.join("specs")).unwrap();
    std::fs::write(dir.path().join("outside.csv"), table()).unwrap();
    std::fs::write(repo.join("inside.csv"), table()).unwrap();
    let write_spec = |name: &str, table: &str| {
        let spec = SPEC.replace("table = \"data.csv\"", &format!("table = \"{table}\""));
        std::fs::write(repo.join("specs").join(name), spec).unwrap();
    };
    write_spec("climbs.toml", "../../outside.csv");
    write_spec("absolute.toml", "/etc/passwd");
    write_spec("inside.toml", "../inside.csv");
    let run = |spec: &str, extra: &[&str]| {
        let mut args = vec!["run", spec, "--quiet", "--cache", "cache", "--out", "out"];
        args.extend_from_slice(extra);
        util::run_in(&repo, &args)
    };

    refused(
        &run("specs/climbs.toml", &[]),
        &[
            "[data] table = \"../../outside.csv\"",
            "specs/climbs.toml",
            "outside the repository",
            "--allow-outside",
        ],
    );
    util::assert_success(&run("specs/climbs.toml", &["--allow-outside"]));
    util::assert_success(&run("specs/inside.toml", &[]));
    // `plan`, `folds` and `verify` read the table too, under the same rule.
    for command in ["plan", "folds", "verify"] {
        let output = util::run_in(&repo, &[command, "specs/climbs.toml"]);
        refused(&output, &["outside the repository"]);
    }

    if Path::new("/etc/passwd").is_file() {
        let output = run("specs/absolute.toml", &[]);
        refused(&output, &["/etc/passwd", "outside the repository"]);
        // Allowed, it is still no table, and its first line is not echoed.
        let output = run("specs/absolute.toml", &["--allow-outside"]);
        refused(
            &output,
            &["/etc/passwd", "a single column", "comma-separated"],
        );
        assert!(!util::stderr_of(&output).contains("root"));
    }

    // A symbolic link inside the repository is followed before the check.
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink(dir.path().join("outside.csv"), repo.join("link.csv")).unwrap();
        write_spec("link.toml", "../link.csv");
        refused(&run("specs/link.toml", &[]), &["outside the repository"]);
    }
}

#[test]
fn a_spec_name_with_backticks_newlines_and_semicolons_stays_inside_its_fence() {
    // Catalogue row 12: such a name broke out of the Markdown fence around
    // the regenerate command, which was not shell-quoted either.
    let name = "odd``` name\n;touch pwned;`x`.toml";
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join(name), SPEC).unwrap();
    std::fs::write(dir.path().join("data.csv"), table()).unwrap();
    let output = util::run_in(
        dir.path(),
        &["run", name, "--quiet", "--cache", "cache", "--out", "out"],
    );
    util::assert_success(&output);
    let report = std::fs::read_to_string(dir.path().join("out/hostile/report.md")).unwrap();
    let quoted = "'odd``` name\n;touch pwned;`x`.toml'";
    let block = format!("````\nheldout verify {quoted}\nheldout run {quoted}\n````");
    assert!(report.contains(&block), "{report}");
    // The fence closes where it should: what follows is the next heading.
    let after = &report[report.find(&block).unwrap() + block.len()..];
    assert!(
        after.trim_start().starts_with("### The spec as read"),
        "{after}"
    );

    // The quoted command, given to a POSIX shell, names the file itself.
    let listed = std::process::Command::new("sh")
        .arg("-c")
        .arg(format!("ls {quoted}"))
        .current_dir(dir.path())
        .output()
        .unwrap();
    assert!(listed.status.success(), "{}", util::stderr_of(&listed));
    assert!(!dir.path().join("pwned").exists());
}

#[test]
fn repeats_that_deal_the_same_folds_are_counted_once_and_said() {
    // Five groups in five folds, three repeats: every repeat is the same
    // partition, and its copies of the scores shrank the standard error.
    let spec = SPEC
        .replace("features = [\"x\"]", "features = [\"x\"]\ngroup = \"g\"")
        .replace("folds = 3", "folds = 5\nrepeats = 3");
    let mut data = String::from("g,x,y\n");
    for i in 0..40 {
        data.push_str(&format!("g{},{i},{}\n", i % 5, 2 * i + i % 3));
    }
    let (dir, output) = run_with(&spec, &data, &[]);
    util::assert_success(&output);
    assert!(util::stderr_of(&output).contains("2 of the 3 repeats dealt the same folds"));
    let results = util::read_json(&dir.path().join("out/hostile/results.json"));
    assert_eq!(results["split"]["repeats"], 1);
    assert_eq!(results["split"]["identical_repeats"], 2);
    let scores = &results["candidates"][0]["fold_scores"];
    assert_eq!(scores.as_array().unwrap().len(), 5);
    let report = std::fs::read_to_string(dir.path().join("out/hostile/report.md")).unwrap();
    assert!(report.contains("- **Repeats that were not repeats:** 2 of the 3 repeats"));
}
