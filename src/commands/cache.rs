//! `heldout cache`: what the fit cache holds, and removing the entries that
//! no given spec needs (docs/reproducibility.md, "The cache").

use std::collections::BTreeSet;
use std::path::Path;

use crate::cache::Cache;
use crate::cli::CacheCommandArgs;
use crate::execute;
use crate::plan::ExperimentPlan;

pub(crate) fn cache(args: &CacheCommandArgs) -> anyhow::Result<()> {
    crate::output::require_folder(&args.cache.cache, "--cache")?;
    let cache = Cache::new(&args.cache.cache);
    let entries = cache.entries();
    let bytes: u64 = entries.iter().map(|e| e.bytes).sum();
    let (packs, damaged) = cache.pack_files();
    println!(
        "{}: {} entries in {} pack file(s), {}{}",
        cache.root().display(),
        entries.len(),
        packs,
        size(bytes),
        if damaged > 0 {
            format!("; {damaged} damaged pack file(s), removed by --keep-only")
        } else {
            String::new()
        }
    );
    if args.keep_only.is_empty() {
        return Ok(());
    }

    let mut needed = BTreeSet::new();
    for spec in &super::without_their_receipts(&args.keep_only) {
        let keys = needed_by(spec, args)?;
        println!("{}: needs {} fits", spec.display(), keys.len());
        needed.extend(keys);
    }
    let unneeded: Vec<_> = entries
        .iter()
        .filter(|entry| !needed.contains(&entry.key.0))
        .collect();
    let freed: u64 = unneeded.iter().map(|e| e.bytes).sum();
    if args.dry_run {
        println!(
            "would remove {} of {} entries ({}); nothing removed (--dry-run)",
            unneeded.len(),
            entries.len(),
            size(freed)
        );
        return Ok(());
    }
    cache.retain(|key| needed.contains(key))?;
    let swept =
        cache.sweep_orphans(std::time::SystemTime::now() - std::time::Duration::from_secs(60));
    println!(
        "removed {} of {} entries ({}), kept {}{}",
        unneeded.len(),
        entries.len(),
        size(freed),
        entries.len() - unneeded.len(),
        if swept > 0 {
            format!("; removed {swept} temporary file(s) a stopped run left")
        } else {
            String::new()
        }
    );
    Ok(())
}

/// The key of every fit `spec` needs: its tasks (with nested
/// cross-validation's), or for a simulation spec the tasks of every
/// replicate. Nothing is fitted.
fn needed_by(spec: &Path, args: &CacheCommandArgs) -> anyhow::Result<Vec<[u8; 32]>> {
    let loaded = super::load_spec(spec, &args.data)?;
    let keys_of = |plan: &ExperimentPlan| {
        let tasks = execute::tasks(plan);
        execute::task_keys(plan, &tasks)
            .into_iter()
            .map(|key| key.0)
            .collect::<Vec<_>>()
    };
    if loaded.is_simulation() {
        let plan = crate::simulate::resolve(loaded)?;
        let mut keys = Vec::new();
        for r in 0..plan.setup.replicates {
            keys.extend(keys_of(&plan.replicate_plan(&plan.replicate(r)?)));
        }
        return Ok(keys);
    }
    // The main selection's fits and, with `[choose] nested`, those of every
    // outer fold.
    let mut plan = crate::plan::resolve(loaded)?;
    let layouts = crate::evidence::nested::layouts(&plan)
        .map_err(|e| anyhow::anyhow!("{}: choose.nested: {e}", spec.display()))?;
    let mut keys = Vec::new();
    for (assignment, full_fit) in layouts {
        plan.assignment = assignment;
        plan.full_fit = full_fit;
        keys.extend(keys_of(&plan));
    }
    Ok(keys)
}

/// A byte count as people read it.
fn size(bytes: u64) -> String {
    const MIB: f64 = 1024.0 * 1024.0;
    if bytes < 1024 * 1024 {
        format!("{:.1} KiB", bytes as f64 / 1024.0)
    } else {
        format!("{:.1} MiB", bytes as f64 / MIB)
    }
}
