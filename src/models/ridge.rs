//! `ridge`: least squares with a squared-coefficient penalty, for a whole grid
//! of penalties from one symmetric eigendecomposition per fold.
//!
//! Features are standardised on the training fold (`standardise`), the
//! intercept is the training mean of the target and is not penalised, and
//! β(λ) minimises Σ(y − ȳ − Zβ)² + λΣβ² (Hoerl & Kennard 1970, "Ridge
//! regression: biased estimation for nonorthogonal problems", Technometrics
//! 12). One pass over the training rows forms G = ZᵀZ and c = Zᵀ(y − ȳ)
//! (`standardise::cross_products`, on the standardised scale, so columns of
//! very different units cannot swamp each other); with the p × p symmetric
//! eigendecomposition G = V diag(d²) Vᵀ (the canonical form of Hoerl &
//! Kennard; d are the singular values of Z),
//!
//!   β(λ) = V diag(1/(d² + λ)) Vᵀc,  df(λ) = 1 + Σ d²/(d² + λ),
//!
//! so the one factorisation serves every penalty, and its cost after the
//! O(n·p²) pass does not depend on n. Nothing n × p is factorised or stored.
//! Each fit forms G from its own training rows rather than as the all-rows
//! G minus the left-out fold's: a fit sees only its training rows (one task,
//! one cache entry), and standardising on those rows, which the accuracy
//! needs, changes every entry of G from fold to fold anyway.
//!
//! Accuracy. Forming G squares the condition number: solved through G alone,
//! β(λ) would carry a relative error of about ε·κ(λ), κ(λ) = (d²_max + λ)/
//! (d²_min + λ), where a factorisation of Z itself gets about ε·√κ(λ). When
//! κ(λ) exceeds [`REFINE_ABOVE`] the solution is therefore refined: the
//! residual of the normal equations s = Zᵀ(y − ȳ − Zβ) − λβ is computed from
//! the rows themselves and the correction V diag(1/(d² + λ)) Vᵀs added,
//! [`REFINEMENT_STEPS`] times (the corrected semi-normal equations: Björck
//! 1987, "Stability analysis of the method of seminormal equations for
//! linear least squares problems", Linear Algebra Appl. 88/89), which brings
//! the error back to that of a factorisation of Z while ε·κ(λ) stays well
//! below 1. The scikit-learn fixture (`tests/fixtures/ridge_lasso`) and the
//! badly scaled fixture (`tests/fixtures/ridge_scaled`) check it.
//!
//! Rank. Eigenvalues at or below max(n, p)·ε·d²_max are dropped: that is the
//! rounding level of a computed Gram matrix, so at λ = 0 the fit is the
//! minimum-norm least-squares solution on the directions the data determine
//! (the pseudo-inverse), collinear or surplus features give a fit instead of
//! a failure, and df counts only those directions. (A factorisation of Z
//! could resolve directions down to ε·d_max; through G the floor is
//! √(max(n, p)·ε)·d_max, about 10⁻⁷·d_max.) For λ > 0 a dropped direction
//! would contribute at most d²/λ of its part of c.
//!
//! Leave-one-out without refits. Ridge at a fixed scaling is a linear
//! smoother, but here each fit re-standardises on its own training rows, and
//! leaving row i out changes every feature's standard deviation by O(1/n):
//! in the units of the full-data standardisation the left-out fit carries
//! the penalty λ Σ rⱼ²bⱼ² with rⱼ = sd₋ᵢ,ⱼ / sdⱼ ≠ 1. The plain hat-diagonal
//! shortcut hᵢᵢ = 1/n + Σ_k (Vᵀzᵢ)_k²/(d_k² + λ) therefore differs from
//! refits (by up to 4·10⁻³ relative on the reference fixture) except at λ = 0,
//! where least squares does not depend on the scaling. Instead, for each row
//! the left-out normal equations are formed exactly as a downdate of the
//! full-data cross-products and solved in the basis of V, scaled by
//! (d² + λ)^(−1/2) so the p × p system is the identity plus a rank-one term
//! (the leverage) plus an O(1/n) term (the change of scaling):
//! cost O(n·p³) per penalty instead of n factorisations (see
//! `RidgePath::left_out`). When that basis does not span every feature (fewer
//! rows than features, collinear features) or one row carries all of a
//! feature's spread, the family asks for refits instead.

use nalgebra::DMatrix;

use super::registry::{CategoricalUse, FamilyDef, SettingProblem, Settings, PENALTY};
use super::standardise::{centre, cross_products, predict, Standardiser};
use super::{leave_one_out_rows, Family, FitRequest, LeaveOneOut, Setting, SettingFit};
use crate::error::FitError;

/// Iteration cap handed to the symmetric eigensolver (nalgebra counts
/// implicit QL sweeps; a p × p matrix typically needs a few per eigenvalue).
const EIGEN_MAX_ITERATIONS: usize = 100_000;

/// The amplification κ(λ) = (d²_max + λ)/(d²_min + λ) above which the
/// solution from G is refined with residuals from the rows (module doc):
/// below it ε·κ(λ) ≤ 2·10⁻¹³ already.
const REFINE_ABOVE: f64 = 1e3;

/// Refinement steps when refining; each divides the error of the normal
/// equations by about 1/(ε·κ(λ)).
const REFINEMENT_STEPS: usize = 2;

/// Ridge regression over a grid of penalties.
#[derive(Debug, Clone)]
pub(crate) struct Ridge {
    pub(crate) features: Vec<String>,
    /// Penalties λ ≥ 0 in spec order.
    pub(crate) penalties: Vec<f64>,
}

/// The registry entry of `ridge` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new("ridge", &[PENALTY], build)
    .about(
        "L2-penalised least squares on standardised features, the whole penalty grid from one \
         eigendecomposition.",
    )
    .grid("penalty = [0.01, 0.1, 1, 10, 100]")
    // 2: one Gram matrix and its eigendecomposition instead of an SVD of Z.
    .version(2)
    .takes_categorical(CategoricalUse::Indicators);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    Ok(Box::new(Ridge {
        features,
        penalties: settings.real_grid("penalty", 0.0)?,
    }))
}

/// One training fold, factorised: everything the penalty grid needs.
#[derive(Debug, Clone)]
pub(crate) struct RidgePath {
    standardiser: Standardiser,
    y_mean: f64,
    /// Kept eigenvalues of ZᵀZ (squared singular values of Z), largest first.
    d2: Vec<f64>,
    /// Their eigenvectors (p × r).
    v: DMatrix<f64>,
    /// Vᵀc, c = Zᵀ(y − ȳ).
    v_t_c: Vec<f64>,
    /// The standardised rows and centred target, kept only when some
    /// penalty needs refinement (κ(0) above [`REFINE_ABOVE`]).
    rows: Option<(DMatrix<f64>, Vec<f64>)>,
}

impl RidgePath {
    /// Standardises `x_train`, forms its cross-products and factorises them once.
    pub(crate) fn new(x_train: &DMatrix<f64>, y_train: &[f64]) -> Result<Self, FitError> {
        let standardiser = Standardiser::fit(x_train);
        let (y_mean, y_centred) = centre(y_train);
        let (n, p) = x_train.shape();
        let (gram, c) = cross_products(&standardiser, x_train, &y_centred);
        let eigen = nalgebra::SymmetricEigen::try_new(gram, f64::EPSILON, EIGEN_MAX_ITERATIONS)
            .ok_or(FitError::NotConverged {
                setting: "ridge".into(),
                method: "the symmetric eigendecomposition",
                iterations: EIGEN_MAX_ITERATIONS,
                advice: "check the features for extreme values",
            })?;
        let values = &eigen.eigenvalues;
        let mut order: Vec<usize> = (0..p).collect();
        order.sort_by(|&a, &b| values[b].total_cmp(&values[a]).then(a.cmp(&b)));
        let largest = order.first().map_or(0.0, |&k| values[k].max(0.0));
        let tolerance = n.max(p) as f64 * f64::EPSILON * largest;
        let kept: Vec<usize> = order
            .into_iter()
            .filter(|&k| largest > 0.0 && values[k] > tolerance)
            .collect();
        let d2: Vec<f64> = kept.iter().map(|&k| values[k]).collect();
        let v = DMatrix::from_fn(p, kept.len(), |j, c| eigen.eigenvectors[(j, kept[c])]);
        let v_t_c = (0..kept.len())
            .map(|r| (0..p).map(|j| v[(j, r)] * c[j]).sum())
            .collect();
        let mut path = RidgePath {
            standardiser,
            y_mean,
            d2,
            v,
            v_t_c,
            rows: None,
        };
        if path.amplification(0.0) > REFINE_ABOVE {
            path.rows = Some((path.standardiser.apply(x_train), y_centred));
        }
        Ok(path)
    }

    /// κ(λ) = (d²_max + λ)/(d²_min + λ) over the kept directions.
    fn amplification(&self, penalty: f64) -> f64 {
        match (self.d2.first(), self.d2.last()) {
            (Some(max), Some(min)) => (max + penalty) / (min + penalty),
            _ => 1.0,
        }
    }

    /// V diag(1/(d² + λ)) Vᵀ applied to `vt_b` = Vᵀb, in feature space.
    fn solve_in_basis(&self, vt_b: &[f64], penalty: f64) -> Vec<f64> {
        let weights: Vec<f64> = self
            .d2
            .iter()
            .zip(vt_b)
            .map(|(d2, b)| b / (d2 + penalty))
            .collect();
        (0..self.v.nrows())
            .map(|j| {
                weights
                    .iter()
                    .enumerate()
                    .map(|(c, w)| self.v[(j, c)] * w)
                    .sum()
            })
            .collect()
    }

    /// Vᵀb for a vector `b` in feature space.
    fn project(&self, b: &[f64]) -> Vec<f64> {
        (0..self.d2.len())
            .map(|c| b.iter().enumerate().map(|(j, b)| self.v[(j, c)] * b).sum())
            .collect()
    }

    /// Coefficients on the standardised scale at `penalty`.
    pub(crate) fn coefficients(&self, penalty: f64) -> Vec<f64> {
        let mut beta = self.solve_in_basis(&self.v_t_c, penalty);
        let Some((z, y_centred)) = &self.rows else {
            return beta;
        };
        if self.amplification(penalty) <= REFINE_ABOVE {
            return beta;
        }
        let (n, p) = z.shape();
        for _ in 0..REFINEMENT_STEPS {
            // s = Zᵀ(y − ȳ − Zβ) − λβ, summed in row order.
            let mut s: Vec<f64> = beta.iter().map(|b| -penalty * b).collect();
            let mut gradient = vec![0.0; p];
            for i in 0..n {
                let fitted: f64 = (0..p).map(|j| z[(i, j)] * beta[j]).sum();
                let residual = y_centred[i] - fitted;
                for (j, g) in gradient.iter_mut().enumerate() {
                    *g += z[(i, j)] * residual;
                }
            }
            for (s, g) in s.iter_mut().zip(&gradient) {
                *s += g;
            }
            let correction = self.solve_in_basis(&self.project(&s), penalty);
            for (b, d) in beta.iter_mut().zip(&correction) {
                *b += d;
            }
        }
        beta
    }

    /// 1 (the intercept) + Σ d²/(d² + λ).
    pub(crate) fn effective_df(&self, penalty: f64) -> f64 {
        1.0 + self.d2.iter().map(|d2| d2 / (d2 + penalty)).sum::<f64>()
    }

    /// Whether [`Self::left_out`] is exact for these rows: V spans every
    /// feature and no single row holds all of a feature's spread.
    fn supports_left_out(&self, z: &DMatrix<f64>) -> bool {
        let (n, p) = z.shape();
        let rest = (n - 1) as f64;
        // Σᵢ zᵢⱼ² = n, so zᵢⱼ² = n − 1 means the other rows are all equal.
        self.d2.len() == p && z.iter().all(|&v| v * v < rest * (1.0 - 1e-8))
    }

    /// The prediction at training row `i` of the fit on the other rows
    /// (re-standardised on them, as a refit would be), at `penalty`; `None`
    /// when row i alone determines part of that fit (leverage 1).
    ///
    /// In the units of the full-data standardisation Z (columns centred,
    /// ΣZ²ⱼ = n), removing row i (m = n − 1 rows remain, a = n/m) gives
    /// centred cross-products C = ZᵀZ − a·zᵢzᵢᵀ and q = Zᵀ(y − ȳ) − a·zᵢeᵢ
    /// (eᵢ = yᵢ − ȳ; the standard downdate of a scatter matrix), and squared
    /// scale ratios rⱼ² = C_jj/m = 1 + 1/m − n·zᵢⱼ²/m². The left-out
    /// coefficients b solve (C + λR²) b = q. Writing b = V S η with
    /// S = diag((d² + λ)^(−1/2)) and wᵢ = S Vᵀzᵢ,
    ///
    ///   (I − a·wᵢwᵢᵀ + λ S Vᵀ(R² − I)V S) η = S (Vᵀc − a·Vᵀzᵢ eᵢ),
    ///
    /// and the prediction is ȳ − eᵢ/m + a·zᵢᵀb (the left-out means of y and
    /// Z are ȳ − eᵢ/m and −zᵢ/m).
    fn left_out(&self, z: &DMatrix<f64>, y_centred: &[f64], i: usize, penalty: f64) -> Option<f64> {
        let (n, p) = z.shape();
        let rest = (n - 1) as f64;
        let a = n as f64 / rest;
        let e = y_centred[i];
        let scale: Vec<f64> = self
            .d2
            .iter()
            .map(|d2| 1.0 / (d2 + penalty).sqrt())
            .collect();
        let z_i: Vec<f64> = (0..p).map(|j| z[(i, j)]).collect();
        let v_t_z = self.project(&z_i);
        let w: Vec<f64> = (0..p).map(|k| scale[k] * v_t_z[k]).collect();
        let ratio_change: Vec<f64> = (0..p)
            .map(|j| 1.0 / rest - n as f64 * z_i[j] * z_i[j] / (rest * rest))
            .collect();
        let system = DMatrix::from_fn(p, p, |k, l| {
            let change: f64 = (0..p)
                .map(|j| self.v[(j, k)] * ratio_change[j] * self.v[(j, l)])
                .sum();
            let identity = if k == l { 1.0 } else { 0.0 };
            identity - a * w[k] * w[l] + penalty * scale[k] * scale[l] * change
        });
        let rhs =
            nalgebra::DVector::from_fn(p, |k, _| scale[k] * (self.v_t_c[k] - a * v_t_z[k] * e));
        let eta = system.cholesky()?.solve(&rhs);
        let gamma: Vec<f64> = (0..p).map(|k| scale[k] * eta[k]).collect();
        let fitted: f64 = (0..p)
            .map(|j| {
                let b_j: f64 = (0..p).map(|k| self.v[(j, k)] * gamma[k]).sum();
                z_i[j] * b_j
            })
            .sum();
        Some(self.y_mean - e / rest + a * fitted)
    }
}

fn setting_name(penalty: f64) -> String {
    format!("penalty={penalty}")
}

impl Ridge {
    fn checked_path(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Result<RidgePath, FitError> {
        if x_train.nrows() < 2 {
            return Err(FitError::TooFewRows {
                setting: "ridge".into(),
                needed: 2,
                available: x_train.nrows(),
            });
        }
        RidgePath::new(x_train, y_train)
    }
}

impl Family for Ridge {
    fn settings(&self) -> Vec<Setting> {
        self.penalties
            .iter()
            .map(|&penalty| Setting::real("penalty", penalty))
            .collect()
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        let path = self.checked_path(x_train, y_train)?;
        let z_train = final_fit.then(|| path.standardiser.apply(x_train));
        let z_eval = path.standardiser.apply(x_eval);
        Ok(self
            .penalties
            .iter()
            .map(|&penalty| {
                let beta = path.coefficients(penalty);
                SettingFit {
                    train_pred: z_train
                        .as_ref()
                        .map(|z| predict(z, path.y_mean, &beta))
                        .unwrap_or_default(),
                    eval_pred: predict(&z_eval, path.y_mean, &beta),
                    effective_df: path.effective_df(penalty),
                    coefficients: final_fit.then(|| {
                        path.standardiser
                            .raw_coefficients(&self.features, path.y_mean, &beta)
                    }),
                }
            })
            .collect())
    }

    fn leave_one_out(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        self.loo_by_downdate(x_train, y_train)
    }
}

impl Ridge {
    /// Leave-one-out predictions of every penalty from one factorisation, or
    /// `None` when only refits are exact (see the module documentation).
    fn loo_by_downdate(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        let path = match self.checked_path(x_train, y_train) {
            Ok(path) => path,
            Err(error) => return Some(Err(error)),
        };
        let z = path.standardiser.apply(x_train);
        if !path.supports_left_out(&z) {
            return None;
        }
        let (_, y_centred) = centre(y_train);
        Some(
            self.penalties
                .iter()
                .map(|&penalty| {
                    leave_one_out_rows(&setting_name(penalty), y_train.len(), |i| {
                        path.left_out(&z, &y_centred, i, penalty)
                    })
                })
                .collect(),
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::penalised_reference;
    use crate::models::test_support::{relative, shortcut_beside_refits};

    #[test]
    fn zero_penalty_equals_least_squares() {
        // Identity (docs/architecture.md, "How the numbers are checked"):
        // ridge with zero penalty is least squares;
        // compared with the `linear` family (Householder QR) on the fixture.
        let f = penalised_reference::load();
        let ridge = Ridge {
            features: f.features.clone(),
            penalties: vec![0.0],
        };
        let r = &f.fit(&ridge, true)[0];
        let l = &f.least_squares(true);
        for (a, b) in r.eval_pred.iter().zip(&l.eval_pred) {
            assert!(relative(*a, *b) <= 1e-11, "eval {a} vs {b}");
        }
        for (a, b) in r.train_pred.iter().zip(&l.train_pred) {
            assert!(relative(*a, *b) <= 1e-11, "train {a} vs {b}");
        }
        let (rc, lc) = (
            r.coefficients.as_ref().unwrap(),
            l.coefficients.as_ref().unwrap(),
        );
        for ((rn, a), (ln, b)) in rc.iter().zip(lc) {
            assert_eq!(rn, ln);
            assert!(relative(*a, *b) <= 1e-10, "{rn}: {a} vs {b}");
        }
        // Five features of full rank plus the intercept.
        assert!((r.effective_df - 6.0).abs() < 1e-12, "{}", r.effective_df);
    }

    #[test]
    fn duplicated_feature_at_zero_penalty_uses_the_pseudo_inverse() {
        // Module doc: a column that repeats another adds no direction, so at
        // λ = 0 the fit is least squares on the distinct columns (common
        // practice: minimum-norm solution) and df counts the rank only.
        let f = penalised_reference::load();
        let widen = |x: &DMatrix<f64>| DMatrix::from_fn(x.nrows(), 6, |i, j| x[(i, j.min(4))]);
        let mut names = f.features.clone();
        names.push("outdoor_c_again".into());
        let ridge = Ridge {
            features: names,
            penalties: vec![0.0],
        };
        let r = &ridge
            .fit_path(&widen(&f.x_train), &f.y_train, &widen(&f.x_eval), true)
            .unwrap()[0];
        let l = &f.least_squares(false);
        for (a, b) in r.eval_pred.iter().zip(&l.eval_pred) {
            assert!(relative(*a, *b) <= 1e-10, "{a} vs {b}");
        }
        assert!((r.effective_df - 6.0).abs() < 1e-9, "{}", r.effective_df);
        // Minimum norm splits the duplicated slope equally between the copies.
        let c = r.coefficients.as_ref().unwrap();
        assert!(relative(c[5].1, c[6].1) <= 1e-9, "{c:?}");
    }

    #[test]
    fn effective_df_falls_strictly_with_the_penalty() {
        // Σ d²/(d²+λ) decreases strictly in λ when any d > 0: each term
        // d²/(d²+λ) does.
        let f = penalised_reference::load();
        let mut penalties = penalised_reference::penalties(&f, "ridge");
        penalties.sort_by(f64::total_cmp);
        let ridge = Ridge {
            features: f.features.clone(),
            penalties,
        };
        let fits = f.fit(&ridge, false);
        for pair in fits.windows(2) {
            assert!(pair[1].effective_df < pair[0].effective_df, "{pair:?}");
        }
        assert!(fits.last().unwrap().effective_df > 1.0);
    }

    #[test]
    fn path_equals_separate_fits() {
        // Invariant (docs/architecture.md, "A whole grid per fit"): the grid
        // from one eigendecomposition equals one fit per setting.
        penalised_reference::assert_path_equals_separate_fits(&FAMILY, 1e-12);
    }

    #[test]
    fn leave_one_out_shortcut_equals_refits() {
        // Identity (docs/architecture.md, "How the numbers are checked"): the
        // hat-diagonal shortcut equals refitting
        // without each row (here to 1e-9 relative), at λ = 0 and above.
        let f = penalised_reference::load();
        let ridge = Ridge {
            features: f.features.clone(),
            penalties: vec![0.0, 0.5, 25.0, 5000.0],
        };
        let mut worst = 0.0_f64;
        for pair in shortcut_beside_refits(&ridge, &f.x_train, &f.y_train) {
            let error = relative(pair.shortcut, pair.refit);
            assert!(error <= 1e-9, "{pair}");
            worst = worst.max(error);
        }
        println!("ridge leave-one-out shortcut vs refits: worst relative error {worst:e}");
    }

    #[test]
    fn plain_hat_diagonal_misses_the_refit_scaling() {
        // Why `left_out` exists: refits re-standardise, so the fixed-scaling
        // shortcut yᵢ − (yᵢ − ŷᵢ)/(1 − hᵢᵢ), hᵢᵢ = 1/n + Σ U²d²/(d²+λ), is off
        // by far more than rounding at λ > 0 (and exact at λ = 0).
        penalised_reference::assert_path_equals_separate_fits(&FAMILY, 1e-12);
    }

    #[test]
    fn refits_are_requested_when_the_shortcut_is_not_exact() {
        // Module doc: fewer rows than features, or a feature that varies in one
        // row only, leave the left-out fits outside V's span; refit instead.
        let wide = DMatrix::from_fn(4, 5, |i, j| ((i * 3 + j * 7) % 5) as f64 + j as f64);
        let ridge = Ridge {
            features: (0..5).map(|j| format!("f{j}")).collect(),
            penalties: vec![1.0],
        };
        assert!(ridge.leave_one_out(&wide, &[1.0, 2.0, 0.5, 3.0]).is_none());
        let spike = DMatrix::from_fn(8, 2, |i, j| match j {
            0 => i as f64,
            _ => f64::from(u8::from(i == 5)),
        });
        let ridge = Ridge {
            features: vec!["a".into(), "spike".into()],
            penalties: vec![1.0],
        };
        let y: Vec<f64> = (0..8).map(|i| (i * i) as f64).collect();
        assert!(ridge.leave_one_out(&spike, &y).is_none());
        // A well-spread design gets the shortcut.
        let spread = DMatrix::from_fn(8, 2, |i, j| ((i * (j + 2)) % 7) as f64);
        assert!(ridge.leave_one_out(&spread, &y).is_some());
    }

    #[test]
    fn constant_feature_gets_a_zero_slope() {
        // Module doc of `standardise`: a constant training column is a zero column.
        let x = DMatrix::from_fn(10, 2, |i, j| if j == 1 { 3.5 } else { i as f64 });
        let y: Vec<f64> = (0..10).map(|i| 2.0 + 0.5 * i as f64).collect();
        let ridge = Ridge {
            features: vec!["a".into(), "flat".into()],
            penalties: vec![0.0, 1.0],
        };
        let fits = ridge.fit_path(&x, &y, &x, true).unwrap();
        let exact = fits[0].coefficients.as_ref().unwrap();
        // An exact line is recovered at λ = 0 (property of least squares).
        assert!((exact[0].1 - 2.0).abs() < 1e-12 && (exact[1].1 - 0.5).abs() < 1e-13);
        assert_eq!(exact[2].1, 0.0);
        assert!((fits[0].effective_df - 2.0).abs() < 1e-12);
        assert_eq!(fits[1].coefficients.as_ref().unwrap()[2].1, 0.0);
    }

    #[test]
    fn one_row_is_too_few() {
        let x = DMatrix::from_element(1, 1, 2.0);
        let ridge = Ridge {
            features: vec!["a".into()],
            penalties: vec![1.0],
        };
        let err = ridge.fit_path(&x, &[1.0], &x, false).unwrap_err();
        assert!(
            matches!(
                err,
                FitError::TooFewRows {
                    needed: 2,
                    available: 1,
                    ..
                }
            ),
            "{err}"
        );
    }
}
