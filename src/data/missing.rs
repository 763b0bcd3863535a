//! `missing = "impute"`: missing feature cells (NaN after loading) are filled
//! with the median of the training rows of each fit, and every feature that
//! has a missing cell among the rows used for fitting gets a 0/1 indicator
//! column beside it (docs/spec.md, "Missing values").
//!
//! Only the medians are fitted, and only on a task's training rows; they are
//! applied unchanged to its evaluation rows (a fold's validation rows, or the
//! locked test set for the fit on all non-test rows). An indicator depends on
//! its own row alone, so it is computed once for the whole table.
//! The same convention as scikit-learn's
//! `SimpleImputer(strategy="median", add_indicator=True)`.

use nalgebra::DMatrix;

/// The name of the indicator column of `feature`. It cannot clash with a
/// spec's own column name only by luck, so the plan checks the header.
pub(crate) fn indicator_name(feature: &str) -> String {
    format!("missing({feature})")
}

/// The feature an indicator column stands for, when `name` is one.
pub(crate) fn indicated_feature(name: &str) -> Option<&str> {
    name.strip_prefix("missing(")?.strip_suffix(')')
}

/// 1 where `values` is missing (NaN), 0 elsewhere.
pub(crate) fn indicator(values: &[f64]) -> Vec<f64> {
    values
        .iter()
        .map(|v| if v.is_nan() { 1.0 } else { 0.0 })
        .collect()
}

/// The median of the values that are not NaN: the middle one, or the mean of
/// the middle two for an even count (numpy's `median`); `None` when there is
/// no value.
pub(crate) fn median(values: impl Iterator<Item = f64>) -> Option<f64> {
    let mut present: Vec<f64> = values.filter(|v| !v.is_nan()).collect();
    if present.is_empty() {
        return None;
    }
    present.sort_by(f64::total_cmp);
    let half = present.len() / 2;
    Some(if present.len() % 2 == 1 {
        present[half]
    } else {
        // Halves first: the sum of two values near the largest magnitude
        // must not overflow.
        present[half - 1] / 2.0 + present[half] / 2.0
    })
}

/// Fills the missing cells of every column of `x_train` and `x_eval` with
/// the median of that column over `x_train`, and returns the medians used
/// (`None` for a column with no missing cell in either matrix). Fails with
/// the index of a column that has missing cells but no training value.
pub(crate) fn fill_with_training_medians(
    x_train: &mut DMatrix<f64>,
    x_eval: &mut DMatrix<f64>,
) -> Result<Vec<Option<f64>>, usize> {
    let mut medians = Vec::with_capacity(x_train.ncols());
    for j in 0..x_train.ncols() {
        let has_missing = x_train.column(j).iter().any(|v| v.is_nan())
            || x_eval.column(j).iter().any(|v| v.is_nan());
        if !has_missing {
            medians.push(None);
            continue;
        }
        let fill = median(x_train.column(j).iter().copied()).ok_or(j)?;
        for matrix in [&mut *x_train, &mut *x_eval] {
            for v in matrix.column_mut(j).iter_mut() {
                if v.is_nan() {
                    *v = fill;
                }
            }
        }
        medians.push(Some(fill));
    }
    Ok(medians)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn median_ignores_missing_and_averages_the_middle_pair() {
        // By hand: sorted 1, 2, 4, 10 -> (2 + 4) / 2.
        assert_eq!(
            median([10.0, f64::NAN, 2.0, 1.0, 4.0].into_iter()),
            Some(3.0)
        );
        assert_eq!(median([5.0, f64::NAN, -1.0, 7.0].into_iter()), Some(5.0));
        assert_eq!(median([f64::NAN].into_iter()), None);
        assert_eq!(median([1e308, 1e308].into_iter()), Some(1e308));
    }

    #[test]
    fn training_medians_fill_both_matrices_and_only_columns_with_gaps() {
        let nan = f64::NAN;
        let mut train = DMatrix::from_row_slice(3, 2, &[1.0, 5.0, nan, 6.0, 3.0, 7.0]);
        let mut eval = DMatrix::from_row_slice(2, 2, &[nan, 8.0, 100.0, 9.0]);
        let medians = fill_with_training_medians(&mut train, &mut eval).unwrap();
        assert_eq!(medians, vec![Some(2.0), None]);
        assert_eq!(train[(1, 0)], 2.0);
        // The evaluation row gets the training median, not its own column's.
        assert_eq!(eval[(0, 0)], 2.0);
        assert_eq!(eval[(1, 0)], 100.0);
        // A column missing only in the evaluation rows is filled too.
        let mut train = DMatrix::from_row_slice(2, 1, &[1.0, 2.0]);
        let mut eval = DMatrix::from_row_slice(1, 1, &[nan]);
        assert_eq!(
            fill_with_training_medians(&mut train, &mut eval).unwrap(),
            vec![Some(1.5)]
        );
        // No training value to fill from.
        let mut train = DMatrix::from_row_slice(2, 1, &[nan, nan]);
        let mut eval = DMatrix::from_row_slice(1, 1, &[1.0]);
        assert_eq!(fill_with_training_medians(&mut train, &mut eval), Err(0));
    }

    #[test]
    fn indicator_names_read_back() {
        assert_eq!(indicator_name("wind"), "missing(wind)");
        assert_eq!(indicated_feature("missing(wind)"), Some("wind"));
        assert_eq!(indicated_feature("wind"), None);
        assert_eq!(indicator(&[1.0, f64::NAN]), vec![0.0, 1.0]);
    }
}
