//! `discriminant`: Gaussian discriminant analysis for a class target
//! (Hastie, Tibshirani & Friedman 2009, *The Elements of Statistical
//! Learning*, 2nd ed., §4.3). Each class present in the training rows gets
//! a normal density with its own mean; `shape = "linear"` shares one
//! covariance between the classes (linear boundaries), `"quadratic"` gives
//! each class its own (quadratic boundaries). Priors are the training class
//! frequencies; the posterior of class k at x is proportional to
//! prior_k · N(x; mean_k, Σ_k). Classes absent from the training rows get
//! probability 0.
//!
//! Covariances are the maximum-likelihood estimates: shared, the pooled
//! within-class scatter Σ_k Σ_{i in k} (x_i − mean_k)(x_i − mean_k)ᵀ over n;
//! per class, the class's scatter over n_k (n_k the rows of class k). (The
//! book's unbiased versions divide by n − K and n_k − 1, which moves the
//! posteriors slightly; the maximum-likelihood ones are also what
//! scikit-learn 1.9 computes, against which the posteriors are tested in
//! `classification_reference.rs`.) Densities are
//! evaluated through the Cholesky factor of each covariance; a covariance
//! that has none (too few rows of a class, or a feature constant within it)
//! fails naming the setting and the class. Effective df is the parameter
//! count the book gives (§4.3): (K − 1)(p + 1) for the linear shape and
//! (K − 1)(p(p + 3)/2 + 1) for the quadratic one.

use nalgebra::{Cholesky, DMatrix, DVector, Dyn};

use super::registry::{
    CategoricalUse, FamilyDef, KeyDef, KeyKind, SettingProblem, Settings, Targets,
};
use super::{require_spread, Family, FitRequest, Setting, SettingFit};
use crate::error::FitError;
use crate::metrics::ClassPrediction;

/// The shapes a spec may name.
const SHAPES: &[&str] = &["linear", "quadratic"];

/// Gaussian discriminant analysis over a grid of shapes.
#[derive(Debug, Clone)]
pub(crate) struct Discriminant {
    pub(crate) features: Vec<String>,
    pub(crate) shapes: Vec<&'static str>,
}

/// The registry entry of `discriminant` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new(
    "discriminant",
    &[KeyDef::new(
        "shape",
        KeyKind::Words,
        "Covariance shapes to compare: \"linear\" (shared) or \"quadratic\" (per class).",
    )],
    build,
)
.about("Gaussian class densities with a shared (linear) or per-class (quadratic) covariance.")
.grid("shape = [\"linear\", \"quadratic\"]")
.predicts(Targets::Classes)
.takes_categorical(CategoricalUse::Indicators);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    Ok(Box::new(Discriminant {
        features,
        shapes: settings.word_grid("shape", SHAPES)?,
    }))
}

/// One class's fitted density: prior, mean and covariance factor.
struct ClassDensity {
    class: usize,
    log_prior: f64,
    mean: DVector<f64>,
    factor: Cholesky<f64, Dyn>,
    /// log |Σ| / 2.
    half_log_det: f64,
}

impl ClassDensity {
    /// log prior + log density at `x`, up to the constant shared by all classes.
    fn log_score(&self, x: &DVector<f64>) -> f64 {
        let centred = x - &self.mean;
        let solved = self.factor.l().solve_lower_triangular(&centred);
        let distance = solved.map_or(f64::INFINITY, |z| z.iter().map(|v| v * v).sum::<f64>());
        self.log_prior - self.half_log_det - distance / 2.0
    }
}

fn factorise(
    setting: &str,
    class: usize,
    covariance: DMatrix<f64>,
) -> Result<(Cholesky<f64, Dyn>, f64), FitError> {
    let factor = covariance
        .cholesky()
        .ok_or_else(|| FitError::SingularCovariance {
            setting: setting.to_string(),
            class: class + 1,
        })?;
    let half_log_det: f64 = factor.l().diagonal().iter().map(|d| libm::log(*d)).sum();
    if !half_log_det.is_finite() {
        return Err(FitError::SingularCovariance {
            setting: setting.to_string(),
            class: class + 1,
        });
    }
    Ok((factor, half_log_det))
}

/// The scatter Σ (x − mean)(x − mean)ᵀ of `rows` of `x`, summed in row order.
fn scatter(x: &DMatrix<f64>, rows: &[usize], mean: &DVector<f64>) -> DMatrix<f64> {
    let p = x.ncols();
    let mut out = DMatrix::zeros(p, p);
    for &i in rows {
        for a in 0..p {
            let da = x[(i, a)] - mean[a];
            for b in 0..p {
                out[(a, b)] += da * (x[(i, b)] - mean[b]);
            }
        }
    }
    out
}

impl Discriminant {
    fn densities(
        &self,
        shape: &str,
        x: &DMatrix<f64>,
        y: &[f64],
        classes: usize,
    ) -> Result<Vec<ClassDensity>, FitError> {
        let setting = format!("shape={shape}");
        let n = x.nrows();
        let p = x.ncols();
        let mut rows_of: Vec<Vec<usize>> = vec![Vec::new(); classes];
        for (i, &label) in y.iter().enumerate() {
            rows_of[label as usize].push(i);
        }
        let present: Vec<usize> = (0..classes).filter(|&c| !rows_of[c].is_empty()).collect();
        let means: Vec<DVector<f64>> = present
            .iter()
            .map(|&c| {
                let rows = &rows_of[c];
                DVector::from_fn(p, |j, _| {
                    rows.iter().map(|&i| x[(i, j)]).sum::<f64>() / rows.len() as f64
                })
            })
            .collect();
        let log_prior = |c: usize| libm::log(rows_of[c].len() as f64 / n as f64);
        if shape == "linear" {
            let mut pooled = DMatrix::zeros(p, p);
            for (k, &c) in present.iter().enumerate() {
                pooled += scatter(x, &rows_of[c], &means[k]);
            }
            pooled /= n as f64;
            let (factor, half_log_det) = factorise(&setting, present[0], pooled)?;
            Ok(present
                .iter()
                .zip(means)
                .map(|(&c, mean)| ClassDensity {
                    class: c,
                    log_prior: log_prior(c),
                    mean,
                    factor: factor.clone(),
                    half_log_det,
                })
                .collect())
        } else {
            present
                .iter()
                .zip(means)
                .map(|(&c, mean)| {
                    let rows = &rows_of[c];
                    if rows.len() < 2 {
                        return Err(FitError::SingularCovariance {
                            setting: setting.clone(),
                            class: c + 1,
                        });
                    }
                    let covariance = scatter(x, rows, &mean) / rows.len() as f64;
                    let (factor, half_log_det) = factorise(&setting, c, covariance)?;
                    Ok(ClassDensity {
                        class: c,
                        log_prior: log_prior(c),
                        mean,
                        factor,
                        half_log_det,
                    })
                })
                .collect()
        }
    }
}

/// Posterior probabilities of every class at each row of `x`, with the
/// predicted class, in the layout of `metrics::ClassPrediction`.
fn predict(densities: &[ClassDensity], x: &DMatrix<f64>, classes: usize) -> Vec<f64> {
    let layout = ClassPrediction { classes };
    let mut out = Vec::with_capacity(x.nrows() * layout.width());
    let mut probabilities = vec![0.0; classes];
    for i in 0..x.nrows() {
        let row = DVector::from_fn(x.ncols(), |j, _| x[(i, j)]);
        let scores: Vec<f64> = densities.iter().map(|d| d.log_score(&row)).collect();
        let top = scores.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let weights: Vec<f64> = scores.iter().map(|s| libm::exp(s - top)).collect();
        let total: f64 = weights.iter().sum();
        probabilities.iter_mut().for_each(|p| *p = 0.0);
        for (d, w) in densities.iter().zip(&weights) {
            probabilities[d.class] = w / total;
        }
        layout.push_argmax(&mut out, &probabilities);
    }
    out
}

impl Family for Discriminant {
    fn settings(&self) -> Vec<Setting> {
        self.shapes
            .iter()
            .map(|&shape| Setting::word("shape", shape))
            .collect()
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        let classes = request.classes.max(2);
        require_spread(
            &self.features,
            x_train,
            "its covariance with the others is singular",
        )?;
        let p = x_train.ncols() as f64;
        self.shapes
            .iter()
            .map(|&shape| {
                let densities = self.densities(shape, x_train, y_train, classes)?;
                let present = densities.len() as f64;
                let per_class = if shape == "linear" {
                    p + 1.0
                } else {
                    p * (p + 3.0) / 2.0 + 1.0
                };
                Ok(SettingFit {
                    train_pred: if final_fit {
                        predict(&densities, x_train, classes)
                    } else {
                        Vec::new()
                    },
                    eval_pred: predict(&densities, x_eval, classes),
                    effective_df: (present - 1.0) * per_class,
                    coefficients: None,
                })
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn two_classes() -> (DMatrix<f64>, Vec<f64>) {
        // Invented: class 1 shifted right, both with some spread.
        let x = DMatrix::from_row_slice(8, 1, &[0.0, 1.0, 2.0, 1.5, 2.5, 3.0, 4.0, 3.5]);
        (x, vec![0.0, 0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 1.0])
    }

    #[test]
    fn one_feature_linear_posterior_by_hand() {
        // Hand-computed: means 1.125 and 3.25, pooled variance (scatters
        // 2.1875 and 1.25 over n = 8), equal priors; at x the log-odds are
        // (m1 − m0)(x − (m0 + m1)/2) / σ².
        let (x, y) = two_classes();
        let model = Discriminant {
            features: vec!["x".into()],
            shapes: vec!["linear"],
        };
        let fit = &model.fit_classes(&x, &y, &x, false, 2).unwrap()[0];
        let variance = (2.1875 + 1.25) / 8.0;
        for i in 0..8 {
            let log_odds = (3.25 - 1.125) * (x[(i, 0)] - (1.125 + 3.25) / 2.0) / variance;
            let expected = 1.0 / (1.0 + (-log_odds).exp());
            let got = ClassPrediction { classes: 2 }.probabilities(&fit.eval_pred, i)[1];
            assert!(
                (got - expected).abs() < 1e-12,
                "row {i}: {got} vs {expected}"
            );
        }
        assert_eq!(fit.effective_df, 2.0);
    }

    #[test]
    fn grid_equals_separate_fits() {
        let (x, y) = two_classes();
        let both = Discriminant {
            features: vec!["x".into()],
            shapes: vec!["quadratic", "linear"],
        }
        .fit_classes(&x, &y, &x, true, 2)
        .unwrap();
        for (s, shape) in ["quadratic", "linear"].into_iter().enumerate() {
            let alone = Discriminant {
                features: vec!["x".into()],
                shapes: vec![shape],
            }
            .fit_classes(&x, &y, &x, true, 2)
            .unwrap();
            assert_eq!(both[s], alone[0]);
        }
    }

    #[test]
    fn a_class_with_one_row_fails_the_quadratic_shape_naming_it() {
        let x = DMatrix::from_row_slice(5, 1, &[0.0, 1.0, 2.0, 0.5, 5.0]);
        let y = [0.0, 0.0, 0.0, 0.0, 1.0];
        let model = Discriminant {
            features: vec!["x".into()],
            shapes: vec!["quadratic"],
        };
        let err = model.fit_classes(&x, &y, &x, false, 2).unwrap_err();
        assert!(
            matches!(err, FitError::SingularCovariance { class: 2, .. }),
            "{err}"
        );
        // The shared covariance still works, and an absent class gets 0.
        let linear = Discriminant {
            features: vec!["x".into()],
            shapes: vec!["linear"],
        };
        let fit = &linear.fit_classes(&x, &y, &x, false, 3).unwrap()[0];
        for i in 0..5 {
            assert_eq!(
                ClassPrediction { classes: 3 }.probabilities(&fit.eval_pred, i)[2],
                0.0
            );
        }
    }
}
