//! What each command does, from parsed arguments to files and printed text.
//! Shared here: the evaluation pipeline that `run` and `verify` both use.

mod compare;
mod inspect;
mod render;
mod run;
mod scaffold;
mod schema;
mod simulate;
mod summary;
mod verify;

use std::io::IsTerminal;
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};

use anyhow::Context;

use crate::cli::Command;
use crate::error::UsageError;
use crate::execute::{self, CachePolicy, CandidateFits, Shard, Summary};
use crate::plan::{self, ExperimentPlan};
use crate::receipt::{self, Receipt};
use crate::results::{self, Results};
use crate::{report, spec};

/// Runs one parsed command.
pub fn dispatch(command: Command) -> anyhow::Result<()> {
    match command {
        Command::Run(args) => run::run(&args),
        Command::Verify(args) => verify::verify(&args),
        Command::Plan(args) => inspect::plan(&args),
        Command::Folds(args) => inspect::folds(&args),
        Command::Compare(args) => compare::compare(&args),
        Command::New(args) => scaffold::scaffold(&args),
        Command::Schema => schema::schema(),
        Command::Report(args) => render::report(&args),
    }
}

/// A rayon pool with `jobs` threads (default: one per core).
fn thread_pool(jobs: Option<usize>) -> anyhow::Result<rayon::ThreadPool> {
    let threads = match jobs {
        Some(0) => return Err(UsageError("--jobs must be at least 1".into()).into()),
        Some(n) => n,
        None => 0,
    };
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .context("cannot start the worker threads")
}

/// Everything one evaluation of a spec produced.
struct Evaluation {
    plan: ExperimentPlan,
    results: Results,
    /// (name inside the output folder, bytes), in a fixed order.
    outputs: Vec<(String, Vec<u8>)>,
    receipt: Receipt,
    summary: Summary,
}

/// Loads a spec and evaluates it: a table through the plan, a simulation
/// through its replicates. Returns `Ok(Err(summary))` for a shard.
fn evaluate_spec(
    spec_path: &Path,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    show_progress: bool,
) -> anyhow::Result<Result<Evaluation, Summary>> {
    let loaded = spec::load(spec_path)?;
    if loaded.is_simulation() {
        return simulate::evaluate(loaded, spec_path, policy, shard, show_progress);
    }
    let plan = plan::resolve(loaded)?;
    evaluate(plan, spec_path, policy, shard, show_progress)
}

/// Fits (through the cache policy) and renders a planned spec, or only fills
/// the cache for a shard (then returns `Ok(Err(summary))`).
fn evaluate(
    plan: ExperimentPlan,
    spec_path: &Path,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    show_progress: bool,
) -> anyhow::Result<Result<Evaluation, Summary>> {
    let total = execute::tasks(&plan)
        .iter()
        .enumerate()
        .filter(|(n, _)| shard.is_none_or(|s| s.owns(*n)))
        .count();
    let (fits, summary) = with_progress("fitting", total, "tasks", show_progress, |done| {
        Ok(execute::run(&plan, policy, shard, done)?)
    })?;
    let Some(fits) = fits else {
        return Ok(Err(summary));
    };
    Ok(Ok(finish(plan, spec_path, &fits, summary, None)?))
}

/// Runs `work`, which calls `done` once per finished unit of `total`,
/// drawing `{what}: N/total {units}` on stderr when `show` is set; then
/// warns about every cache entry that had to be recomputed. Shared by
/// tables and simulations.
fn with_progress<T>(
    what: &str,
    total: usize,
    units: &str,
    show: bool,
    work: impl FnOnce(&(dyn Fn() + Sync)) -> anyhow::Result<(T, Summary)>,
) -> anyhow::Result<(T, Summary)> {
    let finished = AtomicUsize::new(0);
    let done = || {
        let count = finished.fetch_add(1, Ordering::Relaxed) + 1;
        if show {
            eprint!("\r{what}: {count}/{total} {units}");
        }
    };
    let (value, summary) = work(&done)?;
    if show {
        eprintln!();
    }
    for why in &summary.corrupt {
        eprintln!("warning: cache entry ignored and recomputed: {why}");
    }
    Ok((value, summary))
}

fn finish(
    plan: ExperimentPlan,
    spec_path: &Path,
    fits: &[CandidateFits],
    summary: Summary,
    simulation: Option<crate::simulate::SimulationOutput>,
) -> anyhow::Result<Evaluation> {
    let mut results = results::assemble(&plan, fits);
    results.simulation = simulation;
    let regenerate = regenerate_command(spec_path);
    let spec_text = report::spec_as_read(&plan.spec.spec);
    let inputs = report::ReportInputs {
        regenerate: &regenerate,
        spec_text: &spec_text,
    };
    let outputs = report::render_outputs(&results, &plan.spec.spec.report.formats, &inputs)
        .context("cannot render the reports")?;
    let receipt = receipt::build(&plan, &results, &outputs);
    Ok(Evaluation {
        plan,
        results,
        outputs,
        receipt,
        summary,
    })
}

/// The commands a report gives for regenerating its outputs, run from the
/// spec's folder. The same spec in YAML gives the same bytes, so they name
/// the TOML form; the report says a YAML twin works alike.
fn regenerate_command(spec_path: &Path) -> String {
    let stem = spec_path
        .file_stem()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    format!("heldout verify {stem}.toml\nheldout run {stem}.toml")
}

/// Whether progress may be drawn on stderr.
fn progress_wanted(quiet: bool) -> bool {
    !quiet && std::io::stderr().is_terminal()
}
