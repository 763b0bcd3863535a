//! `heldout plan` and `heldout folds`: look at what a spec would do, without fitting.

use std::fmt::Write as _;
use std::io::Write as _;

use anyhow::Context;

use super::summary::{self, FitCounts, PlanCandidate, PlanFolds, PlanInfeasible, PlanRows};
use crate::cache::Cache;
use crate::cli::{FoldsArgs, PlanArgs};
use crate::execute::{self, TaskRows};

pub(crate) fn plan(args: &PlanArgs) -> anyhow::Result<()> {
    let planned = plan_spec(args);
    if args.json {
        return summary::print_plan(&args.spec, planned.map(|(plan, _)| plan));
    }
    summary::write_stdout(&planned?.1)
}

/// What `plan` finds for the spec: the counts, and the text that shows them.
fn plan_spec(args: &PlanArgs) -> anyhow::Result<(summary::Plan, String)> {
    let cache = Cache::new(&args.cache.cache);
    let loaded = super::load_spec(&args.spec, &args.data)?;
    if loaded.is_simulation() {
        return super::simulate::plan(loaded, &cache);
    }
    let mut plan = crate::plan::resolve(loaded)?;
    // The main selection, then (with `[choose] nested`) the selection rerun
    // in every outer fold.
    let layouts = crate::evidence::nested::layouts(&plan)
        .map_err(|e| anyhow::anyhow!("{}: choose.nested: {e}", plan.spec.path.display()))?;
    let nested_folds = layouts.len() - 1;
    let main = (plan.assignment.clone(), plan.full_fit);
    let mut counts = vec![(0usize, 0usize, 0u64); plan.candidates.len()];
    for (assignment, full_fit) in layouts {
        plan.assignment = assignment;
        plan.full_fit = full_fit;
        let a = &plan.assignment;
        let tasks = execute::tasks(&plan);
        let keys = execute::task_keys(&plan, &tasks);
        for (task, key) in tasks.iter().zip(&keys) {
            let (fits, cached, work) = &mut counts[task.candidate];
            *fits += 1;
            if cache.contains(key) {
                *cached += 1;
            } else {
                let rows = match task.rows {
                    TaskRows::Fold(f) => a.fold_train_len(f),
                    TaskRows::LeaveOneOut => a.train.len() * a.train.len(),
                    TaskRows::Full => a.train.len(),
                };
                *work += (rows * plan.candidates[task.candidate].settings.len()) as u64;
            }
        }
    }
    (plan.assignment, plan.full_fit) = main;
    let foreseen = execute::feasible::before_fitting(&plan);
    let a = &plan.assignment;
    let folds_per_repeat = a.folds.len() / a.repeats;
    let candidates: Vec<PlanCandidate> = plan
        .candidates
        .iter()
        .zip(&counts)
        .zip(&foreseen)
        .map(
            |((candidate, &(fits, cached, work)), foreseen)| PlanCandidate {
                candidate: candidate.stem.clone(),
                family: candidate.family_name.to_string(),
                settings: candidate.settings.len(),
                fits: FitCounts::new(fits, cached),
                work: Some(work),
                infeasible: candidate
                    .settings
                    .iter()
                    .zip(foreseen)
                    .filter(|(_, found)| !found.is_empty())
                    .map(|(setting, found)| PlanInfeasible {
                        setting: candidate.id(setting),
                        fits: found.clone(),
                    })
                    .collect(),
            },
        )
        .collect();
    let summary = summary::Plan {
        experiment: plan.spec.spec.experiment.name.clone(),
        kind: "table",
        rows: Some(PlanRows {
            read: plan.table.len(),
            dropped: plan.table.dropped,
            train: a.train.len(),
            test: a.test.len(),
        }),
        simulation: None,
        folds: PlanFolds {
            per_repeat: folds_per_repeat,
            repeats: a.repeats,
        },
        cache: cache.root().display().to_string(),
        total: FitCounts::total(&candidates),
        candidates,
    };

    let mut out = String::new();
    let _ = writeln!(out, "experiment  {}", summary.experiment);
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
    let _ = writeln!(out, "cache       {}", summary.cache);
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "{:<24} {:>8} {:>6} {:>7} {:>8} {:>14}",
        "candidate", "settings", "fits", "cached", "to fit", "row-settings"
    );
    for c in &summary.candidates {
        let _ = writeln!(
            out,
            "{:<24} {:>8} {:>6} {:>7} {:>8} {:>14}",
            c.candidate,
            c.settings,
            c.fits.fits,
            c.fits.cached,
            c.fits.to_fit,
            c.work.unwrap_or_default()
        );
    }
    let infeasible: Vec<&PlanInfeasible> = summary
        .candidates
        .iter()
        .flat_map(|c| &c.infeasible)
        .collect();
    if !infeasible.is_empty() {
        let _ = writeln!(
            out,
            "\ninfeasible before fitting ({} setting(s); left out of the choice, the run goes on):",
            infeasible.len()
        );
        for setting in infeasible {
            let first = &setting.fits[0];
            let more = match setting.fits.len() {
                1 => String::new(),
                n => format!(", and {} more fit(s)", n - 1),
            };
            let _ = writeln!(
                out,
                "  {}: {} ({}{more})",
                setting.setting, first.reason, first.fold
            );
        }
    }
    let all_work: u64 = summary.candidates.iter().filter_map(|c| c.work).sum();
    let nested = if nested_folds > 0 {
        format!(", and the same in each of {nested_folds} outer folds of nested cross-validation")
    } else {
        String::new()
    };
    let _ = writeln!(
        out,
        "\n{} fits (one per candidate and fold, plus one on all non-test rows{nested}): \
         {} cached, {} to compute; work ≈ {all_work} training rows × settings",
        summary.total.fits, summary.total.cached, summary.total.to_fit
    );
    Ok((summary, out))
}

pub(crate) fn folds(args: &FoldsArgs) -> anyhow::Result<()> {
    let loaded = super::load_spec(&args.spec, &args.data)?;
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
