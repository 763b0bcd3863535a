//! `linear`: ordinary least squares on the features as given.
//!
//! Columns are centred (with an intercept) and scaled to unit spread before
//! one Householder QR; coefficients are mapped back to the raw units of the
//! features. Centring and scaling keep collinear data such as Longley (1967)
//! well inside double precision; the normal equations are never formed.

use nalgebra::DMatrix;

use super::double_double::DoubleDouble;
use super::least_squares::{
    cumulative_leverages, predict_leading, NestedLeastSquares, RawRefinement, RawSums,
};
use super::registry::{CategoricalUse, FamilyDef, SettingProblem, Settings, INTERCEPT};
use super::{
    leave_one_out_rows, loo_from_leverage, mean_and_sd, require_spread, Family, FitRequest,
    LeaveOneOut, Setting, SettingFit,
};
use crate::error::FitError;

/// Least squares on the features, with or without an intercept.
#[derive(Debug, Clone)]
pub(crate) struct Linear {
    pub(crate) features: Vec<String>,
    pub(crate) intercept: bool,
}

/// The registry entry of `linear` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new("linear", &[INTERCEPT], build)
    .about("Ordinary least squares on the features as given.")
    .grid("")
    .takes_categorical(CategoricalUse::Indicators);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    Ok(Box::new(Linear {
        features,
        intercept: settings.flag("intercept"),
    }))
}

/// The affine map of one feature onto a well-scaled column.
#[derive(Debug, Clone, Copy)]
struct ColumnScale {
    shift: f64,
    scale: f64,
}

impl Linear {
    fn scales(&self, x_train: &DMatrix<f64>) -> Vec<ColumnScale> {
        x_train
            .column_iter()
            .map(|column| {
                if self.intercept {
                    let (mean, sd) = mean_and_sd(column.iter().copied());
                    ColumnScale {
                        shift: mean,
                        scale: sd,
                    }
                } else {
                    // No intercept: the model must stay a line through the
                    // origin, so scale without shifting (by the root mean square).
                    let n = column.len() as f64;
                    let rms = (column.iter().map(|v| v * v).sum::<f64>() / n).sqrt();
                    ColumnScale {
                        shift: 0.0,
                        scale: if rms > 0.0 { rms } else { 1.0 },
                    }
                }
            })
            .collect()
    }

    /// Raw-unit coefficients (intercept first) from coefficients on the
    /// scaled columns; linear in `gamma`.
    fn raw_coefficients(&self, gamma: &[f64], scales: &[ColumnScale]) -> Vec<f64> {
        let offset = usize::from(self.intercept);
        let slopes: Vec<f64> = scales
            .iter()
            .enumerate()
            .map(|(j, s)| gamma[j + offset] / s.scale)
            .collect();
        let mut raw = Vec::with_capacity(slopes.len() + offset);
        if self.intercept {
            let shifted: f64 = slopes.iter().zip(scales).map(|(b, s)| b * s.shift).sum();
            raw.push(gamma[0] - shifted);
        }
        raw.extend(slopes);
        raw
    }

    fn coefficient_names(&self) -> Vec<String> {
        let intercept = self.intercept.then(|| "intercept".to_string());
        intercept
            .into_iter()
            .chain(self.features.iter().cloned())
            .collect()
    }

    fn design(&self, x: &DMatrix<f64>, scales: &[ColumnScale]) -> DMatrix<f64> {
        let offset = usize::from(self.intercept);
        DMatrix::from_fn(x.nrows(), x.ncols() + offset, |i, j| {
            if j < offset {
                1.0
            } else {
                let s = scales[j - offset];
                (x[(i, j - offset)] - s.shift) / s.scale
            }
        })
    }
}

impl Family for Linear {
    fn leave_one_out(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        // Fitted values are the predictions at the training rows themselves.
        let fit = self.fit_path(x_train, y_train, x_train, false);
        Some(fit.and_then(|fits| {
            let design = self.design(x_train, &self.scales(x_train));
            let leverages = cumulative_leverages(&design);
            let last = design.ncols() - 1;
            let loo = leave_one_out_rows("linear", y_train.len(), |i| {
                loo_from_leverage(y_train[i], fits[0].eval_pred[i], leverages[(i, last)])
            })?;
            Ok(vec![loo])
        }))
    }

    fn needs_spread(&self) -> bool {
        // A line through the origin neither centres nor scales by spread.
        self.intercept
    }

    fn settings(&self) -> Vec<Setting> {
        vec![Setting::none()]
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        let columns = self.features.len() + usize::from(self.intercept);
        if x_train.nrows() < columns {
            return Err(FitError::TooFewRows {
                setting: "linear".into(),
                needed: columns,
                available: x_train.nrows(),
            });
        }
        if self.intercept {
            require_spread(
                &self.features,
                x_train,
                "a linear fit cannot tell it from the intercept",
            )?;
        }
        let scales = self.scales(x_train);
        let design = self.design(x_train, &scales);
        let solver = NestedLeastSquares::new(design.clone(), y_train);
        let gamma = solver
            .solve_leading(columns)
            .map_err(|column| FitError::RankDeficient {
                setting: "linear".into(),
                column: column + 1,
            })?;
        let train_pred = if final_fit {
            predict_leading(&design, &gamma)
        } else {
            Vec::new()
        };
        let eval_pred = predict_leading(&self.design(x_eval, &scales), &gamma);

        let coefficients = final_fit.then(|| {
            let to_raw = |g: &[f64]| self.raw_coefficients(g, &scales);
            // Row i of the raw design: the intercept, then the features.
            let raw_row = |i: usize, row: &mut [DoubleDouble]| {
                let offset = usize::from(self.intercept);
                if self.intercept {
                    row[0] = DoubleDouble::from_f64(1.0);
                }
                for j in 0..x_train.ncols() {
                    row[offset + j] = DoubleDouble::from_f64(x_train[(i, j)]);
                }
            };
            let values = solver.refined_raw(
                columns,
                gamma.as_slice(),
                &RawRefinement {
                    to_raw: &to_raw,
                    sums: RawSums::Rows {
                        raw_row: &raw_row,
                        rows: x_train.nrows(),
                        y: y_train,
                    },
                },
            );
            self.coefficient_names().into_iter().zip(values).collect()
        });
        Ok(vec![SettingFit {
            train_pred,
            eval_pred,
            effective_df: columns as f64,
            coefficients,
        }])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::test_support::shortcut_beside_refits;

    #[test]
    fn recovers_an_exact_plane() {
        // An exact plane is reproduced to rounding (property of least squares).
        let x = DMatrix::from_fn(8, 2, |i, j| ((i * 7 + j * 3) % 11) as f64 + j as f64 * 0.5);
        let y: Vec<f64> = (0..8)
            .map(|i| 1.5 + 2.0 * x[(i, 0)] - 0.25 * x[(i, 1)])
            .collect();
        let linear = Linear {
            features: vec!["a".into(), "b".into()],
            intercept: true,
        };
        let fit = &linear.fit_path(&x, &y, &x, true).unwrap()[0];
        let coefficients = fit.coefficients.as_ref().unwrap();
        let expected = [1.5, 2.0, -0.25];
        for ((_, got), want) in coefficients.iter().zip(expected) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        assert_eq!(fit.effective_df, 3.0);
    }

    #[test]
    fn hat_diagonal_shortcut_equals_refits() {
        // Identity (common practice for least squares): the leave-one-out
        // shortcut equals refitting without each row, to 1e-9 relative.
        let n = 12;
        let x = DMatrix::from_fn(n, 2, |i, j| ((i * (3 + j)) % 7) as f64 + 0.3 * i as f64);
        let y: Vec<f64> = (0..n)
            .map(|i| (i as f64).sqrt() + x[(i, 1)] * 0.2)
            .collect();
        let linear = Linear {
            features: vec!["a".into(), "b".into()],
            intercept: true,
        };
        for pair in shortcut_beside_refits(&linear, &x, &y) {
            let (a, b) = (pair.shortcut, pair.refit);
            assert!((a - b).abs() <= 1e-9 * b.abs().max(1.0), "{pair}");
        }
    }

    #[test]
    fn constant_feature_is_named() {
        let x = DMatrix::from_fn(5, 2, |i, j| if j == 1 { 4.0 } else { i as f64 });
        let y = [1.0, 2.0, 3.0, 4.0, 6.0];
        let linear = Linear {
            features: vec!["a".into(), "wind".into()],
            intercept: true,
        };
        let err = linear.fit_path(&x, &y, &x, true).unwrap_err();
        assert!(matches!(err, FitError::ConstantFeature { ref feature, .. } if feature == "wind"));
    }
}
