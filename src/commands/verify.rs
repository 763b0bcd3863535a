//! `heldout verify`: recompute a spec from scratch and compare with its
//! receipt bit for bit, naming the first difference.

use std::path::Path;

use super::summary::{self, Difference, VerifyEntry};
use crate::cache::Cache;
use crate::cli::VerifyArgs;
use crate::error::{SpecError, VerifyMismatch};
use crate::execute::CachePolicy;
use crate::plan::ExperimentPlan;
use crate::receipt::{self, FileDigest, Receipt};
use crate::results::Results;

pub(crate) fn verify(args: &VerifyArgs) -> anyhow::Result<()> {
    summary::for_specs("verify", args.json, |entries| verify_specs(args, entries))
}

/// Verifies the specs in order, noting what each gave in `entries`.
fn verify_specs(args: &VerifyArgs, entries: &mut Vec<VerifyEntry>) -> anyhow::Result<()> {
    let pool = super::thread_pool(args.jobs)?;
    crate::output::require_folder(&args.cache.cache, "--cache")?;
    let cache = Cache::new(&args.cache.cache);
    super::for_each_spec(&args.specs, |spec_path| {
        let outcome = pool.install(|| verify_one(spec_path, args, &cache));
        entries.push(VerifyEntry::new(
            spec_path,
            &receipt::path_for(spec_path),
            &outcome,
        ));
        let differences = outcome?;
        if differences.is_empty() {
            if !args.quiet && !args.json {
                println!("verified {}: identical to its receipt", spec_path.display());
            }
            return Ok(());
        }
        // With --json the verdict is in the summary; stdout holds nothing else.
        if !args.json {
            println!("MISMATCH {}", spec_path.display());
            println!("  first difference: {}", differences[0]);
            for other in &differences[1..] {
                println!("  also: {other}");
            }
        }
        Err(VerifyMismatch {
            specs: vec![spec_path.display().to_string()],
        }
        .into())
    })
}

fn verify_one(
    spec_path: &Path,
    args: &VerifyArgs,
    cache: &Cache,
) -> anyhow::Result<Vec<Difference>> {
    let receipt_path = receipt::path_for(spec_path);
    if !receipt_path.is_file() {
        return Err(SpecError::Invalid {
            path: spec_path.to_path_buf(),
            key: "receipt".into(),
            message: format!(
                "no receipt at {}; run `heldout run {}` first and commit the receipt",
                receipt_path.display(),
                spec_path.display()
            ),
        }
        .into());
    }
    let recorded = receipt::read(&receipt_path)?;
    let policy = CachePolicy {
        read: args.trust_cache.then_some(cache),
        write: None,
    };
    let evaluation = super::evaluate_spec(
        spec_path,
        &args.data,
        policy,
        None,
        super::progress_wanted(args.quiet),
    )?
    .expect("verify never shards");
    let out_dir = args.out.join(&recorded.experiment);
    let stored = stored_results(&out_dir, &recorded);
    // A cache told to be trusted that holds an entry written under another
    // key (or damaged) has been tampered with or has failed: the run
    // recomputed the entry, but a verification that trusted it must say so.
    let mut found: Vec<Difference> = evaluation
        .summary
        .corrupt
        .iter()
        .map(|why| {
            Difference::new(
                "cache_entry",
                "rejected",
                format!("--trust-cache: a cache entry failed its check: {why}"),
            )
        })
        .collect();
    found.extend(differences(
        &recorded,
        &evaluation.receipt,
        stored.as_ref(),
        &evaluation.results,
        &evaluation.plan,
        spec_path,
    ));
    found.extend(files_on_disk(&recorded, &out_dir));
    Ok(found)
}

/// The outputs a run left in `dir` whose bytes are not the ones the receipt
/// records: what people read must be what was computed. Only files present
/// are checked (a CI checkout usually holds no outputs at all); a missing
/// file cannot mislead a reader.
fn files_on_disk(recorded: &Receipt, dir: &Path) -> Vec<Difference> {
    let mut found = Vec::new();
    for file in &recorded.outputs {
        // A receipt names files inside the output folder; any other name
        // (absolute, or climbing out with `..`) is not read.
        let inside = Path::new(&file.path)
            .components()
            .all(|c| matches!(c, std::path::Component::Normal(_)));
        if !inside {
            continue;
        }
        let path = dir.join(&file.path);
        let Ok(bytes) = std::fs::read(&path) else {
            continue;
        };
        let digest = crate::digests::file_digest(&bytes);
        if digest != file.blake3 {
            found.push(
                Difference::new(
                    "output_on_disk",
                    "changed",
                    format!(
                        "{} on disk is not the file the receipt records (blake3 {} in the \
                         receipt, {} on disk): it was edited or written by another run; \
                         `heldout run` writes it afresh",
                        path.display(),
                        &file.blake3[..16.min(file.blake3.len())],
                        &digest[..16]
                    ),
                )
                .name(&file.path)
                .values(file.blake3.as_str(), digest.as_str()),
            );
        }
    }
    found
}

/// The results.json a run left, if it is the one the receipt describes.
fn stored_results(dir: &Path, recorded: &Receipt) -> Option<serde_json::Value> {
    let bytes = std::fs::read(dir.join("results.json")).ok()?;
    let digest = crate::digests::file_digest(&bytes);
    let matches = recorded
        .outputs
        .iter()
        .any(|o| o.path == "results.json" && o.blake3 == digest);
    if !matches {
        return None;
    }
    serde_json::from_slice(&bytes).ok()
}

/// Every difference between the recorded and the recomputed receipt, inputs
/// first, then numbers, then outputs.
fn differences(
    recorded: &Receipt,
    now: &Receipt,
    stored: Option<&serde_json::Value>,
    results: &Results,
    plan: &ExperimentPlan,
    spec_path: &Path,
) -> Vec<Difference> {
    let mut found = Vec::new();
    let short = |digest: &str| digest.chars().take(16).collect::<String>();
    // A digest that moved: the message shows both short, the parts in full.
    let digest = |what, message: String, before: &str, after: &str| {
        Difference::new(what, "changed", message).values(before, after)
    };
    if recorded.tool != now.tool {
        found.push(digest(
            "tool",
            format!("tool version: receipt {}, now {}", recorded.tool, now.tool),
            &recorded.tool,
            &now.tool,
        ));
    }
    if recorded.spec != now.spec {
        found.push(
            digest(
                "spec",
                format!(
                    "spec {} changed meaning: blake3 {} in the receipt, {} now",
                    spec_path.display(),
                    short(&recorded.spec),
                    short(&now.spec)
                ),
                &recorded.spec,
                &now.spec,
            )
            .name(spec_path.display().to_string()),
        );
    }
    if recorded.templates != now.templates {
        found.push(digest(
            "templates",
            format!(
                "report templates changed: blake3 {} in the receipt, {} now",
                short(&recorded.templates),
                short(&now.templates)
            ),
            &recorded.templates,
            &now.templates,
        ));
    }
    compare_files(
        ("data file", "data_file"),
        &recorded.data,
        &now.data,
        &mut found,
    );
    if recorded.folds != now.folds {
        found.push(digest(
            "folds",
            format!(
                "fold assignment changed: blake3 {} in the receipt, {} now",
                short(&recorded.folds),
                short(&now.folds)
            ),
            &recorded.folds,
            &now.folds,
        ));
    }
    for old in &recorded.candidates {
        match now.candidates.iter().find(|c| c.id == old.id) {
            None => found.push(
                Difference::new(
                    "candidate",
                    "missing_now",
                    format!(
                        "candidate {} is in the receipt but not computed now",
                        old.id
                    ),
                )
                .name(&old.id),
            ),
            Some(new) if new.blake3 != old.blake3 => found.push(
                number_difference(&old.id, stored, results, plan).unwrap_or_else(|| {
                    digest(
                        "candidate",
                        format!(
                            "candidate {}: numbers differ (blake3 {} in the receipt, {} now; \
                             the run's results.json was not found to name the number)",
                            old.id,
                            short(&old.blake3),
                            short(&new.blake3)
                        ),
                        &old.blake3,
                        &new.blake3,
                    )
                    .name(&old.id)
                }),
            ),
            Some(_) => {}
        }
    }
    for new in &now.candidates {
        if !recorded.candidates.iter().any(|c| c.id == new.id) {
            found.push(
                Difference::new(
                    "candidate",
                    "new_now",
                    format!(
                        "candidate {} is computed now but not in the receipt",
                        new.id
                    ),
                )
                .name(&new.id),
            );
        }
    }
    compare_simulation(recorded, now, stored, results, &mut found);
    compare_files(
        ("output", "output"),
        &recorded.outputs,
        &now.outputs,
        &mut found,
    );
    if recorded.experiment != now.experiment || recorded.schema != now.schema {
        found.push(
            Difference::new(
                "receipt_header",
                "changed",
                format!(
                    "receipt header: experiment {} / {} in the receipt, {} / {} now",
                    recorded.experiment, recorded.schema, now.experiment, now.schema
                ),
            )
            .values(
                format!("{} / {}", recorded.experiment, recorded.schema),
                format!("{} / {}", now.experiment, now.schema),
            ),
        );
    }
    found
}

/// Differences in a simulation's numbers, naming the first number that moved
/// when the run's results.json is at hand.
fn compare_simulation(
    recorded: &Receipt,
    now: &Receipt,
    stored: Option<&serde_json::Value>,
    results: &Results,
    found: &mut Vec<Difference>,
) {
    for old in &recorded.simulation {
        match now.simulation.iter().find(|c| c.id == old.id) {
            None => found.push(
                Difference::new(
                    "simulation",
                    "missing_now",
                    format!(
                        "simulation {} is in the receipt but not computed now",
                        old.id
                    ),
                )
                .name(&old.id),
            ),
            Some(new) if new.blake3 != old.blake3 => found.push(
                simulation_difference(&old.id, stored, results).unwrap_or_else(|| {
                    Difference::new(
                        "simulation",
                        "changed",
                        format!(
                            "simulation {}: numbers differ (blake3 {} in the receipt, {} now)",
                            old.id,
                            &old.blake3[..16],
                            &new.blake3[..16]
                        ),
                    )
                    .name(&old.id)
                    .values(old.blake3.as_str(), new.blake3.as_str())
                }),
            ),
            Some(_) => {}
        }
    }
    for new in &now.simulation {
        if !recorded.simulation.iter().any(|c| c.id == new.id) {
            found.push(
                Difference::new(
                    "simulation",
                    "new_now",
                    format!(
                        "simulation {} is computed now but not in the receipt",
                        new.id
                    ),
                )
                .name(&new.id),
            );
        }
    }
}

/// Names the first simulation number of `id` that moved.
fn simulation_difference(
    id: &str,
    stored: Option<&serde_json::Value>,
    results: &Results,
) -> Option<Difference> {
    let stored = stored?;
    let now = results.simulation.as_ref()?;
    if id == "cv-choices" {
        let before = stored["simulation_summary"]["cv"]["chosen_by_replicate"].as_array()?;
        for (r, after) in now
            .simulation_summary
            .cv
            .chosen_by_replicate
            .iter()
            .enumerate()
        {
            let was = before.get(r).and_then(|v| v.as_str()).unwrap_or("nothing");
            if was != after {
                let message = format!(
                    "simulation: cross-validation on replicate {} chose {was} in the receipt's \
                     results, {after} now",
                    r + 1
                );
                return Some(
                    Difference::new("simulation", "changed", message)
                        .name(id)
                        .choice(
                            "chosen_by_replicate",
                            format!("replicate {}", r + 1),
                            was,
                            after,
                        ),
                );
            }
        }
        return None;
    }
    let old = stored["simulation"]
        .as_array()?
        .iter()
        .find(|s| s["id"] == id)?;
    let new = now.simulation.iter().find(|s| s.id == id)?;
    for (name, after) in new.named_numbers() {
        let before = old[name].as_f64().unwrap_or(f64::NAN);
        if before.to_bits() != after.to_bits() {
            let message = format!(
                "simulation {id}, {name}: {before:?} in the receipt's results, {after:?} now \
                 ({} ulps apart)",
                receipt::ulps_apart(before, after)
            );
            return Some(
                Difference::new("simulation", "changed", message)
                    .name(id)
                    .number(name, None, before, after),
            );
        }
    }
    None
}

/// Files of the receipt (`label` in messages, `what` in the summary) that
/// changed, went or came.
fn compare_files(
    (label, what): (&str, &'static str),
    recorded: &[FileDigest],
    now: &[FileDigest],
    found: &mut Vec<Difference>,
) {
    for old in recorded {
        match now.iter().find(|f| f.path == old.path) {
            None => found.push(
                Difference::new(
                    what,
                    "missing_now",
                    format!("{label} {} is in the receipt but not used now", old.path),
                )
                .name(&old.path),
            ),
            Some(new) if new.blake3 != old.blake3 => found.push(
                Difference::new(
                    what,
                    "changed",
                    format!(
                        "{label} {} changed: blake3 {} in the receipt, {} now",
                        old.path, old.blake3, new.blake3
                    ),
                )
                .name(&old.path)
                .values(old.blake3.as_str(), new.blake3.as_str()),
            ),
            Some(_) => {}
        }
    }
    for new in now {
        if !recorded.iter().any(|f| f.path == new.path) {
            found.push(
                Difference::new(
                    what,
                    "new_now",
                    format!("{label} {} is used now but not in the receipt", new.path),
                )
                .name(&new.path),
            );
        }
    }
}

/// Names the first number of a candidate that moved, from the stored results.
fn number_difference(
    id: &str,
    stored: Option<&serde_json::Value>,
    results: &Results,
    plan: &ExperimentPlan,
) -> Option<Difference> {
    let old = stored?["candidates"]
        .as_array()?
        .iter()
        .find(|c| c["id"] == id)?;
    let new = results.candidates.iter().find(|c| c.id == id)?;
    let scalars = [
        ("effective_df", new.effective_df),
        ("train_score", new.train_score),
        ("cv_score", new.cv_score),
        ("cv_se", new.cv_se),
    ];
    let describe = |number: &str, place: Option<String>, before: f64, after: f64| {
        let what = match &place {
            Some(place) => format!("score on {place}"),
            None => number.to_string(),
        };
        let message = format!(
            "candidate {id}, {what}: {before:?} in the receipt's results, {after:?} now \
             ({} ulps apart)",
            receipt::ulps_apart(before, after)
        );
        Difference::new("candidate", "changed", message)
            .name(id)
            .number(number, place, before, after)
    };
    for (name, after) in scalars {
        let before = old[name].as_f64().unwrap_or(f64::NAN);
        if before.to_bits() != after.to_bits() {
            return Some(describe(name, None, before, after));
        }
    }
    let old_folds = old["fold_scores"].as_array()?;
    for (i, after) in new.fold_scores.iter().enumerate() {
        let before = old_folds
            .get(i)
            .and_then(|v| v.as_f64())
            .unwrap_or(f64::NAN);
        if before.to_bits() != after.to_bits() {
            let place = plan.assignment.describe_fold(i);
            return Some(describe("fold_scores", Some(place), before, *after));
        }
    }
    None
}
