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
//!
//! Ordered (time) splits use no randomness: the latest time points form the
//! test set and the rest are cut into k + 1 consecutive blocks; fold j trains
//! on blocks 1..=j and validates on block j + 1 (forward chaining), so no fit
//! ever sees a row later than the rows it is scored on.

use std::collections::BTreeMap;

use rayon::prelude::*;

/// Where one row ended up in one repeat.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Placement {
    Test,
    /// 0-based fold index.
    Fold(usize),
    /// Fits on it but is never validated on: the first block of an ordered
    /// split.
    TrainOnly,
}

/// One cross-validation fold: the non-test rows it validates on. It trains
/// on every other non-test row ([`Assignment::fold_train`]) unless `train`
/// restricts it; only the validation rows are stored otherwise, so
/// leave-one-out on n rows needs O(n) memory.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Fold {
    /// 0-based repeat.
    pub(crate) repeat: usize,
    /// 0-based fold within the repeat.
    pub(crate) index: usize,
    /// Label shown to people (`1`, `2`, … or the fold column's text).
    pub(crate) label: String,
    /// Row indices (into the loaded table), ascending.
    pub(crate) valid: Vec<usize>,
    /// The training rows, ascending, when they are not all other non-test
    /// rows (ordered splits train only on earlier rows).
    pub(crate) train: Option<Vec<usize>>,
}

/// The whole assignment.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Assignment {
    /// Rows locked away for the final test, ascending.
    pub(crate) test: Vec<usize>,
    /// All other rows, ascending.
    pub(crate) train: Vec<usize>,
    /// Folds in order: repeat-major, then fold index.
    pub(crate) folds: Vec<Fold>,
    /// Number of repeats: distinct partitions of the non-test rows.
    pub(crate) repeats: usize,
    /// Repeats asked for that dealt the same folds as an earlier repeat and
    /// were therefore left out (their scores would be copies).
    pub(crate) identical_repeats: usize,
    /// Leave-one-out on single rows: fold i validates on `train[i]` alone.
    pub(crate) single_row_folds: bool,
}

impl Assignment {
    /// The training rows of fold `f`: the non-test rows it does not validate on.
    pub(crate) fn fold_train(&self, f: usize) -> Vec<usize> {
        if let Some(train) = &self.folds[f].train {
            return train.clone();
        }
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

    /// Fold `f` as people are told about it (see [`describe_fold`]).
    pub(crate) fn describe_fold(&self, f: usize) -> String {
        let fold = &self.folds[f];
        describe_fold(&fold.label, fold.repeat, self.repeats)
    }

    /// Number of training rows of fold `f`.
    pub(crate) fn fold_train_len(&self, f: usize) -> usize {
        match &self.folds[f].train {
            Some(train) => train.len(),
            None => self.train.len() - self.folds[f].valid.len(),
        }
    }

    /// What the `folds` listing prints for a placement in `repeat`: `test`,
    /// the fold's label, or `train-only`.
    pub(crate) fn placement_label(&self, placement: Placement, repeat: usize) -> String {
        match placement {
            Placement::Test => "test".to_string(),
            Placement::TrainOnly => "train-only".to_string(),
            Placement::Fold(i) => {
                let per_repeat = self.folds.len() / self.repeats;
                self.folds[repeat * per_repeat + i].label.clone()
            }
        }
    }

    /// Where each row sits in the given repeat.
    pub(crate) fn placements(&self, rows: usize, repeat: usize) -> Vec<Placement> {
        let mut placement = vec![Placement::Test; rows];
        for &row in &self.train {
            placement[row] = Placement::TrainOnly;
        }
        for fold in self.folds.iter().filter(|f| f.repeat == repeat) {
            for &row in &fold.valid {
                placement[row] = Placement::Fold(fold.index);
            }
        }
        placement
    }
}

/// How a fold is named wherever a person reads it (fit errors, `verify`,
/// `compare`): `fold 3`, or `fold 3 of repeat 2` when folds are repeated, so
/// nobody has to turn a position in `fold_scores` into a fold by hand.
/// `repeat` is 0-based; the label is the fold's own (`3`, or the fold
/// column's text).
pub(crate) fn describe_fold(label: &str, repeat: usize, repeats: usize) -> String {
    if repeats > 1 {
        format!("fold {label} of repeat {}", repeat + 1)
    } else {
        format!("fold {label}")
    }
}

/// How the non-test rows are divided into folds.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) enum FoldScheme {
    Kfold {
        folds: usize,
        repeats: usize,
    },
    LeaveOneOut,
    /// Fold label of every row, from a column of the table.
    Column {
        labels: Vec<String>,
    },
    /// Forward chaining over the time point of every row (the order column's
    /// text): `folds` folds over `folds + 1` consecutive blocks.
    Ordered {
        folds: usize,
        time: Vec<String>,
    },
}

/// Why rows cannot be split as asked.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub(crate) enum SplitError {
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
    #[error("the order column has {points} distinct time points after the test set, too few to cut into the {blocks} consecutive blocks that {folds} ordered folds need (block {empty} would be empty); lower `folds` or `holdout`")]
    TooFewTimePoints {
        points: usize,
        blocks: usize,
        folds: usize,
        empty: usize,
    },
}

/// The derived 32-byte key of one random purpose under a master seed.
pub(crate) fn purpose_key(seed: u64, purpose: &str) -> [u8; 32] {
    let mut hasher = blake3::Hasher::new();
    hasher.update(b"heldout split v1");
    hasher.update(&seed.to_le_bytes());
    hasher.update(purpose.as_bytes());
    *hasher.finalize().as_bytes()
}

/// Priority of one unit under a purpose key.
pub(crate) fn priority(key: &[u8; 32], identity: &str) -> u64 {
    let hash = blake3::keyed_hash(key, identity.as_bytes());
    let mut first = [0u8; 8];
    first.copy_from_slice(&hash.as_bytes()[..8]);
    u64::from_le_bytes(first)
}

/// The identity text of every unit, which decides its place in each shuffle
/// (docs/splits.md).
#[derive(Debug, Clone, Copy)]
pub(crate) enum Identities<'a> {
    /// Given text: a key column's values or group labels.
    Text(&'a [String]),
    /// Rows without a key: unit `u` is the row numbered `numbers[u]` (1-based
    /// among the data rows), whose identity text is that number in decimal.
    /// Held as numbers, the text is formed only while it is hashed, rather
    /// than kept as a string per row.
    RowNumbers(&'a [u64]),
}

impl Identities<'_> {
    fn len(&self) -> usize {
        match self {
            Identities::Text(texts) => texts.len(),
            Identities::RowNumbers(numbers) => numbers.len(),
        }
    }

    fn priority(&self, key: &[u8; 32], unit: usize) -> u64 {
        match self {
            Identities::Text(texts) => priority(key, &texts[unit]),
            Identities::RowNumbers(numbers) => priority(key, &numbers[unit].to_string()),
        }
    }

    /// Orders two units by their identity text.
    fn compare(&self, a: usize, b: usize) -> std::cmp::Ordering {
        match self {
            Identities::Text(texts) => texts[a].cmp(&texts[b]),
            Identities::RowNumbers(numbers) => numbers[a].to_string().cmp(&numbers[b].to_string()),
        }
    }
}

/// Units (indices into `identities`) sorted by (priority, identity text).
fn shuffled(key: &[u8; 32], identities: Identities<'_>, units: &[usize]) -> Vec<usize> {
    let mut ranked: Vec<(u64, usize)> = units
        .par_iter()
        .map(|&u| (identities.priority(key, u), u))
        .collect();
    ranked.sort_unstable_by(|a, b| {
        a.0.cmp(&b.0)
            .then_with(|| identities.compare(a.1, b.1))
            .then(a.1.cmp(&b.1))
    });
    ranked.into_iter().map(|(_, u)| u).collect()
}

/// Assigns rows, unstratified. `unit_of_row[r]` is the unit (row or group)
/// of row `r`; `identities` gives the identity text of each unit.
#[cfg(test)]
pub(crate) fn assign(
    seed: u64,
    holdout: f64,
    scheme: &FoldScheme,
    identities: Identities<'_>,
    unit_of_row: &[usize],
) -> Result<Assignment, SplitError> {
    assign_stratified(seed, holdout, scheme, identities, unit_of_row, None)
}

/// Assigns rows (`unit_of_row[r]` is the unit, row or group, of row `r`;
/// `identities` gives each unit's identity text), stratified when `strata`
/// gives each unit's stratum (its class,
/// 0-based): the test set takes from each stratum its share of the test rows
/// (largest remainders), and k-fold deals each stratum's units round-robin in
/// turn, so every fold holds each stratum's units within one of the exact
/// proportion (docs/splits.md, "Stratified splits"). Ordered splits ignore
/// strata.
pub(crate) fn assign_stratified(
    seed: u64,
    holdout: f64,
    scheme: &FoldScheme,
    identities: Identities<'_>,
    unit_of_row: &[usize],
    strata: Option<&[usize]>,
) -> Result<Assignment, SplitError> {
    let strata = strata.filter(|_| !matches!(scheme, FoldScheme::Ordered { .. }));
    let rows = unit_of_row.len();
    // Per unit, its row count and first row: all the split needs to know of
    // a unit's rows (a list per unit would cost an allocation per row).
    let mut rows_in_unit = vec![0usize; identities.len()];
    let mut first_row_of_unit = vec![usize::MAX; identities.len()];
    for (row, &unit) in unit_of_row.iter().enumerate() {
        rows_in_unit[unit] += 1;
        first_row_of_unit[unit] = first_row_of_unit[unit].min(row);
    }
    let all_units: Vec<usize> = (0..identities.len()).collect();
    // Each row's time point, for ordered splits (used by the test set and
    // the blocks alike).
    let time_rank = match scheme {
        FoldScheme::Ordered { time, .. } => time_ranks(time),
        _ => Vec::new(),
    };

    // The test set: units in holdout order until it holds round(holdout ×
    // rows). Ordered splits lock away the latest time points instead, whole.
    let wanted = (holdout * rows as f64).round() as usize;
    let mut is_test_unit = vec![false; identities.len()];
    let mut taken = 0;
    // Units are taken in batches: one time point's units for an ordered
    // split, one unit at a time otherwise.
    let mut take = |units: &[usize]| {
        if taken >= wanted {
            return false;
        }
        for &unit in units {
            is_test_unit[unit] = true;
            taken += rows_in_unit[unit];
        }
        true
    };
    match scheme {
        FoldScheme::Ordered { .. } => {
            let points = time_rank.iter().max().map_or(0, |&r| r + 1);
            let mut units_at: Vec<Vec<usize>> = vec![Vec::new(); points];
            for (row, &r) in time_rank.iter().enumerate() {
                units_at[r].push(unit_of_row[row]);
            }
            for units in units_at.iter().rev() {
                if !take(units) {
                    break;
                }
            }
        }
        _ => {
            let order = shuffled(&purpose_key(seed, "holdout"), identities, &all_units);
            let order = match strata {
                Some(strata) => stratified_holdout(&order, strata, &rows_in_unit, holdout),
                None => order,
            };
            for unit in order {
                if !take(&[unit]) {
                    break;
                }
            }
        }
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
        .filter(|&u| !is_test_unit[u] && rows_in_unit[u] > 0)
        .collect();
    let grouped = identities.len() != rows;
    let what = if grouped { "groups" } else { "rows" };

    let mut folds = Vec::new();
    let mut identical_repeats = 0;
    let repeats = match scheme {
        FoldScheme::Kfold { folds: k, repeats } => {
            if train_units.len() < *k {
                return Err(SplitError::FewerUnitsThanFolds {
                    units: train_units.len(),
                    folds: *k,
                    what,
                });
            }
            // Each partition once: a repeat that deals the units into the same
            // folds as an earlier one (as when every group is a fold of its
            // own) adds copies of the same scores, which would shrink the
            // standard error without adding evidence (docs/splits.md).
            let mut partitions: Vec<Vec<Vec<usize>>> = Vec::new();
            for repeat in 0..*repeats {
                let key = purpose_key(seed, &format!("kfold/repeat={}", repeat + 1));
                let mut fold_of_unit = vec![usize::MAX; identities.len()];
                let mut order = shuffled(&key, identities, &train_units);
                if let Some(strata) = strata {
                    // Each stratum's units in their shuffled order, strata in
                    // class order; the deal continues from one to the next.
                    order.sort_by_key(|&unit| strata[unit]);
                }
                for (position, unit) in order.into_iter().enumerate() {
                    fold_of_unit[unit] = position % k;
                }
                let dealt = deal(partitions.len(), *k, &train, |r| {
                    fold_of_unit[unit_of_row[r]]
                });
                let mut partition: Vec<Vec<usize>> =
                    dealt.iter().map(|fold| fold.valid.clone()).collect();
                partition.sort_unstable();
                if partitions.contains(&partition) {
                    identical_repeats += 1;
                    continue;
                }
                partitions.push(partition);
                folds.extend(dealt);
            }
            partitions.len()
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
            order.sort_by_key(|&u| first_row_of_unit[u]);
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
        FoldScheme::Ordered { folds: k, .. } => {
            folds.extend(forward_chain(*k, &train, &time_rank)?);
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
        identical_repeats,
        single_row_folds,
    })
}

/// The units of a stratified test set, in `order` (the holdout's shuffled
/// order): stratum c contributes its first t_c units, where the t_c share
/// out round(holdout × rows) in proportion to the strata's sizes by largest
/// remainders (ties to the earlier stratum). Units are single rows here.
fn stratified_holdout(
    order: &[usize],
    strata: &[usize],
    rows_in_unit: &[usize],
    holdout: f64,
) -> Vec<usize> {
    let units: Vec<usize> = order
        .iter()
        .copied()
        .filter(|&u| rows_in_unit[u] > 0)
        .collect();
    let n = units.len();
    let wanted = (holdout * n as f64).round() as usize;
    let count = strata.iter().copied().max().map_or(0, |m| m + 1);
    let mut sizes = vec![0usize; count];
    for &u in &units {
        sizes[strata[u]] += 1;
    }
    let mut take: Vec<usize> = sizes.iter().map(|&size| wanted * size / n).collect();
    let mut by_remainder: Vec<usize> = (0..count).collect();
    by_remainder.sort_by_key(|&c| (std::cmp::Reverse(wanted * sizes[c] % n), c));
    let short = wanted - take.iter().sum::<usize>();
    for &c in by_remainder.iter().take(short) {
        take[c] += 1;
    }
    let mut taken = vec![0usize; count];
    units
        .into_iter()
        .filter(|&u| {
            let c = strata[u];
            taken[c] += 1;
            taken[c] <= take[c]
        })
        .collect()
}

/// The rank of every row's time point among the distinct values of `time`:
/// numeric order when every value is a number, text order otherwise (which
/// sorts ISO 8601 dates and times correctly).
fn time_ranks(time: &[String]) -> Vec<usize> {
    let points = ordered_labels(time.iter().map(String::as_str));
    let rank: BTreeMap<&str, usize> = points
        .iter()
        .enumerate()
        .map(|(r, p)| (p.as_str(), r))
        .collect();
    time.iter().map(|t| rank[t.as_str()]).collect()
}

/// Forward-chaining folds: the non-test rows in time order are cut into
/// `k + 1` consecutive blocks of about equal size, whole time points each (a
/// time point goes to block ⌊(k + 1)·s/n⌋, s the non-test rows at earlier
/// times, n all non-test rows); fold j validates on block j + 1 and trains on
/// blocks 0..=j.
fn forward_chain(k: usize, train_rows: &[usize], rank: &[usize]) -> Result<Vec<Fold>, SplitError> {
    let blocks = k + 1;
    let mut by_time: Vec<usize> = train_rows.to_vec();
    by_time.sort_by_key(|&row| (rank[row], row));
    let n = by_time.len();
    let mut block_of_row = vec![usize::MAX; rank.len()];
    let mut points = 0;
    let mut start = 0;
    while start < n {
        let point = rank[by_time[start]];
        let block = blocks * start / n;
        let mut end = start;
        while end < n && rank[by_time[end]] == point {
            block_of_row[by_time[end]] = block;
            end += 1;
        }
        points += 1;
        start = end;
    }
    let mut sizes = vec![0usize; blocks];
    for &row in train_rows {
        sizes[block_of_row[row]] += 1;
    }
    if let Some(empty) = sizes.iter().position(|&size| size == 0) {
        return Err(SplitError::TooFewTimePoints {
            points,
            blocks,
            folds: k,
            empty: empty + 1,
        });
    }
    Ok((0..k)
        .map(|index| Fold {
            repeat: 0,
            index,
            label: (index + 1).to_string(),
            valid: train_rows
                .iter()
                .copied()
                .filter(|&row| block_of_row[row] == index + 1)
                .collect(),
            train: Some(
                train_rows
                    .iter()
                    .copied()
                    .filter(|&row| block_of_row[row] <= index)
                    .collect(),
            ),
        })
        .collect())
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
            train: None,
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
        train: None,
    }
}

/// Distinct fold labels in order: numerically when every label is a number,
/// as text otherwise.
pub(crate) fn ordered_labels<'a>(labels: impl Iterator<Item = &'a str>) -> Vec<String> {
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

    /// Every row some fold of `repeat` validates on, ascending (with
    /// repeats: a row validated twice appears twice).
    pub(super) fn validated_in(a: &Assignment, repeat: usize) -> Vec<usize> {
        let mut rows: Vec<usize> = a
            .folds
            .iter()
            .filter(|f| f.repeat == repeat)
            .flat_map(|f| f.valid.iter().copied())
            .collect();
        rows.sort_unstable();
        rows
    }

    fn rows(n: usize) -> (Vec<String>, Vec<usize>) {
        ((1..=n).map(|i| i.to_string()).collect(), (0..n).collect())
    }

    #[test]
    fn row_numbers_split_exactly_as_their_decimal_text() {
        // A row's identity is its number written in decimal; holding the
        // numbers instead of strings must not move a single row.
        let (ids, units) = rows(300);
        let numbers: Vec<u64> = (1..=300).collect();
        for scheme in [
            FoldScheme::Kfold {
                folds: 7,
                repeats: 2,
            },
            FoldScheme::LeaveOneOut,
        ] {
            let text = assign(5, 0.25, &scheme, Identities::Text(&ids), &units).unwrap();
            let rows = assign(5, 0.25, &scheme, Identities::RowNumbers(&numbers), &units).unwrap();
            assert_eq!(text.test, rows.test);
            assert_eq!(text.train, rows.train);
            let valid =
                |a: &Assignment| a.folds.iter().map(|f| f.valid.clone()).collect::<Vec<_>>();
            assert_eq!(valid(&text), valid(&rows));
        }
    }

    #[test]
    fn a_repeat_that_deals_the_same_folds_is_counted_once() {
        // Five groups, five folds: every repeat puts each group in a fold of
        // its own, so the three repeats are one partition (fold numbers
        // aside).
        let ids: Vec<String> = ["a", "b", "c", "d", "e"].map(String::from).to_vec();
        let units: Vec<usize> = (0..40).map(|r| r % 5).collect();
        let scheme = FoldScheme::Kfold {
            folds: 5,
            repeats: 3,
        };
        let a = assign(2, 0.0, &scheme, Identities::Text(&ids), &units).unwrap();
        assert_eq!((a.repeats, a.identical_repeats, a.folds.len()), (1, 2, 5));
        assert!(a.folds.iter().all(|f| f.repeat == 0));
        // Ten groups in five folds: the repeats differ and all are kept.
        let ids: Vec<String> = (0..10).map(|g| g.to_string()).collect();
        let units: Vec<usize> = (0..40).map(|r| r % 10).collect();
        let a = assign(2, 0.0, &scheme, Identities::Text(&ids), &units).unwrap();
        assert_eq!((a.repeats, a.identical_repeats, a.folds.len()), (3, 0, 15));
    }

    #[test]
    fn folds_are_named_within_their_repeat() {
        let (ids, units) = rows(40);
        let scheme = FoldScheme::Kfold {
            folds: 4,
            repeats: 3,
        };
        let a = assign(7, 0.0, &scheme, Identities::Text(&ids), &units).unwrap();
        // Position 5 of fold_scores is the second fold of the second repeat.
        assert_eq!(a.describe_fold(5), "fold 2 of repeat 2");
        assert_eq!(a.describe_fold(11), "fold 4 of repeat 3");
        assert_eq!(describe_fold("north", 0, 1), "fold north");
    }

    #[test]
    fn kfold_partitions_the_non_test_rows_into_balanced_folds() {
        let (ids, units) = rows(103);
        let scheme = FoldScheme::Kfold {
            folds: 5,
            repeats: 2,
        };
        let a = assign(42, 0.2, &scheme, Identities::Text(&ids), &units).unwrap();
        assert_eq!(a.test.len(), 21); // round(0.2 × 103)
        assert_eq!(a.train.len(), 82);
        assert_eq!(a.folds.len(), 10);
        for repeat in 0..2 {
            let seen = validated_in(&a, repeat);
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
        let a = assign(7, 0.2, &scheme, Identities::Text(&ids), &units).unwrap();
        let b = assign(7, 0.2, &scheme, Identities::Text(&ids), &units).unwrap();
        let c = assign(8, 0.2, &scheme, Identities::Text(&ids), &units).unwrap();
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
        let a = assign(3, 0.0, &scheme, Identities::Text(&ids), &units).unwrap();
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
        let a = assign(1, 0.0, &scheme, Identities::Text(&ids), &units).unwrap();
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
        let err = assign(1, 0.0, &scheme, Identities::Text(&ids), &units).unwrap_err();
        assert_eq!(
            err,
            SplitError::FewerUnitsThanFolds {
                units: 4,
                folds: 5,
                what: "rows"
            }
        );
    }

    /// Time points 1..=n as text, shuffled across rows by a fixed stride so
    /// that file order is not time order.
    fn shuffled_days(n: usize) -> Vec<String> {
        (0..n).map(|row| ((row * 37) % n + 1).to_string()).collect()
    }

    #[test]
    fn ordered_folds_train_only_on_earlier_rows_and_test_on_the_latest() {
        let time = shuffled_days(103);
        let day = |row: usize| time[row].parse::<usize>().unwrap();
        let (ids, units) = rows(103);
        let scheme = FoldScheme::Ordered {
            folds: 4,
            time: time.clone(),
        };
        let a = assign(9, 0.2, &scheme, Identities::Text(&ids), &units).unwrap();
        // round(0.2 × 103) = 21 latest days are the test set.
        assert_eq!(a.test.len(), 21);
        assert!(a.test.iter().all(|&r| day(r) > 82));
        assert_eq!(a.folds.len(), 4);
        // 82 rows in 5 blocks: ⌊5s/82⌋ gives sizes 17, 16, 17, 16, 16.
        let sizes: Vec<usize> = a.folds.iter().map(|f| f.valid.len()).collect();
        assert_eq!(sizes, vec![16, 17, 16, 16]);
        for (j, fold) in a.folds.iter().enumerate() {
            let train = a.fold_train(j);
            assert_eq!(a.fold_train_len(j), train.len());
            let latest_train = train.iter().map(|&r| day(r)).max().unwrap();
            let earliest_valid = fold.valid.iter().map(|&r| day(r)).min().unwrap();
            assert_eq!(latest_train + 1, earliest_valid, "fold {}", j + 1);
            // Expanding window: everything before the block, nothing after.
            assert_eq!(train.len(), 17 + sizes[..j].iter().sum::<usize>());
            assert!(train.windows(2).all(|w| w[0] < w[1]));
        }
        // The first block trains every fold and validates none.
        let placements = a.placements(103, 0);
        let train_only = placements
            .iter()
            .filter(|p| **p == Placement::TrainOnly)
            .count();
        assert_eq!(train_only, 17);
        // No randomness: another seed gives the same assignment.
        assert_eq!(
            assign(10, 0.2, &scheme, Identities::Text(&ids), &units).unwrap(),
            a
        );
    }

    #[test]
    fn ordered_blocks_keep_each_time_point_whole_and_sort_dates_as_text() {
        // Two readings per date; ISO 8601 text sorts in time order.
        let dates = ["2026-01-09", "2026-01-10", "2025-12-31", "2026-01-02"];
        let time: Vec<String> = (0..16)
            .map(|row| format!("{}T0{}", dates[row % 4], row / 8))
            .collect();
        let (ids, units) = rows(16);
        let scheme = FoldScheme::Ordered {
            folds: 3,
            time: time.clone(),
        };
        let a = assign(1, 0.25, &scheme, Identities::Text(&ids), &units).unwrap();
        // round(0.25 × 16) = 4 rows: the two latest time points, whole.
        let latest: std::collections::BTreeSet<&str> =
            a.test.iter().map(|&r| time[r].as_str()).collect();
        assert_eq!(a.test.len(), 4);
        assert_eq!(
            latest.into_iter().collect::<Vec<_>>(),
            ["2026-01-10T00", "2026-01-10T01"]
        );
        // Six time points of two rows in four blocks: ⌊4s/12⌋ for s = 0, 2,
        // …, 10 puts them in blocks 0, 0, 1, 2, 2, 3.
        let sizes: Vec<usize> = a.folds.iter().map(|f| f.valid.len()).collect();
        assert_eq!(sizes, vec![2, 4, 2]);
        for fold in &a.folds {
            for &row in &fold.valid {
                let twin = (0..16).find(|&r| r != row && time[r] == time[row]).unwrap();
                assert!(fold.valid.contains(&twin), "time point {} split", time[row]);
            }
        }
    }

    #[test]
    fn too_few_time_points_for_ordered_folds_is_an_error() {
        let time: Vec<String> = ["1", "1", "1", "2", "2", "3"].map(String::from).to_vec();
        let (ids, units) = rows(6);
        let scheme = FoldScheme::Ordered { folds: 3, time };
        let err = assign(1, 0.0, &scheme, Identities::Text(&ids), &units).unwrap_err();
        assert_eq!(
            err,
            SplitError::TooFewTimePoints {
                points: 3,
                blocks: 4,
                folds: 3,
                empty: 2
            }
        );
    }
}

#[cfg(test)]
mod stratified_tests {
    use super::*;

    /// `n` rows (identities "1".."n") with classes drawn by a fixed rule
    /// that leaves the classes unbalanced.
    fn rows_with_classes(n: usize, classes: usize, salt: usize) -> (Vec<String>, Vec<usize>) {
        let ids = (1..=n).map(|i| i.to_string()).collect();
        let class = (0..n)
            .map(|i| ((i * 7919 + salt * 31) % 97) % (classes + 1) % classes)
            .collect();
        (ids, class)
    }

    fn count(rows: &[usize], class: &[usize], c: usize) -> usize {
        rows.iter().filter(|&&r| class[r] == c).count()
    }

    #[test]
    fn every_fold_holds_each_class_within_one_of_its_exact_share() {
        // Property over many seeds, sizes and class counts: in every repeat,
        // fold f validates on n_c / k rows of class c, give or take less than
        // one; the test set takes round(holdout · n) rows, each class's share
        // within one.
        for seed in 0..200u64 {
            let n = 40 + (seed as usize * 13) % 160;
            let classes = 2 + (seed as usize) % 4;
            let k = 2 + (seed as usize) % 9;
            let (ids, class) = rows_with_classes(n, classes, seed as usize);
            let units: Vec<usize> = (0..n).collect();
            let scheme = FoldScheme::Kfold {
                folds: k,
                repeats: 2,
            };
            let holdout = 0.2;
            let a = assign_stratified(
                seed,
                holdout,
                &scheme,
                Identities::Text(&ids),
                &units,
                Some(&class),
            )
            .unwrap();
            assert_eq!(a.test.len(), (holdout * n as f64).round() as usize);
            for c in 0..classes {
                let exact = holdout * count(&(0..n).collect::<Vec<_>>(), &class, c) as f64;
                let got = count(&a.test, &class, c) as f64;
                assert!(
                    (got - exact).abs() < 1.0,
                    "seed {seed}: test set, class {c}"
                );
                let in_train = count(&a.train, &class, c) as f64;
                for fold in &a.folds {
                    let got = count(&fold.valid, &class, c) as f64;
                    assert!(
                        (got - in_train / k as f64).abs() < 1.0,
                        "seed {seed}, repeat {}, fold {}: class {c} has {got} of {in_train}",
                        fold.repeat,
                        fold.label
                    );
                }
            }
            // Still a partition of the non-test rows in every repeat.
            for repeat in 0..2 {
                let all = super::tests::validated_in(&a, repeat);
                assert_eq!(all, a.train, "seed {seed}, repeat {repeat}");
            }
        }
    }

    #[test]
    fn stratified_splits_are_deterministic_and_unstratified_ones_unchanged() {
        let (ids, class) = rows_with_classes(90, 3, 1);
        let units: Vec<usize> = (0..90).collect();
        let scheme = FoldScheme::Kfold {
            folds: 5,
            repeats: 1,
        };
        let a = assign_stratified(
            4,
            0.2,
            &scheme,
            Identities::Text(&ids),
            &units,
            Some(&class),
        )
        .unwrap();
        let b = assign_stratified(
            4,
            0.2,
            &scheme,
            Identities::Text(&ids),
            &units,
            Some(&class),
        )
        .unwrap();
        assert_eq!(a, b);
        // Without strata the assignment is the plain one.
        assert_eq!(
            assign_stratified(4, 0.2, &scheme, Identities::Text(&ids), &units, None).unwrap(),
            assign(4, 0.2, &scheme, Identities::Text(&ids), &units).unwrap()
        );
    }
}
