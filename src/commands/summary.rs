//! `--json`: what `run`, `verify`, `plan` and `compare` did, as one JSON
//! object on stdout for scripts (schema [`SCHEMA`]; every field is described
//! in docs/json.md). The commands hand over what they already worked out;
//! this module owns the names and the shape, so that the command files only
//! decide when to print.
//!
//! Every invocation that gets past argument parsing prints exactly one
//! object, also when it fails: the failure is in it (`error`, and for `run`
//! and `verify` in the entry of the spec it belongs to), and stderr says the
//! same as without `--json`. Fields are always present; `null` stands for
//! "does not apply".

use std::path::Path;

use anyhow::Context as _;
use serde::Serialize;
use serde_json::Value;

use super::Evaluation;
use crate::cli::CompareArgs;
use crate::execute::{Shard, Summary};
use crate::report::compare::{BeforeAfter, CandidateChange, CandidateOnly, Comparison, Moved};
use crate::spec::{Metric, Rule};

/// The name and version of the object's layout. A field's meaning never
/// changes under one version; removing or renaming one means a new version.
pub(crate) const SCHEMA: &str = "heldout-summary/1";

/// Why a command, or one spec of it, failed: the message `main` prints on
/// stderr and the exit code it stands for.
#[derive(Debug, Serialize)]
pub(crate) struct Failure {
    message: String,
    exit_code: u8,
}

impl Failure {
    fn of(error: &anyhow::Error) -> Self {
        Failure {
            message: format!("{error:#}"),
            exit_code: crate::error::exit_code_for(error),
        }
    }
}

/// The fields every object starts with, then the command's own.
#[derive(Serialize)]
struct Envelope<'a, B: Serialize> {
    schema: &'static str,
    command: &'static str,
    exit_code: u8,
    /// Only for errors (exit codes 2 and 3); a difference `verify` finds is
    /// a verdict, not an error.
    error: Option<Failure>,
    #[serde(flatten)]
    body: &'a B,
}

/// Prints the one object for `command` and hands its outcome on unchanged,
/// so the exit code and stderr are what they would be without `--json`.
fn print<B: Serialize>(
    command: &'static str,
    body: &B,
    outcome: anyhow::Result<()>,
) -> anyhow::Result<()> {
    let exit_code = match &outcome {
        Ok(()) => crate::error::exit::OK,
        Err(error) => crate::error::exit_code_for(error),
    };
    let error = match &outcome {
        Err(error) if exit_code != crate::error::exit::MISMATCH => Some(Failure::of(error)),
        _ => None,
    };
    let envelope = Envelope {
        schema: SCHEMA,
        command,
        exit_code,
        error,
        body,
    };
    let mut text = serde_json::to_string_pretty(&envelope)
        .context("internal error: cannot write the JSON summary")?;
    text.push('\n');
    write_stdout(&text)?;
    outcome
}

/// Writes `text` to stdout, an error (not a panic) when stdout is closed
/// early, as when piped into `head`.
pub(crate) fn write_stdout(text: &str) -> anyhow::Result<()> {
    use std::io::Write as _;
    let mut stdout = std::io::stdout().lock();
    stdout
        .write_all(text.as_bytes())
        .and_then(|()| stdout.flush())
        .context("cannot write to standard output")
}

/// The body of `run` and `verify`: one entry per spec, in command-line
/// order, up to and including the first that failed.
#[derive(Serialize)]
struct Specs<'a, E: Serialize> {
    specs: &'a [E],
}

/// Runs `work` for `run` or `verify` (`command`), which notes one entry per
/// spec it got to; with `json`, prints the object holding them.
pub(crate) fn for_specs<E: Serialize>(
    command: &'static str,
    json: bool,
    work: impl FnOnce(&mut Vec<E>) -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    let mut entries = Vec::new();
    let outcome = work(&mut entries);
    if !json {
        return outcome;
    }
    print(command, &Specs { specs: &entries }, outcome)
}

fn path_text(path: &Path) -> String {
    path.display().to_string()
}

// ---------------------------------------------------------------------------
// run

/// What `run` did with one spec.
#[derive(Debug, Serialize)]
pub(crate) struct RunEntry {
    spec: String,
    /// `done`, `shard` (only a slice of the fits, into the cache) or `error`.
    status: &'static str,
    experiment: Option<String>,
    metric: Option<Metric>,
    rule: Option<Rule>,
    kept: Option<Kept>,
    fits: Option<Fits>,
    shard: Option<ShardPart>,
    output_dir: Option<String>,
    receipt: Option<String>,
    error: Option<Failure>,
}

/// The setting the rule kept and its scores.
#[derive(Debug, Serialize)]
struct Kept {
    id: String,
    cv_score: f64,
    cv_se: f64,
    /// `null` without a locked test set.
    test_score: Option<f64>,
}

#[derive(Debug, Serialize)]
struct Fits {
    computed: usize,
    reused: usize,
}

/// Which slice of the fits a sharded run computed, 1-based as given.
#[derive(Debug, Serialize)]
struct ShardPart {
    index: usize,
    count: usize,
}

impl RunEntry {
    fn empty(spec: &Path, status: &'static str) -> Self {
        RunEntry {
            spec: path_text(spec),
            status,
            experiment: None,
            metric: None,
            rule: None,
            kept: None,
            fits: None,
            shard: None,
            output_dir: None,
            receipt: None,
            error: None,
        }
    }

    /// A spec run to the end: outputs in `dir`, receipt at `receipt`.
    pub(super) fn done(spec: &Path, evaluation: &Evaluation, dir: &Path, receipt: &Path) -> Self {
        let results = &evaluation.results;
        let chosen = results.candidates.iter().find(|c| c.id == results.chosen);
        RunEntry {
            experiment: Some(results.experiment.clone()),
            metric: Some(results.metric),
            rule: Some(results.rule),
            kept: Some(Kept {
                id: results.chosen.clone(),
                cv_score: chosen.map_or(f64::NAN, |c| c.cv_score),
                cv_se: chosen.map_or(f64::NAN, |c| c.cv_se),
                test_score: results.test_score,
            }),
            fits: Some(fits(&evaluation.summary)),
            output_dir: Some(path_text(dir)),
            receipt: Some(path_text(receipt)),
            ..Self::empty(spec, "done")
        }
    }

    /// One slice of a spec's fits computed into the cache, nothing assembled.
    pub(super) fn shard(spec: &Path, shard: Shard, summary: &Summary) -> Self {
        RunEntry {
            fits: Some(fits(summary)),
            shard: Some(ShardPart {
                index: shard.index + 1,
                count: shard.count,
            }),
            ..Self::empty(spec, "shard")
        }
    }

    /// A spec that failed.
    pub(super) fn failed(spec: &Path, error: &anyhow::Error) -> Self {
        RunEntry {
            error: Some(Failure::of(error)),
            ..Self::empty(spec, "error")
        }
    }
}

fn fits(summary: &Summary) -> Fits {
    Fits {
        computed: summary.computed,
        reused: summary.reused,
    }
}

// ---------------------------------------------------------------------------
// verify

/// What `verify` found for one spec.
#[derive(Debug, Serialize)]
pub(crate) struct VerifyEntry {
    spec: String,
    receipt: String,
    /// `identical`, `differs` or `error`.
    verdict: &'static str,
    /// How many differences were found (0 unless `differs`).
    differences: usize,
    first_difference: Option<Difference>,
    error: Option<Failure>,
}

impl VerifyEntry {
    /// The entry for `spec`, from what verifying it gave.
    pub(super) fn new(
        spec: &Path,
        receipt: &Path,
        outcome: &anyhow::Result<Vec<Difference>>,
    ) -> Self {
        let (verdict, differences, first, error) = match outcome {
            Ok(found) if found.is_empty() => ("identical", 0, None, None),
            Ok(found) => ("differs", found.len(), found.first().cloned(), None),
            Err(e) => ("error", 0, None, Some(Failure::of(e))),
        };
        VerifyEntry {
            spec: path_text(spec),
            receipt: path_text(receipt),
            verdict,
            differences,
            first_difference: first,
            error,
        }
    }
}

/// One difference `verify` found between a receipt and the recomputation:
/// the line it prints, and the same in parts.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub(crate) struct Difference {
    /// Which kind of thing differs: `tool`, `spec`, `templates`, `data_file`,
    /// `folds`, `candidate`, `simulation`, `output` or `receipt_header`.
    what: &'static str,
    /// `changed`, `missing_now` (in the receipt, not now) or `new_now`.
    change: &'static str,
    /// The candidate or simulation id, or the file's path.
    name: Option<String>,
    /// Which number moved, in results.json's words (`cv_score`,
    /// `fold_scores`, `chosen_by_replicate`).
    number: Option<String>,
    /// Where within that number: `fold 3 of repeat 2`, `replicate 4`.
    place: Option<String>,
    /// As recorded (the receipt, or the run's results.json) and as
    /// recomputed: digests and versions as text, numbers as numbers.
    before: Value,
    after: Value,
    /// How many doubles lie between a number's two values.
    ulps: Option<u64>,
    /// The line `verify` prints.
    message: String,
}

impl Difference {
    /// A difference of `what`, changed in the way `change` says.
    pub(crate) fn new(what: &'static str, change: &'static str, message: String) -> Self {
        Difference {
            what,
            change,
            name: None,
            number: None,
            place: None,
            before: Value::Null,
            after: Value::Null,
            ulps: None,
            message,
        }
    }

    pub(crate) fn name(mut self, name: impl Into<String>) -> Self {
        self.name = Some(name.into());
        self
    }

    /// The recorded and the recomputed value.
    pub(crate) fn values(mut self, before: impl Into<Value>, after: impl Into<Value>) -> Self {
        self.before = before.into();
        self.after = after.into();
        self
    }

    /// A number that moved: which, where within it, and both values.
    pub(crate) fn number(
        mut self,
        number: impl Into<String>,
        place: Option<String>,
        before: f64,
        after: f64,
    ) -> Self {
        self.number = Some(number.into());
        self.place = place;
        self.ulps = Some(crate::receipt::ulps_apart(before, after));
        self.values(before, after)
    }

    /// A choice that moved (`chosen_by_replicate`): which, where, both ids.
    pub(crate) fn choice(
        mut self,
        number: impl Into<String>,
        place: String,
        before: &str,
        after: &str,
    ) -> Self {
        self.number = Some(number.into());
        self.place = Some(place);
        self.values(before, after)
    }
}

impl std::fmt::Display for Difference {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

// ---------------------------------------------------------------------------
// plan

/// What `plan` found for its spec (the object's body besides `spec`).
#[derive(Debug, Serialize)]
pub(crate) struct Plan {
    pub(super) experiment: String,
    /// `table` or `simulation`.
    pub(super) kind: &'static str,
    /// A table's rows; `null` for a simulation.
    pub(super) rows: Option<PlanRows>,
    /// A simulation's replicates; `null` for a table.
    pub(super) simulation: Option<PlanSimulation>,
    pub(super) folds: PlanFolds,
    pub(super) cache: String,
    pub(super) candidates: Vec<PlanCandidate>,
    pub(super) total: FitCounts,
}

#[derive(Debug, Serialize)]
pub(crate) struct PlanRows {
    pub(super) read: usize,
    pub(super) dropped: usize,
    pub(super) train: usize,
    pub(super) test: usize,
}

#[derive(Debug, Serialize)]
pub(crate) struct PlanSimulation {
    pub(super) replicates: usize,
    pub(super) train_size: usize,
}

#[derive(Debug, Serialize)]
pub(crate) struct PlanFolds {
    pub(super) per_repeat: usize,
    pub(super) repeats: usize,
}

/// One candidate of the plan.
#[derive(Debug, Serialize)]
pub(crate) struct PlanCandidate {
    /// The stem of its setting ids (its label, or its family's name).
    pub(super) candidate: String,
    pub(super) family: String,
    pub(super) settings: usize,
    #[serde(flatten)]
    pub(super) fits: FitCounts,
    /// Training rows × settings still to fit (a table's plan only).
    pub(super) work: Option<u64>,
    /// Settings known to be infeasible before fitting, with the fits in
    /// which they are (a table's plan only; docs/spec.md, "Infeasible settings").
    pub(super) infeasible: Vec<PlanInfeasible>,
}

/// One setting that cannot be fitted on some of its training rows.
#[derive(Debug, Clone, Serialize)]
pub(crate) struct PlanInfeasible {
    /// The setting's id (`nearest-neighbors/k=60`).
    pub(super) setting: String,
    pub(super) fits: Vec<crate::execute::feasible::Infeasible>,
}

/// Fits in all, found in the cache, and still to compute.
#[derive(Debug, Default, Clone, Copy, Serialize)]
pub(crate) struct FitCounts {
    pub(super) fits: usize,
    pub(super) cached: usize,
    pub(super) to_fit: usize,
}

impl FitCounts {
    /// `fits` fits of which `cached` are in the cache.
    pub(super) fn new(fits: usize, cached: usize) -> Self {
        FitCounts {
            fits,
            cached,
            to_fit: fits - cached,
        }
    }

    /// The counts of every candidate together.
    pub(super) fn total(candidates: &[PlanCandidate]) -> Self {
        let (fits, cached) = candidates
            .iter()
            .fold((0, 0), |(f, c), p| (f + p.fits.fits, c + p.fits.cached));
        FitCounts::new(fits, cached)
    }
}

#[derive(Serialize)]
struct PlanBody<'a> {
    spec: String,
    plan: Option<&'a Plan>,
}

/// Prints the object of `plan`.
pub(crate) fn print_plan(spec: &Path, plan: anyhow::Result<Plan>) -> anyhow::Result<()> {
    let (plan, outcome) = split(plan);
    let body = PlanBody {
        spec: path_text(spec),
        plan: plan.as_ref(),
    };
    print("plan", &body, outcome)
}

/// A value and the bare outcome, so the outcome can be handed on.
fn split<T>(result: anyhow::Result<T>) -> (Option<T>, anyhow::Result<()>) {
    match result {
        Ok(value) => (Some(value), Ok(())),
        Err(error) => (None, Err(error)),
    }
}

// ---------------------------------------------------------------------------
// compare

#[derive(Serialize)]
struct CompareBody {
    before: String,
    after: String,
    comparison: Option<CompareSummary>,
}

/// What moved between the two result sets.
#[derive(Serialize)]
struct CompareSummary {
    experiment: BeforeAfter<String>,
    metric: String,
    kept: KeptChange,
    test_score: BeforeAfter<Option<f64>>,
    changed_inputs: Vec<InputChange>,
    setup_changes: Vec<SettingChange>,
    families: AddedRemoved,
    candidates: CandidateChanges,
    settings: SettingIds,
    moved: Vec<MovedNumber>,
    fold_scores_compared: bool,
    fold_scores_moved: Vec<FoldScoresMoved>,
}

#[derive(Serialize)]
struct KeptChange {
    before: String,
    after: String,
    changed: bool,
}

#[derive(Serialize)]
struct InputChange {
    input: &'static str,
    before: Option<String>,
    after: Option<String>,
}

#[derive(Serialize)]
struct SettingChange {
    setting: String,
    before: Value,
    after: Value,
}

#[derive(Serialize)]
struct AddedRemoved {
    added: Vec<String>,
    removed: Vec<String>,
}

#[derive(Serialize)]
struct CandidateChanges {
    added: Vec<CandidateOnly>,
    removed: Vec<CandidateOnly>,
    changed: Vec<CandidateChange>,
}

#[derive(Serialize)]
struct SettingIds {
    in_both: usize,
    added: Vec<String>,
    removed: Vec<String>,
}

#[derive(Serialize)]
struct MovedNumber {
    place: String,
    number: String,
    before: Option<f64>,
    after: Option<f64>,
    /// after − before; `null` unless both are numbers.
    change: Option<f64>,
    /// (after − before) / |before|; `null` when before is 0 or absent.
    relative: Option<f64>,
}

#[derive(Serialize)]
struct FoldScoresMoved {
    setting: String,
    moved: usize,
    folds: usize,
    largest: LargestFold,
}

#[derive(Serialize)]
struct LargestFold {
    /// 0-based position in `fold_scores`.
    position: usize,
    /// As `verify` names it: `fold 3 of repeat 2`.
    fold: String,
    before: Option<f64>,
    after: Option<f64>,
    change: Option<f64>,
    relative: Option<f64>,
}

fn moved_number(m: &Moved) -> MovedNumber {
    let (change, relative) = change_of(m);
    MovedNumber {
        place: m.place.clone(),
        number: m.number.clone(),
        before: m.before,
        after: m.after,
        change,
        relative,
    }
}

fn change_of(m: &Moved) -> (Option<f64>, Option<f64>) {
    match (m.before, m.after) {
        (Some(b), Some(a)) => (Some(a - b), (b != 0.0).then(|| (a - b) / b.abs())),
        _ => (None, None),
    }
}

fn compare_summary(c: Comparison) -> CompareSummary {
    CompareSummary {
        experiment: c.experiment,
        metric: c.metric,
        kept: KeptChange {
            changed: c.chosen.before != c.chosen.after,
            before: c.chosen.before,
            after: c.chosen.after,
        },
        test_score: c.test_score,
        changed_inputs: c
            .inputs
            .into_iter()
            .filter(|row| row.changed)
            .map(|row| InputChange {
                input: row.input.key(),
                before: row.values.before,
                after: row.values.after,
            })
            .collect(),
        setup_changes: c
            .setup
            .into_iter()
            .map(|s| SettingChange {
                setting: s.what,
                before: s.before,
                after: s.after,
            })
            .collect(),
        families: AddedRemoved {
            added: c.families_added,
            removed: c.families_removed,
        },
        candidates: CandidateChanges {
            added: c.candidates_added,
            removed: c.candidates_removed,
            changed: c.candidates_changed,
        },
        settings: SettingIds {
            in_both: c.settings_in_both,
            added: c.added,
            removed: c.removed,
        },
        moved: c.moved.iter().map(moved_number).collect(),
        fold_scores_compared: c.folds_compared,
        fold_scores_moved: c
            .folds_moved
            .into_iter()
            .map(|f| {
                let (change, relative) = change_of(&f.values);
                FoldScoresMoved {
                    setting: f.values.place,
                    moved: f.moved,
                    folds: f.folds,
                    largest: LargestFold {
                        position: f.largest,
                        fold: f.largest_fold,
                        before: f.values.before,
                        after: f.values.after,
                        change,
                        relative,
                    },
                }
            })
            .collect(),
    }
}

/// Prints the object of `compare`: every moved number (never cut short).
pub(crate) fn print_compare(
    args: &CompareArgs,
    comparison: anyhow::Result<Comparison>,
) -> anyhow::Result<()> {
    let (comparison, outcome) = split(comparison);
    let body = CompareBody {
        before: path_text(&args.before),
        after: path_text(&args.after),
        comparison: comparison.map(compare_summary),
    };
    print("compare", &body, outcome)
}
