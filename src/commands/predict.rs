//! `heldout predict`: the kept setting of a spec, refitted on every non-test
//! row exactly as the report's final fit is, applied to the rows of a new
//! table (docs/predict.md).
//!
//! The evaluation runs through the cache like `run` (so a spec that has been
//! run costs only the refit), and the refit is the same call on the same
//! rows as the final fit's, so a new row equal to a test row gets the
//! report's prediction for it to the bit.

use std::io::Write as _;
use std::path::Path;

use nalgebra::DMatrix;

use crate::cache::Cache;
use crate::cli::PredictArgs;
use crate::data::missing;
use crate::data::{self, Table, TableRequest};
use crate::error::{SpecError, UsageError};
use crate::execute::CachePolicy;
use crate::plan::{CandidatePlan, ExperimentPlan};
use crate::spec::MissingPolicy;

pub(crate) fn predict(args: &PredictArgs) -> anyhow::Result<()> {
    crate::output::require_folder(&args.cache.cache, "--cache")?;
    let cache = Cache::new(&args.cache.cache);
    let loaded = super::load_spec(&args.spec, &args.data)?;
    if loaded.is_simulation() {
        return Err(SpecError::Invalid {
            path: args.spec.clone(),
            key: "simulate".into(),
            message: "a simulation spec has no table to refit on; `heldout predict` needs a \
                      spec with [data]"
                .into(),
        }
        .into());
    }
    drop(loaded);
    let policy = CachePolicy {
        read: Some(&cache),
        write: Some(&cache),
    };
    let evaluation = super::evaluate_spec(
        &args.spec,
        &args.data,
        policy,
        None,
        super::progress_wanted(args.quiet),
    )?
    .map_err(|_| anyhow::anyhow!("predict never shards"))?;
    let plan = &evaluation.plan;
    if plan.task.task == crate::spec::Task::Classification {
        return Err(UsageError(format!(
            "{}: the target holds classes; `heldout predict` writes numeric predictions only \
             so far (class probabilities are not written yet)",
            args.spec.display()
        ))
        .into());
    }
    let chosen = &evaluation.results.chosen;
    let (candidate, setting) = locate(plan, chosen)
        .ok_or_else(|| anyhow::anyhow!("the kept setting {chosen} is not among the candidates"))?;

    let key = plan.spec.data().key.clone();
    let data_spec = plan.spec.data();
    // Indicator columns of missing cells are derived, not read.
    let read: Vec<String> = candidate
        .features
        .iter()
        .filter(|f| missing::indicated_feature(f).is_none())
        .cloned()
        .collect();
    let new = data::load(
        &args.table,
        &args.table,
        &TableRequest {
            numeric: read.clone(),
            text: key.iter().cloned().collect(),
            missing: match data_spec.missing {
                MissingPolicy::Impute => MissingPolicy::Impute,
                _ => MissingPolicy::Error,
            },
            imputed: read,
            format: data::TableFormat::of(data_spec),
        },
        &|_, _| {},
    )?;
    let new_columns: Vec<Vec<f64>> = candidate
        .features
        .iter()
        .map(|f| match missing::indicated_feature(f) {
            Some(feature) => missing::indicator(new.column(feature)),
            None => new.column(f).to_vec(),
        })
        .collect();
    let mut x_new = DMatrix::from_fn(new.len(), candidate.features.len(), |i, j| {
        new_columns[j][i]
    });
    let train = &plan.assignment.train;
    let mut x_train = plan.design(candidate, train);
    if data_spec.missing == MissingPolicy::Impute {
        // The medians of the rows the kept fit was made on, as for the test set.
        missing::fill_with_training_medians(&mut x_train, &mut x_new).map_err(|j| {
            anyhow::anyhow!("column {} has no training value", candidate.features[j])
        })?;
    }
    let fits = candidate
        .family
        .fit_path(
            &x_train,
            &plan.target_of(train),
            &x_new,
            plan.full_fit.final_fit,
        )
        .map_err(|cause| crate::error::FitFailure {
            candidate: candidate.stem.clone(),
            fold: "the fit on all non-test rows".into(),
            cause,
        })?;
    let predicted = &fits
        .get(setting)
        .ok_or_else(|| anyhow::anyhow!("the refit of {chosen} returned no fit for it"))?
        .eval_pred;

    if !args.quiet {
        for warning in extrapolation(plan, candidate, &new) {
            eprintln!("warning: {}: {warning}", args.table.display());
        }
    }
    let header = provenance(&args.spec, plan, chosen, train.len())?;
    let bytes = write_csv(
        &header,
        key.as_deref(),
        &new,
        &plan.spec.data().target,
        predicted,
    )?;
    match &args.output {
        Some(path) => {
            crate::output::write_atomic(path, &bytes)?;
            if !args.quiet {
                println!(
                    "wrote {} predictions of {chosen} to {}",
                    new.len(),
                    path.display()
                );
            }
        }
        None => std::io::stdout().write_all(&bytes)?,
    }
    Ok(())
}

/// The candidate and setting index whose id is `id`.
fn locate<'a>(plan: &'a ExperimentPlan, id: &str) -> Option<(&'a CandidatePlan, usize)> {
    plan.candidates.iter().find_map(|candidate| {
        candidate
            .settings
            .iter()
            .position(|setting| candidate.id(setting) == id)
            .map(|s| (candidate, s))
    })
}

/// One warning per feature with new values outside the range the fit saw.
fn extrapolation(plan: &ExperimentPlan, candidate: &CandidatePlan, new: &Table) -> Vec<String> {
    let mut warnings = Vec::new();
    for feature in &candidate.features {
        let seen = plan.table.column(feature);
        let (low, high) = plan
            .assignment
            .train
            .iter()
            .map(|&r| seen[r])
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                (lo.min(v), hi.max(v))
            });
        let outside = new
            .column(feature)
            .iter()
            .filter(|&&v| v < low || v > high)
            .count();
        if outside > 0 {
            warnings.push(format!(
                "{outside} of {} rows lie outside the training range of {feature} \
                 [{low}, {high}]; their predictions extrapolate",
                new.len()
            ));
        }
    }
    warnings
}

/// The comment lines that tie a prediction file to the approved run.
fn provenance(
    spec_path: &Path,
    plan: &ExperimentPlan,
    chosen: &str,
    rows: usize,
) -> anyhow::Result<Vec<String>> {
    let receipt_path = crate::receipt::path_for(spec_path);
    let receipt = match std::fs::read(&receipt_path) {
        Ok(bytes) => format!(
            "{} blake3 {}",
            receipt_path.display(),
            crate::digests::file_digest(&bytes)
        ),
        Err(_) => "none beside the spec (run `heldout run` to write it)".to_string(),
    };
    Ok(vec![
        format!(
            "heldout predictions, experiment {} ({})",
            plan.spec.spec.experiment.name,
            crate::receipt::tool_version()
        ),
        format!(
            "spec: {} (meaning) blake3 {}",
            spec_path.display(),
            crate::digests::spec_digest(&plan.spec.spec)
        ),
        format!("receipt: {receipt}"),
        format!("kept: {chosen}, refitted on the {rows} non-test rows"),
    ])
}

/// The CSV: comment lines, then one row per new row, named by the spec's key
/// or by its 1-based data row, with its prediction in shortest round-trip
/// form.
fn write_csv(
    header: &[String],
    key: Option<&str>,
    new: &Table,
    target: &str,
    predicted: &[f64],
) -> anyhow::Result<Vec<u8>> {
    let mut bytes = Vec::new();
    for line in header {
        // A comment line holds no line break of a spec path's making.
        writeln!(bytes, "# {}", line.replace(['\n', '\r'], " "))?;
    }
    let mut writer = csv::Writer::from_writer(bytes);
    let column = format!("predicted_{target}");
    writer.write_record([key.unwrap_or("row"), column.as_str()])?;
    for (i, value) in predicted.iter().enumerate() {
        let name = match key {
            Some(key) => new.text_column(key)[i].clone(),
            None => new.row_numbers[i].to_string(),
        };
        writer.write_record([name, format!("{value:?}")])?;
    }
    writer
        .into_inner()
        .map_err(|e| UsageError(format!("cannot write the predictions: {e}")).into())
}
