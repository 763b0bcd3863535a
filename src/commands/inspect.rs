//! `heldout plan` and `heldout folds`: look at what a spec would do, without fitting.

use std::fmt::Write as _;
use std::io::Write as _;

use anyhow::Context;

use crate::cache::Cache;
use crate::cli::{FoldsArgs, PlanArgs};
use crate::execute::{self, TaskRows};

pub(crate) fn plan(args: &PlanArgs) -> anyhow::Result<()> {
    let cache = Cache::new(&args.cache.cache);
    let loaded = crate::spec::load(&args.spec)?;
    if loaded.is_simulation() {
        return super::simulate::plan(loaded, &cache);
    }
    let plan = crate::plan::resolve(loaded)?;
    let a = &plan.assignment;
    let folds_per_repeat = a.folds.len() / a.repeats;
    let mut out = String::new();
    let _ = writeln!(out, "experiment  {}", plan.spec.spec.experiment.name);
    let _ = writeln!(
        out,
        "rows        {} read ({} dropped), {} for cross-validation, {} locked as the test set",
        plan.table.len(),
        plan.table.dropped,
        a.train.len(),
        a.test.len()
    );
    let _ = writeln!(
        out,
        "folds       {folds_per_repeat} per repeat × {} repeat(s) = {} folds",
        a.repeats,
        a.folds.len()
    );
    let _ = writeln!(out, "cache       {}", cache.root().display());
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "{:<24} {:>8} {:>6} {:>7} {:>8} {:>14}",
        "candidate", "settings", "fits", "cached", "to fit", "row-settings"
    );
    let tasks = execute::tasks(&plan);
    let keys = execute::task_keys(&plan, &tasks);
    let (mut all_fits, mut all_cached, mut all_work) = (0, 0, 0u64);
    for (index, candidate) in plan.candidates.iter().enumerate() {
        let mine: Vec<_> = tasks
            .iter()
            .zip(&keys)
            .filter(|(t, _)| t.candidate == index)
            .collect();
        let mut cached = 0;
        let mut work = 0u64;
        for (task, key) in &mine {
            if cache.contains(key) {
                cached += 1;
            } else {
                let rows = match task.rows {
                    TaskRows::Fold(f) => a.fold_train_len(f),
                    TaskRows::LeaveOneOut => a.train.len() * a.train.len(),
                    TaskRows::Full => a.train.len(),
                };
                work += (rows * candidate.settings.len()) as u64;
            }
        }
        let _ = writeln!(
            out,
            "{:<24} {:>8} {:>6} {:>7} {:>8} {:>14}",
            candidate.stem,
            candidate.settings.len(),
            mine.len(),
            cached,
            mine.len() - cached,
            work
        );
        all_fits += mine.len();
        all_cached += cached;
        all_work += work;
    }
    let _ = writeln!(
        out,
        "\n{all_fits} fits (one per candidate and fold, plus one on all non-test rows): \
         {all_cached} cached, {} to compute; work ≈ {all_work} training rows × settings",
        all_fits - all_cached
    );
    print!("{out}");
    Ok(())
}

pub(crate) fn folds(args: &FoldsArgs) -> anyhow::Result<()> {
    let loaded = crate::spec::load(&args.spec)?;
    if loaded.is_simulation() {
        return super::simulate::folds(loaded);
    }
    let key = loaded.data().key.clone();
    let plan = crate::plan::resolve(loaded)?;
    let rows = plan.table.len();
    let keys = key.as_deref().map(|k| plan.table.text_column(k));

    let mut writer = csv::Writer::from_writer(Vec::new());
    let mut header = vec!["row"];
    if keys.is_some() {
        header.push("key");
    }
    header.extend(["repeat", "fold"]);
    writer.write_record(&header).context("cannot write CSV")?;
    for repeat in 0..plan.assignment.repeats {
        let placements = plan.assignment.placements(rows, repeat);
        for (row, placement) in placements.iter().enumerate() {
            let fold = plan.assignment.placement_label(*placement, repeat);
            let mut record = vec![plan.table.row_numbers[row].to_string()];
            if let Some(keys) = keys {
                record.push(keys[row].clone());
            }
            record.push((repeat + 1).to_string());
            record.push(fold);
            writer.write_record(&record).context("cannot write CSV")?;
        }
    }
    let bytes = writer.into_inner().context("cannot write CSV")?;
    std::io::stdout()
        .write_all(&bytes)
        .context("cannot write to standard output")?;
    Ok(())
}
