//! The low-rank thin-plate smoother, for folds above `exact_limit` rows: the
//! surface is restricted to f = Σⱼ δⱼ η(‖u − κⱼ‖) + Td over m knots κ with
//! T_κᵀδ = 0, and fitted by penalised least squares with the exact thin-plate
//! roughness of that surface, J(f) = δᵀE_κκδ (the knot-based low-rank thin
//! plate of Ruppert, Wand & Carroll, *Semiparametric Regression*, 2003,
//! §13.4–13.5; J from Duchon 1977).
//!
//! Reparametrisation: δ = Z_κ P Λ^{-1/2} θ, from the eigen-decomposition
//! Z_κᵀE_κκZ_κ = PΛPᵀ (directions with Λ ≤ m·ε·max Λ dropped), turns the
//! penalty into λ‖θ‖². The design X = [T, E_nκ Z_κ P Λ^{-1/2}] is factorised
//! once, X = QR; with R₂₂ = UΣVᵀ (its trailing block) and z = Qᵀy, every
//! penalty is a ridge step: θ = V diag(σ/(σ² + λ)) Uᵀz₂, the plane part
//! β₁ = R₁₁⁻¹(z₁ − R₁₂θ), effective df = 3 + Σ σ²/(σ² + λ), leverages
//! Σ_{k<3} Qᵢₖ² + Σₖ (Q₂U)ᵢₖ² σ²/(σ² + λ). With every training point a knot
//! this is the exact smoother again.
//!
//! Knot choice: every training row gets the priority blake3 (keyed by
//! derivation from the context string below) of its two raw feature values'
//! IEEE-754 bits (little-endian, −0 read as +0); rows are taken in ascending
//! priority (ties: the bits, then the row index), skipping points already
//! taken, until `knots` distinct points are chosen. The choice depends on the
//! set of points only, not on row order, and follows the data's density like a
//! random subsample would.

use std::collections::BTreeSet;

use nalgebra::{DMatrix, SymmetricEigen, SVD};

use super::plane::{solve_upper, PlaneQr};
use super::{kernel, product, trace, weight, Surface};
use crate::error::FitError;

/// Context string of the knot priority (blake3 key derivation).
const KNOT_CONTEXT: &str = "heldout 2025 thin-plate knot priority v1";

/// Rows of the distinct points chosen as knots, in priority order.
pub(super) fn knot_rows(x: &DMatrix<f64>, count: usize) -> Vec<usize> {
    let bits = |i: usize| -> (u64, u64) {
        // Adding +0.0 turns −0.0 into +0.0, so equal values get equal bits.
        ((x[(i, 0)] + 0.0).to_bits(), (x[(i, 1)] + 0.0).to_bits())
    };
    let mut keyed: Vec<([u8; 32], (u64, u64), usize)> = (0..x.nrows())
        .map(|i| {
            let (a, b) = bits(i);
            let mut hasher = blake3::Hasher::new_derive_key(KNOT_CONTEXT);
            hasher.update(&a.to_le_bytes());
            hasher.update(&b.to_le_bytes());
            (*hasher.finalize().as_bytes(), (a, b), i)
        })
        .collect();
    keyed.sort_unstable();
    let mut taken = BTreeSet::new();
    let mut rows = Vec::with_capacity(count.min(x.nrows()));
    for (_, point, row) in keyed {
        if rows.len() == count {
            break;
        }
        if taken.insert(point) {
            rows.push(row);
        }
    }
    rows
}

/// One fold's factorisation on a knot basis, ready for any penalty.
#[derive(Debug)]
pub(super) struct LowRankPath {
    /// Standardised knots (the centres of the surface).
    pub(super) knots: Vec<[f64; 2]>,
    /// E_nκ: η between training points and knots.
    pub(super) kernel: DMatrix<f64>,
    /// Z_κ P Λ^{-1/2}: maps θ to δ.
    to_delta: DMatrix<f64>,
    r11: [[f64; 3]; 3],
    r12: DMatrix<f64>,
    z1: [f64; 3],
    sigma: Vec<f64>,
    /// Uᵀz₂.
    rotated: Vec<f64>,
    v: DMatrix<f64>,
    /// σ², with the invisible directions set to 0.
    strengths: Vec<f64>,
    /// [Q₁, Q₂U], kept only when leverages are wanted.
    leverage_basis: Option<DMatrix<f64>>,
}

impl LowRankPath {
    /// Factorises the fold on the given standardised `knots`.
    pub(super) fn new(
        points: &[[f64; 2]],
        y: &[f64],
        knots: Vec<[f64; 2]>,
        want_leverages: bool,
        setting: &str,
    ) -> Result<Self, FitError> {
        let collinear = || FitError::CollinearPoints {
            setting: setting.to_string(),
        };
        let knot_plane = PlaneQr::new(&knots).ok_or_else(collinear)?;
        let reduced = knot_plane.reduce(&kernel(&knots, &knots));
        let dim = reduced.nrows();
        let no_convergence = |what| FitError::NoConvergence {
            setting: setting.to_string(),
            what,
        };
        let (values, vectors) = if dim == 0 {
            (Vec::new(), DMatrix::zeros(0, 0))
        } else {
            let eigen = SymmetricEigen::try_new(reduced, f64::EPSILON, 100 * dim.max(10))
                .ok_or_else(|| no_convergence("eigen-decomposition of the knot penalty"))?;
            (
                eigen.eigenvalues.iter().copied().collect(),
                eigen.eigenvectors,
            )
        };
        let largest = values.iter().fold(0.0_f64, |m, &e: &f64| m.max(e.abs()));
        let tolerance = knots.len() as f64 * f64::EPSILON * largest;
        let kept: Vec<usize> = (0..values.len())
            .filter(|&k| values[k] > tolerance)
            .collect();
        let scaled = DMatrix::from_fn(dim, kept.len(), |i, c| {
            vectors[(i, kept[c])] / values[kept[c]].sqrt()
        });
        let to_delta = knot_plane.lift(&scaled);

        let kernel = kernel(points, &knots);
        let rank = kept.len();
        let n = points.len();
        let spline_part = product(&kernel, &to_delta);
        let mut design = DMatrix::zeros(n, 3 + rank);
        for (i, p) in points.iter().enumerate() {
            design[(i, 0)] = 1.0;
            design[(i, 1)] = p[0];
            design[(i, 2)] = p[1];
        }
        design.columns_mut(3, rank).copy_from(&spline_part);
        let qr = design.qr();
        let r = qr.r();
        let mut z = nalgebra::DVector::from_column_slice(y);
        qr.q_tr_mul(&mut z);
        let column_norm = (n as f64).sqrt();
        if (0..3).any(|k| r[(k, k)].abs() <= 1e-10 * column_norm) {
            return Err(collinear());
        }
        let mut r11 = [[0.0; 3]; 3];
        for (i, row) in r11.iter_mut().enumerate() {
            for (j, entry) in row.iter_mut().enumerate().skip(i) {
                *entry = r[(i, j)];
            }
        }
        let r12 = r.view((0, 3), (3, rank)).into_owned();
        let r22 = r.view((3, 3), (rank, rank)).into_owned();
        let (sigma, u, v) = if rank == 0 {
            (Vec::new(), DMatrix::zeros(0, 0), DMatrix::zeros(0, 0))
        } else {
            let svd = SVD::try_new(r22, true, true, f64::EPSILON, 100 * rank.max(10))
                .ok_or_else(|| no_convergence("singular value decomposition of the knot design"))?;
            let u = svd
                .u
                .ok_or_else(|| no_convergence("left singular vectors"))?;
            let v_t = svd
                .v_t
                .ok_or_else(|| no_convergence("right singular vectors"))?;
            (
                svd.singular_values.iter().copied().collect(),
                u,
                v_t.transpose(),
            )
        };
        let sigma_max = sigma.iter().fold(0.0_f64, |m, &s: &f64| m.max(s));
        let sigma_tolerance = (3 + rank) as f64 * f64::EPSILON * sigma_max;
        let strengths = sigma
            .iter()
            .map(|&s| if s > sigma_tolerance { s * s } else { 0.0 })
            .collect();
        let z2 = &z.as_slice()[3..3 + rank];
        let rotated = u
            .column_iter()
            .map(|column| column.iter().zip(z2).map(|(a, b)| a * b).sum())
            .collect();
        let leverage_basis = want_leverages.then(|| {
            let q = qr.q();
            let mut basis = DMatrix::zeros(n, 3 + rank);
            basis.columns_mut(0, 3).copy_from(&q.columns(0, 3));
            basis
                .columns_mut(3, rank)
                .copy_from(&product(&q.columns(3, rank).into_owned(), &u));
            basis
        });
        Ok(LowRankPath {
            knots,
            kernel,
            to_delta,
            r11,
            r12,
            z1: [z[0], z[1], z[2]],
            sigma,
            rotated,
            v,
            strengths,
            leverage_basis,
        })
    }

    /// Effective df for `penalty`: 3 + Σ σ²/(σ² + λ).
    pub(super) fn trace(&self, penalty: f64) -> f64 {
        trace(&self.strengths, penalty)
    }

    /// Directions the data see: the largest effective df is 3 + this.
    pub(super) fn visible(&self) -> usize {
        self.strengths.iter().filter(|&&s| s > 0.0).count()
    }

    /// The mean of σ², where the search for a df's penalty starts.
    pub(super) fn typical_strength(&self) -> f64 {
        self.strengths.iter().sum::<f64>() / self.strengths.len().max(1) as f64
    }

    /// The fitted surface for `penalty` (centres: the knots).
    pub(super) fn surface(&self, penalty: f64) -> Surface {
        let rank = self.sigma.len();
        let mut theta = vec![0.0; rank];
        for (k, column) in self.v.column_iter().enumerate() {
            let s = self.sigma[k];
            let factor = if self.strengths[k] > 0.0 {
                s / (s * s + penalty) * self.rotated[k]
            } else {
                0.0
            };
            for (t, vk) in theta.iter_mut().zip(column.iter()) {
                *t += vk * factor;
            }
        }
        let mut rhs = self.z1;
        for (i, r) in rhs.iter_mut().enumerate() {
            let coupled: f64 = (0..rank).map(|k| self.r12[(i, k)] * theta[k]).sum();
            *r -= coupled;
        }
        let plane = solve_upper(&self.r11, rhs);
        let mut delta = vec![0.0; self.knots.len()];
        for (k, column) in self.to_delta.column_iter().enumerate() {
            let tk = theta[k];
            for (d, g) in delta.iter_mut().zip(column.iter()) {
                *d += g * tk;
            }
        }
        Surface { delta, plane }
    }

    /// Hat-matrix diagonal for `penalty`; `None` unless built with leverages.
    pub(super) fn leverages(&self, penalty: f64) -> Option<Vec<f64>> {
        let basis = self.leverage_basis.as_ref()?;
        let mut leverages = vec![0.0; basis.nrows()];
        for (k, column) in basis.column_iter().enumerate() {
            let t = if k < 3 {
                1.0
            } else {
                weight(self.strengths[k - 3], penalty)
            };
            for (h, q) in leverages.iter_mut().zip(column.iter()) {
                *h += q * q * t;
            }
        }
        Some(leverages)
    }
}
