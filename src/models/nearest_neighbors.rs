//! `nearest-neighbors`: the average target of the k training rows nearest in
//! Euclidean distance, for a whole grid of k from one neighbour search.
//!
//! Features are standardised with the training fold's mean and population
//! standard deviation. For each query the neighbours up to the largest k are
//! found once and sorted by (distance, training row); prefix sums of their
//! targets then give every k at once. Ties in distance go to the earlier
//! training row, so results never depend on a search order.

use nalgebra::DMatrix;

use super::{mean_and_sd, require_spread, Family, Setting, SettingFit};
use crate::error::FitError;

/// k-nearest-neighbour averages for the listed k.
#[derive(Debug, Clone)]
pub struct NearestNeighbors {
    pub features: Vec<String>,
    pub ks: Vec<usize>,
}

/// Training points in standardised coordinates, row-major for fast scans.
struct Standardised {
    points: Vec<f64>,
    dims: usize,
    means: Vec<f64>,
    sds: Vec<f64>,
}

impl Standardised {
    fn fit(x: &DMatrix<f64>) -> Self {
        let (means, sds): (Vec<f64>, Vec<f64>) = x
            .column_iter()
            .map(|c| mean_and_sd(c.iter().copied()))
            .unzip();
        let mut s = Standardised {
            points: Vec::new(),
            dims: x.ncols(),
            means,
            sds,
        };
        s.points = s.transform(x);
        s
    }

    fn transform(&self, x: &DMatrix<f64>) -> Vec<f64> {
        let mut out = Vec::with_capacity(x.nrows() * self.dims);
        for i in 0..x.nrows() {
            for j in 0..self.dims {
                out.push((x[(i, j)] - self.means[j]) / self.sds[j]);
            }
        }
        out
    }

    /// Prefix sums of the targets of the `k_max` nearest training rows of `query`.
    fn neighbour_prefix_sums(
        &self,
        query: &[f64],
        y: &[f64],
        k_max: usize,
        scratch: &mut Vec<(f64, usize)>,
    ) -> Vec<f64> {
        scratch.clear();
        scratch.extend(
            self.points
                .chunks_exact(self.dims)
                .enumerate()
                .map(|(row, p)| {
                    let d2: f64 = p.iter().zip(query).map(|(a, b)| (a - b) * (a - b)).sum();
                    (d2, row)
                }),
        );
        let by_distance_then_row =
            |a: &(f64, usize), b: &(f64, usize)| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1));
        if k_max < scratch.len() {
            scratch.select_nth_unstable_by(k_max - 1, by_distance_then_row);
            scratch.truncate(k_max);
        }
        scratch.sort_unstable_by(by_distance_then_row);
        let mut sums = Vec::with_capacity(k_max + 1);
        sums.push(0.0);
        let mut total = 0.0;
        for &(_, row) in scratch.iter() {
            total += y[row];
            sums.push(total);
        }
        sums
    }
}

impl Family for NearestNeighbors {
    fn family(&self) -> &'static str {
        "nearest-neighbors"
    }

    fn features(&self) -> &[String] {
        &self.features
    }

    fn settings(&self) -> Vec<Setting> {
        self.ks.iter().map(|&k| Setting::count("k", k)).collect()
    }

    fn fit_path(
        &self,
        x_train: &DMatrix<f64>,
        y_train: &[f64],
        x_eval: &DMatrix<f64>,
        _with_coefficients: bool,
    ) -> Result<Vec<SettingFit>, FitError> {
        let n = x_train.nrows();
        let k_max = self.ks.iter().copied().max().unwrap_or(1);
        if n < k_max {
            return Err(FitError::TooFewRows {
                setting: format!("k={k_max}"),
                needed: k_max,
                available: n,
            });
        }
        require_spread(
            &self.features,
            x_train,
            "it cannot be standardised for distances",
        )?;
        let space = Standardised::fit(x_train);
        let mut scratch = Vec::with_capacity(n);
        let mut predict_all = |queries: &[f64]| -> Vec<Vec<f64>> {
            queries
                .chunks_exact(space.dims)
                .map(|q| space.neighbour_prefix_sums(q, y_train, k_max, &mut scratch))
                .collect()
        };
        let train_sums = predict_all(&space.points);
        let eval_sums = predict_all(&space.transform(x_eval));
        Ok(self
            .ks
            .iter()
            .map(|&k| SettingFit {
                train_pred: train_sums.iter().map(|s| s[k] / k as f64).collect(),
                eval_pred: eval_sums.iter().map(|s| s[k] / k as f64).collect(),
                effective_df: n as f64 / k as f64,
                coefficients: None,
            })
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn data() -> (DMatrix<f64>, Vec<f64>) {
        let x = DMatrix::from_fn(10, 2, |i, j| {
            ((i * 37 + j * 11) % 17) as f64 + 0.1 * i as f64
        });
        let y: Vec<f64> = (0..10).map(|i| (i as f64).sin() * 3.0).collect();
        (x, y)
    }

    #[test]
    fn one_neighbour_training_error_is_zero() {
        // Common practice: with distinct inputs each row is its own nearest neighbour.
        let (x, y) = data();
        let knn = NearestNeighbors {
            features: vec!["a".into(), "b".into()],
            ks: vec![1],
        };
        let fit = &knn.fit_path(&x, &y, &x, false).unwrap()[0];
        assert_eq!(fit.train_pred, y);
    }

    #[test]
    fn all_neighbours_predict_the_training_mean() {
        // Common practice: k = n averages every training row.
        let (x, y) = data();
        let knn = NearestNeighbors {
            features: vec!["a".into(), "b".into()],
            ks: vec![10],
        };
        let fit = &knn.fit_path(&x, &y, &x, false).unwrap()[0];
        let mean = y.iter().sum::<f64>() / 10.0;
        for p in &fit.eval_pred {
            assert!((p - mean).abs() < 1e-12);
        }
        assert_eq!(fit.effective_df, 1.0);
    }

    #[test]
    fn grid_equals_separate_fits() {
        let (x, y) = data();
        let together = NearestNeighbors {
            features: vec!["a".into(), "b".into()],
            ks: vec![1, 3, 7],
        }
        .fit_path(&x, &y, &x, false)
        .unwrap();
        for (i, k) in [1, 3, 7].into_iter().enumerate() {
            let alone = NearestNeighbors {
                features: vec!["a".into(), "b".into()],
                ks: vec![k],
            }
            .fit_path(&x, &y, &x, false)
            .unwrap();
            assert_eq!(together[i], alone[0]);
        }
    }
}
