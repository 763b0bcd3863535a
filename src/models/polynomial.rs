//! `polynomial`: least squares on powers of the features, for a whole grid of
//! degrees from one QR factorisation.
//!
//! With one feature the degree-d model uses powers 1..d. With several, each
//! feature contributes its own powers 1..d and there are no interaction terms
//! (an additive polynomial). With an intercept, each feature is mapped onto
//! [-1, 1] over the training rows and expanded in Chebyshev polynomials
//! T₁…T_d (Trefethen, *Approximation Theory and Approximation Practice*, 2013,
//! ch. 3), whose columns are close to orthogonal; raw powers of x are not
//! (Filip's raw design has condition number ≈ 1.8·10¹⁵). Columns are ordered
//! by power, so every lower degree is a leading block of the highest one and
//! one QR serves the whole grid. Coefficients are converted back to the raw
//! power basis only for reporting; predictions use the Chebyshev form.
//!
//! Bound to encoded categorical features (`plan::encode`), the trailing
//! `plain` columns (0/1 indicators and interaction columns) enter once, as
//! they are, never raised to powers (powers of a 0/1 column repeat it). They
//! sit right after the intercept, before the power blocks, so every degree
//! is still a leading block of the design (docs/spec.md, "Categorical
//! features").

use nalgebra::DMatrix;

use super::double_double::DoubleDouble;
use super::least_squares::{
    cumulative_leverages, moments_pay, predict_leading, NestedLeastSquares, RawMoments,
    RawRefinement, RawSums,
};
use super::registry::{
    CategoricalUse, FamilyDef, KeyDef, KeyKind, SettingProblem, Settings, INTERCEPT,
};
use super::{
    leave_one_out_rows, loo_from_leverage, require_spread, Family, FitRequest, LeaveOneOut,
    Setting, SettingFit, TrainingShape,
};
use crate::error::FitError;

/// Least-squares polynomials of the listed degrees.
#[derive(Debug, Clone)]
pub(crate) struct Polynomial {
    pub(crate) features: Vec<String>,
    pub(crate) intercept: bool,
    pub(crate) degrees: Vec<usize>,
    /// How many trailing `features` enter once, as they are (indicators and
    /// interaction columns; `registry::FamilyDef::build_plain`).
    pub(crate) plain: usize,
}

/// The registry entry of `polynomial` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new(
    "polynomial",
    &[
        INTERCEPT,
        KeyDef::new(
            "degree",
            KeyKind::Counts,
            "The degrees to compare (1 to 30).",
        ),
    ],
    build,
)
.about(
    "Polynomials of one or more features, one Householder QR per fold for the whole degree grid.",
)
.grid("degree = [1, 2, 3, 4, 5, 6, 8, 10]")
.expanding_features()
.takes_categorical(CategoricalUse::Indicators)
.plain_columns(build_plain);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    build_plain(settings, features, 0)
}

/// Binds the grid to `features`, whose last `plain` columns enter once.
fn build_plain(
    settings: &Settings,
    features: Vec<String>,
    plain: usize,
) -> Result<Box<dyn Family>, SettingProblem> {
    Ok(Box::new(Polynomial {
        features,
        intercept: settings.flag("intercept"),
        degrees: settings.whole_grid("degree", 1, 30)?,
        plain,
    }))
}

/// The map of one feature's training range onto [-1, 1]: t = (x − centre) / half_width.
#[derive(Debug, Clone, Copy)]
struct RangeMap {
    centre: f64,
    half_width: f64,
}

impl Polynomial {
    /// Features expanded into powers: all but the trailing plain ones.
    fn numeric(&self) -> usize {
        self.features.len() - self.plain
    }

    /// Columns before the power blocks: the intercept and the plain columns.
    fn leading(&self) -> usize {
        usize::from(self.intercept) + self.plain
    }

    fn columns_for(&self, degree: usize) -> usize {
        self.leading() + degree * self.numeric()
    }

    /// The range map of each numeric feature.
    fn range_maps(&self, x_train: &DMatrix<f64>) -> Vec<RangeMap> {
        x_train
            .columns(0, self.numeric())
            .column_iter()
            .map(|column| {
                let lo = column.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = column.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                if self.intercept {
                    RangeMap {
                        centre: 0.5 * (lo + hi),
                        half_width: 0.5 * (hi - lo),
                    }
                } else {
                    // Without an intercept the model must vanish at x = 0, so
                    // only scale (by the largest |x|), never shift.
                    let largest = lo.abs().max(hi.abs());
                    RangeMap {
                        centre: 0.0,
                        half_width: if largest > 0.0 { largest } else { 1.0 },
                    }
                }
            })
            .collect()
    }

    /// Design columns: \[1\], the plain columns as they are, then for power
    /// 1..=max_degree, one column per numeric feature.
    fn design(&self, x: &DMatrix<f64>, maps: &[RangeMap], max_degree: usize) -> DMatrix<f64> {
        let p = self.numeric();
        let lead = usize::from(self.intercept);
        let offset = self.leading();
        let mut design = DMatrix::zeros(x.nrows(), max_degree * p + offset);
        for i in 0..x.nrows() {
            if self.intercept {
                design[(i, 0)] = 1.0;
            }
            for k in 0..self.plain {
                design[(i, lead + k)] = x[(i, p + k)];
            }
            for (f, map) in maps.iter().enumerate() {
                let t = (x[(i, f)] - map.centre) / map.half_width;
                // Chebyshev recurrence T_{j+1} = 2t·T_j − T_{j−1}, or plain
                // powers of the scaled value without an intercept.
                let (mut previous, mut current) = (1.0, t);
                for power in 1..=max_degree {
                    design[(i, offset + (power - 1) * p + f)] = current;
                    let next = if self.intercept {
                        2.0 * t * current - previous
                    } else {
                        t * current
                    };
                    previous = current;
                    current = next;
                }
            }
        }
        design
    }

    /// Raw-unit coefficients (intercept, then each numeric feature's powers
    /// 1..d, then the plain columns) from basis coefficients; linear in
    /// `gamma`.
    fn raw_coefficients(&self, gamma: &[f64], maps: &[RangeMap], degree: usize) -> Vec<f64> {
        let p = self.numeric();
        let lead = usize::from(self.intercept);
        let offset = self.leading();
        let mut raw = vec![0.0; lead + degree * p + self.plain];
        if self.intercept {
            raw[0] = gamma[0];
        }
        for (f, map) in maps.iter().enumerate() {
            let basis: Vec<f64> = (1..=degree)
                .map(|power| gamma[offset + (power - 1) * p + f])
                .collect();
            let in_t = if self.intercept {
                chebyshev_to_monomial(&basis)
            } else {
                std::iter::once(0.0).chain(basis.iter().copied()).collect()
            };
            let in_x = unmap_monomial(&in_t, map.centre, map.half_width);
            if self.intercept {
                raw[0] += in_x[0];
            }
            raw[lead + f * degree..lead + (f + 1) * degree].copy_from_slice(&in_x[1..]);
        }
        // Plain columns are their own basis.
        raw[lead + degree * p..].copy_from_slice(&gamma[lead..offset]);
        raw
    }

    /// Names of the raw coefficients, in [`Self::raw_coefficients`] order.
    fn coefficient_names(&self, degree: usize) -> Vec<String> {
        let intercept = self.intercept.then(|| "intercept".to_string());
        let powers = self.features[..self.numeric()].iter().flat_map(|name| {
            (1..=degree).map(move |power| match power {
                1 => name.clone(),
                _ => format!("{name}^{power}"),
            })
        });
        let plain = self.features[self.numeric()..].iter().cloned();
        intercept.into_iter().chain(powers).chain(plain).collect()
    }

    /// Writes row `i` of the raw design of `degree` into `row`: the
    /// intercept, then each numeric feature's powers 1..=degree, formed by
    /// repeated double-double products, then the plain columns as they are.
    fn raw_row(&self, x_train: &DMatrix<f64>, degree: usize, i: usize, row: &mut [DoubleDouble]) {
        let p = self.numeric();
        let mut at = 0;
        if self.intercept {
            row[0] = DoubleDouble::from_f64(1.0);
            at = 1;
        }
        for f in 0..p {
            let x = DoubleDouble::from_f64(x_train[(i, f)]);
            let mut power = x;
            for _ in 0..degree {
                row[at] = power;
                at += 1;
                power = power.mul(x);
            }
        }
        for k in 0..self.plain {
            row[at + k] = DoubleDouble::from_f64(x_train[(i, p + k)]);
        }
    }

    /// The raw design's moments at the largest degree, when one set of them
    /// costs less than passes over the rows for every degree's refinement
    /// (`least_squares::moments_pay`).
    fn raw_moments(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<RawMoments> {
        let max_degree = self.degrees.iter().copied().max().unwrap_or(1);
        let largest = self.columns_for(max_degree);
        let widths = self.degrees.iter().map(|&d| self.columns_for(d));
        moments_pay(largest, widths).then(|| {
            let raw_row =
                |i: usize, row: &mut [DoubleDouble]| self.raw_row(x_train, max_degree, i, row);
            RawMoments::of(&raw_row, x_train.nrows(), y_train, largest)
        })
    }

    /// Raw coefficients of one degree's fit, refined in double-double.
    #[allow(clippy::too_many_arguments)]
    fn refined_coefficients(
        &self,
        solver: &NestedLeastSquares,
        gamma: &[f64],
        maps: &[RangeMap],
        degree: usize,
        x_train: &DMatrix<f64>,
        y_train: &[f64],
        moments: Option<&RawMoments>,
    ) -> Vec<(String, f64)> {
        let raw_row = |i: usize, row: &mut [DoubleDouble]| self.raw_row(x_train, degree, i, row);
        // Where each raw coefficient of this degree sits among the columns
        // of the largest degree's raw design (the moments' columns).
        let p = self.numeric();
        let max_degree = self.degrees.iter().copied().max().unwrap_or(1);
        let offset = usize::from(self.intercept);
        let positions: Vec<usize> = (0..offset)
            .chain(
                (0..p).flat_map(|f| (0..degree).map(move |power| offset + f * max_degree + power)),
            )
            .chain((0..self.plain).map(|k| offset + p * max_degree + k))
            .collect();
        let to_raw = |g: &[f64]| self.raw_coefficients(g, maps, degree);
        let width = usize::from(self.intercept) + degree * p + self.plain;
        let sums = match moments {
            Some(moments) => RawSums::Moments {
                moments,
                positions: &positions,
            },
            None => RawSums::Rows {
                raw_row: &raw_row,
                rows: x_train.nrows(),
                y: y_train,
            },
        };
        let values = solver.refined_raw(
            width,
            gamma,
            &RawRefinement {
                to_raw: &to_raw,
                sums,
            },
        );
        self.coefficient_names(degree)
            .into_iter()
            .zip(values)
            .collect()
    }
}

/// Monomial coefficients (powers 0..=d of t) of Σ_{j=1..d} a_j T_j(t).
fn chebyshev_to_monomial(a: &[f64]) -> Vec<f64> {
    let d = a.len();
    // Rows of the Chebyshev recurrence in the monomial basis; integers, exact
    // in double precision for the degrees allowed (≤ 30).
    let mut previous = vec![0.0; d + 1];
    previous[0] = 1.0; // T_0
    let mut current = vec![0.0; d + 1];
    if d >= 1 {
        current[1] = 1.0; // T_1
    }
    let mut out = vec![0.0; d + 1];
    for coefficient in a {
        // `current` holds T_{j+1}.
        for (o, c) in out.iter_mut().zip(&current) {
            *o += coefficient * c;
        }
        let mut next = vec![0.0; d + 1];
        for i in 0..=d {
            let shifted = if i > 0 { 2.0 * current[i - 1] } else { 0.0 };
            next[i] = shifted - previous[i];
        }
        previous = std::mem::replace(&mut current, next);
    }
    out
}

/// Given Σ b_j t^j with t = (x − c)/h, the coefficients of Σ β_i x^i.
fn unmap_monomial(b: &[f64], centre: f64, half_width: f64) -> Vec<f64> {
    let d = b.len() - 1;
    let mut beta = vec![0.0; d + 1];
    // (x − c)^j / h^j = Σ_i C(j, i) x^i (−c)^{j−i} / h^j
    for (j, bj) in b.iter().enumerate() {
        let scale = bj / half_width.powi(j as i32);
        let mut binomial = 1.0; // C(j, i) for i = j down to 0
        let mut shift_power = 1.0; // (−c)^{j−i}
        for i in (0..=j).rev() {
            beta[i] += scale * binomial * shift_power;
            binomial = binomial * i as f64 / (j - i + 1) as f64;
            shift_power *= -centre;
        }
    }
    beta
}

impl Family for Polynomial {
    fn infeasible(&self, setting: usize, shape: &TrainingShape<'_>) -> Option<String> {
        let degree = self.degrees[setting];
        let columns = self.columns_for(degree);
        if columns > shape.rows() {
            return Some(format!(
                "degree={degree} needs at least {columns} training rows, the fit has {}",
                shape.rows()
            ));
        }
        // Powers 0..=degree of a feature with fewer distinct values than
        // degree + 1 are linearly dependent (a 0/1 feature: x² = x). Plain
        // columns enter once and are not expanded.
        if !self.intercept {
            return None;
        }
        let numeric = &self.features[..self.numeric()];
        numeric.iter().enumerate().find_map(|(j, feature)| {
            let distinct = shape.distinct(j);
            (degree >= distinct).then(|| {
                format!(
                    "degree={degree} needs at least {} distinct values of feature \"{feature}\", \
                     the training rows have {distinct}",
                    degree + 1
                )
            })
        })
    }

    fn settings(&self) -> Vec<Setting> {
        self.degrees
            .iter()
            .map(|&d| Setting::count("degree", d))
            .collect()
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        let max_degree = self.degrees.iter().copied().max().unwrap_or(1);
        let columns = self.columns_for(max_degree);
        if x_train.nrows() < columns {
            return Err(FitError::TooFewRows {
                setting: format!("degree={max_degree}"),
                needed: columns,
                available: x_train.nrows(),
            });
        }
        require_spread(
            &self.features[..self.numeric()],
            x_train,
            "a polynomial in it cannot be fitted",
        )?;
        let maps = self.range_maps(x_train);
        let design = self.design(x_train, &maps, max_degree);
        let eval_design = self.design(x_eval, &maps, max_degree);
        // The factorisation consumes its matrix; only a final fit, which
        // predicts its own training rows, keeps a copy of the design.
        let (solver, kept_design) = if final_fit {
            (
                NestedLeastSquares::new(design.clone(), y_train),
                Some(design),
            )
        } else {
            (NestedLeastSquares::new(design, y_train), None)
        };

        let moments = final_fit
            .then(|| self.raw_moments(x_train, y_train))
            .flatten();
        self.degrees
            .iter()
            .map(|&degree| {
                let m = self.columns_for(degree);
                let gamma = solver
                    .solve_leading(m)
                    .map_err(|column| FitError::RankDeficient {
                        setting: format!("degree={degree}"),
                        column: column + 1,
                    })?;
                Ok(SettingFit {
                    train_pred: kept_design
                        .as_ref()
                        .map_or_else(Vec::new, |design| predict_leading(design, &gamma)),
                    eval_pred: predict_leading(&eval_design, &gamma),
                    effective_df: m as f64,
                    coefficients: final_fit.then(|| {
                        self.refined_coefficients(
                            &solver,
                            gamma.as_slice(),
                            &maps,
                            degree,
                            x_train,
                            y_train,
                            moments.as_ref(),
                        )
                    }),
                })
            })
            .collect()
    }

    fn leave_one_out(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        Some(self.loo_by_leverage(x_train, y_train))
    }
}

impl Polynomial {
    /// Leave-one-out predictions of every degree from one fit on all rows.
    fn loo_by_leverage(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> LeaveOneOut {
        let fits = self.fit_path(x_train, y_train, &x_train.rows(0, 0).into_owned(), true)?;
        let max_degree = self.degrees.iter().copied().max().unwrap_or(1);
        let maps = self.range_maps(x_train);
        let leverages = cumulative_leverages(&self.design(x_train, &maps, max_degree));
        self.degrees
            .iter()
            .zip(fits)
            .map(|(&degree, fit)| {
                let column = self.columns_for(degree) - 1;
                leave_one_out_rows(&format!("degree={degree}"), y_train.len(), |i| {
                    loo_from_leverage(y_train[i], fit.train_pred[i], leverages[(i, column)])
                })
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chebyshev_conversion_matches_known_polynomials() {
        // T_2 = 2t² − 1, T_3 = 4t³ − 3t (standard identities).
        assert_eq!(chebyshev_to_monomial(&[0.0, 1.0]), vec![-1.0, 0.0, 2.0]);
        assert_eq!(
            chebyshev_to_monomial(&[0.0, 0.0, 1.0]),
            vec![0.0, -3.0, 0.0, 4.0]
        );
    }

    #[test]
    fn unmapping_a_shifted_square() {
        // ((x − 2)/4)² = x²/16 − x/4 + 1/4
        assert_eq!(
            unmap_monomial(&[0.0, 0.0, 1.0], 2.0, 4.0),
            vec![0.25, -0.25, 0.0625]
        );
    }

    #[test]
    fn exact_cubic_is_recovered_in_raw_units() {
        let x = DMatrix::from_fn(9, 1, |i, _| 10.0 + i as f64);
        let y: Vec<f64> = (0..9)
            .map(|i| {
                let v = x[(i, 0)];
                3.0 - 0.5 * v + 0.02 * v * v + 0.001 * v * v * v
            })
            .collect();
        let poly = Polynomial {
            features: vec!["x".into()],
            intercept: true,
            degrees: vec![3, 1],
            plain: 0,
        };
        let fits = poly.fit_path(&x, &y, &x, true).unwrap();
        let coefficients = fits[0].coefficients.as_ref().unwrap();
        let names: Vec<&str> = coefficients.iter().map(|(n, _)| n.as_str()).collect();
        assert_eq!(names, ["intercept", "x", "x^2", "x^3"]);
        for ((_, got), want) in coefficients.iter().zip([3.0, -0.5, 0.02, 0.001]) {
            assert!((got - want).abs() <= 1e-10 * want.abs(), "{got} vs {want}");
        }
        assert_eq!(fits[0].effective_df, 4.0);
        assert_eq!(fits[1].effective_df, 2.0);
    }

    #[test]
    fn several_features_get_additive_powers() {
        let x = DMatrix::from_fn(12, 2, |i, j| {
            (i as f64) * (1.0 + j as f64) + (i % 3) as f64 * j as f64
        });
        let y: Vec<f64> = (0..12)
            .map(|i| 1.0 + x[(i, 0)].powi(2) - 2.0 * x[(i, 1)])
            .collect();
        let poly = Polynomial {
            features: vec!["a".into(), "b".into()],
            intercept: true,
            degrees: vec![2],
            plain: 0,
        };
        let fit = &poly.fit_path(&x, &y, &x, true).unwrap()[0];
        let names: Vec<&str> = fit
            .coefficients
            .as_ref()
            .unwrap()
            .iter()
            .map(|(n, _)| n.as_str())
            .collect();
        assert_eq!(names, ["intercept", "a", "a^2", "b", "b^2"]);
        assert_eq!(fit.effective_df, 5.0);
        for (pred, truth) in fit.train_pred.iter().zip(&y) {
            assert!((pred - truth).abs() < 1e-9);
        }
    }

    #[test]
    fn degree_beyond_distinct_values_is_rank_deficient() {
        let x = DMatrix::from_fn(8, 1, |i, _| (i % 3) as f64);
        let y: Vec<f64> = (0..8).map(|i| i as f64).collect();
        let poly = Polynomial {
            features: vec!["x".into()],
            intercept: true,
            degrees: vec![3],
            plain: 0,
        };
        let err = poly.fit_path(&x, &y, &x, true).unwrap_err();
        assert!(matches!(err, FitError::RankDeficient { .. }), "{err:?}");
    }
}

#[cfg(test)]
mod plain_column_tests {
    use super::*;

    /// A numeric feature with 7 distinct values, a 0/1 indicator and an
    /// interaction column (the feature times the indicator).
    fn with_plain(intercept: bool, degrees: Vec<usize>) -> (Polynomial, DMatrix<f64>) {
        let x = DMatrix::from_fn(14, 3, |i, j| {
            let value = 2.0 + (i % 7) as f64 * 0.5;
            let indicator = f64::from(u8::from(i % 3 == 0));
            [value, indicator, value * indicator][j]
        });
        let poly = Polynomial {
            features: vec!["x".into(), "g=b".into(), "x:g=b".into()],
            intercept,
            degrees,
            plain: 2,
        };
        (poly, x)
    }

    #[test]
    fn each_degree_is_a_leading_block_of_the_highest() {
        for intercept in [true, false] {
            let (poly, x) = with_plain(intercept, vec![1, 2, 3, 4]);
            let maps = poly.range_maps(&x);
            let highest = poly.design(&x, &maps, 4);
            for degree in 1..4 {
                let own = poly.design(&x, &maps, degree);
                assert_eq!(own.ncols(), poly.columns_for(degree));
                assert_eq!(
                    highest.columns(0, own.ncols()),
                    own,
                    "degree {degree}, intercept {intercept}"
                );
            }
            // The plain columns follow the intercept as they are.
            let lead = usize::from(intercept);
            assert_eq!(highest.columns(lead, 2), x.columns(1, 2));
            assert_eq!(highest.ncols(), lead + 2 + 4);
        }
    }

    #[test]
    fn the_grid_with_plain_columns_equals_each_degree_alone() {
        let (poly, x) = with_plain(true, vec![1, 2, 3, 4]);
        let y: Vec<f64> = (0..x.nrows())
            .map(|i| (x[(i, 0)] * 0.9).sin() + 0.5 * x[(i, 1)] + 0.01 * (i * i) as f64)
            .collect();
        let alone = |s: usize| {
            Box::new(Polynomial {
                degrees: vec![poly.degrees[s]],
                ..poly.clone()
            })
        };
        crate::models::test_support::assert_grid_equals_separate_fits(
            &poly, alone, &x, &y, &x, 1e-10,
        );
    }

    #[test]
    fn plain_columns_enter_once_and_are_named_after_the_powers() {
        let (poly, x) = with_plain(true, vec![3]);
        let y: Vec<f64> = (0..x.nrows())
            .map(|i| {
                let (v, g) = (x[(i, 0)], x[(i, 1)]);
                1.5 - 0.5 * v + 0.25 * v * v - 0.125 * v * v * v + 4.0 * g - 0.75 * v * g
            })
            .collect();
        let fit = &poly.fit_path(&x, &y, &x, true).unwrap()[0];
        let coefficients = fit.coefficients.as_ref().unwrap();
        let names: Vec<&str> = coefficients.iter().map(|(n, _)| n.as_str()).collect();
        assert_eq!(names, ["intercept", "x", "x^2", "x^3", "g=b", "x:g=b"]);
        // An exact model: the raw coefficients come back (1e-10 relative).
        for ((_, got), want) in coefficients
            .iter()
            .zip([1.5, -0.5, 0.25, -0.125, 4.0, -0.75])
        {
            assert!((got - want).abs() <= 1e-10 * want.abs(), "{got} vs {want}");
        }
        assert_eq!(fit.effective_df, 6.0);
    }

    #[test]
    fn only_numeric_features_need_degree_plus_one_values() {
        let (poly, x) = with_plain(true, vec![3, 6, 7]);
        let shape = TrainingShape::new(&x, false);
        // The 0/1 columns have 2 values; degree 3 only asks x for 4 of its 7.
        assert_eq!(poly.infeasible(0, &shape), None);
        assert_eq!(poly.infeasible(1, &shape), None);
        let why = poly
            .infeasible(2, &shape)
            .expect("degree 7 needs 8 values of x");
        assert!(why.contains("feature \"x\""), "{why}");
        // Rows count every column: degree 7 has 1 + 2 plain + 7 powers = 10
        // columns; degree 6 has 9 and its 7 distinct values of x.
        let few = x.rows(0, 9).into_owned();
        let shape = TrainingShape::new(&few, false);
        assert_eq!(poly.infeasible(1, &shape), None);
        let why = poly.infeasible(2, &shape).expect("10 columns, 9 rows");
        assert!(why.contains("needs at least 10 training rows"), "{why}");
    }
}

#[cfg(test)]
mod leave_one_out_tests {
    use super::*;
    use crate::models::test_support::shortcut_beside_refits;

    #[test]
    fn hat_diagonal_shortcut_equals_refits() {
        // Identity (common practice for linear smoothers): the shortcut equals
        // refitting without each row, here to 1e-9 relative.
        let n = 25;
        let x = DMatrix::from_fn(n, 1, |i, _| (i as f64 * 0.37).sin() * 4.0 + i as f64 * 0.1);
        let y: Vec<f64> = (0..n)
            .map(|i| (x[(i, 0)] * 0.8).cos() + 0.05 * i as f64)
            .collect();
        let poly = Polynomial {
            features: vec!["x".into()],
            intercept: true,
            degrees: vec![1, 3, 5],
            plain: 0,
        };
        for pair in shortcut_beside_refits(&poly, &x, &y) {
            let (a, b) = (pair.shortcut, pair.refit);
            assert!((a - b).abs() <= 1e-9 * b.abs().max(1.0), "{pair}");
        }
    }

    #[test]
    fn hat_diagonal_shortcut_equals_refits_with_plain_columns() {
        // The same identity with an indicator and an interaction column in
        // the design (the leverages read the plain columns too).
        let n = 24;
        let x = DMatrix::from_fn(n, 3, |i, j| {
            let value = (i as f64 * 0.41).sin() * 3.0 + i as f64 * 0.15;
            let indicator = f64::from(u8::from(i % 3 == 1));
            [value, indicator, value * indicator][j]
        });
        let y: Vec<f64> = (0..n)
            .map(|i| (x[(i, 0)] * 0.7).cos() + 0.8 * x[(i, 1)] - 0.3 * x[(i, 2)] + 0.02 * i as f64)
            .collect();
        let poly = Polynomial {
            features: vec!["x".into(), "g=b".into(), "x:g=b".into()],
            intercept: true,
            degrees: vec![1, 2, 4],
            plain: 2,
        };
        let pairs = shortcut_beside_refits(&poly, &x, &y);
        assert_eq!(pairs.len(), 3 * n);
        for pair in pairs {
            let (a, b) = (pair.shortcut, pair.refit);
            assert!((a - b).abs() <= 1e-9 * b.abs().max(1.0), "{pair}");
        }
    }
}
