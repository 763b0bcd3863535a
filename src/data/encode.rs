//! Categorical features (docs/spec.md, "Categorical features"): a column of
//! text labels (or of integer codes listed in `[data] categorical`) becomes
//! 0/1 indicator columns inside each fit.
//!
//! The table keeps each categorical column as level codes: the index of the
//! cell's label among the column's distinct labels sorted in byte order
//! ([`codes`]). What a fit makes of them is fitted on its training rows only
//! ([`LevelEncoding::fit`]): which levels the training rows hold, which are
//! rare enough to be pooled into one level named [`POOLED`], and which is the
//! reference (the most frequent training level, ties to the first in sorted
//! order, the pooled level last). The encoding is then applied unchanged to
//! the rows the fit predicts: a level the training rows never held gets the
//! reference's row (every indicator 0), as scikit-learn's
//! `OneHotEncoder(drop=<reference>, handle_unknown="ignore")` does.

use std::collections::BTreeMap;

/// The level rare training levels are pooled into under `min_level_rows`.
pub(crate) const POOLED: &str = "other";

/// The level a missing categorical cell becomes under `missing = "impute"`.
pub(crate) const MISSING_LEVEL: &str = "missing";

/// A column of labels as its distinct labels in byte order and each row's
/// code (its label's index there, as a float, the type of design columns).
pub(crate) fn codes(labels: &[String]) -> (Vec<String>, Vec<f64>) {
    let mut index: BTreeMap<&str, usize> = labels.iter().map(|l| (l.as_str(), 0)).collect();
    for (i, code) in index.values_mut().enumerate() {
        *code = i;
    }
    let codes = labels.iter().map(|l| index[l.as_str()] as f64).collect();
    (index.into_keys().map(str::to_string).collect(), codes)
}

/// What one training level group is: a level of the table, or the pooled
/// rare levels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Group {
    Level(usize),
    Pooled,
}

/// One categorical column's encoding inside one fit.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct LevelEncoding {
    /// The training level groups in order: levels with at least
    /// `min_level_rows` training rows by code, then the pooled group if any.
    pub(crate) groups: Vec<Group>,
    /// Training rows of each group.
    pub(crate) rows: Vec<usize>,
    /// The index in `groups` of the reference (most rows, ties to the
    /// first); `None` when every group gets a column.
    pub(crate) reference: Option<usize>,
    /// Per table level: its group, or `None` when the training rows never
    /// hold it.
    group_of_level: Vec<Option<usize>>,
}

impl LevelEncoding {
    /// Fitted on the codes of the training rows of a column with `levels`
    /// levels. Levels with fewer than `min_level_rows` training rows are
    /// pooled; `with_reference` leaves the most frequent group out of the
    /// columns.
    pub(crate) fn fit(
        train_codes: impl Iterator<Item = f64>,
        levels: usize,
        min_level_rows: usize,
        with_reference: bool,
    ) -> Self {
        let mut counts = vec![0usize; levels];
        for code in train_codes {
            counts[code as usize] += 1;
        }
        let mut groups = Vec::new();
        let mut rows = Vec::new();
        let mut group_of_level = vec![None; levels];
        let mut pooled = 0;
        for (level, &count) in counts.iter().enumerate() {
            if count >= min_level_rows.max(1) {
                group_of_level[level] = Some(groups.len());
                groups.push(Group::Level(level));
                rows.push(count);
            } else if count > 0 {
                pooled += count;
            }
        }
        if pooled > 0 {
            for (level, &count) in counts.iter().enumerate() {
                if count > 0 && count < min_level_rows {
                    group_of_level[level] = Some(groups.len());
                }
            }
            groups.push(Group::Pooled);
            rows.push(pooled);
        }
        // The first group with the most rows: `max_by_key` keeps the last
        // of equals, so compare against the position too.
        let reference = with_reference
            .then(|| (0..groups.len()).max_by(|&a, &b| rows[a].cmp(&rows[b]).then(b.cmp(&a))))
            .flatten();
        LevelEncoding {
            groups,
            rows,
            reference,
            group_of_level,
        }
    }

    /// The groups that get a column, in column order.
    pub(crate) fn columns(&self) -> impl Iterator<Item = Group> + '_ {
        self.groups
            .iter()
            .enumerate()
            .filter(|(g, _)| Some(*g) != self.reference)
            .map(|(_, &group)| group)
    }

    /// The indicator column a row of level `code` sets to 1: `None` for the
    /// reference and for a level the training rows never held.
    pub(crate) fn column_of(&self, code: f64) -> Option<usize> {
        let group = (*self.group_of_level.get(code as usize)?)?;
        match self.reference {
            Some(reference) if group == reference => None,
            Some(reference) if group > reference => Some(group - 1),
            _ => Some(group),
        }
    }

    /// A group's name, from the column's level names.
    pub(crate) fn name<'a>(&self, group: Group, levels: &'a [String]) -> &'a str {
        match group {
            Group::Level(level) => &levels[level],
            Group::Pooled => POOLED,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labels(text: &str) -> Vec<String> {
        text.split(' ').map(str::to_string).collect()
    }

    #[test]
    fn codes_follow_byte_order() {
        // Byte order: upper case before lower case, "10" before "9".
        let (levels, codes) = codes(&labels("b a B 9 10 a"));
        assert_eq!(levels, ["10", "9", "B", "a", "b"]);
        assert_eq!(codes, [4.0, 3.0, 2.0, 1.0, 0.0, 3.0]);
    }

    #[test]
    fn the_reference_is_the_most_frequent_training_level_ties_to_the_first() {
        // Levels 0..4; training rows: 1 x2, 2 x2, 3 x1 (0 unseen).
        let encoding = LevelEncoding::fit([1.0, 2.0, 2.0, 1.0, 3.0].into_iter(), 4, 1, true);
        assert_eq!(encoding.reference, Some(0)); // level 1, first of the tie
        assert_eq!(
            encoding.columns().collect::<Vec<_>>(),
            [Group::Level(2), Group::Level(3)]
        );
        assert_eq!(encoding.column_of(1.0), None);
        assert_eq!(encoding.column_of(2.0), Some(0));
        assert_eq!(encoding.column_of(3.0), Some(1));
        // Unseen in training: the reference's row, and counted as unseen.
        assert_eq!(encoding.column_of(0.0), None);
        // Every level its own column (nearest neighbours).
        let every = LevelEncoding::fit([1.0, 2.0, 2.0].into_iter(), 4, 1, false);
        assert_eq!(every.columns().count(), 2);
        assert_eq!(every.column_of(1.0), Some(0));
        assert_eq!(every.column_of(2.0), Some(1));
        assert_eq!(every.column_of(0.0), None);
    }

    #[test]
    fn rare_levels_are_pooled_and_the_pool_can_be_the_reference() {
        // min 3: levels 0 (4 rows) kept; 1 (2) and 2 (1) pooled into 3 rows.
        let train = [0.0, 0.0, 0.0, 0.0, 1.0, 1.0, 2.0];
        let encoding = LevelEncoding::fit(train.into_iter(), 4, 3, true);
        assert_eq!(encoding.groups, [Group::Level(0), Group::Pooled]);
        assert_eq!(encoding.rows, [4, 3]);
        assert_eq!(encoding.reference, Some(0));
        assert_eq!(encoding.column_of(1.0), Some(0));
        assert_eq!(encoding.column_of(2.0), Some(0));
        assert_eq!(encoding.column_of(3.0), None);
        let names = labels("a b c d");
        assert_eq!(encoding.name(Group::Pooled, &names), "other");
        // The pool outnumbers every kept level: it is the reference.
        let train = [0.0, 0.0, 1.0, 2.0, 3.0];
        let encoding = LevelEncoding::fit(train.into_iter(), 4, 2, true);
        assert_eq!(encoding.groups, [Group::Level(0), Group::Pooled]);
        assert_eq!(encoding.reference, Some(1));
        assert_eq!(encoding.column_of(0.0), Some(0));
        assert_eq!(encoding.column_of(3.0), None);
    }
}
