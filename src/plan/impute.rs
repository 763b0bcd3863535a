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
/// feature, a surface of two) or expands each feature into a basis
/// (polynomial, spline) keeps its features and gets the medians only.
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
        if family_spec.def.feature_count.is_some() || family_spec.def.expands_features {
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
        features.extend(indicators);
        let family = (family_spec.def.build)(&family_spec.settings, features.clone()).map_err(
            |problem| {
                format!(
                    "candidate {} with the indicator columns of missing cells: {}: {}",
                    candidate.stem, problem.key, problem.message
                )
            },
        )?;
        candidate.family = Arc::from(family);
        candidate.identity = family_spec.def.identity(&family_spec.settings, &features);
        candidate.features = features;
    }
    Ok(())
}
