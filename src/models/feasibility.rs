//! What a family can tell about a setting before fitting it: the training
//! rows' count and each feature's number of distinct values decide some
//! settings outright (k nearest neighbours need k rows; a polynomial of
//! degree d needs d + 1 distinct values of each feature). Families answer
//! through [`super::Family::infeasible`]; settings that fail only while
//! fitting are caught by the executor (docs/spec.md, "Infeasible settings").

use std::sync::OnceLock;

use nalgebra::DMatrix;

/// The shape of one fit's training rows, as far as feasibility needs it.
/// Distinct values are counted only when a family asks.
#[derive(Debug)]
pub struct TrainingShape<'a> {
    x_train: &'a DMatrix<f64>,
    leave_one_out: bool,
    distinct: OnceLock<Vec<usize>>,
}

impl<'a> TrainingShape<'a> {
    /// The shape of the fits on `x_train`; with `leave_one_out`, of every
    /// fit that leaves one of its rows out (the smallest such fit counts).
    pub fn new(x_train: &'a DMatrix<f64>, leave_one_out: bool) -> Self {
        TrainingShape {
            x_train,
            leave_one_out,
            distinct: OnceLock::new(),
        }
    }

    /// The training rows themselves (a family bound to encoded columns
    /// encodes them to ask the family it fits).
    pub(crate) fn x_train(&self) -> &'a DMatrix<f64> {
        self.x_train
    }

    /// Whether this is the shape of the fits that leave one row out.
    pub(crate) fn leave_one_out(&self) -> bool {
        self.leave_one_out
    }

    /// Training rows of a fit.
    pub fn rows(&self) -> usize {
        self.x_train.nrows() - usize::from(self.leave_one_out && self.x_train.nrows() > 0)
    }

    /// Distinct values of feature `column` over a fit's training rows (the
    /// fewest of any leave-one-out fit: a value seen once can be left out).
    pub fn distinct(&self, column: usize) -> usize {
        self.distinct.get_or_init(|| {
            (0..self.x_train.ncols())
                .map(|j| {
                    distinct_values(self.x_train.column(j).iter().copied(), self.leave_one_out)
                })
                .collect()
        })[column]
    }
}

/// The number of distinct values, less one when `less_a_single` and some
/// value occurs only once.
fn distinct_values(values: impl Iterator<Item = f64>, less_a_single: bool) -> usize {
    let mut sorted: Vec<f64> = values.collect();
    sorted.sort_by(f64::total_cmp);
    let mut distinct = 0;
    let mut single = false;
    let mut i = 0;
    while i < sorted.len() {
        let mut j = i + 1;
        while j < sorted.len() && sorted[j] == sorted[i] {
            j += 1;
        }
        distinct += 1;
        single |= j - i == 1;
        i = j;
    }
    distinct - usize::from(less_a_single && single)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_and_distinct_values_of_a_fold_and_of_leave_one_out() {
        // Column 0: 0/1 with both values repeated; column 1: 1, 2, 2, 3
        // (1 and 3 occur once, so a leave-one-out fit may see only 2 values).
        let x = DMatrix::from_row_slice(4, 2, &[0.0, 1.0, 1.0, 2.0, 0.0, 2.0, 1.0, 3.0]);
        let fold = TrainingShape::new(&x, false);
        assert_eq!((fold.rows(), fold.distinct(0), fold.distinct(1)), (4, 2, 3));
        let loo = TrainingShape::new(&x, true);
        assert_eq!((loo.rows(), loo.distinct(0), loo.distinct(1)), (3, 2, 2));
    }
}
