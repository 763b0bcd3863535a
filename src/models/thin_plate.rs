//! `thin-plate`: the thin-plate smoothing spline in two features, for a whole
//! grid of penalties (or of effective df) from one factorisation per fold.
//!
//! Both features are standardised on the training fold (mean 0, population
//! sd 1); u = (u, v) below are standardised coordinates. The fit minimises
//!
//! Σᵢ (yᵢ − f(uᵢ))² + λ J(f),  J(f) = ∫∫_ℝ² (f_uu² + 2 f_uv² + f_vv²) du dv
//!
//! (Duchon 1977, "Splines minimizing rotation-invariant semi-norms in Sobolev
//! spaces"; Wahba 1990, *Spline Models for Observational Data*, §2.4). The
//! minimiser is f(u) = Σᵢ cᵢ η(‖u − uᵢ‖) + d₀ + d₁u + d₂v with
//! η(r) = r² log r / (8π), the fundamental solution of the biharmonic
//! equation in the plane (Δ²η = δ), and Σcᵢ = Σcᵢuᵢ = Σcᵢvᵢ = 0. With that
//! constant J(f) = cᵀEc exactly, E = [η(‖uᵢ − uⱼ‖)], so the spec's `penalty`
//! is the λ of the criterion above, unscaled: no factor of n, no other
//! constant. (Criteria written with a mean, (1/n)Σ(…)² + λ'J, have λ = nλ'.)
//! As λ → 0 the fit interpolates distinct points; as λ → ∞ it tends to the
//! least-squares plane, effective df 3.
//!
//! Up to `exact_limit` training rows the exact smoother is used (module `exact`);
//! above, a low-rank one on `knots` knots (module `low_rank`). Both reduce every
//! penalty to weights s/(s + λ) on fixed directions, so effective df (the
//! smoother's trace) is 3 + Σ s/(s + λ), strictly decreasing in λ. A `df`
//! grid is turned into penalties by solving that equation for log λ:
//! bracketing by doubling steps from the mean strength, bisection to 10⁻¹² in
//! log λ (λ to 10⁻¹² relative), then one secant step inside the bracket.
//!
//! Products of dense matrices are written out here in a fixed order rather
//! than left to nalgebra's `*`, whose large products may use fused
//! multiply-add depending on the processor.

mod exact;
mod low_rank;
mod plane;
mod tridiagonal;

use nalgebra::DMatrix;

use super::registry::{
    FamilyDef, KeyDef, KeyDefault, KeyKind, SettingProblem, Settings, PENALTY, SMOOTHER_DF,
};
use super::{
    leave_one_out_rows, loo_from_leverage, mean_and_sd, require_spread, Family, FitRequest,
    LeaveOneOut, Setting, SettingFit, SmootherGrid,
};
use crate::error::FitError;
use exact::ExactPath;
use low_rank::{knot_rows, LowRankPath};

/// Thin-plate smoothing splines over a grid of penalties or effective df.
#[derive(Debug, Clone)]
pub(crate) struct ThinPlate {
    pub(crate) features: Vec<String>,
    pub(crate) grid: SmootherGrid,
    /// Knots of the low-rank fit.
    pub(crate) knots: usize,
    /// Largest training fold fitted exactly.
    pub(crate) exact_limit: usize,
}

/// Thin-plate defaults: exact up to this many training rows, then low rank.
pub(crate) const THIN_PLATE_EXACT_LIMIT: usize = 2000;
/// Thin-plate defaults: knots of the low-rank fit.
pub(crate) const THIN_PLATE_KNOTS: usize = 300;
/// Thin-plate bounds: fewest knots (a surface beyond the plane needs four).
const THIN_PLATE_MIN_KNOTS: usize = 4;
/// Thin-plate bounds: most knots, and the largest `exact_limit`.
const THIN_PLATE_MAX_ROWS: usize = 5000;

/// The registry entry of `thin-plate` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new(
    "thin-plate",
    &[
        PENALTY,
        SMOOTHER_DF,
        KeyDef::new(
            "knots",
            KeyKind::Count,
            "Knots of the low-rank fit used above `exact_limit` rows (4 to 5000).",
        )
        .or(KeyDefault::Count(THIN_PLATE_KNOTS)),
        KeyDef::new(
            "exact_limit",
            KeyKind::Count,
            "Largest training fold fitted exactly (at most 5000).",
        )
        .or(KeyDefault::Count(THIN_PLATE_EXACT_LIMIT)),
    ],
    build,
)
.about(
    "Thin-plate smoothing splines of two features, exact up to `exact_limit` rows, low rank above.",
)
.grid("df = [4, 6, 10, 16, 25]")
.takes_features(2);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    let grid = SmootherGrid::from_settings(settings)?;
    if let SmootherGrid::Df(values) = &grid {
        if let Some(df) = values.iter().find(|&&d| d <= 3.0) {
            return Err(SettingProblem::new(
                "df",
                format!(
                    "df = {df} must be above 3: every thin-plate surface contains the \
                     plane (3 df), reached only as the penalty grows without bound"
                ),
            ));
        }
    }
    let knots = settings.count("knots").unwrap_or(THIN_PLATE_KNOTS);
    if !(THIN_PLATE_MIN_KNOTS..=THIN_PLATE_MAX_ROWS).contains(&knots) {
        return Err(SettingProblem::new(
            "knots",
            format!("knots = {knots} is outside [{THIN_PLATE_MIN_KNOTS}, {THIN_PLATE_MAX_ROWS}]"),
        ));
    }
    let exact_limit = settings
        .count("exact_limit")
        .unwrap_or(THIN_PLATE_EXACT_LIMIT);
    if exact_limit > THIN_PLATE_MAX_ROWS {
        return Err(SettingProblem::new(
            "exact_limit",
            format!(
                "exact_limit = {exact_limit} is above {THIN_PLATE_MAX_ROWS}: the exact fit \
                 takes time growing as rows³ and memory as rows²; use knots instead"
            ),
        ));
    }
    Ok(Box::new(ThinPlate {
        features,
        grid,
        knots,
        exact_limit,
    }))
}

/// 1/(16π): η(r) = r² log r / (8π) = r² · log(r²) / (16π).
const RADIAL_SCALE: f64 = 1.0 / (16.0 * std::f64::consts::PI);

/// η as a function of the squared distance; η(0) = 0.
pub(crate) fn radial(squared_distance: f64) -> f64 {
    if squared_distance > 0.0 {
        squared_distance * libm::log(squared_distance) * RADIAL_SCALE
    } else {
        0.0
    }
}

/// [η(‖rowᵢ − centreⱼ‖)], rows × centres.
fn kernel(rows: &[[f64; 2]], centres: &[[f64; 2]]) -> DMatrix<f64> {
    DMatrix::from_fn(rows.len(), centres.len(), |i, j| {
        let du = rows[i][0] - centres[j][0];
        let dv = rows[i][1] - centres[j][1];
        radial(du * du + dv * dv)
    })
}

/// A·B summed over the inner index in ascending order, without fused
/// multiply-add. Rows go in chunks that stay in cache while every column of
/// B passes over them; the order of each sum is unchanged.
fn product(a: &DMatrix<f64>, b: &DMatrix<f64>) -> DMatrix<f64> {
    const CHUNK: usize = 256;
    let (rows, inner, cols) = (a.nrows(), a.ncols(), b.ncols());
    let mut out = DMatrix::zeros(rows, cols);
    let a_data = a.as_slice();
    let out_data = out.as_mut_slice();
    for start in (0..rows).step_by(CHUNK) {
        let end = (start + CHUNK).min(rows);
        for j in 0..cols {
            let out_column = &mut out_data[j * rows + start..j * rows + end];
            for k in 0..inner {
                let factor = b[(k, j)];
                let a_column = &a_data[k * rows + start..k * rows + end];
                for (o, x) in out_column.iter_mut().zip(a_column) {
                    *o += x * factor;
                }
            }
        }
    }
    out
}

/// s/(s + λ) for a direction the data see, 0 for one they do not.
fn weight(strength: f64, penalty: f64) -> f64 {
    if strength > 0.0 {
        strength / (strength + penalty)
    } else {
        0.0
    }
}

/// Effective df 3 + Σ s/(s + λ), summed in index order.
fn trace(strengths: &[f64], penalty: f64) -> f64 {
    3.0 + strengths.iter().map(|&s| weight(s, penalty)).sum::<f64>()
}

/// The penalty at which `trace` (decreasing in the penalty) equals `df`, or
/// `None` when df is outside (3, 3 + visible). Searched on log λ: doubling
/// steps from log(typical) until the root is bracketed, bisection to 10⁻¹²,
/// then one secant step inside the final bracket.
fn penalty_for_df(
    trace: impl Fn(f64) -> f64,
    df: f64,
    visible: usize,
    typical: f64,
) -> Option<f64> {
    if !(df > 3.0 && df < 3.0 + visible as f64) {
        return None;
    }
    let excess = |s: f64| trace(libm::exp(s)) - df;
    let start = if typical > 0.0 {
        libm::log(typical)
    } else {
        0.0
    };
    let (mut lo, mut hi) = (start, start);
    let mut step = 1.0;
    let mut g_lo = excess(lo);
    while g_lo <= 0.0 {
        lo -= step;
        step *= 2.0;
        g_lo = excess(lo);
        if step > 1e5 {
            return None;
        }
    }
    step = 1.0;
    let mut g_hi = excess(hi);
    while g_hi >= 0.0 {
        hi += step;
        step *= 2.0;
        g_hi = excess(hi);
        if step > 1e5 {
            return None;
        }
    }
    if g_lo.is_nan() || g_hi.is_nan() {
        return None;
    }
    while hi - lo > 1e-12 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        let g = excess(mid);
        if g > 0.0 {
            (lo, g_lo) = (mid, g);
        } else if g < 0.0 {
            (hi, g_hi) = (mid, g);
        } else if g == 0.0 {
            return Some(libm::exp(mid));
        } else {
            return None;
        }
    }
    Some(libm::exp(lo + (hi - lo) * g_lo / (g_lo - g_hi)))
}

/// Standardisation of the two features on the training fold.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Scaling {
    mean: [f64; 2],
    sd: [f64; 2],
}

impl Scaling {
    fn of(x: &DMatrix<f64>) -> Self {
        let (m0, s0) = mean_and_sd(x.column(0).iter().copied());
        let (m1, s1) = mean_and_sd(x.column(1).iter().copied());
        Scaling {
            mean: [m0, m1],
            sd: [s0, s1],
        }
    }

    fn point(&self, a: f64, b: f64) -> [f64; 2] {
        [
            (a - self.mean[0]) / self.sd[0],
            (b - self.mean[1]) / self.sd[1],
        ]
    }

    fn apply(&self, x: &DMatrix<f64>) -> Vec<[f64; 2]> {
        (0..x.nrows())
            .map(|i| self.point(x[(i, 0)], x[(i, 1)]))
            .collect()
    }
}

/// What a fold's fit depends on besides its rows' values: the scaling and,
/// for the low-rank fit, the knots (raw feature values). Fixed from all rows
/// for the leave-one-out shortcut.
#[derive(Debug, Clone, PartialEq)]
struct Basis {
    scaling: Scaling,
    knots: Option<Vec<[f64; 2]>>,
}

/// A fitted surface: Σⱼ δⱼ η(‖u − centreⱼ‖) + plane₀ + plane₁u + plane₂v.
#[derive(Debug, Clone)]
struct Surface {
    delta: Vec<f64>,
    plane: [f64; 3],
}

impl Surface {
    /// Values at `points`, given their kernel rows against the centres.
    fn predict(&self, kernel: &DMatrix<f64>, points: &[[f64; 2]]) -> Vec<f64> {
        let mut values = vec![0.0; points.len()];
        for (column, &d) in kernel.column_iter().zip(&self.delta) {
            for (value, k) in values.iter_mut().zip(column.iter()) {
                *value += k * d;
            }
        }
        for (value, p) in values.iter_mut().zip(points) {
            *value += self.plane[0] + self.plane[1] * p[0] + self.plane[2] * p[1];
        }
        values
    }
}

/// The exact or the low-rank factorisation of one fold.
#[derive(Debug)]
enum Path {
    Exact {
        path: ExactPath,
        points: Vec<[f64; 2]>,
    },
    LowRank(LowRankPath),
}

impl Path {
    /// Effective df for `penalty`.
    fn trace(&self, penalty: f64) -> f64 {
        match self {
            Path::Exact { path, .. } => path.trace(penalty),
            Path::LowRank(path) => path.trace(penalty),
        }
    }

    /// Directions the data see (the largest effective df is 3 + this).
    fn visible(&self) -> usize {
        match self {
            Path::Exact { path, .. } => path.visible(),
            Path::LowRank(path) => path.visible(),
        }
    }

    /// Where the search for a df's penalty starts.
    fn typical_strength(&self) -> f64 {
        match self {
            Path::Exact { path, .. } => path.typical_strength(),
            Path::LowRank(path) => path.typical_strength(),
        }
    }

    fn centres(&self) -> &[[f64; 2]] {
        match self {
            Path::Exact { points, .. } => points,
            Path::LowRank(path) => &path.knots,
        }
    }

    /// Kernel of the training points against the centres.
    fn train_kernel(&self) -> &DMatrix<f64> {
        match self {
            Path::Exact { path, .. } => &path.kernel,
            Path::LowRank(path) => &path.kernel,
        }
    }

    fn surface(&self, penalty: f64) -> Surface {
        match self {
            Path::Exact { path, .. } => path.surface(penalty),
            Path::LowRank(path) => path.surface(penalty),
        }
    }

    fn leverages(&self, penalty: f64) -> Option<Vec<f64>> {
        match self {
            Path::Exact { path, .. } => path.leverages(penalty),
            Path::LowRank(path) => path.leverages(penalty),
        }
    }
}

/// One setting's fit, with its leverages when asked for.
type FitWithLeverages = (SettingFit, Option<Vec<f64>>);

impl ThinPlate {
    /// Label for failures that concern the whole grid.
    const WHOLE_GRID: &'static str = "every setting";

    fn check_rows(&self, x_train: &DMatrix<f64>) -> Result<(), FitError> {
        if x_train.nrows() < 3 {
            return Err(FitError::TooFewRows {
                setting: Self::WHOLE_GRID.to_string(),
                needed: 3,
                available: x_train.nrows(),
            });
        }
        require_spread(
            &self.features,
            x_train,
            "it cannot be standardised for a thin-plate surface",
        )
    }

    /// Scaling from the training rows; knots too above `exact_limit`.
    fn basis_for(&self, x_train: &DMatrix<f64>) -> Basis {
        let knots = (x_train.nrows() > self.exact_limit).then(|| {
            knot_rows(x_train, self.knots)
                .into_iter()
                .map(|i| [x_train[(i, 0)], x_train[(i, 1)]])
                .collect()
        });
        Basis {
            scaling: Scaling::of(x_train),
            knots,
        }
    }

    /// The penalty of every setting, in grid order.
    fn penalties(&self, path: &Path, rows: usize) -> Result<Vec<f64>, FitError> {
        match &self.grid {
            SmootherGrid::Penalty(values) => Ok(values.clone()),
            SmootherGrid::Df(values) => values
                .iter()
                .map(|&df| {
                    let visible = path.visible();
                    let trace = |penalty| path.trace(penalty);
                    penalty_for_df(trace, df, visible, path.typical_strength()).ok_or_else(|| {
                        FitError::DfOutOfReach {
                            setting: Setting::real("df", df).to_string(),
                            lowest: 3.0,
                            highest: 3.0 + visible as f64,
                            rows,
                        }
                    })
                })
                .collect(),
        }
    }

    /// Fits every setting with a given basis; leverages when `with_leverages`.
    fn fit_with_basis(
        &self,
        basis: &Basis,
        x_train: &DMatrix<f64>,
        y_train: &[f64],
        x_eval: &DMatrix<f64>,
        final_fit: bool,
        with_leverages: bool,
    ) -> Result<Vec<FitWithLeverages>, FitError> {
        let points = basis.scaling.apply(x_train);
        let path = match &basis.knots {
            None => {
                // Eigenvectors only where the tridiagonal route cannot go.
                let zero_penalty = matches!(&self.grid,
                    SmootherGrid::Penalty(values) if values.contains(&0.0));
                Path::Exact {
                    path: ExactPath::new(
                        &points,
                        y_train,
                        with_leverages || zero_penalty,
                        Self::WHOLE_GRID,
                    )?,
                    points: points.clone(),
                }
            }
            Some(raw) => {
                let knots = raw
                    .iter()
                    .map(|k| basis.scaling.point(k[0], k[1]))
                    .collect();
                Path::LowRank(LowRankPath::new(
                    &points,
                    y_train,
                    knots,
                    with_leverages,
                    Self::WHOLE_GRID,
                )?)
            }
        };
        let penalties = self.penalties(&path, x_train.nrows())?;
        let eval_points = basis.scaling.apply(x_eval);
        let eval_kernel = kernel(&eval_points, path.centres());
        Ok(penalties
            .into_iter()
            .map(|penalty| {
                let surface = path.surface(penalty);
                let fit = SettingFit {
                    train_pred: if final_fit {
                        surface.predict(path.train_kernel(), &points)
                    } else {
                        Vec::new()
                    },
                    eval_pred: surface.predict(&eval_kernel, &eval_points),
                    effective_df: path.trace(penalty),
                    coefficients: None,
                };
                let leverages = if with_leverages {
                    path.leverages(penalty)
                } else {
                    None
                };
                (fit, leverages)
            })
            .collect())
    }
}

impl Family for ThinPlate {
    fn settings(&self) -> Vec<Setting> {
        self.grid.settings()
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        self.check_rows(x_train)?;
        let basis = self.basis_for(x_train);
        let fits = self.fit_with_basis(&basis, x_train, y_train, x_eval, final_fit, false)?;
        Ok(fits.into_iter().map(|(fit, _)| fit).collect())
    }

    /// Leave-one-out by the hat diagonal, with the scaling (and, above
    /// `exact_limit`, the knots) taken once from all the rows given: the
    /// fixed-design leave-one-out of Wahba (1990, §4.2). Each left-out row's
    /// feature values, never its target, take part in the scaling; re-deriving
    /// the scaling from every n − 1 rows would change the smoother itself and
    /// break the hat-diagonal identity.
    fn leave_one_out(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        Some(self.loo_by_leverage(x_train, y_train))
    }
}

impl ThinPlate {
    fn loo_by_leverage(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> LeaveOneOut {
        self.check_rows(x_train)?;
        let basis = self.basis_for(x_train);
        let empty = x_train.rows(0, 0).into_owned();
        let fits = self.fit_with_basis(&basis, x_train, y_train, &empty, true, true)?;
        self.settings()
            .into_iter()
            .zip(fits)
            .map(|(setting, (fit, leverages))| {
                let leverages = leverages.unwrap_or_default();
                leave_one_out_rows(&setting.to_string(), y_train.len(), |i| {
                    let h = leverages.get(i).copied().unwrap_or(1.0);
                    loo_from_leverage(y_train[i], fit.train_pred[i], h)
                })
            })
            .collect()
    }
}

#[cfg(test)]
mod tests;
