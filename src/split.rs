//! Assigning rows to the locked test set and to cross-validation folds.
//!
//! The algorithm is written out in `docs/splits.md` so that a short program in
//! another language can reproduce it. In brief: each purpose ("holdout",
//! "kfold/repeat=1", …) gets a 32-byte key, `blake3("heldout split v1" ‖
//! seed as u64 little-endian ‖ purpose)`. Each unit (a row, or a group of rows
//! when `[data] group` is set) gets a priority: the first 8 bytes, read as a
//! little-endian u64, of `blake3::keyed_hash(key, identity)`, where the
//! identity is the unit's key or group text, or else its 1-based data-row
//! number in decimal. Units sorted by (priority, identity) are dealt out: the
//! first ones to the test set, the rest round-robin to folds. Because every
//! unit's priority depends only on its own identity, adding, removing or
//! reordering rows leaves the other rows' relative order unchanged.

use std::collections::BTreeMap;

use rayon::prelude::*;

/// Where one row ended up in one repeat.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Placement {
    Test,
    /// 0-based fold index.
    Fold(usize),
}

/// One cross-validation fold: the non-test rows it validates on. It trains
/// on every other non-test row ([`Assignment::fold_train`]); only the
/// validation rows are stored, so leave-one-out on n rows needs O(n) memory.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Fold {
    /// 0-based repeat.
    pub repeat: usize,
    /// 0-based fold within the repeat.
    pub index: usize,
    /// Label shown to people (`1`, `2`, … or the fold column's text).
    pub label: String,
    /// Row indices (into the loaded table), ascending.
    pub valid: Vec<usize>,
}

/// The whole assignment.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Assignment {
    /// Rows locked away for the final test, ascending.
    pub test: Vec<usize>,
    /// All other rows, ascending.
    pub train: Vec<usize>,
    /// Folds in order: repeat-major, then fold index.
    pub folds: Vec<Fold>,
    /// Number of repeats.
    pub repeats: usize,
    /// Leave-one-out on single rows: fold i validates on `train[i]` alone.
    pub single_row_folds: bool,
}

impl Assignment {
    /// The training rows of fold `f`: the non-test rows it does not validate on.
    pub fn fold_train(&self, f: usize) -> Vec<usize> {
        let valid = &self.folds[f].valid;
        let mut out = Vec::with_capacity(self.train.len() - valid.len());
        let mut next = valid.iter().peekable();
        for &row in &self.train {
            while next.next_if(|&&v| v < row).is_some() {}
            if next.next_if_eq(&&row).is_none() {
                out.push(row);
            }
        }
        out
    }

    /// Number of training rows of fold `f`.
    pub fn fold_train_len(&self, f: usize) -> usize {
        self.train.len() - self.folds[f].valid.len()
    }

    /// Where each row sits in the given repeat.
    pub fn placements(&self, rows: usize, repeat: usize) -> Vec<Placement> {
        let mut placement = vec![Placement::Test; rows];
        for fold in self.folds.iter().filter(|f| f.repeat == repeat) {
            for &row in &fold.valid {
                placement[row] = Placement::Fold(fold.index);
            }
        }
        placement
    }
}

/// How the non-test rows are divided into folds.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum FoldScheme {
    Kfold {
        folds: usize,
        repeats: usize,
    },
    LeaveOneOut,
    /// Fold label of every row, from a column of the table.
    Column {
        labels: Vec<String>,
    },
}

/// Why rows cannot be split as asked.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum SplitError {
    #[error("{units} {what} remain after the test set, fewer than the {folds} folds asked for ([split] folds, or leave-one-out)")]
    FewerUnitsThanFolds {
        units: usize,
        folds: usize,
        what: &'static str,
    },
    #[error("the test set would take all {0} rows; lower `holdout`")]
    NothingLeft(usize),
    #[error("the fold column holds only one distinct label (\"{0}\") among the non-test rows; cross-validation needs at least 2")]
    OneColumnFold(String),
}

/// The derived 32-byte key of one random purpose under a master seed.
pub fn purpose_key(seed: u64, purpose: &str) -> [u8; 32] {
    let mut hasher = blake3::Hasher::new();
    hasher.update(b"heldout split v1");
    hasher.update(&seed.to_le_bytes());
    hasher.update(purpose.as_bytes());
    *hasher.finalize().as_bytes()
}

/// Priority of one unit under a purpose key.
pub fn priority(key: &[u8; 32], identity: &str) -> u64 {
    let hash = blake3::keyed_hash(key, identity.as_bytes());
    let mut first = [0u8; 8];
    first.copy_from_slice(&hash.as_bytes()[..8]);
    u64::from_le_bytes(first)
}

/// Units (indices into `identities`) sorted by (priority, identity).
fn shuffled(key: &[u8; 32], identities: &[String], units: &[usize]) -> Vec<usize> {
    let mut ranked: Vec<(u64, &str, usize)> = units
        .par_iter()
        .map(|&u| (priority(key, &identities[u]), identities[u].as_str(), u))
        .collect();
    ranked.sort_unstable();
    ranked.into_iter().map(|(_, _, u)| u).collect()
}

/// Assigns rows. `unit_of_row[r]` is the unit (row or group) of row `r`;
/// `identities[u]` is the identity text of unit `u`.
pub fn assign(
    seed: u64,
    holdout: f64,
    scheme: &FoldScheme,
    identities: &[String],
    unit_of_row: &[usize],
) -> Result<Assignment, SplitError> {
    let rows = unit_of_row.len();
    let mut rows_of_unit: Vec<Vec<usize>> = vec![Vec::new(); identities.len()];
    for (row, &unit) in unit_of_row.iter().enumerate() {
        rows_of_unit[unit].push(row);
    }
    let all_units: Vec<usize> = (0..identities.len()).collect();

    // The test set: units in holdout order until it holds round(holdout × rows).
    let wanted = (holdout * rows as f64).round() as usize;
    let mut is_test_unit = vec![false; identities.len()];
    let mut taken = 0;
    for unit in shuffled(&purpose_key(seed, "holdout"), identities, &all_units) {
        if taken >= wanted {
            break;
        }
        is_test_unit[unit] = true;
        taken += rows_of_unit[unit].len();
    }
    let test: Vec<usize> = (0..rows)
        .filter(|&r| is_test_unit[unit_of_row[r]])
        .collect();
    let train: Vec<usize> = (0..rows)
        .filter(|&r| !is_test_unit[unit_of_row[r]])
        .collect();
    if train.is_empty() {
        return Err(SplitError::NothingLeft(rows));
    }
    let train_units: Vec<usize> = all_units
        .iter()
        .copied()
        .filter(|&u| !is_test_unit[u] && !rows_of_unit[u].is_empty())
        .collect();
    let grouped = identities.len() != rows;
    let what = if grouped { "groups" } else { "rows" };

    let mut folds = Vec::new();
    let repeats = match scheme {
        FoldScheme::Kfold { folds: k, repeats } => {
            if train_units.len() < *k {
                return Err(SplitError::FewerUnitsThanFolds {
                    units: train_units.len(),
                    folds: *k,
                    what,
                });
            }
            for repeat in 0..*repeats {
                let key = purpose_key(seed, &format!("kfold/repeat={}", repeat + 1));
                let mut fold_of_unit = vec![usize::MAX; identities.len()];
                for (position, unit) in shuffled(&key, identities, &train_units)
                    .into_iter()
                    .enumerate()
                {
                    fold_of_unit[unit] = position % k;
                }
                folds.extend(deal(repeat, *k, &train, |r| fold_of_unit[unit_of_row[r]]));
            }
            *repeats
        }
        FoldScheme::LeaveOneOut => {
            // One fold per training unit: a row, or a whole group (leave one
            // group out), in order of the unit's first row.
            if train_units.len() < 2 {
                return Err(SplitError::FewerUnitsThanFolds {
                    units: train_units.len(),
                    folds: 2,
                    what,
                });
            }
            let mut order: Vec<usize> = train_units.clone();
            order.sort_by_key(|&u| rows_of_unit[u][0]);
            for (index, unit) in order.into_iter().enumerate() {
                folds.push(make_fold(0, index, (index + 1).to_string(), &train, |r| {
                    unit_of_row[r] == unit
                }));
            }
            1
        }
        FoldScheme::Column { labels } => {
            let ordered = ordered_labels(train.iter().map(|&r| labels[r].as_str()));
            if ordered.len() < 2 {
                return Err(SplitError::OneColumnFold(
                    ordered.first().cloned().unwrap_or_default(),
                ));
            }
            for (index, label) in ordered.iter().enumerate() {
                folds.push(make_fold(0, index, label.clone(), &train, |r| {
                    &labels[r] == label
                }));
            }
            1
        }
    };
    let single_row_folds =
        matches!(scheme, FoldScheme::LeaveOneOut) && folds.iter().all(|f| f.valid.len() == 1);
    Ok(Assignment {
        test,
        train,
        folds,
        repeats,
        single_row_folds,
    })
}

/// Splits `train_rows` into `k` folds in one pass; `fold_of(row)` is 0-based.
fn deal(
    repeat: usize,
    k: usize,
    train_rows: &[usize],
    fold_of: impl Fn(usize) -> usize,
) -> Vec<Fold> {
    let mut folds: Vec<Fold> = (0..k)
        .map(|index| Fold {
            repeat,
            index,
            label: (index + 1).to_string(),
            valid: Vec::new(),
        })
        .collect();
    for &row in train_rows {
        folds[fold_of(row)].valid.push(row);
    }
    folds
}

fn make_fold(
    repeat: usize,
    index: usize,
    label: String,
    train_rows: &[usize],
    in_fold: impl Fn(usize) -> bool,
) -> Fold {
    Fold {
        repeat,
        index,
        label,
        valid: train_rows.iter().copied().filter(|&r| in_fold(r)).collect(),
    }
}

/// Distinct fold labels in order: numerically when every label is a number,
/// as text otherwise.
fn ordered_labels<'a>(labels: impl Iterator<Item = &'a str>) -> Vec<String> {
    let distinct: BTreeMap<&str, ()> = labels.map(|l| (l, ())).collect();
    let mut labels: Vec<&str> = distinct.into_keys().collect();
    let numbers: Option<Vec<f64>> = labels.iter().map(|l| l.parse::<f64>().ok()).collect();
    if let Some(numbers) = numbers {
        let mut paired: Vec<(f64, &str)> = numbers.into_iter().zip(labels).collect();
        paired.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(b.1)));
        labels = paired.into_iter().map(|(_, l)| l).collect();
    }
    labels.into_iter().map(str::to_string).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rows(n: usize) -> (Vec<String>, Vec<usize>) {
        ((1..=n).map(|i| i.to_string()).collect(), (0..n).collect())
    }

    #[test]
    fn kfold_partitions_the_non_test_rows_into_balanced_folds() {
        let (ids, units) = rows(103);
        let scheme = FoldScheme::Kfold {
            folds: 5,
            repeats: 2,
        };
        let a = assign(42, 0.2, &scheme, &ids, &units).unwrap();
        assert_eq!(a.test.len(), 21); // round(0.2 × 103)
        assert_eq!(a.train.len(), 82);
        assert_eq!(a.folds.len(), 10);
        for repeat in 0..2 {
            let mut seen: Vec<usize> = a
                .folds
                .iter()
                .filter(|f| f.repeat == repeat)
                .flat_map(|f| f.valid.clone())
                .collect();
            seen.sort_unstable();
            assert_eq!(seen, a.train, "each non-test row validates exactly once");
            for (f, fold) in a
                .folds
                .iter()
                .enumerate()
                .filter(|(_, f)| f.repeat == repeat)
            {
                assert!(fold.valid.len() == 16 || fold.valid.len() == 17);
                let train = a.fold_train(f);
                assert_eq!(fold.valid.len() + train.len(), 82);
                assert!(train.iter().all(|r| !fold.valid.contains(r)));
            }
        }
        assert_ne!(a.folds[0].valid, a.folds[5].valid, "repeats reshuffle");
    }

    #[test]
    fn same_seed_same_folds_other_seed_other_folds() {
        let (ids, units) = rows(50);
        let scheme = FoldScheme::Kfold {
            folds: 5,
            repeats: 1,
        };
        let a = assign(7, 0.2, &scheme, &ids, &units).unwrap();
        let b = assign(7, 0.2, &scheme, &ids, &units).unwrap();
        let c = assign(8, 0.2, &scheme, &ids, &units).unwrap();
        assert_eq!(a, b);
        assert_ne!(a.test, c.test);
    }

    #[test]
    fn groups_never_straddle_folds() {
        let ids: Vec<String> = ["a", "b", "c", "d", "e", "f"].map(String::from).to_vec();
        let units: Vec<usize> = (0..60).map(|r| r % 6).collect();
        let scheme = FoldScheme::Kfold {
            folds: 3,
            repeats: 1,
        };
        let a = assign(3, 0.0, &scheme, &ids, &units).unwrap();
        for (f, fold) in a.folds.iter().enumerate() {
            let train = a.fold_train(f);
            for &v in &fold.valid {
                assert!(train.iter().all(|&t| units[t] != units[v]));
            }
        }
    }

    #[test]
    fn column_labels_order_numerically() {
        let labels: Vec<String> = ["10", "2", "1", "2", "10", "1"].map(String::from).to_vec();
        let (ids, units) = rows(6);
        let scheme = FoldScheme::Column { labels };
        let a = assign(1, 0.0, &scheme, &ids, &units).unwrap();
        let order: Vec<&str> = a.folds.iter().map(|f| f.label.as_str()).collect();
        assert_eq!(order, ["1", "2", "10"]);
        assert_eq!(a.folds[0].valid, vec![2, 5]);
    }

    #[test]
    fn too_few_rows_for_the_folds_is_an_error() {
        let (ids, units) = rows(4);
        let scheme = FoldScheme::Kfold {
            folds: 5,
            repeats: 1,
        };
        let err = assign(1, 0.0, &scheme, &ids, &units).unwrap_err();
        assert_eq!(
            err,
            SplitError::FewerUnitsThanFolds {
                units: 4,
                folds: 5,
                what: "rows"
            }
        );
    }
}
