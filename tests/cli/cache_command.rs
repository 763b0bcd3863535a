//! `heldout cache`: counts and sizes of the fit cache, and removing the
//! entries no given spec needs while keeping every one they do need.

use crate::{demo, util};

#[test]
fn keep_only_removes_other_specs_fits_and_keeps_every_needed_one() {
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
    let spec = std::fs::read_to_string(dir.path().join("specs/heat-demand.toml")).unwrap();
    // Another seed: other folds, so other fits in the same cache.
    let other: String = spec
        .lines()
        .map(|line| {
            if line.trim_start().starts_with("seed") {
                "seed = 7".to_string()
            } else {
                line.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    assert_ne!(other.trim_end(), spec.trim_end());
    std::fs::write(dir.path().join("specs/other-seed.toml"), other).unwrap();
    for spec in ["specs/heat-demand.toml", "specs/other-seed.toml"] {
        util::assert_success(&util::run_in(
            dir.path(),
            &["run", spec, "--quiet", "--cache", "cache"],
        ));
    }
    let count = |output: &std::process::Output| -> usize {
        let stdout = util::stdout_of(output);
        let first = stdout.lines().next().unwrap_or_default().to_string();
        first
            .split(": ")
            .nth(1)
            .and_then(|rest| rest.split(' ').next())
            .and_then(|n| n.parse().ok())
            .unwrap_or_else(|| panic!("no entry count in {stdout}"))
    };
    let listed = util::run_in(dir.path(), &["cache", "--cache", "cache"]);
    util::assert_success(&listed);
    let total = count(&listed);

    let planned = |spec: &str| -> (usize, usize) {
        let output = util::run_in(dir.path(), &["plan", spec, "--cache", "cache", "--json"]);
        let plan: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
        let fits = &plan["plan"]["total"];
        (
            fits["fits"].as_u64().unwrap() as usize,
            fits["cached"].as_u64().unwrap() as usize,
        )
    };
    let (needed, cached) = planned("specs/heat-demand.toml");
    assert_eq!(needed, cached);
    assert!(total > needed, "{total} entries, {needed} needed");

    // A dry run removes nothing.
    let dry = util::run_in(
        dir.path(),
        &[
            "cache",
            "--cache",
            "cache",
            "--keep-only",
            "specs/heat-demand.toml",
            "--dry-run",
        ],
    );
    util::assert_success(&dry);
    assert!(util::stdout_of(&dry).contains(&format!("would remove {} of {total}", total - needed)));
    assert_eq!(
        count(&util::run_in(dir.path(), &["cache", "--cache", "cache"])),
        total
    );

    let pruned = util::run_in(
        dir.path(),
        &[
            "cache",
            "--cache",
            "cache",
            "--keep-only",
            "specs/heat-demand.toml",
        ],
    );
    util::assert_success(&pruned);
    assert_eq!(
        count(&util::run_in(dir.path(), &["cache", "--cache", "cache"])),
        needed
    );
    // Every fit the kept spec needs is still there; the other spec's are gone.
    assert_eq!(planned("specs/heat-demand.toml"), (needed, needed));
    let (_, other_cached) = planned("specs/other-seed.toml");
    assert!(other_cached < needed, "{other_cached}");
}
