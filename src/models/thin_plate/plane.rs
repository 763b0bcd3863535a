//! Householder QR of the plane design T = [1, u, v] (n × 3) and what it gives:
//! Qᵀx, Qx, and the reduction of a symmetric matrix to the null space of Tᵀ,
//! (QᵀEQ)[3.., 3..] = ZᵀEZ with Z = Q[.., 3..] (Golub & Van Loan, *Matrix
//! Computations*, 4th ed., §5.1–5.2 for the reflections, §8.3.1 for the
//! symmetric two-sided update).

use nalgebra::DMatrix;

/// Q as three Householder reflections H_k = I − β_k v_k v_kᵀ (Q = H₀H₁H₂), and R.
#[derive(Debug, Clone)]
pub(super) struct PlaneQr {
    /// Each of full length n, zero above its own index.
    vectors: [Vec<f64>; 3],
    betas: [f64; 3],
    /// Upper triangle of R.
    r: [[f64; 3]; 3],
}

impl PlaneQr {
    /// Factorises [1, u, v] of `points`; `None` when the points lie on one line
    /// (or coincide), judged by |R_kk| ≤ 10⁻¹⁰ × the norm of column k.
    pub(super) fn new(points: &[[f64; 2]]) -> Option<Self> {
        let n = points.len();
        if n < 3 {
            return None;
        }
        let mut columns: [Vec<f64>; 3] = [
            vec![1.0; n],
            points.iter().map(|p| p[0]).collect(),
            points.iter().map(|p| p[1]).collect(),
        ];
        let norms: Vec<f64> = columns
            .iter()
            .map(|c| c.iter().map(|v| v * v).sum::<f64>().sqrt())
            .collect();
        let mut vectors: [Vec<f64>; 3] = [vec![0.0; n], vec![0.0; n], vec![0.0; n]];
        let mut betas = [0.0; 3];
        let mut r = [[0.0; 3]; 3];
        for k in 0..3 {
            let norm = columns[k][k..].iter().map(|v| v * v).sum::<f64>().sqrt();
            if norm <= 1e-10 * norms[k] || norm == 0.0 {
                return None;
            }
            let head = columns[k][k];
            let alpha = if head >= 0.0 { -norm } else { norm };
            let mut v = vec![0.0; n];
            v[k..].copy_from_slice(&columns[k][k..]);
            v[k] -= alpha;
            let vv: f64 = v[k..].iter().map(|x| x * x).sum();
            let beta = 2.0 / vv;
            r[k][k] = alpha;
            for j in k + 1..3 {
                reflect(&v, beta, k, &mut columns[j]);
                r[k][j] = columns[j][k];
            }
            vectors[k] = v;
            betas[k] = beta;
        }
        Some(PlaneQr { vectors, betas, r })
    }

    /// x ← Qᵀx.
    pub(super) fn apply_qt(&self, x: &mut [f64]) {
        for k in 0..3 {
            reflect(&self.vectors[k], self.betas[k], k, x);
        }
    }

    /// x ← Qx.
    pub(super) fn apply_q(&self, x: &mut [f64]) {
        for k in (0..3).rev() {
            reflect(&self.vectors[k], self.betas[k], k, x);
        }
    }

    /// Solves R d = rhs (3 × 3, upper triangular).
    pub(super) fn solve_r(&self, rhs: [f64; 3]) -> [f64; 3] {
        solve_upper(&self.r, rhs)
    }

    /// ZᵀEZ for a symmetric n × n matrix E: the trailing (n−3) block of QᵀEQ.
    pub(super) fn reduce(&self, symmetric: &DMatrix<f64>) -> DMatrix<f64> {
        let n = symmetric.nrows();
        let mut f = symmetric.clone();
        // Column-major storage: entry (i, j) sits at j·n + i.
        let data = f.as_mut_slice();
        for k in 0..3 {
            // H F H = F − v wᵀ − w vᵀ with p = βFv, w = p − (β vᵀp / 2) v.
            let v = &self.vectors[k];
            let beta = self.betas[k];
            let mut p = vec![0.0; n];
            for j in k..n {
                let vj = v[j];
                let column = &data[j * n..(j + 1) * n];
                for (pi, ci) in p[k..].iter_mut().zip(&column[k..]) {
                    *pi += ci * vj;
                }
            }
            p.iter_mut().for_each(|x| *x *= beta);
            let vp: f64 = v[k..].iter().zip(&p[k..]).map(|(a, b)| a * b).sum();
            let half = 0.5 * beta * vp;
            let w: Vec<f64> = p.iter().zip(v).map(|(pi, vi)| pi - half * vi).collect();
            for j in k..n {
                let (vj, wj) = (v[j], w[j]);
                let column = &mut data[j * n..(j + 1) * n];
                for ((c, vi), wi) in column[k..].iter_mut().zip(&v[k..]).zip(&w[k..]) {
                    *c -= vi * wj + wi * vj;
                }
            }
        }
        f.view((3, 3), (n - 3, n - 3)).into_owned()
    }

    /// Q [0; M]: maps (n−3)-vectors in the columns of `m` to n-vectors in the
    /// null space of Tᵀ.
    pub(super) fn lift(&self, m: &DMatrix<f64>) -> DMatrix<f64> {
        let n = m.nrows() + 3;
        let mut out = DMatrix::zeros(n, m.ncols());
        for j in 0..m.ncols() {
            let mut column = vec![0.0; n];
            column[3..].copy_from_slice(m.column(j).as_slice());
            self.apply_q(&mut column);
            out.column_mut(j).copy_from_slice(&column);
        }
        out
    }

    /// The first three columns of Q (an orthonormal basis of the plane design).
    pub(super) fn plane_basis(&self) -> DMatrix<f64> {
        let n = self.vectors[0].len();
        let mut out = DMatrix::zeros(n, 3);
        for j in 0..3 {
            let mut column = vec![0.0; n];
            column[j] = 1.0;
            self.apply_q(&mut column);
            out.column_mut(j).copy_from_slice(&column);
        }
        out
    }
}

/// x[k..] ← (I − β v vᵀ) x[k..].
fn reflect(v: &[f64], beta: f64, k: usize, x: &mut [f64]) {
    let dot: f64 = v[k..].iter().zip(&x[k..]).map(|(a, b)| a * b).sum();
    let scale = beta * dot;
    for (xi, vi) in x[k..].iter_mut().zip(&v[k..]) {
        *xi -= scale * vi;
    }
}

/// Back substitution for a 3 × 3 upper-triangular system.
pub(super) fn solve_upper(r: &[[f64; 3]; 3], rhs: [f64; 3]) -> [f64; 3] {
    let mut x = [0.0; 3];
    for i in (0..3).rev() {
        let tail: f64 = (i + 1..3).map(|j| r[i][j] * x[j]).sum();
        x[i] = (rhs[i] - tail) / r[i][i];
    }
    x
}
