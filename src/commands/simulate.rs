//! Simulation specs through `run`/`verify` (evaluation), `plan` and `folds`.

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::Path;

use anyhow::Context;

use super::summary::{self, FitCounts, PlanCandidate, PlanFolds, PlanSimulation};
use super::Evaluation;
use crate::cache::Cache;
use crate::execute::{self, CachePolicy, Shard, Summary};
use crate::simulate::{self, SimulateError};
use crate::spec::LoadedSpec;

/// Typed simulation errors as the edge reports them (so exit codes follow
/// the error kind: bad input for a spec or a fit, internal otherwise).
fn to_anyhow(error: SimulateError) -> anyhow::Error {
    match error {
        SimulateError::Spec(e) => e.into(),
        SimulateError::Execute(e) => e.into(),
    }
}

/// Runs every replicate through the cache policy and renders the outputs,
/// or only fills the cache for a shard (then returns `Ok(Err(summary))`).
pub(super) fn evaluate(
    loaded: LoadedSpec,
    spec_path: &Path,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    show_progress: bool,
) -> anyhow::Result<Result<Evaluation, Summary>> {
    let plan = simulate::resolve(loaded)?;
    let total = (0..plan.setup.replicates)
        .filter(|&r| shard.is_none_or(|s| s.owns(r)))
        .count();
    let (outcomes, summary) =
        super::with_progress("simulating", total, "replicates", show_progress, |done| {
            simulate::run::run(&plan, policy, shard, done).map_err(to_anyhow)
        })?;
    let Some(outcomes) = outcomes else {
        return Ok(Err(summary));
    };
    let mut simulated = simulate::summarise(plan, outcomes);
    // Nested cross-validation, when asked for, runs on replicate 1 as the
    // report's table sections do.
    let (nested, nested_summary) =
        super::nested_selection(&mut simulated.plan, policy, show_progress)?;
    let mut summary = summary;
    summary.absorb(nested_summary);
    Ok(Ok(super::finish(
        simulated.plan,
        spec_path,
        &simulated.fits,
        summary,
        Some(simulated.output),
        nested,
    )?))
}

/// `heldout plan` for a simulation spec: the counts, and the text that
/// shows them.
pub(super) fn plan(loaded: LoadedSpec, cache: &Cache) -> anyhow::Result<(summary::Plan, String)> {
    let plan = simulate::resolve(loaded)?;
    let setup = &plan.setup;
    let mut out = String::new();
    let _ = writeln!(out, "experiment  {}", plan.spec.spec.experiment.name);
    let test = match setup.test {
        simulate::design::TestDesign::Grid(m) => {
            format!("{m} test points evenly spaced over {}", setup.names[0])
        }
        simulate::design::TestDesign::Points(m) => {
            format!("{m} test points drawn from the inputs")
        }
    };
    let target = if setup.classification {
        "labels 0/1 drawn with the truth's probability".to_string()
    } else {
        format!("noise sd {}", setup.noise_sd)
    };
    let _ = writeln!(
        out,
        "simulation  {} replicates × {} training rows ({} design); {test}; {target}",
        setup.replicates,
        setup.train_size,
        if setup.fixed_design {
            "fixed"
        } else {
            "random"
        },
    );
    let first = plan.replicate(0)?;
    let a = &first.assignment;
    let _ = writeln!(
        out,
        "folds       {} per repeat × {} repeat(s), in every replicate",
        a.folds.len() / a.repeats,
        a.repeats
    );
    let _ = writeln!(out, "cache       {}", cache.root().display());
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "{:<24} {:>8} {:>8} {:>8} {:>8}",
        "candidate", "settings", "fits", "cached", "to fit"
    );
    let mut fits = vec![0usize; plan.candidates.len()];
    let mut cached = vec![0usize; plan.candidates.len()];
    for r in 0..setup.replicates {
        let experiment = plan.replicate_plan(&plan.replicate(r)?);
        let tasks = execute::tasks(&experiment);
        for (task, key) in tasks.iter().zip(execute::task_keys(&experiment, &tasks)) {
            fits[task.candidate] += 1;
            cached[task.candidate] += usize::from(cache.contains(&key));
        }
    }
    let candidates: Vec<PlanCandidate> = plan
        .candidates
        .iter()
        .enumerate()
        .map(|(c, candidate)| PlanCandidate {
            candidate: candidate.stem.clone(),
            family: candidate.family_name.to_string(),
            settings: candidate.settings.len(),
            fits: FitCounts::new(fits[c], cached[c]),
            work: None,
            infeasible: Vec::new(),
        })
        .collect();
    for c in &candidates {
        let _ = writeln!(
            out,
            "{:<24} {:>8} {:>8} {:>8} {:>8}",
            c.candidate, c.settings, c.fits.fits, c.fits.cached, c.fits.to_fit
        );
    }
    let total = FitCounts::total(&candidates);
    let _ = writeln!(
        out,
        "\n{} fits (per replicate and candidate: one on all training rows, one per fold): \
         {} cached, {} to compute",
        total.fits, total.cached, total.to_fit
    );
    let summary = summary::Plan {
        experiment: plan.spec.spec.experiment.name.clone(),
        kind: "simulation",
        rows: None,
        simulation: Some(PlanSimulation {
            replicates: setup.replicates,
            train_size: setup.train_size,
        }),
        folds: PlanFolds {
            per_repeat: a.folds.len() / a.repeats,
            repeats: a.repeats,
        },
        cache: cache.root().display().to_string(),
        candidates,
        total,
    };
    Ok((summary, out))
}

/// `heldout folds` for a simulation spec: every replicate's assignment.
pub(super) fn folds(loaded: LoadedSpec) -> anyhow::Result<()> {
    let plan = simulate::resolve(loaded)?;
    let mut writer = csv::Writer::from_writer(Vec::new());
    writer
        .write_record(["replicate", "row", "repeat", "fold"])
        .context("cannot write CSV")?;
    for r in 0..plan.setup.replicates {
        let replicate = plan.replicate(r)?;
        let a = &replicate.assignment;
        for repeat in 0..a.repeats {
            for (row, placement) in a
                .placements(plan.setup.train_size, repeat)
                .iter()
                .enumerate()
            {
                let fold = a.placement_label(*placement, repeat);
                writer
                    .write_record([
                        (r + 1).to_string(),
                        (row + 1).to_string(),
                        (repeat + 1).to_string(),
                        fold,
                    ])
                    .context("cannot write CSV")?;
            }
        }
    }
    let bytes = writer.into_inner().context("cannot write CSV")?;
    std::io::stdout()
        .write_all(&bytes)
        .context("cannot write to standard output")?;
    Ok(())
}
