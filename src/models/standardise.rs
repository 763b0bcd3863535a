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
        DMatrix::from_fn(x.nrows(), x.ncols(), |i, j| self.value(j, x[(i, j)]))
    }

    /// Feature `j`'s value `v` on the standardised scale (0 for a constant
    /// feature); [`Self::apply`] is this, entry by entry.
    pub(crate) fn value(&self, j: usize, v: f64) -> f64 {
        match self.sds[j] {
            Some(sd) => (v - self.means[j]) / sd,
            None => 0.0,
        }
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

/// The cross-products of the standardised training rows, formed in one pass
/// over `x_train` without storing the standardised copy: G = ZᵀZ (p × p)
/// and c = Zᵀ(y − ȳ), each entry summed in row order. Standardising first
/// keeps columns of very different scales from losing each other's digits.
pub(crate) fn cross_products(
    standardiser: &Standardiser,
    x_train: &DMatrix<f64>,
    y_centred: &[f64],
) -> (DMatrix<f64>, Vec<f64>) {
    let (n, p) = x_train.shape();
    // Upper triangle, row-major: entry (j, k), k ≥ j, at j·p + k. Each row
    // adds to every entry once, so every sum runs in row order.
    let mut upper = vec![0.0; p * p];
    let mut c = vec![0.0; p];
    let mut z = vec![0.0; p];
    for i in 0..n {
        for (j, zj) in z.iter_mut().enumerate() {
            *zj = standardiser.value(j, x_train[(i, j)]);
        }
        for j in 0..p {
            let zj = z[j];
            for (g, zk) in upper[j * p + j..(j + 1) * p].iter_mut().zip(&z[j..]) {
                *g += zj * zk;
            }
            c[j] += zj * y_centred[i];
        }
    }
    let gram = DMatrix::from_fn(p, p, |j, k| upper[j.min(k) * p + j.max(k)]);
    (gram, c)
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

    #[test]
    fn cross_products_equal_the_sums_of_the_standardised_copy() {
        // Definition: G = ZᵀZ and c = Zᵀy with Z = apply(x), summed in row
        // order, so the one-pass form equals the plain sums to the bit.
        let x = DMatrix::from_fn(7, 3, |i, j| {
            ((i * 5 + j * 3) % 7) as f64 * 10f64.powi(j as i32 * 3)
        });
        let y: Vec<f64> = (0..7).map(|i| (i as f64).cos()).collect();
        let s = Standardiser::fit(&x);
        let z = s.apply(&x);
        let (gram, c) = cross_products(&s, &x, &y);
        for j in 0..3 {
            for k in 0..3 {
                let direct = (0..7).fold(0.0, |sum, i| sum + z[(i, j)] * z[(i, k)]);
                assert_eq!(gram[(j, k)], direct, "({j}, {k})");
            }
            let direct = (0..7).fold(0.0, |sum, i| sum + z[(i, j)] * y[i]);
            assert_eq!(c[j], direct);
        }
    }
}
