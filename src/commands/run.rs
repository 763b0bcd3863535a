//! `heldout run`: evaluate specs through the cache and write outputs and receipts.

use std::path::Path;

use super::summary::{self, RunEntry};
use crate::cache::Cache;
use crate::cli::RunArgs;
use crate::error::UsageError;
use crate::execute::{CachePolicy, Shard};
use crate::{output, receipt, report};

pub(crate) fn run(args: &RunArgs) -> anyhow::Result<()> {
    summary::for_specs("run", args.json, |entries| run_specs(args, entries))
}

/// Runs the specs in order, noting what each gave in `entries`.
fn run_specs(args: &RunArgs, entries: &mut Vec<RunEntry>) -> anyhow::Result<()> {
    let shard = args.shard.as_deref().map(parse_shard).transpose()?;
    let pool = super::thread_pool(args.jobs)?;
    crate::output::require_folder(&args.out, "--out")?;
    crate::output::require_folder(&args.cache.cache, "--cache")?;
    let cache = Cache::new(&args.cache.cache);
    // Temporary files older than this run are what a killed run left. An
    // entry is written and renamed within moments, so a minute's margin
    // spares the files of a concurrent run in flight.
    let started = std::time::SystemTime::now() - std::time::Duration::from_secs(60);
    let swept = cache.sweep_orphans(started);
    if swept > 0 && !args.quiet {
        eprintln!("removed {swept} temporary file(s) a stopped run left in the cache");
    }
    super::for_each_spec(&args.specs, |spec_path| {
        match pool.install(|| run_one(spec_path, args, &cache, shard)) {
            Ok(entry) => {
                entries.push(entry);
                Ok(())
            }
            Err(error) => {
                entries.push(RunEntry::failed(spec_path, &error));
                Err(error)
            }
        }
    })
}

/// Parses `I/N` (1-based I) into a 0-based shard.
fn parse_shard(text: &str) -> Result<Shard, UsageError> {
    let bad = || {
        UsageError(format!(
            "--shard {text}: expected I/N with 1 ≤ I ≤ N, e.g. 2/3"
        ))
    };
    let (i, n) = text.split_once('/').ok_or_else(bad)?;
    let index: usize = i.trim().parse().map_err(|_| bad())?;
    let count: usize = n.trim().parse().map_err(|_| bad())?;
    if count == 0 || index == 0 || index > count {
        return Err(bad());
    }
    Ok(Shard {
        index: index - 1,
        count,
    })
}

fn run_one(
    spec_path: &Path,
    args: &RunArgs,
    cache: &Cache,
    shard: Option<Shard>,
) -> anyhow::Result<RunEntry> {
    let policy = CachePolicy {
        read: Some(cache),
        write: Some(cache),
    };
    let evaluation = super::evaluate_spec(
        spec_path,
        &args.data,
        policy,
        shard,
        super::progress_wanted(args.quiet),
    );
    // The fits computed are written before anything that depends on them,
    // and before an error ends the run: a rerun reuses them either way.
    cache.flush()?;
    let evaluation = match evaluation? {
        Ok(evaluation) => evaluation,
        Err(summary) => {
            let shard = shard.expect("only shards skip assembly");
            if !args.quiet {
                eprintln!(
                    "shard {}/{}: {} fits computed, {} reused (cache {}); run without --shard \
                     to assemble the outputs",
                    shard.index + 1,
                    shard.count,
                    summary.computed,
                    summary.reused,
                    cache.root().display()
                );
            }
            return Ok(RunEntry::shard(spec_path, shard, &summary));
        }
    };

    let dir = output::experiment_dir(&args.out, &evaluation.results.experiment);
    for (name, bytes) in &evaluation.outputs {
        output::write_atomic(&dir.join(name), bytes)?;
    }
    let receipt_path = receipt::path_for(spec_path);
    output::write_atomic(
        &receipt_path,
        receipt::to_toml(&evaluation.receipt).as_bytes(),
    )?;

    if !args.quiet {
        let dropped = evaluation.plan.table.dropped;
        if dropped > 0 {
            eprintln!("note: dropped {dropped} rows with empty cells (missing = \"drop-rows\")");
        }
        let task = &evaluation.plan.task;
        if let Some(why) = task.inferred.as_ref().filter(|_| task.noteworthy) {
            eprintln!(
                "note: task inferred as {}: {why}; set `task` in [data] to decide it",
                evaluation.plan.task.task.name()
            );
        }
        eprintln!(
            "fits: {} computed, {} reused from the cache",
            evaluation.summary.computed, evaluation.summary.reused
        );
    }
    if !args.quiet && !args.json {
        print!("{}", report::terminal::render(&evaluation.results));
        if evaluation.results.simulation.is_some() {
            print!(
                "{}",
                report::terminal::render_simulation(&evaluation.results)
            );
        }
        println!(
            "outputs in {}; receipt {}",
            dir.display(),
            receipt_path.display()
        );
    }
    Ok(RunEntry::done(spec_path, &evaluation, &dir, &receipt_path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_parse_one_based() {
        assert_eq!(parse_shard("2/3").unwrap(), Shard { index: 1, count: 3 });
        for bad in ["0/3", "4/3", "3", "a/b", "1/0"] {
            assert!(parse_shard(bad).is_err(), "{bad}");
        }
    }
}
