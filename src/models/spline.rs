//! `spline`: additive natural cubic regression splines, one least-squares fit
//! per df.
//!
//! Each feature gets a natural cubic spline with `df + 1` knots: the training
//! fold's minimum and maximum (the boundary knots) and `df − 1` interior knots
//! at the quantile levels k/df, k = 1..df−1, of the training values (rule
//! below). A natural cubic spline is cubic between knots, twice continuously
//! differentiable, and linear beyond the boundary knots (second derivative 0
//! there); with K knots its space has dimension K (Green & Silverman,
//! *Nonparametric Regression and Generalized Linear Models*, 1994, §2.1–2.3).
//!
//! The basis is the cardinal one: N_j is the natural cubic spline with
//! N_j(t_k) = δ_jk at the knots. It is stored by its second derivatives at the
//! knots, which solve a strictly diagonally dominant tridiagonal system
//! (Green & Silverman 1994, §2.5, the value–second-derivative
//! representation), and evaluated piecewise. Cardinal splines are bounded and
//! decay away from their own knot, so the design stays well conditioned for any
//! knot spacing, unlike a truncated-power basis. The N_j sum to 1, so with the
//! intercept each feature contributes N_1..N_{K−1} (N_0 is dropped): `df`
//! columns per feature, 1 + p·df columns in all, all fitted by one Householder
//! QR per df (different df give different knots, so nothing is nested).
//!
//! Quantile rule (linear interpolation between order statistics, "type 7" of
//! Hyndman & Fan, 1996, *Sample quantiles in statistical packages*): with the
//! n training values sorted as x₍₀₎ ≤ … ≤ x₍ₙ₋₁₎, level k/df has position
//! h = (n − 1)·k/df, computed exactly in integers as ⌊h⌋ = ((n−1)k) div df with
//! fraction ((n−1)k mod df)/df, and value x₍⌊h⌋₎ + frac·(x₍⌊h⌋+1₎ − x₍⌊h⌋₎).
//! Knots must come out strictly increasing; ties fail with a message to lower
//! df.

use nalgebra::DMatrix;

use super::least_squares::{cumulative_leverages, predict_leading, NestedLeastSquares};
use super::registry::{check_whole_grid, FamilyDef, KeyDef, KeyKind, SettingProblem, Settings};
use super::{
    leave_one_out_rows, loo_from_leverage, require_spread, Family, FitRequest, LeaveOneOut,
    Setting, SettingFit, TrainingShape,
};
use crate::error::FitError;

/// Additive natural cubic regression splines of the listed df per feature.
#[derive(Debug, Clone)]
pub(crate) struct Spline {
    pub(crate) features: Vec<String>,
    pub(crate) dfs: Vec<usize>,
}

/// The registry entry of `spline` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new(
    "spline",
    &[KeyDef::new(
        "df",
        KeyKind::Reals,
        "Basis columns per feature to compare (whole numbers, 1 to 50).",
    )],
    build,
)
.about("Natural cubic regression splines, an additive basis per feature.")
.grid("df = [1, 2, 3, 4, 6, 8, 12]")
.expanding_features();

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    let given = settings.real_grid("df", f64::NEG_INFINITY)?;
    let whole: Option<Vec<usize>> = given
        .iter()
        .map(|&d| (d.fract() == 0.0 && d >= 1.0).then_some(d as usize))
        .collect();
    let dfs = whole.ok_or_else(|| {
        SettingProblem::new(
            "df",
            "spline df must be whole numbers ≥ 1 (basis columns per feature)".to_string(),
        )
    })?;
    check_whole_grid(&dfs, 1, 50, "df")?;
    Ok(Box::new(Spline { features, dfs }))
}

/// Knots of one feature and the second derivatives of its cardinal basis.
#[derive(Debug, Clone)]
pub(crate) struct NaturalBasis {
    knots: Vec<f64>,
    /// `second[k][j]` = N_j''(t_k); rows 0 and K−1 are zero (natural ends).
    second: Vec<Vec<f64>>,
}

impl NaturalBasis {
    /// The cardinal natural cubic spline basis on strictly increasing `knots`
    /// (at least two).
    pub(crate) fn new(knots: Vec<f64>) -> Self {
        let count = knots.len();
        debug_assert!(count >= 2, "caller places at least the two boundary knots");
        let widths: Vec<f64> = knots.windows(2).map(|w| w[1] - w[0]).collect();
        let mut second = vec![vec![0.0; count]; count];
        let interior = count - 2;
        if interior > 0 {
            // Equations k = 1..K−2 (Green & Silverman 1994, eq. 2.4 scaled by 6):
            // h_{k−1} M_{k−1} + 2(h_{k−1} + h_k) M_k + h_k M_{k+1}
            //   = 6[(g_{k+1} − g_k)/h_k − (g_k − g_{k−1})/h_{k−1}],  M_0 = M_{K−1} = 0.
            // Thomas algorithm; the matrix is strictly diagonally dominant.
            let diagonal: Vec<f64> = (1..=interior)
                .map(|k| 2.0 * (widths[k - 1] + widths[k]))
                .collect();
            let mut modified = diagonal.clone();
            let mut factors = vec![0.0; interior];
            for i in 1..interior {
                // Sub-diagonal entry of row i is h_i (= widths[i]); super of row i−1 is h_i too.
                factors[i] = widths[i] / modified[i - 1];
                modified[i] = diagonal[i] - factors[i] * widths[i];
            }
            let columns = (0..count).map(|j| {
                let value = |k: usize| if k == j { 1.0 } else { 0.0 };
                let mut rhs: Vec<f64> = (1..=interior)
                    .map(|k| {
                        6.0 * ((value(k + 1) - value(k)) / widths[k]
                            - (value(k) - value(k - 1)) / widths[k - 1])
                    })
                    .collect();
                for i in 1..interior {
                    rhs[i] -= factors[i] * rhs[i - 1];
                }
                let mut m = vec![0.0; interior];
                for i in (0..interior).rev() {
                    let above = if i + 1 < interior {
                        widths[i + 1] * m[i + 1]
                    } else {
                        0.0
                    };
                    m[i] = (rhs[i] - above) / modified[i];
                }
                m
            });
            for (j, m) in columns.enumerate() {
                for (i, mi) in m.into_iter().enumerate() {
                    second[i + 1][j] = mi;
                }
            }
        }
        NaturalBasis { knots, second }
    }

    #[cfg(test)]
    pub(crate) fn knots(&self) -> &[f64] {
        &self.knots
    }

    /// N_0(x), …, N_{K−1}(x) into `out`; linear continuation beyond the ends.
    pub(crate) fn values(&self, x: f64, out: &mut [f64]) {
        let count = self.knots.len();
        let first = self.knots[0];
        let last = self.knots[count - 1];
        out.iter_mut().for_each(|v| *v = 0.0);
        if x < first {
            // N_j(t_0) + N_j'(t_0)(x − t_0), N_j'(t_0) = (g_1 − g_0)/h_0 − h_0 M_1/6.
            let h = self.knots[1] - first;
            for (j, o) in out.iter_mut().enumerate() {
                let g0 = if j == 0 { 1.0 } else { 0.0 };
                let g1 = if j == 1 { 1.0 } else { 0.0 };
                let slope = (g1 - g0) / h - h * self.second[1][j] / 6.0;
                *o = g0 + slope * (x - first);
            }
            return;
        }
        if x > last {
            // N_j'(t_{K−1}) = (g_{K−1} − g_{K−2})/h + h M_{K−2}/6.
            let h = last - self.knots[count - 2];
            for (j, o) in out.iter_mut().enumerate() {
                let g0 = if j == count - 2 { 1.0 } else { 0.0 };
                let g1 = if j == count - 1 { 1.0 } else { 0.0 };
                let slope = (g1 - g0) / h + h * self.second[count - 2][j] / 6.0;
                *o = g1 + slope * (x - last);
            }
            return;
        }
        // Interval k with t_k ≤ x ≤ t_{k+1} (the last interval is closed).
        let k = self.knots[1..count - 1]
            .partition_point(|&t| t <= x)
            .min(count - 2);
        let h = self.knots[k + 1] - self.knots[k];
        let a = (self.knots[k + 1] - x) / h;
        let b = (x - self.knots[k]) / h;
        let ca = (a * a * a - a) * h * h / 6.0;
        let cb = (b * b * b - b) * h * h / 6.0;
        for (j, o) in out.iter_mut().enumerate() {
            let mut value = ca * self.second[k][j] + cb * self.second[k + 1][j];
            if j == k {
                value += a;
            }
            if j == k + 1 {
                value += b;
            }
            *o = value;
        }
    }
}

/// Knots for `df`: the quantiles at levels k/df, k = 0..=df, of the sorted
/// values (type 7, exact integer positions; see the module docs).
pub(crate) fn quantile_knots(sorted: &[f64], df: usize) -> Vec<f64> {
    let n = sorted.len();
    (0..=df)
        .map(|k| {
            let scaled = (n - 1) * k;
            let below = scaled / df;
            let fraction = (scaled % df) as f64 / df as f64;
            if fraction == 0.0 {
                sorted[below]
            } else {
                sorted[below] + fraction * (sorted[below + 1] - sorted[below])
            }
        })
        .collect()
}

impl Spline {
    fn columns_for(&self, df: usize) -> usize {
        1 + self.features.len() * df
    }

    /// The bases of every feature for `df`, from the training values.
    fn bases(&self, x_train: &DMatrix<f64>, df: usize) -> Result<Vec<NaturalBasis>, FitError> {
        self.features
            .iter()
            .enumerate()
            .map(|(f, name)| {
                let mut sorted: Vec<f64> = x_train.column(f).iter().copied().collect();
                sorted.sort_by(f64::total_cmp);
                let knots = quantile_knots(&sorted, df);
                if let Some(k) = knots.windows(2).position(|w| w[1] <= w[0]) {
                    return Err(FitError::CoincidentKnots {
                        setting: format!("df={df}"),
                        feature: name.clone(),
                        knot: k + 1,
                        value: knots[k],
                    });
                }
                Ok(NaturalBasis::new(knots))
            })
            .collect()
    }

    /// Design columns: 1, then N_1..N_{K−1} of each feature in turn.
    fn design(&self, x: &DMatrix<f64>, bases: &[NaturalBasis]) -> DMatrix<f64> {
        let df = bases.first().map_or(0, |b| b.knots.len() - 1);
        let mut design = DMatrix::zeros(x.nrows(), 1 + bases.len() * df);
        let mut values = vec![0.0; df + 1];
        for i in 0..x.nrows() {
            design[(i, 0)] = 1.0;
            for (f, basis) in bases.iter().enumerate() {
                basis.values(x[(i, f)], &mut values);
                for (j, value) in values[1..].iter().enumerate() {
                    design[(i, 1 + f * df + j)] = *value;
                }
            }
        }
        design
    }

    /// Fits one df with the given bases; also returns the training design.
    fn fit_with_bases(
        &self,
        bases: &[NaturalBasis],
        df: usize,
        x_train: &DMatrix<f64>,
        y_train: &[f64],
        x_eval: &DMatrix<f64>,
        final_fit: bool,
    ) -> Result<(SettingFit, DMatrix<f64>), FitError> {
        let columns = self.columns_for(df);
        if x_train.nrows() < columns {
            return Err(FitError::TooFewRows {
                setting: format!("df={df}"),
                needed: columns,
                available: x_train.nrows(),
            });
        }
        let design = self.design(x_train, bases);
        let solver = NestedLeastSquares::new(design.clone(), y_train);
        let beta = solver.solve_leading(columns).map_err(|column| {
            let feature = column.saturating_sub(1) / df;
            FitError::SplineRankDeficient {
                setting: format!("df={df}"),
                feature: self.features[feature.min(self.features.len() - 1)].clone(),
                column: column + 1,
            }
        })?;
        let fit = SettingFit {
            train_pred: if final_fit {
                predict_leading(&design, &beta)
            } else {
                Vec::new()
            },
            eval_pred: predict_leading(&self.design(x_eval, bases), &beta),
            effective_df: columns as f64,
            coefficients: None,
        };
        Ok((fit, design))
    }
}

impl Family for Spline {
    fn settings(&self) -> Vec<Setting> {
        self.dfs.iter().map(|&d| Setting::count("df", d)).collect()
    }

    fn infeasible(&self, setting: usize, shape: &TrainingShape<'_>) -> Option<String> {
        let df = self.dfs[setting];
        let columns = self.columns_for(df);
        if columns > shape.rows() {
            return Some(format!(
                "df={df} needs at least {columns} training rows, the fit has {}",
                shape.rows()
            ));
        }
        // An intercept and df basis columns of a feature take df + 1
        // distinct values to be independent (ties among the knots can fail
        // earlier; the fit itself says so).
        self.features.iter().enumerate().find_map(|(j, feature)| {
            let distinct = shape.distinct(j);
            (df >= distinct).then(|| {
                format!(
                    "df={df} needs at least {} distinct values of feature \"{feature}\", the \
                     training rows have {distinct}",
                    df + 1
                )
            })
        })
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        require_spread(
            &self.features,
            x_train,
            "no spline knots can be placed in it",
        )?;
        self.dfs
            .iter()
            .map(|&df| {
                let bases = self.bases(x_train, df)?;
                self.fit_with_bases(&bases, df, x_train, y_train, x_eval, final_fit)
                    .map(|(fit, _)| fit)
            })
            .collect()
    }

    /// Leave-one-out by the hat diagonal, with the knots placed once on all
    /// the rows given (the fixed-design leave-one-out): each left-out row's
    /// feature value, never its target, takes part in placing the knots.
    /// Re-placing the knots on every n − 1 rows would move them and break the
    /// hat-diagonal identity.
    fn leave_one_out(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        Some(self.loo_by_leverage(x_train, y_train))
    }
}

impl Spline {
    fn loo_by_leverage(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> LeaveOneOut {
        require_spread(
            &self.features,
            x_train,
            "no spline knots can be placed in it",
        )?;
        let empty = x_train.rows(0, 0).into_owned();
        self.dfs
            .iter()
            .map(|&df| {
                let bases = self.bases(x_train, df)?;
                let (fit, design) =
                    self.fit_with_bases(&bases, df, x_train, y_train, &empty, true)?;
                let leverages = cumulative_leverages(&design);
                let last = design.ncols() - 1;
                leave_one_out_rows(&format!("df={df}"), y_train.len(), |i| {
                    loo_from_leverage(y_train[i], fit.train_pred[i], leverages[(i, last)])
                })
            })
            .collect()
    }
}

#[cfg(test)]
mod tests;
