//! Binding `missing = "impute"` to the plan: the indicator columns of the
//! features with missing cells, and the check that every fit has a training
//! value to fill from. The filling itself happens per task
//! (`data::missing::fill_with_training_medians`, called by `execute`).

use std::sync::Arc;

use super::CandidatePlan;
use crate::data::missing::{indicator, indicator_name};
use crate::data::Table;
use crate::spec::LoadedSpec;
use crate::split::Assignment;

/// Adds, for each candidate, an indicator column for every feature with a
/// missing cell among the rows used for fitting, and rebinds the family to
/// them. A family that takes a fixed number of features (a smoother of one
/// feature, a surface of two) or expands each feature into a basis without
/// taking plain columns (spline) keeps its features and gets the medians
/// only; one that takes plain columns (polynomial, logistic) gets the
/// indicators as such, never raised to powers.
/// Fails, naming the column and the fold, when some training fold holds no
/// value of a feature to take a median of.
pub(super) fn bind_indicators(
    spec: &LoadedSpec,
    table: &mut Table,
    assignment: &Assignment,
    candidates: &mut [CandidatePlan],
) -> Result<(), String> {
    let gappy: Vec<String> = table
        .numeric
        .iter()
        .filter(|(_, values)| assignment.train.iter().any(|&r| values[r].is_nan()))
        .map(|(name, _)| name.clone())
        .collect();
    for feature in &gappy {
        let values = table.column(feature);
        for f in 0..assignment.folds.len() {
            if assignment.fold_train(f).iter().all(|&r| values[r].is_nan()) {
                return Err(format!(
                    "column \"{feature}\" has no value in the training rows of {}, so there \
                     is no median to impute; fill some cells or use `missing = \"drop-rows\"`",
                    assignment.describe_fold(f)
                ));
            }
        }
        if assignment.train.iter().all(|&r| values[r].is_nan()) {
            return Err(format!(
                "column \"{feature}\" has no value in the rows used for fitting"
            ));
        }
    }
    for (candidate, family_spec) in candidates.iter_mut().zip(&spec.families) {
        let def = family_spec.def;
        if def.feature_count.is_some() || (def.expands_features && def.build_plain.is_none()) {
            continue;
        }
        let indicators: Vec<String> = candidate
            .features
            .iter()
            .filter(|f| gappy.contains(f))
            .map(|f| indicator_name(f))
            .collect();
        if indicators.is_empty() {
            continue;
        }
        for name in &indicators {
            if !table.numeric.contains_key(name) {
                let feature = crate::data::missing::indicated_feature(name).unwrap_or_default();
                let column = indicator(table.column(feature));
                table.numeric.insert(name.clone(), column);
            }
        }
        let mut features = candidate.features.clone();
        let plain = indicators.len();
        features.extend(indicators);
        // A family with a basis per feature (powers) takes the indicators
        // once, as they are: their powers would repeat them.
        let built = match def.build_plain {
            Some(build_plain) => build_plain(&family_spec.settings, features.clone(), plain),
            None => (def.build)(&family_spec.settings, features.clone()),
        };
        let family = built.map_err(|problem| {
            format!(
                "candidate {} with the indicator columns of missing cells: {}: {}",
                candidate.stem, problem.key, problem.message
            )
        })?;
        candidate.family = Arc::from(family);
        candidate.identity = def.identity(&family_spec.settings, &features);
        if def.build_plain.is_some() {
            candidate.identity.extend_from_slice(b"plain-indicators-1");
        }
        candidate.features = features;
    }
    Ok(())
}
