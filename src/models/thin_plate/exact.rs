//! The exact thin-plate smoother on n training points, for every penalty from
//! one eigen-decomposition.
//!
//! The minimiser of Σ(yᵢ − f(uᵢ))² + λJ(f) is f = Σ cᵢ η(‖u − uᵢ‖) + Td with
//! (E + λI)c + Td = y and Tᵀc = 0 (Wahba 1990, *Spline Models for
//! Observational Data*, §2.4). Writing c = Zγ with Z an orthonormal basis of
//! the null space of Tᵀ (from the QR of T) gives (ZᵀEZ + λI)γ = Zᵀy. With
//! ZᵀEZ = V diag(e) Vᵀ (symmetric, positive semi-definite for this η) and
//! W = ZV, α = Wᵀy:
//!
//! - c = W diag(1/(e + λ)) α, and d = R⁻¹ Q₁ᵀ(y − Ec);
//! - fitted values ŷ = Q₁Q₁ᵀy + W diag(e/(e + λ)) α;
//! - effective df = trace of the smoother = 3 + Σ e/(e + λ);
//! - leverages hᵢᵢ = Σ_{k<3} (Q₁)ᵢₖ² + Σₖ Wᵢₖ² e/(e + λ).
//!
//! Directions with e ≤ n·ε·max e carry no roughness the data can see (they
//! arise from repeated points, whose kernel rows are identical); they are
//! given weight 0, which is the limit λ → 0⁺ and changes no prediction.
//!
//! The eigenvectors are needed only for leverages and for λ = 0. Otherwise
//! ZᵀEZ is reduced to tridiagonal form T = QᵀZᵀEZQ once ([`TridiagonalForm`]):
//! the effective df is 3 + (n − 3) − λ tr((T + λI)⁻¹), O(n) per penalty, and
//! c = ZQ(T + λI)⁻¹QᵀZᵀy costs O(n²), after a reduction with a fraction of
//! the work of the eigen-decomposition. The visible directions are counted
//! by a Sturm sequence at the same threshold.

use nalgebra::{DMatrix, SymmetricEigen};

use super::plane::PlaneQr;
use super::tridiagonal::TridiagonalForm;
use super::{kernel, trace, weight, Surface};
use crate::error::FitError;

/// How the reduced kernel ZᵀEZ is held.
#[derive(Debug)]
enum Spectral {
    /// Eigenvalues e (invisible directions set to 0), eigenvectors lifted
    /// to W = ZV, and α = Wᵀy.
    Eigen {
        strengths: Vec<f64>,
        directions: DMatrix<f64>,
        alpha: Vec<f64>,
    },
    /// Tridiagonal form, QᵀZᵀy, and the number of visible directions.
    Tridiagonal {
        form: TridiagonalForm,
        rotated: Vec<f64>,
        visible: usize,
    },
}

/// One fold's factorisation, ready for any penalty.
#[derive(Debug)]
pub(super) struct ExactPath {
    /// E: η between every pair of training points (the centres).
    pub(super) kernel: DMatrix<f64>,
    plane: PlaneQr,
    spectral: Spectral,
    y: Vec<f64>,
}

impl ExactPath {
    /// Factorises the fold; `points` are the standardised training points.
    /// `eigenvectors` is needed for leverages and for a penalty of 0; without
    /// it every penalty must be positive.
    pub(super) fn new(
        points: &[[f64; 2]],
        y: &[f64],
        eigenvectors: bool,
        setting: &str,
    ) -> Result<Self, FitError> {
        let plane = PlaneQr::new(points).ok_or_else(|| FitError::CollinearPoints {
            setting: setting.to_string(),
        })?;
        let kernel = kernel(points, points);
        let reduced = plane.reduce(&kernel);
        let dim = reduced.nrows();
        // Directions with e at or below this carry no visible roughness.
        let threshold = |largest: f64| points.len() as f64 * f64::EPSILON * largest;
        let spectral = if eigenvectors {
            let (values, vectors) = if dim == 0 {
                (Vec::new(), DMatrix::zeros(0, 0))
            } else {
                let eigen = SymmetricEigen::try_new(reduced, f64::EPSILON, 100 * dim.max(10))
                    .ok_or_else(|| FitError::NoConvergence {
                        setting: setting.to_string(),
                        what: "eigen-decomposition of the thin-plate kernel",
                    })?;
                (
                    eigen.eigenvalues.iter().copied().collect(),
                    eigen.eigenvectors,
                )
            };
            let largest = values.iter().fold(0.0_f64, |m, &e: &f64| m.max(e.abs()));
            let tolerance = threshold(largest);
            let strengths = values
                .iter()
                .map(|&e| if e > tolerance { e } else { 0.0 })
                .collect();
            let directions = plane.lift(&vectors);
            let alpha = directions
                .column_iter()
                .map(|w| w.iter().zip(y).map(|(a, b)| a * b).sum())
                .collect();
            Spectral::Eigen {
                strengths,
                directions,
                alpha,
            }
        } else {
            let form = TridiagonalForm::new(reduced);
            let mut projected = y.to_vec();
            plane.apply_qt(&mut projected);
            let mut rotated = projected[3..].to_vec();
            form.apply_qt(&mut rotated);
            // The smallest positive double keeps an all-zero T's count at 0.
            let tolerance = threshold(form.norm_bound()).max(f64::MIN_POSITIVE);
            let visible = dim - form.count_below(tolerance);
            Spectral::Tridiagonal {
                form,
                rotated,
                visible,
            }
        };
        Ok(ExactPath {
            kernel,
            plane,
            spectral,
            y: y.to_vec(),
        })
    }

    /// The coefficients c of the kernel part for `penalty`.
    fn kernel_coefficients(&self, penalty: f64) -> Vec<f64> {
        let n = self.y.len();
        match &self.spectral {
            Spectral::Eigen {
                strengths,
                directions,
                alpha,
            } => {
                let mut delta = vec![0.0; n];
                for (k, w) in directions.column_iter().enumerate() {
                    let factor = coefficient_factor(strengths[k], penalty) * alpha[k];
                    for (c, wi) in delta.iter_mut().zip(w.iter()) {
                        *c += wi * factor;
                    }
                }
                delta
            }
            Spectral::Tridiagonal { form, rotated, .. } => {
                debug_assert!(penalty > 0.0, "a penalty of 0 needs the eigenvectors");
                let mut gamma = form.solve_shifted(penalty, rotated);
                form.apply_q(&mut gamma);
                let mut delta = vec![0.0; 3];
                delta.extend_from_slice(&gamma);
                self.plane.apply_q(&mut delta);
                delta
            }
        }
    }

    /// Effective df for `penalty`: 3 + Σ e/(e + λ).
    pub(super) fn trace(&self, penalty: f64) -> f64 {
        match &self.spectral {
            Spectral::Eigen { strengths, .. } => trace(strengths, penalty),
            // λ = 0 never reaches this route's solves; its trace is the limit.
            Spectral::Tridiagonal { visible, .. } if penalty <= 0.0 => 3.0 + *visible as f64,
            Spectral::Tridiagonal { form, .. } => {
                let m = form.diagonal.len() as f64;
                3.0 + m - penalty * form.inverse_trace(penalty)
            }
        }
    }

    /// Directions the data see: the largest effective df is 3 + this.
    pub(super) fn visible(&self) -> usize {
        match &self.spectral {
            Spectral::Eigen { strengths, .. } => strengths.iter().filter(|&&s| s > 0.0).count(),
            Spectral::Tridiagonal { visible, .. } => *visible,
        }
    }

    /// A typical strength (the mean eigenvalue), where the search for a
    /// df's penalty starts.
    pub(super) fn typical_strength(&self) -> f64 {
        let (total, count) = match &self.spectral {
            Spectral::Eigen { strengths, .. } => (strengths.iter().sum::<f64>(), strengths.len()),
            Spectral::Tridiagonal { form, .. } => {
                (form.diagonal.iter().sum::<f64>(), form.diagonal.len())
            }
        };
        total / count.max(1) as f64
    }

    /// The fitted surface for `penalty` (centres: the training points).
    pub(super) fn surface(&self, penalty: f64) -> Surface {
        let delta = self.kernel_coefficients(penalty);
        let mut residual = self.y.clone();
        for (j, column) in self.kernel.column_iter().enumerate() {
            let cj = delta[j];
            for (r, e) in residual.iter_mut().zip(column.iter()) {
                *r -= e * cj;
            }
        }
        self.plane.apply_qt(&mut residual);
        let plane = self.plane.solve_r([residual[0], residual[1], residual[2]]);
        Surface { delta, plane }
    }

    /// Hat-matrix diagonal for `penalty`; `None` unless built with eigenvectors.
    pub(super) fn leverages(&self, penalty: f64) -> Option<Vec<f64>> {
        let Spectral::Eigen {
            strengths,
            directions,
            ..
        } = &self.spectral
        else {
            return None;
        };
        let basis = self.plane.plane_basis();
        let mut leverages: Vec<f64> = basis
            .row_iter()
            .map(|row| row.iter().map(|q| q * q).sum())
            .collect();
        for (k, w) in directions.column_iter().enumerate() {
            let t = weight(strengths[k], penalty);
            for (h, wi) in leverages.iter_mut().zip(w.iter()) {
                *h += wi * wi * t;
            }
        }
        Some(leverages)
    }
}

/// 1/(e + λ) for a visible direction, 0 for an invisible one.
fn coefficient_factor(strength: f64, penalty: f64) -> f64 {
    if strength > 0.0 {
        1.0 / (strength + penalty)
    } else {
        0.0
    }
}
