//! Standardised features for the penalised families (`ridge`, `lasso`).
//!
//! Each feature is centred on its training-fold mean and divided by its
//! training-fold population standard deviation, so a penalty treats every
//! feature alike whatever its units (common practice; e.g. Hoerl & Kennard
//! 1970, "Ridge regression: biased estimation for nonorthogonal problems",
//! Technometrics 12). The intercept is left out of the penalty: it is the
//! training mean of the target, and coefficients act on the centred target.
//!
//! A feature that is constant on the training fold becomes a column of
//! zeros: it cannot explain anything there, its coefficient is 0, and it
//! does not move any prediction (scikit-learn's `StandardScaler` treats a
//! zero-variance column the same way).

use nalgebra::DMatrix;

use super::mean_and_sd;

/// Training-fold means and standard deviations of the features.
#[derive(Debug, Clone)]
pub(crate) struct Standardiser {
    means: Vec<f64>,
    /// `None` for a feature that is constant on the training fold.
    sds: Vec<Option<f64>>,
}

impl Standardiser {
    /// Means and population standard deviations of the columns of `x_train`.
    pub(crate) fn fit(x_train: &DMatrix<f64>) -> Self {
        let (means, sds) = x_train
            .column_iter()
            .map(|column| {
                let (mean, sd) = mean_and_sd(column.iter().copied());
                let first = column[0];
                // Compare values, not the computed sd: the mean of identical
                // values may be off by one rounding, leaving a tiny spurious sd.
                let constant = column.iter().all(|&v| v == first);
                (mean, (!constant && sd > 0.0).then_some(sd))
            })
            .unzip();
        Standardiser { means, sds }
    }

    /// The standardised copy of `x` (rows of any fold, training statistics).
    pub(crate) fn apply(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        DMatrix::from_fn(x.nrows(), x.ncols(), |i, j| match self.sds[j] {
            Some(sd) => (x[(i, j)] - self.means[j]) / sd,
            None => 0.0,
        })
    }

    /// Coefficients in the raw units of the features, `"intercept"` first,
    /// from coefficients on the standardised scale: slope_j = β_j / sd_j and
    /// intercept = ȳ − Σ_j slope_j · mean_j (summed in feature order).
    pub(crate) fn raw_coefficients(
        &self,
        names: &[String],
        y_mean: f64,
        beta: &[f64],
    ) -> Vec<(String, f64)> {
        let slopes: Vec<f64> = beta
            .iter()
            .zip(&self.sds)
            .map(|(b, sd)| match sd {
                Some(sd) => b / sd,
                None => 0.0,
            })
            .collect();
        let shift: f64 = slopes.iter().zip(&self.means).map(|(s, m)| s * m).sum();
        std::iter::once(("intercept".to_string(), y_mean - shift))
            .chain(names.iter().cloned().zip(slopes))
            .collect()
    }
}

/// ȳ + Zβ for every row of the standardised `z`, each row summed in feature order.
pub(crate) fn predict(z: &DMatrix<f64>, y_mean: f64, beta: &[f64]) -> Vec<f64> {
    (0..z.nrows())
        .map(|i| {
            let linear: f64 = beta.iter().enumerate().map(|(j, b)| z[(i, j)] * b).sum();
            y_mean + linear
        })
        .collect()
}

/// The training mean of the target and the centred target, in row order.
pub(crate) fn centre(y: &[f64]) -> (f64, Vec<f64>) {
    let mean = y.iter().sum::<f64>() / y.len() as f64;
    (mean, y.iter().map(|v| v - mean).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constant_column_becomes_zeros_and_gets_no_slope() {
        // Definition above: a constant training column standardises to 0.
        let x = DMatrix::from_row_slice(3, 2, &[1.0, 0.1, 2.0, 0.1, 6.0, 0.1]);
        let s = Standardiser::fit(&x);
        let z = s.apply(&x);
        assert!(z.column(1).iter().all(|&v| v == 0.0));
        // Column 0: mean 3, population sd sqrt(14/3) (hand computation).
        let sd = (14.0_f64 / 3.0).sqrt();
        assert!((z[(2, 0)] - 3.0 / sd).abs() < 1e-15);
        let raw = s.raw_coefficients(&["a".into(), "b".into()], 10.0, &[sd, 5.0]);
        assert_eq!(raw[0].0, "intercept");
        assert!((raw[0].1 - 7.0).abs() < 1e-14, "{raw:?}");
        assert!((raw[1].1 - 1.0).abs() < 1e-15);
        assert_eq!(raw[2], ("b".to_string(), 0.0));
    }
}
