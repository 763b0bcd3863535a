//! What each command does, from parsed arguments to files and printed text.
//! Shared here: the evaluation pipeline that `run` and `verify` both use.

mod cache;
mod compare;
mod completions;
mod inspect;
mod predict;
mod progress;
mod render;
mod run;
mod scaffold;
mod schema;
mod simulate;
mod summary;
mod verify;

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use anyhow::Context;

use crate::cli::{Command, DataAccessArgs};
use crate::error::{exit, exit_code_for, SpecsFailed, UsageError, VerifyMismatch};
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
        Command::Predict(args) => predict::predict(&args),
        Command::Cache(args) => cache::cache(&args),
        Command::Schema => schema::schema(),
        Command::Report(args) => render::report(&args),
        Command::Completions(args) => completions::completions(&args),
        Command::Manual(args) => completions::manual(&args),
    }
}

/// Runs `one` for every spec in turn, so that one failing spec does not hide
/// the others. A single spec's error is returned as it is. With several,
/// each error is printed as it happens, naming its spec (a mismatch was
/// already reported by `verify` itself), and the command ends with a summary
/// carrying the worst exit code.
fn for_each_spec(
    specs: &[PathBuf],
    mut one: impl FnMut(&Path) -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    let specs = without_their_receipts(specs);
    let specs = specs.as_slice();
    if let [only] = specs {
        return one(only);
    }
    let mut codes = Vec::with_capacity(specs.len());
    for spec in specs {
        let code = match one(spec) {
            Ok(()) => exit::OK,
            Err(error) => {
                if !error.is::<VerifyMismatch>() {
                    eprintln!("error: {}", naming_spec(spec, &error));
                }
                exit_code_for(&error)
            }
        };
        codes.push((spec.as_path(), code));
    }
    match several_failed(&codes) {
        None => Ok(()),
        Some(failed) => Err(failed.into()),
    }
}

/// `paths` without the receipts of specs among them: a glob such as
/// `specs/*.toml` matches `x.receipt.toml` beside `x.toml`, and a receipt is
/// never a spec. A receipt given without its spec stays, so that its error
/// says what it is.
pub(super) fn without_their_receipts(paths: &[PathBuf]) -> Vec<PathBuf> {
    paths
        .iter()
        .filter(|path| {
            !paths
                .iter()
                .any(|spec| receipt::path_for(spec) == **path && spec != *path)
        })
        .cloned()
        .collect()
}

/// The error's text, led by the spec's path unless it already names it
/// (spec errors do; a data or fit error names the table or the candidate).
fn naming_spec(spec: &Path, error: &anyhow::Error) -> String {
    let text = format!("{error:#}");
    let shown = spec.display().to_string();
    if text.contains(&shown) {
        text
    } else {
        format!("{shown}: {text}")
    }
}

/// The closing error of a command given several specs, `None` when every one
/// succeeded. Its exit code is the worst: an internal error (3) outranks bad
/// input (2), which outranks a verification mismatch (1), which outranks
/// success (0). The codes are numbered in that order, so the worst is the
/// largest.
fn several_failed(codes: &[(&Path, u8)]) -> Option<SpecsFailed> {
    let worst = codes.iter().map(|&(_, code)| code).max()?;
    if worst == exit::OK {
        return None;
    }
    let failed = codes
        .iter()
        .filter(|&&(_, code)| code != exit::OK)
        .map(|&(spec, code)| {
            let what = match code {
                exit::MISMATCH => "mismatch",
                exit::BAD_INPUT => "bad input",
                _ => "internal error",
            };
            format!("{} ({what})", spec.display())
        })
        .collect();
    Some(SpecsFailed {
        code: worst,
        total: codes.len(),
        failed,
    })
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
    /// The fits behind the results (a table's; empty for a simulation):
    /// `predict` reads the fold predictions for its intervals.
    fits: Vec<CandidateFits>,
}

/// Loads and checks a spec, with where its data may come from as the
/// command line says.
fn load_spec(
    spec_path: &Path,
    access: &DataAccessArgs,
) -> Result<spec::LoadedSpec, crate::error::SpecError> {
    let mut loaded = spec::load(spec_path)?;
    loaded.allow_outside = access.allow_outside;
    Ok(loaded)
}

/// Loads a spec and evaluates it: a table through the plan, a simulation
/// through its replicates. Returns `Ok(Err(summary))` for a shard.
fn evaluate_spec(
    spec_path: &Path,
    access: &DataAccessArgs,
    policy: CachePolicy<'_>,
    shard: Option<Shard>,
    show_progress: bool,
) -> anyhow::Result<Result<Evaluation, Summary>> {
    let loaded = load_spec(spec_path, access)?;
    if loaded.is_simulation() {
        return simulate::evaluate(loaded, spec_path, policy, shard, show_progress);
    }
    let reading = progress::TableProgress::new(&loaded.data().table, show_progress);
    let plan = plan::resolve_reporting(loaded, &|parsed, total| reading.update(parsed, total));
    reading.finish(plan.is_ok());
    let plan = plan?;
    if plan.assignment.identical_repeats > 0 {
        eprintln!(
            "warning: {}: {} of the {} repeats dealt the same folds as an earlier repeat \
             (too few groups or rows to shuffle); each partition is counted once, so the \
             scores rest on {} repeat(s)",
            spec_path.display(),
            plan.assignment.identical_repeats,
            plan.assignment.identical_repeats + plan.assignment.repeats,
            plan.assignment.repeats
        );
    }
    if plan.table.unterminated {
        eprintln!(
            "warning: {}: the last line ends without a line break; check that the table \
             was not cut short inside its last value",
            plan.table.path.display()
        );
    }
    check_leakage(&plan, spec_path)?;
    evaluate(plan, spec_path, policy, shard, show_progress)
}

/// Warns of every leakage finding before anything is fitted, or stops with
/// bad input under `[choose] leakage = "error"` (docs/reports.md, "Leakage").
fn check_leakage(plan: &ExperimentPlan, spec_path: &Path) -> anyhow::Result<()> {
    let findings = crate::evidence::leakage::describe(&crate::evidence::leakage::of_plan(plan));
    if findings.is_empty() {
        return Ok(());
    }
    if plan.spec.spec.choose.leakage == crate::spec::LeakagePolicy::Error {
        return Err(crate::error::DataError::Table {
            path: plan.table.path.clone(),
            message: format!(
                "leakage ([choose] leakage = \"error\" in {}): {}",
                spec_path.display(),
                findings.join("; ")
            ),
        }
        .into());
    }
    for finding in findings {
        eprintln!("warning: {}: leakage: {finding}", spec_path.display());
    }
    Ok(())
}

/// Fits (through the cache policy) and renders a planned spec, or only fills
/// the cache for a shard (then returns `Ok(Err(summary))`).
fn evaluate(
    mut plan: ExperimentPlan,
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
    let (fits, summary) = with_progress("fitting", total, "fits", show_progress, |done| {
        Ok(execute::run(&plan, policy, shard, done)?)
    })?;
    let Some(fits) = fits else {
        return Ok(Err(summary));
    };
    let (nested, nested_summary) = nested_selection(&mut plan, policy, show_progress)?;
    let mut summary = summary;
    summary.absorb(nested_summary);
    let mut evaluation = finish(plan, spec_path, &fits, summary, None, nested)?;
    evaluation.fits = fits;
    Ok(Ok(evaluation))
}

/// `[choose] nested = true`: the whole selection rerun in outer folds,
/// through the same cache (docs/reports.md, "Nested cross-validation").
fn nested_selection(
    plan: &mut ExperimentPlan,
    policy: CachePolicy<'_>,
    show_progress: bool,
) -> anyhow::Result<(Option<results::Nested>, Summary)> {
    use crate::evidence::nested::{self, NestedError};
    if !plan.spec.spec.choose.nested {
        return Ok((None, Summary::default()));
    }
    let spec_path = plan.spec.path.clone();
    let spec_key = |key: &str, message: String| crate::error::DataError::SpecKey {
        path: spec_path.clone(),
        key: key.to_string(),
        message,
    };
    let assignments = match nested::assignments(plan) {
        Ok(a) => a,
        Err(e @ NestedError::Method(_)) => {
            return Err(spec_key("choose.nested", e.to_string()).into())
        }
        Err(e) => return Err(spec_key("split", e.to_string()).into()),
    };
    let total = nested::task_count(plan, &assignments);
    let (nested, summary) = with_progress("nested", total, "fits", show_progress, |done| {
        nested::run(plan, assignments, policy, done).map_err(|e| match e {
            NestedError::Execute(e) => anyhow::Error::from(e),
            other => spec_key("split", other.to_string()).into(),
        })
    })?;
    Ok((Some(nested), summary))
}

/// Runs `work`, which calls `done(cached)` once per finished unit of
/// `total` (from any thread), drawing progress on stderr when `show` is set:
/// the units computed out of those to compute, the cached ones counted apart,
/// the time taken and an estimate of the time left. Then warns about every
/// cache entry that had to be recomputed. Shared by tables and simulations.
fn with_progress<T>(
    what: &str,
    total: usize,
    units: &'static str,
    show: bool,
    work: impl FnOnce(&(dyn Fn(bool) + Sync)) -> anyhow::Result<(T, Summary)>,
) -> anyhow::Result<(T, Summary)> {
    let progress = progress::WorkProgress::new(what, total, units, show);
    let outcome = work(&|cached| progress.record(cached));
    progress.finish(outcome.is_ok());
    let (value, summary) = outcome?;
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
    nested: Option<results::Nested>,
) -> anyhow::Result<Evaluation> {
    let mut results = results::assemble(&plan, fits)?;
    if simulation.is_none() {
        results.intervals = results::intervals::assess(&plan, fits, &results)?;
        results.prediction_sets = results::prediction_sets::assess(&plan, fits, &results)?;
    }
    results.simulation = simulation;
    let kept_cv = results
        .candidates
        .iter()
        .find(|c| c.id == results.chosen)
        .map_or(f64::NAN, |c| c.cv_score);
    results.nested = nested.map(|n| crate::evidence::nested::with_kept_cv(n, kept_cv));
    let regenerate = regenerate_command(spec_path);
    let spec_text = report::spec_as_read(&plan.spec.spec);
    let inputs = report::ReportInputs {
        regenerate: &regenerate,
        spec_text: &spec_text,
        unverified: None,
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
        fits: Vec::new(),
    })
}

/// The commands a report gives for regenerating its outputs, run from the
/// spec's folder. They name the spec file that was given (a YAML spec as
/// `.yaml`), so the command can be pasted as it stands.
fn regenerate_command(spec_path: &Path) -> String {
    let name = spec_path
        .file_name()
        .map(|n| shell_word(&n.to_string_lossy()))
        .unwrap_or_default();
    format!("heldout verify {name}\nheldout run {name}")
}

/// `word` as a POSIX shell reads it back: unchanged when it holds only
/// characters no shell treats specially, otherwise in single quotes.
fn shell_word(word: &str) -> String {
    let plain = !word.is_empty()
        && word
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_.,+@%/:=".contains(c));
    if plain {
        word.to_string()
    } else {
        format!("'{}'", word.replace('\'', r"'\''"))
    }
}

/// Whether progress may be drawn on stderr.
fn progress_wanted(quiet: bool) -> bool {
    !quiet && std::io::stderr().is_terminal()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn several_specs_end_with_the_worst_exit_code() {
        let (a, b, c) = (
            Path::new("a.toml"),
            Path::new("b.toml"),
            Path::new("c.toml"),
        );
        assert!(several_failed(&[(a, exit::OK), (b, exit::OK)]).is_none());
        let failed = several_failed(&[(a, exit::OK), (b, exit::MISMATCH)]).unwrap();
        assert_eq!(failed.code, exit::MISMATCH);
        assert_eq!(failed.to_string(), "1 of 2 specs failed: b.toml (mismatch)");
        let failed =
            several_failed(&[(a, exit::BAD_INPUT), (b, exit::MISMATCH), (c, exit::OK)]).unwrap();
        assert_eq!(failed.code, exit::BAD_INPUT);
        // Whatever the order, an internal error is the worst.
        let failed = several_failed(&[
            (a, exit::INTERNAL),
            (b, exit::BAD_INPUT),
            (c, exit::MISMATCH),
        ])
        .unwrap();
        assert_eq!(failed.code, exit::INTERNAL);
        assert_eq!(
            failed.to_string(),
            "3 of 3 specs failed: a.toml (internal error), b.toml (bad input), c.toml (mismatch)"
        );
        let error: anyhow::Error = failed.into();
        assert_eq!(exit_code_for(&error), exit::INTERNAL);
    }

    #[test]
    fn errors_of_several_specs_name_the_spec_once() {
        let spec = Path::new("specs/b.toml");
        let data = anyhow::anyhow!("data.csv: line 3, column \"y\": cannot read \"x\" as a number");
        assert_eq!(
            naming_spec(spec, &data),
            "specs/b.toml: data.csv: line 3, column \"y\": cannot read \"x\" as a number"
        );
        let parse = anyhow::anyhow!("specs/b.toml:4:1: unknown key");
        assert_eq!(naming_spec(spec, &parse), "specs/b.toml:4:1: unknown key");
    }

    #[test]
    fn regenerate_command_names_the_file_that_was_given() {
        assert_eq!(
            regenerate_command(Path::new("specs/heat-demand.yaml")),
            "heldout verify heat-demand.yaml\nheldout run heat-demand.yaml"
        );
        assert_eq!(
            regenerate_command(Path::new("/abs/dir/study.yml")),
            "heldout verify study.yml\nheldout run study.yml"
        );
        assert_eq!(
            regenerate_command(Path::new("heat-demand.toml")),
            "heldout verify heat-demand.toml\nheldout run heat-demand.toml"
        );
    }

    #[test]
    fn file_names_a_shell_would_split_are_quoted() {
        assert_eq!(shell_word("plain-name_1.toml"), "plain-name_1.toml");
        assert_eq!(shell_word("two words.toml"), "'two words.toml'");
        assert_eq!(shell_word("it's.yaml"), r"'it'\''s.yaml'");
        assert_eq!(shell_word("$HOME.toml"), "'$HOME.toml'");
    }
}
