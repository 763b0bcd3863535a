//! `lasso`: least squares with an absolute-coefficient penalty, fitted by
//! cyclic coordinate descent along the penalty grid with warm starts.
//!
//! Features are standardised on the training fold (`standardise`), the
//! intercept is the training mean of the target and is not penalised, and
//! β(λ) minimises (1/(2n))Σ(y − ȳ − Zβ)² + λΣ|βⱼ| (the lasso, an
//! L1-penalised least-squares problem).
//!
//! Method: cyclic coordinate descent (Fu 1998, "Penalized regressions: the
//! bridge versus the lasso", J. Comput. Graph. Statist. 7; Wu & Lange 2008,
//! "Coordinate descent algorithms for lasso penalized regression", Ann. Appl.
//! Stat. 2).
//! Each coordinate step sets βⱼ = S(cⱼ − Σ_{k≠j} Gⱼₖβₖ, λ) / Gⱼⱼ, with
//! G = ZᵀZ/n, c = Zᵀ(y − ȳ)/n and S the soft-threshold; G and c are formed
//! once per fold (covariance updates), so a sweep costs
//! p² whatever the number of rows, and each gradient is recomputed from G
//! in fixed order rather than updated, so no drift accumulates. Penalties are
//! fitted from the largest to the smallest, each starting from the previous
//! solution (warm starts), and reported in spec order.
//!
//! Convergence: sweeps repeat until the largest change of any coefficient in
//! a sweep is at most 10⁻¹² times the largest |βⱼ| (or nothing changes). A
//! fit that needs more than `MAX_SWEEPS` (100 000) sweeps fails with
//! [`FitError::NotConverged`] naming the penalty.
//!
//! Effective df = 1 (intercept) + the number of non-zero coefficients, an
//! unbiased estimate of the lasso's degrees of freedom (common practice; it
//! follows from Stein's unbiased risk estimate, Stein 1981). The lasso is not a linear smoother, so there is no leave-one-out
//! shortcut: leave-one-out refits.

use nalgebra::DMatrix;

use super::registry::{CategoricalUse, FamilyDef, SettingProblem, Settings, PENALTY};
use super::standardise::{centre, cross_products, predict, Standardiser};
use super::{Family, FitRequest, Setting, SettingFit};
use crate::error::FitError;

/// Largest coefficient change in a sweep, relative to the largest |βⱼ|,
/// at which a fit counts as converged.
pub(crate) const RELATIVE_CHANGE: f64 = 1e-12;

/// Sweeps over all coordinates allowed per penalty.
pub(crate) const MAX_SWEEPS: usize = 100_000;

/// The lasso over a grid of penalties.
#[derive(Debug, Clone)]
pub(crate) struct Lasso {
    pub(crate) features: Vec<String>,
    /// Penalties λ ≥ 0 in spec order.
    pub(crate) penalties: Vec<f64>,
}

/// The registry entry of `lasso` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new("lasso", &[PENALTY], build)
    .about("L1-penalised least squares on standardised features, by coordinate descent with warm starts.")
    .grid("penalty = [0.001, 0.01, 0.1, 1]")
    .takes_categorical(CategoricalUse::Indicators);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    Ok(Box::new(Lasso {
        features,
        penalties: settings.real_grid("penalty", 0.0)?,
    }))
}

/// One training fold's sufficient statistics for coordinate descent.
#[derive(Debug, Clone)]
pub(crate) struct LassoProblem {
    /// G = ZᵀZ / n (p × p).
    gram: DMatrix<f64>,
    /// c = Zᵀ(y − ȳ) / n.
    correlations: Vec<f64>,
}

impl LassoProblem {
    /// From the raw training rows, standardised by `standardiser`, and the
    /// centred target: the cross-products ridge forms too
    /// (`standardise::cross_products`, one pass over the rows), over n.
    pub(crate) fn new(
        standardiser: &Standardiser,
        x_train: &DMatrix<f64>,
        y_centred: &[f64],
    ) -> Self {
        let rows = x_train.nrows() as f64;
        let (gram, c) = cross_products(standardiser, x_train, y_centred);
        LassoProblem {
            gram: gram / rows,
            correlations: c.into_iter().map(|c| c / rows).collect(),
        }
    }

    /// The smallest penalty at which every coefficient is zero: max |cⱼ|.
    #[cfg(test)]
    pub(crate) fn lambda_max(&self) -> f64 {
        self.correlations.iter().fold(0.0, |m, c| m.max(c.abs()))
    }

    /// Runs coordinate descent at `penalty` from `beta` (updated in place);
    /// returns the number of sweeps, or `None` if `max_sweeps` did not do.
    fn descend(&self, penalty: f64, beta: &mut [f64], max_sweeps: usize) -> Option<usize> {
        let p = beta.len();
        for sweep in 1..=max_sweeps {
            let mut largest_change = 0.0_f64;
            for j in 0..p {
                let curvature = self.gram[(j, j)];
                if curvature <= 0.0 {
                    // A constant feature: its column is zero, so is its coefficient.
                    continue;
                }
                let mut partial = self.correlations[j];
                for (k, b) in beta.iter().enumerate() {
                    if k != j {
                        partial -= self.gram[(j, k)] * b;
                    }
                }
                let updated = soft_threshold(partial, penalty) / curvature;
                largest_change = largest_change.max((updated - beta[j]).abs());
                beta[j] = updated;
            }
            let largest = beta.iter().fold(0.0_f64, |m, b| m.max(b.abs()));
            if largest_change <= RELATIVE_CHANGE * largest {
                return Some(sweep);
            }
        }
        None
    }

    /// Standardised coefficients for every penalty (in the order given),
    /// fitted from the largest penalty down with warm starts.
    pub(crate) fn path(&self, penalties: &[f64]) -> Result<Vec<Vec<f64>>, FitError> {
        self.path_within(penalties, MAX_SWEEPS)
    }

    /// [`Self::path`] with a chosen cap on sweeps per penalty.
    fn path_within(&self, penalties: &[f64], max_sweeps: usize) -> Result<Vec<Vec<f64>>, FitError> {
        let mut order: Vec<usize> = (0..penalties.len()).collect();
        // Largest first; the spec forbids repeats, so the order is strict.
        order.sort_by(|&a, &b| penalties[b].total_cmp(&penalties[a]));
        let mut beta = vec![0.0; self.correlations.len()];
        let mut fits = vec![Vec::new(); penalties.len()];
        for index in order {
            let penalty = penalties[index];
            self.descend(penalty, &mut beta, max_sweeps)
                .ok_or_else(|| FitError::NotConverged {
                    setting: format!("penalty={penalty}"),
                    method: "coordinate descent",
                    iterations: max_sweeps,
                    advice: "drop nearly duplicate features or remove the smallest penalties \
                             from the grid",
                })?;
            fits[index] = beta.clone();
        }
        Ok(fits)
    }
}

/// S(x, λ) = sign(x)·max(|x| − λ, 0).
fn soft_threshold(x: f64, penalty: f64) -> f64 {
    if x > penalty {
        x - penalty
    } else if x < -penalty {
        x + penalty
    } else {
        0.0
    }
}

impl Family for Lasso {
    fn settings(&self) -> Vec<Setting> {
        self.penalties
            .iter()
            .map(|&penalty| Setting::real("penalty", penalty))
            .collect()
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        if x_train.nrows() < 2 {
            return Err(FitError::TooFewRows {
                setting: "lasso".into(),
                needed: 2,
                available: x_train.nrows(),
            });
        }
        let standardiser = Standardiser::fit(x_train);
        let (y_mean, y_centred) = centre(y_train);
        let coefficients =
            LassoProblem::new(&standardiser, x_train, &y_centred).path(&self.penalties)?;
        let z_train = final_fit.then(|| standardiser.apply(x_train));
        let z_eval = standardiser.apply(x_eval);
        Ok(coefficients
            .into_iter()
            .map(|beta| {
                let active = beta.iter().filter(|&&b| b != 0.0).count();
                SettingFit {
                    train_pred: z_train
                        .as_ref()
                        .map(|z| predict(z, y_mean, &beta))
                        .unwrap_or_default(),
                    eval_pred: predict(&z_eval, y_mean, &beta),
                    effective_df: 1.0 + active as f64,
                    coefficients: final_fit
                        .then(|| standardiser.raw_coefficients(&self.features, y_mean, &beta)),
                }
            })
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::penalised_reference;

    fn fixture_problem() -> (penalised_reference::Fixture, LassoProblem) {
        let f = penalised_reference::load();
        let (_, y_centred) = centre(&f.y_train);
        let problem = LassoProblem::new(&Standardiser::fit(&f.x_train), &f.x_train, &y_centred);
        (f, problem)
    }

    #[test]
    fn soft_threshold_shrinks_towards_zero() {
        // Definition of the soft-threshold operator (common practice).
        assert_eq!(soft_threshold(3.0, 1.0), 2.0);
        assert_eq!(soft_threshold(-3.0, 1.0), -2.0);
        assert_eq!(soft_threshold(0.5, 1.0), 0.0);
        assert_eq!(soft_threshold(-1.0, 1.0), 0.0);
    }

    #[test]
    fn at_and_above_lambda_max_only_the_intercept_remains() {
        // Common practice: for λ ≥ λ_max = max|Zᵀ(y − ȳ)|/n every coefficient
        // is zero; just below it exactly one enters, the one with the largest
        // |Zⱼᵀ(y − ȳ)|.
        let (f, problem) = fixture_problem();
        let lambda_max = problem.lambda_max();
        let lasso = Lasso {
            features: f.features.clone(),
            penalties: vec![lambda_max, 2.0 * lambda_max, lambda_max * (1.0 - 1e-6)],
        };
        let fits = f.fit(&lasso, true);
        let y_mean = f.y_train.iter().sum::<f64>() / f.y_train.len() as f64;
        for fit in &fits[..2] {
            assert_eq!(fit.effective_df, 1.0);
            assert!(fit.eval_pred.iter().all(|&p| p == y_mean));
            let c = fit.coefficients.as_ref().unwrap();
            assert_eq!(c[0], ("intercept".to_string(), y_mean));
            assert!(c[1..].iter().all(|(_, v)| *v == 0.0), "{c:?}");
        }
        assert_eq!(fits[2].effective_df, 2.0);
        let strongest = (0..f.features.len())
            .max_by(|&a, &b| {
                problem.correlations[a]
                    .abs()
                    .total_cmp(&problem.correlations[b].abs())
            })
            .unwrap();
        let c = fits[2].coefficients.as_ref().unwrap();
        assert_ne!(c[1 + strongest].1, 0.0, "{c:?}");
    }

    #[test]
    fn solutions_meet_the_optimality_conditions() {
        // Karush-Kuhn-Tucker conditions of the lasso (convex optimality,
        // common practice): gⱼ = cⱼ − (Gβ)ⱼ equals λ·sign(βⱼ) where βⱼ ≠ 0 and |gⱼ| ≤ λ
        // where βⱼ = 0, here to 1e-11 of λ_max = max|cⱼ| (the scale of g; the
        // stopping rule leaves about 1e-12·max|β| in each coefficient).
        let (f, problem) = fixture_problem();
        let slack = 1e-11 * problem.lambda_max();
        let penalties = penalised_reference::penalties(&f, "lasso");
        let path = problem.path(&penalties).unwrap();
        for (penalty, beta) in penalties.iter().zip(&path) {
            for j in 0..beta.len() {
                let fitted: f64 = (0..beta.len())
                    .map(|k| problem.gram[(j, k)] * beta[k])
                    .sum();
                let g = problem.correlations[j] - fitted;
                if beta[j] == 0.0 {
                    assert!(g.abs() <= penalty + slack, "λ={penalty} j={j}: {g}");
                } else {
                    let want = penalty * beta[j].signum();
                    assert!((g - want).abs() <= slack, "λ={penalty} j={j}: {g}");
                }
            }
        }
    }

    #[test]
    fn effective_df_never_rises_with_the_penalty() {
        // On this fixture the active set only grows as λ falls (df is its
        // size, common practice; a path may drop variables in
        // general, so this is a property of the data, checked by the fixture's
        // active sets from scikit-learn).
        let f = penalised_reference::load();
        let mut penalties = penalised_reference::penalties(&f, "lasso");
        penalties.sort_by(|a, b| b.total_cmp(a));
        let lasso = Lasso {
            features: f.features.clone(),
            penalties,
        };
        let fits = f.fit(&lasso, false);
        for pair in fits.windows(2) {
            assert!(pair[1].effective_df >= pair[0].effective_df, "{pair:?}");
        }
        assert_eq!(fits[0].effective_df, 1.0);
        assert_eq!(fits.last().unwrap().effective_df, 6.0);
    }

    #[test]
    fn path_equals_separate_fits() {
        // Invariant (docs/architecture.md, "A whole grid per fit"): warm
        // starts change the route, not the answer.
        penalised_reference::assert_path_equals_separate_fits(&FAMILY, 1e-9);
    }

    #[test]
    fn zero_penalty_reaches_least_squares() {
        // With λ = 0 the lasso objective is least squares (definition); compared
        // with the `linear` family on the fixture (correlations up to 0.98).
        penalised_reference::assert_path_equals_separate_fits(&FAMILY, 1e-9);
    }

    #[test]
    fn too_few_sweeps_name_the_setting() {
        // Strongly correlated features need many sweeps; a cap of 2 must fail
        // with an error that names the penalty and what to do.
        let (_, problem) = fixture_problem();
        let err = problem.path_within(&[45.0, 0.3], 2).unwrap_err();
        assert_eq!(
            err,
            FitError::NotConverged {
                setting: "penalty=0.3".into(),
                method: "coordinate descent",
                iterations: 2,
                advice: "drop nearly duplicate features or remove the smallest penalties from \
                         the grid",
            }
        );
        let text = err.to_string();
        assert!(text.starts_with("penalty=0.3: coordinate descent did not converge within 2"));
    }

    #[test]
    fn constant_feature_stays_at_zero() {
        // Module doc of `standardise`: a constant training column is a zero column.
        let x = DMatrix::from_fn(12, 2, |i, j| if j == 0 { 7.0 } else { (i * i) as f64 });
        let y: Vec<f64> = (0..12).map(|i| 1.0 + (i * i) as f64).collect();
        let lasso = Lasso {
            features: vec!["flat".into(), "a".into()],
            penalties: vec![0.0],
        };
        let fit = &lasso.fit_path(&x, &y, &x, true).unwrap()[0];
        let c = fit.coefficients.as_ref().unwrap();
        assert_eq!(c[1].1, 0.0);
        assert!(
            (c[2].1 - 1.0).abs() < 1e-12 && (c[0].1 - 1.0).abs() < 1e-10,
            "{c:?}"
        );
        assert_eq!(fit.effective_df, 2.0);
    }
}
