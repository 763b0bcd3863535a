//! The locked test score with its uncertainty (docs/reports.md, "The test
//! score's interval"): a 95% confidence interval from the per-row losses of
//! the kept setting on the test rows, and how many test rows would halve it.
//!
//! - mse, mae, log-loss, brier: the score is a mean of per-row losses, so the
//!   interval is the t interval of that mean, mean ± t(0.975, n − 1) · s / √n
//!   (common practice; it leans on the central limit theorem, so with few
//!   rows or heavy-tailed losses it is rough).
//! - rmse: the square roots of the mse interval's ends (the root is monotone,
//!   so the coverage carries over).
//! - error-rate: the Wilson score interval (Wilson 1927, "Probable inference,
//!   the law of succession, and statistical inference"), which behaves at
//!   rates near 0 or 1 where the t interval does not.
//! - r2, auc: no interval (they are not means of per-row losses).

use crate::metrics::{ClassPrediction, Scorer, PROBABILITY_FLOOR};
use crate::spec::Metric;

/// The confidence level of every interval heldout reports.
pub(crate) const LEVEL: f64 = 0.95;

/// The standard normal's 0.975 quantile (scipy 1.16 `norm.ppf(0.975)`,
/// the value statsmodels' Wilson interval uses at alpha = 0.05).
pub(crate) const Z_975: f64 = 1.959_963_984_540_054;

/// How an interval was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Method {
    /// t interval of the mean of per-row losses.
    T,
    /// Square roots of the ends of the mse's t interval.
    RootOfT,
    /// Wilson score interval of a proportion.
    Wilson,
}

impl Method {
    pub(crate) fn name(self) -> &'static str {
        match self {
            Method::T => "t",
            Method::RootOfT => "root of t",
            Method::Wilson => "wilson",
        }
    }
}

/// A test score's interval and the rows that would halve its width.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Interval {
    pub(crate) method: Method,
    pub(crate) low: f64,
    pub(crate) high: f64,
    /// Smallest number of test rows whose interval, computed from the same
    /// estimate (mean and spread, or proportion), is at most half as wide.
    pub(crate) rows_to_halve: Option<usize>,
}

/// The interval of the locked test score, or `None` for a metric without
/// one (r2, auc) or fewer than two test rows.
pub(crate) fn test_interval(
    scorer: Scorer,
    observed: &[f64],
    predicted: &[f64],
) -> Option<Interval> {
    let n = observed.len();
    if n < 2 {
        return None;
    }
    let losses = per_row_losses(scorer, observed, predicted)?;
    let mean = losses.iter().sum::<f64>() / n as f64;
    match scorer.metric {
        Metric::ErrorRate => {
            let wrong = losses.iter().filter(|&&l| l > 0.0).count();
            let (low, high) = wilson(wrong, n, Z_975);
            let p = wrong as f64 / n as f64;
            let width = |m: usize| {
                let (l, h) = wilson_at(p, m, Z_975);
                h - l
            };
            Some(Interval {
                method: Method::Wilson,
                low,
                high,
                rows_to_halve: rows_to_halve(n, width),
            })
        }
        Metric::Rmse => {
            let sd = sample_sd(&losses, mean);
            let ends = |m: usize| {
                let half = student_t_quantile(0.975, (m - 1) as f64) * sd / (m as f64).sqrt();
                ((mean - half).max(0.0).sqrt(), (mean + half).sqrt())
            };
            let (low, high) = ends(n);
            Some(Interval {
                method: Method::RootOfT,
                low,
                high,
                rows_to_halve: rows_to_halve(n, |m| {
                    let (l, h) = ends(m);
                    h - l
                }),
            })
        }
        _ => {
            let (low, high) = t_interval(&losses);
            let sd = sample_sd(&losses, mean);
            let width =
                |m: usize| 2.0 * student_t_quantile(0.975, (m - 1) as f64) * sd / (m as f64).sqrt();
            Some(Interval {
                method: Method::T,
                low,
                high,
                rows_to_halve: rows_to_halve(n, width),
            })
        }
    }
}

/// Each row's loss, whose mean is the metric (`None` for r2 and auc).
/// Error rate: 1 for a wrong class, 0 otherwise.
pub(crate) fn per_row_losses(
    scorer: Scorer,
    observed: &[f64],
    predicted: &[f64],
) -> Option<Vec<f64>> {
    let metric = scorer.metric;
    match scorer.classes {
        None => match metric {
            Metric::Mse | Metric::Rmse => Some(
                observed
                    .iter()
                    .zip(predicted)
                    .map(|(y, p)| (y - p) * (y - p))
                    .collect(),
            ),
            Metric::Mae => Some(
                observed
                    .iter()
                    .zip(predicted)
                    .map(|(y, p)| (y - p).abs())
                    .collect(),
            ),
            _ => None,
        },
        Some((classes, _)) => {
            let layout = ClassPrediction { classes };
            let rows = observed.iter().enumerate().map(|(i, &y)| (i, y as usize));
            match metric {
                Metric::ErrorRate => Some(
                    rows.map(|(i, y)| {
                        if layout.class(predicted, i) != y {
                            1.0
                        } else {
                            0.0
                        }
                    })
                    .collect(),
                ),
                Metric::LogLoss => Some(
                    rows.map(|(i, y)| {
                        let p = layout.probabilities(predicted, i)[y]
                            .clamp(PROBABILITY_FLOOR, 1.0 - PROBABILITY_FLOOR);
                        -libm::log(p)
                    })
                    .collect(),
                ),
                Metric::Brier => Some(
                    rows.map(|(i, y)| {
                        let total: f64 = layout
                            .probabilities(predicted, i)
                            .iter()
                            .enumerate()
                            .map(|(c, &p)| {
                                let hit = if c == y { 1.0 } else { 0.0 };
                                (p - hit) * (p - hit)
                            })
                            .sum();
                        // Halved for two classes, as `metrics` scores it.
                        if classes == 2 {
                            total / 2.0
                        } else {
                            total
                        }
                    })
                    .collect(),
                ),
                _ => None,
            }
        }
    }
}

fn sample_sd(values: &[f64], mean: f64) -> f64 {
    let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
    (ss / (values.len() as f64 - 1.0)).sqrt()
}

/// The 95% t interval of the mean of `values` (at least two).
pub(crate) fn t_interval(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let half = student_t_quantile(0.975, n - 1.0) * sample_sd(values, mean) / n.sqrt();
    (mean - half, mean + half)
}

/// The Wilson score interval of `successes` out of `n` at normal quantile `z`.
pub(crate) fn wilson(successes: usize, n: usize, z: f64) -> (f64, f64) {
    wilson_at(successes as f64 / n as f64, n, z)
}

fn wilson_at(p: f64, n: usize, z: f64) -> (f64, f64) {
    let n = n as f64;
    let z2 = z * z;
    let denominator = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / denominator;
    let half = z / denominator * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    (centre - half, centre + half)
}

/// Smallest m ≥ n with `width(m) ≤ width(n) / 2` (widths shrink as m grows),
/// found by doubling then bisection; `None` when the width is zero or not
/// finite, or no m up to 2⁴⁰ halves it.
pub(crate) fn rows_to_halve(n: usize, width: impl Fn(usize) -> f64) -> Option<usize> {
    let target = width(n) / 2.0;
    if !(target.is_finite() && target > 0.0) {
        return None;
    }
    let mut low = n; // width(low) > target
    let mut high = n.checked_mul(2)?;
    while width(high) > target {
        low = high;
        high = high.checked_mul(2).filter(|&h| h <= 1 << 40)?;
    }
    while high - low > 1 {
        let middle = low + (high - low) / 2;
        if width(middle) <= target {
            high = middle;
        } else {
            low = middle;
        }
    }
    Some(high)
}

/// The `p` quantile (0.5 < p < 1) of Student's t with `df` degrees of
/// freedom, by bisection on its upper tail. Deterministic: a fixed number of
/// halvings from a bracket fixed by the arguments.
pub(crate) fn student_t_quantile(p: f64, df: f64) -> f64 {
    let tail = 1.0 - p;
    let mut high = 1.0;
    while student_t_upper_tail(high, df) > tail {
        high *= 2.0;
    }
    let mut low = 0.0;
    for _ in 0..200 {
        let middle = 0.5 * (low + high);
        if middle == low || middle == high {
            break;
        }
        if student_t_upper_tail(middle, df) > tail {
            low = middle;
        } else {
            high = middle;
        }
    }
    0.5 * (low + high)
}

/// P(T > t) for t ≥ 0: ½ I_{df/(df+t²)}(df/2, ½) (Abramowitz & Stegun 1964,
/// "Handbook of Mathematical Functions", 26.7.1 with 26.5.27).
pub(crate) fn student_t_upper_tail(t: f64, df: f64) -> f64 {
    0.5 * regularized_incomplete_beta(df / (df + t * t), 0.5 * df, 0.5)
}

/// I_x(a, b) by its continued fraction, evaluated with the modified Lentz
/// method (Press et al. 2007, "Numerical Recipes", 3rd ed., 6.4), using the
/// symmetry I_x(a, b) = 1 − I_{1−x}(b, a) where the fraction converges slowly.
fn regularized_incomplete_beta(x: f64, a: f64, b: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let log_front = libm::lgamma(a + b) - libm::lgamma(a) - libm::lgamma(b)
        + a * libm::log(x)
        + b * libm::log(1.0 - x);
    let front = libm::exp(log_front);
    if x < (a + 1.0) / (a + b + 2.0) {
        front * beta_fraction(x, a, b) / a
    } else {
        1.0 - front * beta_fraction(1.0 - x, b, a) / b
    }
}

fn beta_fraction(x: f64, a: f64, b: f64) -> f64 {
    const TINY: f64 = 1e-300;
    let mut c = 1.0;
    let mut d = 1.0 - (a + b) * x / (a + 1.0);
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..=300 {
        let m = m as f64;
        let m2 = 2.0 * m;
        let even = m * (b - m) * x / ((a + m2 - 1.0) * (a + m2));
        d = 1.0 + even * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + even / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        h *= d * c;
        let odd = -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1.0));
        d = 1.0 + odd * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + odd / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        let step = d * c;
        h *= step;
        if (step - 1.0).abs() < 1e-16 {
            break;
        }
    }
    h
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reference() -> serde_json::Value {
        serde_json::from_str(include_str!(
            "../../tests/fixtures/test_interval/reference.json"
        ))
        .unwrap()
    }

    #[test]
    fn t_quantiles_match_scipy() {
        // scipy 1.17.1 stats.t.ppf(0.975, df), tests/fixtures/test_interval.
        for q in reference()["t_quantiles"].as_array().unwrap() {
            let df = q["df"].as_f64().unwrap();
            let expected = q["q975"].as_f64().unwrap();
            let got = student_t_quantile(0.975, df);
            assert!(
                (got - expected).abs() < 1e-10 * expected,
                "df {df}: {got} vs {expected}"
            );
        }
    }

    #[test]
    fn t_interval_matches_scipy() {
        let r = reference();
        let losses: Vec<f64> = r["t_interval"]["losses"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let (low, high) = t_interval(&losses);
        assert!((low - r["t_interval"]["low"].as_f64().unwrap()).abs() < 1e-12);
        assert!((high - r["t_interval"]["high"].as_f64().unwrap()).abs() < 1e-12);
    }

    #[test]
    fn wilson_matches_statsmodels() {
        // statsmodels 0.15.0 proportion_confint(method="wilson", alpha=0.05).
        for w in reference()["wilson"].as_array().unwrap() {
            let (wrong, n) = (w["wrong"].as_u64().unwrap(), w["n"].as_u64().unwrap());
            let (low, high) = wilson(wrong as usize, n as usize, Z_975);
            assert!(
                (low - w["low"].as_f64().unwrap()).abs() < 1e-12,
                "{wrong}/{n}"
            );
            assert!(
                (high - w["high"].as_f64().unwrap()).abs() < 1e-12,
                "{wrong}/{n}"
            );
        }
    }

    #[test]
    fn halving_needs_about_four_times_the_rows() {
        // With a fixed quantile the width goes as 1/√m, so exactly 4n halves
        // it; the t quantile shrinks with m too, so slightly fewer suffice.
        assert_eq!(rows_to_halve(100, |m| 1.0 / (m as f64).sqrt()), Some(400));
        let sd = 3.0;
        let width =
            |m: usize| 2.0 * student_t_quantile(0.975, (m - 1) as f64) * sd / (m as f64).sqrt();
        let m = rows_to_halve(10, width).unwrap();
        assert!(width(m) <= width(10) / 2.0 && width(m - 1) > width(10) / 2.0);
        assert!((30..40).contains(&m), "{m}");
        assert_eq!(rows_to_halve(10, |_| 0.0), None);
    }

    #[test]
    fn per_row_losses_average_to_the_metric() {
        let observed = [1.0, 2.0, 4.0, -1.0];
        let predicted = [1.5, 1.0, 3.0, 0.5];
        for metric in [Metric::Mse, Metric::Mae] {
            let scorer = Scorer {
                metric,
                classes: None,
            };
            let losses = per_row_losses(scorer, &observed, &predicted).unwrap();
            let mean = losses.iter().sum::<f64>() / 4.0;
            assert!((mean - scorer.score(&observed, &predicted)).abs() < 1e-15);
        }
        // Two classes: probabilities then the predicted class, per row.
        let truth = [0.0, 1.0, 1.0];
        let predicted = [0.8, 0.2, 0.0, 0.4, 0.6, 1.0, 0.7, 0.3, 0.0];
        for metric in [Metric::ErrorRate, Metric::LogLoss, Metric::Brier] {
            let scorer = Scorer {
                metric,
                classes: Some((2, 1)),
            };
            let losses = per_row_losses(scorer, &truth, &predicted).unwrap();
            let mean = losses.iter().sum::<f64>() / 3.0;
            assert!(
                (mean - scorer.score(&truth, &predicted)).abs() < 1e-15,
                "{metric:?}"
            );
        }
        let auc = Scorer {
            metric: Metric::Auc,
            classes: Some((2, 1)),
        };
        assert!(test_interval(auc, &truth, &predicted).is_none());
    }

    #[test]
    fn rmse_interval_is_the_root_of_the_mse_interval() {
        let observed = [1.0, 2.0, 4.0, -1.0, 0.0];
        let predicted = [1.5, 1.0, 3.0, 0.5, 0.2];
        let mse = test_interval(
            Scorer {
                metric: Metric::Mse,
                classes: None,
            },
            &observed,
            &predicted,
        )
        .unwrap();
        let rmse = test_interval(
            Scorer {
                metric: Metric::Rmse,
                classes: None,
            },
            &observed,
            &predicted,
        )
        .unwrap();
        assert_eq!(rmse.high, mse.high.sqrt());
        assert_eq!(rmse.low, mse.low.max(0.0).sqrt());
    }
}
