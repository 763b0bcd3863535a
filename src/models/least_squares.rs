//! Least squares for nested designs by one Householder QR.
//!
//! For a design X = [X₁ X₂ …] whose leading columns form smaller models, the
//! QR factorisation X = QR also factorises every leading block: the fit on the
//! first m columns solves R[..m, ..m] β = (Qᵀy)[..m] (Golub & Van Loan,
//! *Matrix Computations*, 4th ed., §5.3). So one factorisation serves a whole
//! grid of polynomial degrees. Callers pass well-scaled columns (centred and
//! scaled, or Chebyshev on [-1, 1]); the normal equations are never formed.

use nalgebra::{DMatrix, DVector};

use super::double_double::DoubleDouble;

/// A factorised design with `Qᵀy` ready for any leading block of columns.
pub(crate) struct NestedLeastSquares {
    r: DMatrix<f64>,
    q_t_y: DVector<f64>,
    /// |R_ii| below this means the column adds nothing new.
    rank_tolerance: f64,
}

impl NestedLeastSquares {
    /// Factorises `design` (rows ≥ columns) and applies Qᵀ to `y`.
    pub(crate) fn new(design: DMatrix<f64>, y: &[f64]) -> Self {
        let (rows, cols) = design.shape();
        debug_assert!(rows >= cols, "caller checks the row count");
        let qr = design.qr();
        let r = qr.r();
        let mut q_t_y = DVector::from_column_slice(y);
        qr.q_tr_mul(&mut q_t_y);
        let largest = r.diagonal().iter().fold(0.0_f64, |m, d| m.max(d.abs()));
        // Same rule as common rank estimators (e.g. numpy's matrix_rank):
        // max(rows, cols) · ε · largest |R_ii|.
        let rank_tolerance = rows.max(cols) as f64 * f64::EPSILON * largest;
        NestedLeastSquares {
            r,
            q_t_y,
            rank_tolerance,
        }
    }

    /// Coefficients of the fit on the first `m` columns, or the 0-based index
    /// of the first column that is (numerically) a combination of earlier ones.
    pub(crate) fn solve_leading(&self, m: usize) -> Result<DVector<f64>, usize> {
        if let Some(i) = (0..m).find(|&i| {
            let diagonal = self.r[(i, i)];
            diagonal.abs() <= self.rank_tolerance || !diagonal.is_finite()
        }) {
            return Err(i);
        }
        Ok(DVector::from_vec(
            self.back_substitute(&self.q_t_y.as_slice()[..m]),
        ))
    }

    /// Solves R[..m, ..m] x = rhs (m = rhs.len()) by back substitution.
    fn back_substitute(&self, rhs: &[f64]) -> Vec<f64> {
        let m = rhs.len();
        let mut x = vec![0.0; m];
        for i in (0..m).rev() {
            let tail: f64 = (i + 1..m).map(|j| self.r[(i, j)] * x[j]).sum();
            x[i] = (rhs[i] - tail) / self.r[(i, i)];
        }
        x
    }

    /// Solves R[..m, ..m]ᵀ x = rhs by forward substitution.
    fn solve_transposed(&self, rhs: &[f64]) -> Vec<f64> {
        let m = rhs.len();
        let mut x = vec![0.0; m];
        for i in 0..m {
            let head: f64 = (0..i).map(|j| self.r[(j, i)] * x[j]).sum();
            x[i] = (rhs[i] - head) / self.r[(i, i)];
        }
        x
    }
}

/// Iterative refinement of raw-unit coefficients by corrected seminormal
/// equations (Björck 1987, "Stability analysis of the method of seminormal
/// equations for linear least squares problems", Linear Algebra Appl. 88/89).
///
/// The fit is solved on a well-conditioned basis Z with coefficients γ and
/// reported in the raw basis X (raw powers, raw columns) as β = Cγ, so
/// X = ZC⁻¹ and (XᵀX)⁻¹ = C(RᵀR)⁻¹Cᵀ with R from Z's QR. Each step computes
/// g = Xᵀ(y − Xβ) in double-double arithmetic, where X's entries are exact or
/// nearly so, and adds C R⁻¹R⁻ᵀ Cᵀ g to β. This removes the rounding that a
/// double-precision fit on Z leaves in β when residuals are large (Wampler5)
/// or the raw basis cancels heavily (Filip).
pub(crate) struct RawRefinement<'a> {
    /// Maps basis coefficients γ to raw coefficients β (linear).
    pub(crate) to_raw: &'a dyn Fn(&[f64]) -> Vec<f64>,
    /// Where g = Xᵀ(y − Xβ) comes from.
    pub(crate) sums: RawSums<'a>,
}

/// The two ways to form g = Xᵀ(y − Xβ) in double-double arithmetic: the
/// same quantity, with rounding errors of the same order (each entry's
/// error is a few units of 2⁻¹⁰⁶ times Σₖ |XᵀX|ⱼₖ|βₖ| + |Xᵀy|ⱼ either way).
pub(crate) enum RawSums<'a> {
    /// A pass over the rows per step: row i's residual, then its share of g.
    Rows {
        /// Writes row `i` of the raw design, in double-double, into the
        /// slice (one entry per raw coefficient). Rows are formed as they are
        /// needed: holding the whole raw design would cost 16 bytes per entry.
        raw_row: &'a dyn Fn(usize, &mut [DoubleDouble]),
        rows: usize,
        y: &'a [f64],
    },
    /// From the moments XᵀX and Xᵀy, formed once in one pass: g = Xᵀy − XᵀXβ,
    /// O(p²) per step instead of a pass over the rows. `positions[k]` is
    /// where raw coefficient k sits among the moments' columns, so one set
    /// of moments of the largest design serves every fit of a grid whose
    /// raw columns are among its columns.
    Moments {
        moments: &'a RawMoments,
        positions: &'a [usize],
    },
}

/// XᵀX (upper triangle, row-major) and Xᵀy of a raw design, summed row by
/// row in double-double arithmetic.
pub(crate) struct RawMoments {
    width: usize,
    gram: Vec<DoubleDouble>,
    cross: Vec<DoubleDouble>,
}

impl RawMoments {
    /// The moments of the `rows` rows that `raw_row` writes (`width` entries
    /// each) against `y`.
    pub(crate) fn of(
        raw_row: &dyn Fn(usize, &mut [DoubleDouble]),
        rows: usize,
        y: &[f64],
        width: usize,
    ) -> Self {
        let mut gram = vec![DoubleDouble::ZERO; width * width];
        let mut cross = vec![DoubleDouble::ZERO; width];
        let mut row = vec![DoubleDouble::ZERO; width];
        for (i, &yi) in y.iter().enumerate().take(rows) {
            raw_row(i, &mut row);
            for (j, &entry) in row.iter().enumerate() {
                cross[j] = cross[j].add(entry.mul_f64(yi));
                let upper = &mut gram[j * width + j..(j + 1) * width];
                for (sum, &other) in upper.iter_mut().zip(&row[j..]) {
                    *sum = sum.add(entry.mul(other));
                }
            }
        }
        RawMoments { width, gram, cross }
    }

    fn gram(&self, a: usize, b: usize) -> DoubleDouble {
        let (a, b) = (a.min(b), a.max(b));
        self.gram[a * self.width + b]
    }
}

/// Whether one set of moments of a `largest`-column raw design costs less
/// than passes over the rows for fits of `widths` columns: about p²/2
/// double-double products per row once, against about 3 passes of 2p each.
pub(crate) fn moments_pay(largest: usize, widths: impl Iterator<Item = usize>) -> bool {
    largest * largest / 2 < 6 * widths.sum::<usize>()
}

impl NestedLeastSquares {
    /// Raw coefficients of the fit on the first `m` basis columns, refined.
    pub(crate) fn refined_raw(
        &self,
        m: usize,
        gamma: &[f64],
        refine: &RawRefinement<'_>,
    ) -> Vec<f64> {
        let mut beta = (refine.to_raw)(gamma);
        let raw_len = beta.len();
        // Columns of C, from the images of the unit vectors.
        let c_columns: Vec<Vec<f64>> = (0..m)
            .map(|j| {
                let mut unit = vec![0.0; m];
                unit[j] = 1.0;
                (refine.to_raw)(&unit)
            })
            .collect();
        for _ in 0..3 {
            let g = match &refine.sums {
                RawSums::Rows { raw_row, rows, y } => {
                    let mut g = vec![DoubleDouble::ZERO; raw_len];
                    let mut row = vec![DoubleDouble::ZERO; raw_len];
                    for (i, &yi) in y.iter().enumerate().take(*rows) {
                        raw_row(i, &mut row);
                        let mut residual = DoubleDouble::from_f64(yi);
                        for (entry, b) in row.iter().zip(&beta) {
                            residual = residual.add(entry.mul_f64(*b).neg());
                        }
                        for (gk, entry) in g.iter_mut().zip(&row) {
                            *gk = gk.add(entry.mul(residual));
                        }
                    }
                    g
                }
                RawSums::Moments { moments, positions } => positions
                    .iter()
                    .map(|&j| {
                        let mut gj = moments.cross[j];
                        for (&k, &b) in positions.iter().zip(&beta) {
                            gj = gj.add(moments.gram(j, k).mul_f64(b).neg());
                        }
                        gj
                    })
                    .collect(),
            };
            // h = Cᵀ g, then R⁻¹ R⁻ᵀ h, then back to raw units.
            let h: Vec<f64> = c_columns
                .iter()
                .map(|column| column.iter().zip(&g).map(|(c, gk)| c * gk.to_f64()).sum())
                .collect();
            let u = self.solve_transposed(&h);
            let delta_gamma = self.back_substitute(&u);
            let delta_beta = (refine.to_raw)(&delta_gamma);
            let mut changed = false;
            for (b, d) in beta.iter_mut().zip(delta_beta) {
                let updated = *b + d;
                changed |= updated != *b;
                *b = updated;
            }
            if !changed {
                break;
            }
        }
        beta
    }
}

/// Leverages of every leading block: entry (i, m − 1) is the hat-matrix
/// diagonal hᵢᵢ of the fit on the first m columns, Σ_{j<m} Q_ij² with Q the
/// thin orthogonal factor (nested for the same reason as the coefficients).
pub(crate) fn cumulative_leverages(design: &DMatrix<f64>) -> DMatrix<f64> {
    let q = design.clone().qr().q();
    let mut leverages = DMatrix::zeros(q.nrows(), q.ncols());
    for i in 0..q.nrows() {
        let mut total = 0.0;
        for j in 0..q.ncols() {
            total += q[(i, j)] * q[(i, j)];
            leverages[(i, j)] = total;
        }
    }
    leverages
}

/// `design[.., ..m] · beta`, summed in column order.
pub(crate) fn predict_leading(design: &DMatrix<f64>, beta: &DVector<f64>) -> Vec<f64> {
    let m = beta.len();
    (0..design.nrows())
        .map(|i| (0..m).map(|j| design[(i, j)] * beta[j]).sum())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn leading_blocks_equal_separate_fits() {
        // Identity of the trade (nested QR): fitting on the first m columns of
        // one factorisation equals factorising those columns alone.
        let x: Vec<f64> = (0..12).map(|i| i as f64 / 11.0 * 2.0 - 1.0).collect();
        let y: Vec<f64> = x.iter().map(|v| (3.0 * v).sin() + 0.1 * v).collect();
        let design = DMatrix::from_fn(12, 4, |i, j| x[i].powi(j as i32));
        let nested = NestedLeastSquares::new(design.clone(), &y);
        for m in 1..=4 {
            let alone = NestedLeastSquares::new(design.columns(0, m).into_owned(), &y);
            let a = nested.solve_leading(m).unwrap();
            let b = alone.solve_leading(m).unwrap();
            for (u, v) in a.iter().zip(b.iter()) {
                assert!((u - v).abs() <= 1e-12 * v.abs().max(1.0), "{u} vs {v}");
            }
        }
    }

    #[test]
    fn a_repeated_column_is_reported() {
        // Columns: 1, i, and i again: the third adds nothing.
        let design = DMatrix::from_fn(6, 3, |i, j| if j == 0 { 1.0 } else { i as f64 });
        let y = [1.0, 2.0, 3.0, 5.0, 8.0, 13.0];
        let ls = NestedLeastSquares::new(design, &y);
        assert!(ls.solve_leading(2).is_ok());
        assert_eq!(ls.solve_leading(3).unwrap_err(), 2);
    }
}
