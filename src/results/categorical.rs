//! The `data.categorical` section of results.json: per categorical feature
//! column, its levels, what the fit on all non-test rows made of them, and
//! how many predicted rows held a level their fit's training rows never did
//! (predicted with the reference's row; docs/spec.md, "Categorical
//! features").

use serde::{Deserialize, Serialize};

use crate::data::encode::LevelEncoding;
use crate::plan::encode::unseen_rows;
use crate::plan::ExperimentPlan;

/// One categorical feature column.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CategoricalColumn {
    pub column: String,
    /// Its levels in byte order (the order of its indicator columns).
    pub levels: Vec<String>,
    /// The reference level of the fit on all non-test rows: its most
    /// frequent level (ties to the first), which gets no indicator column
    /// in linear-type families.
    pub reference: String,
    /// Levels pooled into "other" in the fit on all non-test rows, for
    /// having fewer than `min_level_rows` rows there.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub pooled: Vec<String>,
    /// Per fold (in fold order): validation rows whose level the fold's
    /// training rows never hold.
    pub unseen_per_fold: Vec<usize>,
    /// Test rows whose level the non-test rows never hold.
    pub unseen_test: usize,
}

/// Every categorical feature column of the plan, in name order.
pub(crate) fn columns(plan: &ExperimentPlan) -> Vec<CategoricalColumn> {
    let a = &plan.assignment;
    let min_level_rows = plan.spec.data().min_level_rows.unwrap_or(1);
    plan.table
        .levels
        .iter()
        .map(|(column, levels)| {
            let codes = plan.table.column(column);
            let full = LevelEncoding::fit(
                a.train.iter().map(|&r| codes[r]),
                levels.len(),
                min_level_rows,
                true,
            );
            let reference = full
                .reference
                .map(|g| full.name(full.groups[g], levels).to_string())
                .unwrap_or_default();
            let pooled = (0..levels.len())
                .filter(|&level| {
                    let rows = a
                        .train
                        .iter()
                        .filter(|&&r| codes[r] as usize == level)
                        .count();
                    rows > 0 && rows < min_level_rows
                })
                .map(|level| levels[level].clone())
                .collect();
            CategoricalColumn {
                column: column.clone(),
                levels: levels.clone(),
                reference,
                pooled,
                unseen_per_fold: (0..a.folds.len())
                    .map(|f| unseen_rows(&plan.table, column, &a.fold_train(f), &a.folds[f].valid))
                    .collect(),
                unseen_test: unseen_rows(&plan.table, column, &a.train, &a.test),
            }
        })
        .collect()
}
