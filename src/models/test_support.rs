//! Checks that several families' tests share: the whole grid fitted at once
//! against one fit per setting, and a leave-one-out shortcut against refits
//! without each row.

use std::fmt;

use nalgebra::DMatrix;

use super::Family;

/// |a − b| / |b|, with |b| taken as at least the smallest positive double.
pub(crate) fn relative(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
}

/// Asserts that fitting the grid of `whole` at once gives what fitting each
/// setting alone gives (`alone(s)` is the family with only setting `s`):
/// predictions at the training and evaluation rows to `tolerance` relative,
/// effective df exactly.
pub(crate) fn assert_grid_equals_separate_fits<
    F: Family + ?Sized,
    G: std::ops::Deref<Target = F>,
>(
    whole: &F,
    alone: impl Fn(usize) -> G,
    x_train: &DMatrix<f64>,
    y_train: &[f64],
    x_eval: &DMatrix<f64>,
    tolerance: f64,
) {
    let together = whole.fit_path(x_train, y_train, x_eval, true).unwrap();
    for (s, (setting, together)) in whole.settings().iter().zip(&together).enumerate() {
        let alone = &alone(s).fit_path(x_train, y_train, x_eval, true).unwrap()[0];
        let pairs = together
            .eval_pred
            .iter()
            .chain(&together.train_pred)
            .zip(alone.eval_pred.iter().chain(&alone.train_pred));
        for (a, b) in pairs {
            assert!(relative(*a, *b) <= tolerance, "{setting}: {a} vs {b}");
        }
        assert_eq!(together.effective_df, alone.effective_df, "{setting}");
    }
}

/// One training row's leave-one-out prediction at one setting, by the
/// family's shortcut and by a refit on the other rows.
#[derive(Debug, Clone, Copy)]
pub(crate) struct LeftOut {
    pub(crate) setting: usize,
    pub(crate) row: usize,
    pub(crate) shortcut: f64,
    pub(crate) refit: f64,
}

impl fmt::Display for LeftOut {
    /// Names the setting (by index) and row in a failing assertion.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "setting {}, row {}: shortcut {} vs refit {}",
            self.setting, self.row, self.shortcut, self.refit
        )
    }
}

/// [`LeftOut`] for every setting and training row of `family`, which must
/// offer a leave-one-out shortcut; each caller judges how close is close.
#[allow(clippy::needless_range_loop)] // row indexes the targets and the shortcut
pub(crate) fn shortcut_beside_refits(
    family: &dyn Family,
    x: &DMatrix<f64>,
    y: &[f64],
) -> Vec<LeftOut> {
    let shortcut = family
        .leave_one_out(x, y)
        .expect("the family has a leave-one-out shortcut")
        .unwrap();
    assert_eq!(
        shortcut.len(),
        family.settings().len(),
        "one row per setting"
    );
    let n = y.len();
    let mut pairs = Vec::with_capacity(n * shortcut.len());
    for row in 0..n {
        let keep: Vec<usize> = (0..n).filter(|&r| r != row).collect();
        let y_rest: Vec<f64> = keep.iter().map(|&r| y[r]).collect();
        let refits = family
            .fit_path(
                &x.select_rows(&keep),
                &y_rest,
                &x.rows(row, 1).into_owned(),
                false,
            )
            .unwrap();
        for (setting, refit) in refits.iter().enumerate() {
            pairs.push(LeftOut {
                setting,
                row,
                shortcut: shortcut[setting][row],
                refit: refit.eval_pred[0],
            });
        }
    }
    pairs
}
