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
    );
    cache.flush()?;
    let evaluation = evaluation?.map_err(|_| anyhow::anyhow!("predict never shards"))?;
    let plan = &evaluation.plan;
    let chosen = &evaluation.results.chosen;
    let (c, setting) = crate::results::intervals::locate(plan, chosen)
        .ok_or_else(|| anyhow::anyhow!("the kept setting {chosen} is not among the candidates"))?;
    let candidate = &plan.candidates[c];

    let key = plan.spec.data().key.clone();
    let data_spec = plan.spec.data();
    // Indicator columns of missing cells are derived, not read.
    let (categorical, read): (Vec<String>, Vec<String>) = candidate
        .features
        .iter()
        .filter(|f| missing::indicated_feature(f).is_none())
        .cloned()
        .partition(|f| plan.table.levels.contains_key(f));
    let mut new = data::load(
        &args.table,
        &args.table,
        &TableRequest {
            numeric: read.clone(),
            text: key.iter().cloned().collect(),
            categorical,
            missing: match data_spec.missing {
                MissingPolicy::Impute => MissingPolicy::Impute,
                _ => MissingPolicy::Error,
            },
            imputed: read,
            format: data::TableFormat::of(data_spec),
        },
        &|_, _| {},
    )?;
    crate::plan::encode::recode_new_rows(plan, &mut new, &args.table)?;
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
    // The new rows as read (missing cells NaN under `impute`): each fold fit
    // behind the intervals and sets fills them with its own training rows'
    // medians, as it filled the locked test rows for the report.
    let x_new_as_read = x_new.clone();
    let train = &plan.assignment.train;
    let mut x_train = plan.design(candidate, train);
    if data_spec.missing == MissingPolicy::Impute {
        // The medians of the rows the kept fit was made on, as for the test set.
        missing::fill_with_training_medians(&mut x_train, &mut x_new).map_err(|j| {
            anyhow::anyhow!("column {} has no training value", candidate.features[j])
        })?;
    }
    // Other settings of the grid may be infeasible on these rows; the kept
    // one was fitted on them before.
    let y_train = plan.target_of(train);
    let fits = crate::execute::feasible::fit_tolerant(candidate, &x_train, false, |family| {
        family.fit_classes(
            &x_train,
            &y_train,
            &x_new,
            plan.full_fit.final_fit,
            plan.task.class_count(),
        )
    });
    let predicted = &fits
        .get(setting)
        .ok_or_else(|| anyhow::anyhow!("the refit of {chosen} returned no fit for it"))?
        .as_ref()
        .map_err(|reason| {
            anyhow::anyhow!("the refit of {chosen} on all non-test rows failed: {reason}")
        })?
        .eval_pred;

    // CV+ intervals from the same fold predictions the report's came from
    // (docs/intervals.md), so a locked test row gets the report's interval.
    let classes = plan.task.class_count();
    let intervals = match plan.spec.spec.intervals {
        Some(spec) if classes == 0 => Some(
            crate::intervals::intervals_at(
                plan,
                candidate,
                setting,
                &evaluation.fits[c].fold_predictions,
                spec.level,
                &x_new_as_read,
            )?
            .1,
        ),
        _ => None,
    };
    // A class target's CV+ prediction sets, from the same out-of-fold
    // scores as the report's (docs/intervals.md).
    let sets = match plan.spec.spec.intervals {
        Some(spec) if classes > 0 => {
            let calibration = crate::prediction_sets::calibration(
                plan,
                &evaluation.fits[c].fold_predictions,
                setting,
            );
            let at = crate::intervals::fold_predictions_at(
                plan,
                candidate,
                setting,
                &calibration.folds,
                &x_new_as_read,
            )?;
            Some(crate::prediction_sets::sets(
                spec.level,
                &calibration.scores,
                &calibration.fold_of,
                &at,
                classes,
                new.len(),
            ))
        }
        _ => None,
    };

    if !args.quiet {
        for warning in extrapolation(plan, candidate, &new) {
            eprintln!("warning: {}: {warning}", args.table.display());
        }
    }
    let mut header = provenance(&args.spec, plan, chosen, train.len())?;
    if let (Some(ps), Some(_)) = (&evaluation.results.prediction_sets, &sets) {
        header.push(format!(
            "sets: {} at level {} from the out-of-fold scores {} of the {} non-test rows \
             ({} folds); labels joined by \"|\"{}",
            ps.method,
            ps.level,
            ps.score,
            ps.calibration_rows,
            ps.folds,
            if ps.bounded {
                ""
            } else {
                "; too few rows for the level, so every set holds every class"
            }
        ));
    }
    if let (Some(iv), Some(_)) = (&evaluation.results.intervals, &intervals) {
        header.push(format!(
            "intervals: {} at level {} from the out-of-fold residuals of the {} non-test rows \
             ({} folds){}",
            iv.method,
            iv.level,
            iv.calibration_rows,
            iv.folds,
            if iv.bounded {
                ""
            } else {
                "; too few rows for the level, so every interval is the whole line"
            }
        ));
    }
    let columns = Columns {
        key: key.as_deref(),
        target: &plan.spec.data().target,
        classes: plan.task.classes.as_ref().map(|c| c.labels.as_slice()),
    };
    let bytes = write_csv(
        &header,
        &columns,
        &new,
        predicted,
        intervals.as_deref(),
        sets.as_deref(),
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

/// One warning per feature with new values outside the range the fit saw.
fn extrapolation(plan: &ExperimentPlan, candidate: &CandidatePlan, new: &Table) -> Vec<String> {
    let mut warnings = Vec::new();
    // A categorical feature's levels were checked against the training rows;
    // an indicator of missing cells is 0 or 1 by construction (derived, not
    // read), so neither can extrapolate.
    for feature in candidate
        .features
        .iter()
        .filter(|f| !plan.table.levels.contains_key(*f) && missing::indicated_feature(f).is_none())
    {
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

/// What names the output's columns.
struct Columns<'a> {
    /// The spec's row key, or `row` (the 1-based data row).
    key: Option<&'a str>,
    target: &'a str,
    /// A class target's labels in class order.
    classes: Option<&'a [String]>,
}

/// The CSV: comment lines, then one row per new row, named by the spec's key
/// or by its 1-based data row. A number target: the prediction, then the
/// interval's ends when there are intervals (`inf` / `-inf` when unbounded).
/// A class target: the predicted class (the most probable), then each
/// class's probability in class order, then with sets the prediction set's
/// labels in class order joined by `|` (empty for an empty set). Numbers in
/// shortest round-trip form.
fn write_csv(
    header: &[String],
    columns: &Columns<'_>,
    new: &Table,
    predicted: &[f64],
    intervals: Option<&[(f64, f64)]>,
    sets: Option<&[Vec<usize>]>,
) -> anyhow::Result<Vec<u8>> {
    let mut bytes = Vec::new();
    for line in header {
        // A comment line holds no line break of a spec path's making.
        writeln!(bytes, "# {}", line.replace(['\n', '\r'], " "))?;
    }
    let mut writer = csv::Writer::from_writer(bytes);
    let target = columns.target;
    let mut names = vec![
        columns.key.unwrap_or("row").to_string(),
        format!("predicted_{target}"),
    ];
    if intervals.is_some() {
        names.push(format!("lower_{target}"));
        names.push(format!("upper_{target}"));
    }
    if let Some(labels) = columns.classes {
        names.extend(labels.iter().map(|l| format!("probability_{l}")));
        if sets.is_some() {
            names.push(format!("set_{target}"));
        }
    }
    writer.write_record(&names)?;
    let layout = crate::metrics::ClassPrediction {
        classes: columns.classes.map_or(0, <[String]>::len),
    };
    for i in 0..new.len() {
        let mut record = vec![match columns.key {
            Some(key) => new.text_column(key)[i].clone(),
            None => new.row_numbers[i].to_string(),
        }];
        match columns.classes {
            None => {
                record.push(format!("{:?}", predicted[i]));
                if let Some(bounds) = intervals {
                    record.push(format!("{:?}", bounds[i].0));
                    record.push(format!("{:?}", bounds[i].1));
                }
            }
            Some(labels) => {
                record.push(labels[layout.class(predicted, i)].clone());
                record.extend(
                    layout
                        .probabilities(predicted, i)
                        .iter()
                        .map(|p| format!("{p:?}")),
                );
                if let Some(sets) = sets {
                    let members: Vec<&str> = sets[i].iter().map(|&k| labels[k].as_str()).collect();
                    record.push(members.join("|"));
                }
            }
        }
        writer.write_record(&record)?;
    }
    writer
        .into_inner()
        .map_err(|e| UsageError(format!("cannot write the predictions: {e}")).into())
}
