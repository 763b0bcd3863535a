//! `smoothing-spline`: the cubic smoothing spline of one feature, for a grid
//! of penalties or of effective degrees of freedom.
//!
//! For a penalty λ the fit f minimises Σ (yᵢ − f(xᵢ))² + λ ∫ f''(t)² dt over
//! all functions with a square-integrable second derivative; the minimiser is
//! the natural cubic spline with knots at the distinct training values of x
//! (Reinsch 1967, "Smoothing by spline functions", Numer. Math. 10). It is
//! computed as a banded least-squares problem in the values and slopes at the
//! knots, O(m) per penalty for m distinct values, and its effective degrees of
//! freedom (the trace of the smoother matrix) and leverages from the central
//! band of an inverse (Hutchinson & de Hoog 1985, "Smoothing noisy data with
//! spline functions", Numer. Math. 47); see the `hermite` submodule, which also says why
//! Reinsch's pentadiagonal system is not used.
//!
//! Conventions:
//!
//! - **Units of λ.** The penalty is in the raw units of x, as written in the
//!   spec. Internally x is mapped to u = (x − min x)/s with s the smallest
//!   power of two above the training range, so u ∈ [0, 1); since
//!   ∫ f''(x)² dx = s⁻³ ∫ f''(u)² du, the penalty on that scale is λ·s⁻³,
//!   which is exact in floating point (a power of two).
//! - **Tied x.** Rows sharing a value of x collapse into one knot with weight
//!   equal to their count and response equal to their mean (summed in row
//!   order). This changes the objective only by the constant within-knot sum
//!   of squares, so the fit is the same; the trace of the collapsed weighted
//!   smoother equals the trace of the smoother over all rows. Values that
//!   differ in the last bit are distinct knots.
//! - **df grid.** A target df must lie in [2, m]: df = 2 is the weighted
//!   least-squares line (the limit λ → ∞, fitted as that line), df = m
//!   interpolates the knot means (λ = 0).
//!   λ is found by Brent's bracketing root finder (Brent 1973, *Algorithms for
//!   Minimization without Derivatives*, ch. 4) on log λ, independently for
//!   each setting, until the trace matches to 1e-11 relative or the bracket
//!   can shrink no further; `effective_df` reports the trace actually reached.
//! - **Prediction.** Between knots the natural cubic spline; **beyond the
//!   boundary knots it continues as a straight line** (zero second
//!   derivative), which is what makes the spline natural. Some libraries
//!   extrapolate with the end cubic instead; heldout does not.
//! - **Leave-one-out.** A row of a knot with weight w has leverage Sᵢᵢ/w (the
//!   knot's fitted value depends on that row only through the knot mean),
//!   which is exactly what the shortcut ŷ₋ⱼ = yⱼ − (yⱼ − ŷⱼ)/(1 − hⱼⱼ) needs
//!   with ties too; see [`Family::leave_one_out`].
//!
//! The fit is made on the residuals from the weighted least-squares line (the
//! smoother reproduces lines exactly), so large offsets and trends in y do
//! not enter the banded solve.

mod hermite;

use std::cell::RefCell;

use nalgebra::DMatrix;

use self::hermite::{Factor, HermiteSystem, Singular};
use super::registry::{FamilyDef, SettingProblem, Settings, PENALTY, SMOOTHER_DF};
use super::{
    leave_one_out_rows, loo_from_leverage, require_spread, Family, FitRequest, LeaveOneOut,
    Setting, SettingFit, SmootherGrid, TrainingShape,
};
use crate::error::FitError;

/// Cubic smoothing splines of one feature for a grid of penalties or df.
#[derive(Debug, Clone)]
pub(crate) struct SmoothingSpline {
    pub(crate) features: Vec<String>,
    pub(crate) grid: SmootherGrid,
}

/// The registry entry of `smoothing-spline` (see `registry`).
pub(crate) const FAMILY: FamilyDef =
    FamilyDef::new("smoothing-spline", &[PENALTY, SMOOTHER_DF], build)
        .about("Cubic smoothing splines of one feature over a grid of penalties or effective df.")
        .grid("df = [2, 3, 4, 6, 9, 14, 20]")
        .takes_features(1);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    let grid = SmootherGrid::from_settings(settings)?;
    if let SmootherGrid::Df(values) = &grid {
        if let Some(df) = values.iter().find(|&&d| d < 2.0) {
            return Err(SettingProblem::new(
                "df",
                format!(
                    "df = {df} is below 2: every smoothing spline contains the \
                     least-squares line (df = 2, the limit of an unbounded penalty)"
                ),
            ));
        }
    }
    Ok(Box::new(SmoothingSpline { features, grid }))
}

/// Relative agreement sought between a target df and the trace reached.
const DF_TOLERANCE: f64 = 1e-11;

/// Distinct training values of x on the unit scale, with weights and means.
#[derive(Debug, Clone)]
struct Knots {
    /// Strictly increasing knots u = (x − origin)·2^(−exponent), u ∈ [0, 1).
    t: Vec<f64>,
    /// Rows per knot.
    weight: Vec<f64>,
    /// Mean response per knot.
    mean_y: Vec<f64>,
    /// The knot of every training row, in row order.
    knot_of_row: Vec<usize>,
    origin: f64,
    exponent: i32,
}

impl Knots {
    /// Collapses `(x, y)` into knots; `x` must hold at least two distinct
    /// finite values. `None` when their range overflows.
    fn new(x: &[f64], y: &[f64]) -> Option<Self> {
        let mut order: Vec<usize> = (0..x.len()).collect();
        // (x, row) is a strict total order, so an unstable sort is deterministic.
        order.sort_unstable_by(|&a, &b| x[a].total_cmp(&x[b]).then(a.cmp(&b)));
        let origin = x[order[0]];
        let range = x[order[order.len() - 1]] - origin;
        if !range.is_finite() {
            return None;
        }
        let (_, exponent) = libm::frexp(range);
        let mut knots = Knots {
            t: Vec::new(),
            weight: Vec::new(),
            mean_y: Vec::new(),
            knot_of_row: vec![0; x.len()],
            origin,
            exponent,
        };
        let mut sums = Vec::new();
        let mut last = f64::NAN;
        for &row in &order {
            if x[row] != last {
                last = x[row];
                knots.t.push(knots.to_unit(last));
                knots.weight.push(0.0);
                sums.push(0.0);
            }
            let k = knots.t.len() - 1;
            knots.weight[k] += 1.0;
            sums[k] += y[row];
            knots.knot_of_row[row] = k;
        }
        knots.mean_y = sums.iter().zip(&knots.weight).map(|(s, w)| s / w).collect();
        Some(knots)
    }

    /// x on the unit scale (exact scaling by a power of two).
    fn to_unit(&self, x: f64) -> f64 {
        libm::ldexp(x - self.origin, -self.exponent)
    }

    /// A raw-unit penalty on the unit scale: λ·s⁻³, exact.
    fn unit_penalty(&self, lambda: f64) -> f64 {
        libm::ldexp(lambda, -3 * self.exponent)
    }

    fn count(&self) -> usize {
        self.t.len()
    }
}

/// A spline fitted at the knots for one penalty (unit scale).
#[derive(Debug, Clone)]
struct KnotFit {
    /// f(tᵢ) at every knot.
    values: Vec<f64>,
    /// f'(tᵢ) on the unit scale at every knot.
    slopes: Vec<f64>,
    /// Trace of the smoother: the effective degrees of freedom.
    trace: f64,
    /// Leverage of one training row of each knot: Sᵢᵢ/wᵢ.
    leverage: Vec<f64>,
}

/// What every penalty of one training fold shares: knots, the banded system,
/// and the data split into a least-squares line plus residuals.
#[derive(Debug, Clone)]
struct Prepared {
    knots: Knots,
    system: HermiteSystem,
    /// The weighted least-squares line at the knots, and its slope.
    line: Vec<f64>,
    line_slope: f64,
    /// Knot means minus the line.
    detrended: Vec<f64>,
    /// The last penalty whose trace root finding evaluated, with its factor
    /// and leverages: root finding ends at the penalty it returns, so the
    /// fit there reuses them (same bits, one banded factorisation fewer).
    last_trace: RefCell<Option<(u64, Factor, Vec<f64>)>>,
}

impl Prepared {
    fn new(x: &[f64], y: &[f64]) -> Option<Self> {
        let knots = Knots::new(x, y)?;
        let system = HermiteSystem::new(&knots.t, &knots.weight);
        let (line, line_slope) = weighted_line(&knots.t, &knots.mean_y, &knots.weight);
        let detrended: Vec<f64> = knots.mean_y.iter().zip(&line).map(|(y, l)| y - l).collect();
        Some(Prepared {
            knots,
            system,
            line,
            line_slope,
            detrended,
            last_trace: RefCell::new(None),
        })
    }

    /// The fit for penalty `lambda` ≥ 0 on the unit scale; `lambda` = ∞ is
    /// the limit, the weighted least-squares line.
    fn fit(&self, lambda: f64) -> Result<KnotFit, Singular> {
        let weight = &self.knots.weight;
        if lambda == f64::INFINITY {
            // Hat diagonal of a weighted line: 1/Σw + (tᵢ − t̄)²/Sₜₜ per row.
            let total: f64 = weight.iter().sum();
            let t = &self.knots.t;
            let t_bar = weighted_sum(t, weight) / total;
            let s_tt: f64 = t
                .iter()
                .zip(weight)
                .map(|(t, w)| w * (t - t_bar) * (t - t_bar))
                .sum();
            let leverage: Vec<f64> = t
                .iter()
                .map(|t| 1.0 / total + (t - t_bar) * (t - t_bar) / s_tt)
                .collect();
            return Ok(KnotFit {
                values: self.line.clone(),
                slopes: vec![self.line_slope; t.len()],
                trace: weighted_sum(&leverage, weight),
                leverage,
            });
        }
        if lambda == 0.0 {
            // Interpolation of the knot means: S = I.
            let values = self.knots.mean_y.clone();
            return Ok(KnotFit {
                slopes: self.system.interpolating_slopes(&values),
                values,
                trace: self.knots.count() as f64,
                leverage: weight.iter().map(|w| 1.0 / w).collect(),
            });
        }
        let (factor, leverage) = match self.last_trace.take() {
            Some((bits, factor, leverage)) if bits == lambda.to_bits() => (factor, leverage),
            _ => {
                let factor = self.system.factor(lambda, &self.detrended)?;
                let leverage = factor.covariance_band().value_variances();
                (factor, leverage)
            }
        };
        let solution = factor.solve();
        let values = solution
            .iter()
            .step_by(2)
            .zip(&self.line)
            .map(|(f, l)| l + f)
            .collect();
        let slopes = solution
            .iter()
            .skip(1)
            .step_by(2)
            .map(|s| self.line_slope + s)
            .collect();
        Ok(KnotFit {
            values,
            slopes,
            trace: weighted_sum(&leverage, weight),
            leverage,
        })
    }

    /// The trace of the smoother alone, for root finding (λ > 0).
    fn trace(&self, lambda: f64) -> Result<f64, Singular> {
        let factor = self.system.factor(lambda, &self.detrended)?;
        let leverage = factor.covariance_band().value_variances();
        let trace = weighted_sum(&leverage, &self.knots.weight);
        self.last_trace
            .replace(Some((lambda.to_bits(), factor, leverage)));
        Ok(trace)
    }

    /// The unit-scale penalty whose trace is `df`, for 2 < df ≤ m.
    fn penalty_for_df(&self, df: f64) -> Result<f64, String> {
        if df >= self.knots.count() as f64 {
            return Ok(0.0);
        }
        let gap = |log_lambda: f64| -> Result<f64, String> {
            self.trace(libm::exp(log_lambda))
                .map(|trace| trace - df)
                .map_err(|e| {
                    format!(
                        "the banded factor is singular in column {} at penalty {:e} on the unit \
                         scale",
                        e.column + 1,
                        libm::exp(log_lambda)
                    )
                })
        };
        // Start near the penalty that a uniform design would need (mode k of
        // the fit is shrunk by 1/(1 + λπ⁴k⁴/Σw)), then widen the bracket.
        let total: f64 = self.knots.weight.iter().sum();
        let (pi, k) = (std::f64::consts::PI, df - 1.0);
        let start = libm::log(total / ((pi * pi) * (pi * pi) * ((k * k) * (k * k))));
        let (mut a, mut gap_a) = (start, gap(start)?);
        // Walk away from the start in doubling steps, up in λ while the trace
        // is too large, down while it is too small, until the sign changes.
        let mut step = if gap_a > 0.0 { 2.0 } else { -2.0 };
        let (b, gap_b) = loop {
            let b = a + step;
            let gap_b = gap(b)?;
            if (gap_b > 0.0) != (gap_a > 0.0) || gap_b == 0.0 {
                break (b, gap_b);
            }
            if (b - start).abs() > 300.0 {
                return Err(format!(
                    "no penalty up to e^{:.0} times the starting guess reaches it (the trace \
                     there is {:.12})",
                    b - start,
                    gap_b + df
                ));
            }
            (a, gap_a) = (b, gap_b);
            step *= 2.0;
        };
        let log_lambda = brent_root(&gap, (a, gap_a), (b, gap_b), DF_TOLERANCE * df)?;
        Ok(libm::exp(log_lambda))
    }
}

/// The weighted least-squares line of `y` on `t`, evaluated at `t`.
/// Returns its values at `t` and its slope.
fn weighted_line(t: &[f64], y: &[f64], w: &[f64]) -> (Vec<f64>, f64) {
    let total: f64 = w.iter().sum();
    let t_bar = t.iter().zip(w).map(|(t, w)| t * w).sum::<f64>() / total;
    let y_bar = y.iter().zip(w).map(|(y, w)| y * w).sum::<f64>() / total;
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for ((t, y), w) in t.iter().zip(y).zip(w) {
        sxx += w * (t - t_bar) * (t - t_bar);
        sxy += w * (t - t_bar) * (y - y_bar);
    }
    let slope = sxy / sxx;
    (
        t.iter().map(|t| y_bar + slope * (t - t_bar)).collect(),
        slope,
    )
}

/// Σ wᵢvᵢ in knot order.
fn weighted_sum(v: &[f64], w: &[f64]) -> f64 {
    v.iter().zip(w).map(|(v, w)| v * w).sum()
}

/// Brent's method for a root of a decreasing or increasing `f` bracketed by
/// `a` and `b` (values of opposite sign), stopping when |f| ≤ `f_tolerance`
/// or the bracket cannot shrink further. Written from Brent (1973), ch. 4.
fn brent_root(
    f: &dyn Fn(f64) -> Result<f64, String>,
    (mut a, mut fa): (f64, f64),
    (mut b, mut fb): (f64, f64),
    f_tolerance: f64,
) -> Result<f64, String> {
    let (mut c, mut fc) = (a, fa);
    let mut d = b - a;
    let mut e = d;
    for _ in 0..200 {
        if (fb > 0.0) == (fc > 0.0) {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol = 2.0 * f64::EPSILON * b.abs() + 1e-15;
        let mid = 0.5 * (c - b);
        if fb.abs() <= f_tolerance || mid.abs() <= tol {
            return Ok(b);
        }
        if e.abs() >= tol && fa.abs() > fb.abs() {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                // Secant step.
                p = 2.0 * mid * s;
                q = 1.0 - s;
            } else {
                // Inverse quadratic interpolation.
                let qa = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * mid * qa * (qa - r) - (b - a) * (r - 1.0));
                q = (qa - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * mid * q - (tol * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = mid;
                e = d;
            }
        } else {
            d = mid;
            e = d;
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol { d } else { tol.copysign(mid) };
        fb = f(b)?;
    }
    Err("the root finder did not converge in 200 steps".to_string())
}

impl KnotFit {
    /// The natural cubic spline at `u` (unit scale): the cubic Hermite piece
    /// between knots, the tangent line beyond the boundary knots.
    fn at(&self, t: &[f64], u: f64) -> f64 {
        let (f, s) = (&self.values, &self.slopes);
        let m = t.len();
        if u <= t[0] {
            return f[0] + s[0] * (u - t[0]);
        }
        if u >= t[m - 1] {
            return f[m - 1] + s[m - 1] * (u - t[m - 1]);
        }
        let i = t.partition_point(|&v| v <= u) - 1;
        if t[i] == u {
            return f[i];
        }
        let h = t[i + 1] - t[i];
        let tau = (u - t[i]) / h;
        let rest = 1.0 - tau;
        // Hermite basis in Bernstein-like form: (1−τ)²(1+2τ), τ(1−τ)², τ²(3−2τ), −τ²(1−τ).
        f[i] * (rest * rest * (1.0 + 2.0 * tau))
            + h * s[i] * (tau * rest * rest)
            + f[i + 1] * (tau * tau * (3.0 - 2.0 * tau))
            - h * s[i + 1] * (tau * tau * rest)
    }
}

impl SmoothingSpline {
    /// The unit-scale penalty of setting `index`.
    fn unit_penalty(
        &self,
        prepared: &Prepared,
        index: usize,
        setting: &Setting,
    ) -> Result<f64, FitError> {
        match &self.grid {
            SmootherGrid::Penalty(values) => {
                let lambda = prepared.knots.unit_penalty(values[index]);
                if lambda.is_finite() {
                    Ok(lambda)
                } else {
                    Err(FitError::SmootherBreakdown {
                        setting: setting.to_string(),
                        detail: format!(
                            "the penalty overflows when the range of feature \"{}\" is \
                             rescaled to 1 (it is multiplied by range⁻³); use a smaller penalty \
                             or a df grid",
                            self.features[0]
                        ),
                    })
                }
            }
            SmootherGrid::Df(values) => {
                let df = values[index];
                let distinct = prepared.knots.count();
                if df == 2.0 {
                    return Ok(f64::INFINITY);
                }
                if !(df > 2.0 && df <= distinct as f64) {
                    return Err(FitError::DfOutOfRange {
                        setting: setting.to_string(),
                        feature: self.features[0].clone(),
                        distinct,
                    });
                }
                prepared
                    .penalty_for_df(df)
                    .map_err(|detail| FitError::SmootherBreakdown {
                        setting: setting.to_string(),
                        detail,
                    })
            }
        }
    }

    /// Knot fits of the whole grid on one training fold.
    fn fit_knots(
        &self,
        x_train: &DMatrix<f64>,
        y_train: &[f64],
    ) -> Result<(Prepared, Vec<KnotFit>), FitError> {
        require_spread(
            &self.features,
            x_train,
            "a smoothing spline in it cannot be fitted",
        )?;
        let x: Vec<f64> = x_train.column(0).iter().copied().collect();
        let prepared = Prepared::new(&x, y_train).ok_or_else(|| FitError::SmootherBreakdown {
            setting: "every setting".to_string(),
            detail: format!(
                "the range of feature \"{}\" in the training rows overflows a double",
                self.features[0]
            ),
        })?;
        let fits = self
            .settings()
            .iter()
            .enumerate()
            .map(|(index, setting)| {
                let lambda = self.unit_penalty(&prepared, index, setting)?;
                prepared
                    .fit(lambda)
                    .map_err(|e| FitError::SmootherBreakdown {
                        setting: setting.to_string(),
                        detail: format!("the banded factor is singular in column {}", e.column + 1),
                    })
            })
            .collect::<Result<Vec<_>, _>>()?;
        Ok((prepared, fits))
    }
}

impl Family for SmoothingSpline {
    fn settings(&self) -> Vec<Setting> {
        self.grid.settings()
    }

    fn infeasible(&self, setting: usize, shape: &TrainingShape<'_>) -> Option<String> {
        // The same bound as the fit's own check (df in [2, distinct values]).
        let SmootherGrid::Df(values) = &self.grid else {
            return None;
        };
        let df = values[setting];
        let distinct = shape.distinct(0);
        (df != 2.0 && df > distinct as f64).then(|| {
            format!(
                "df={df} exceeds the {distinct} distinct values of feature \"{}\" in the \
                 training rows (a smoothing spline's df lies in [2, distinct values])",
                self.features[0]
            )
        })
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        let (prepared, fits) = self.fit_knots(x_train, y_train)?;
        let knots = &prepared.knots;
        let eval_u: Vec<f64> = x_eval.column(0).iter().map(|&x| knots.to_unit(x)).collect();
        Ok(fits
            .into_iter()
            .map(|fit| SettingFit {
                train_pred: if final_fit {
                    knots.knot_of_row.iter().map(|&k| fit.values[k]).collect()
                } else {
                    Vec::new()
                },
                eval_pred: eval_u.iter().map(|&u| fit.at(&knots.t, u)).collect(),
                effective_df: fit.trace,
                coefficients: None,
            })
            .collect())
    }

    /// Leave-one-out predictions from one fit per setting, by the shortcut
    /// ŷ₋ⱼ = yⱼ − (yⱼ − ŷⱼ)/(1 − hⱼⱼ). It is exact here because the fit
    /// minimises the same objective over a space that does not depend on the
    /// rows (the leaving-out-one lemma of Craven & Wahba 1979, "Smoothing
    /// noisy data with spline functions: estimating the correct degree of
    /// smoothing by the method of generalized cross-validation", Numer. Math.
    /// 31). A row j of a knot with weight
    /// w has hⱼⱼ = Sᵢᵢ/w, so ties need no special case.
    fn leave_one_out(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        Some(
            self.fit_knots(x_train, y_train)
                .and_then(|(prepared, fits)| {
                    let knots = &prepared.knots;
                    fits.iter()
                        .zip(self.settings())
                        .map(|(fit, setting)| {
                            leave_one_out_rows(&setting.to_string(), y_train.len(), |row| {
                                let k = knots.knot_of_row[row];
                                loo_from_leverage(y_train[row], fit.values[k], fit.leverage[k])
                            })
                        })
                        .collect()
                }),
        )
    }
}

#[cfg(test)]
mod reference_tests;
#[cfg(test)]
mod tests;
