//! Monte-Carlo estimates of the bias–variance decomposition of expected test
//! error for one candidate setting, from its predictions at M fixed test
//! points over R replicate training sets.
//!
//! With f the truth, f̂ᵣ the fit of replicate r, f̄ = (1/R) Σᵣ f̂ᵣ,
//! SS = Σᵣ (f̂ᵣ − f̄)² and test targets y₀ = f(x₀) + ε₀ with ε₀ drawn
//! independently for every replicate and point, the estimators are, averaged
//! over the test points:
//!
//! - variance = SS / (R − 1), the unbiased sample variance;
//! - bias² = (f̄ − f)² − SS / (R(R − 1)), unbiased too: E(f̄ − f)² is
//!   bias² + variance / R, so the plain square would carry an upward
//!   Monte-Carlo bias that grows with the variance and would show bias
//!   rising again for the most flexible fits. Where the true bias is below
//!   Monte-Carlo resolution this estimate can come out slightly negative;
//! - noise = σ², the declared noise variance;
//! - expected error = (1/R) Σᵣ (y₀ᵣ − f̂ᵣ)².
//!
//! The two corrections cancel: bias² + variance = (f̄ − f)² + SS/R =
//! (1/R) Σᵣ (f − f̂ᵣ)² exactly (algebra), so expected error − (bias² +
//! variance + noise) is (1/R) Σᵣ [ε₀ᵣ² − σ² + 2 ε₀ᵣ (f − f̂ᵣ)], a mean of
//! zero-mean terms: the sum matches the expected error up to the Monte-Carlo
//! error of the test noise alone, reported as `identity_gap` with its
//! standard error.
//!
//! Standard errors treat replicates as independent and the test points as a
//! fixed integration rule: for means over replicates (expected error,
//! training error, the gap) the sample standard deviation over replicates
//! / √R; for bias² and variance, which are not means, the jackknife over
//! replicates (Efron & Stein, 1981, "The jackknife estimate of variance"),
//! computed in O(RM) from exact leave-one-replicate-out updates of f̄ and
//! SS. Sums run over replicates in order, then points in order.

/// Per-test-point pieces of one setting's decomposition.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Pointwise {
    /// f̄ at each test point.
    pub(crate) mean_fit: Vec<f64>,
    pub(crate) bias_sq: Vec<f64>,
    pub(crate) variance: Vec<f64>,
    /// Jackknife standard error of each point's variance.
    pub(crate) variance_se: Vec<f64>,
}

/// One setting's decomposition, averaged over the test points.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Decomposition {
    pub(crate) bias_sq: f64,
    pub(crate) bias_sq_se: f64,
    pub(crate) variance: f64,
    pub(crate) variance_se: f64,
    /// σ².
    pub(crate) noise: f64,
    pub(crate) expected_mse: f64,
    /// Standard error of `expected_mse` over replicates.
    pub(crate) mc_se: f64,
    /// expected_mse − (bias_sq + variance + noise) and its standard error.
    pub(crate) identity_gap: f64,
    pub(crate) identity_gap_se: f64,
    pub(crate) pointwise: Pointwise,
}

/// Mean and standard error (sample SD / √n) of values, summed in order.
pub(crate) fn mean_and_se(values: &[f64]) -> (f64, f64) {
    crate::assess::mean_and_standard_error(values)
}

/// Jackknife standard error from leave-one-out estimates.
fn jackknife_se(leave_one_out: &[f64]) -> f64 {
    let r = leave_one_out.len() as f64;
    let mean = leave_one_out.iter().sum::<f64>() / r;
    let ss: f64 = leave_one_out.iter().map(|v| (v - mean) * (v - mean)).sum();
    libm::sqrt((r - 1.0) / r * ss)
}

/// Decomposes one setting's error. `predictions[r][j]` is replicate r's
/// prediction at test point j, `test_noise[r][j]` the noise of its test
/// target, `truth[j]` the truth there; `noise` is σ². Needs R ≥ 3 (the
/// jackknife leaves one replicate out of an unbiased variance).
pub(crate) fn decompose(
    truth: &[f64],
    predictions: &[Vec<f64>],
    test_noise: &[Vec<f64>],
    noise: f64,
) -> Decomposition {
    let r_count = predictions.len();
    let m_count = truth.len();
    let (r, m) = (r_count as f64, m_count as f64);

    let mut mean_fit = vec![0.0; m_count];
    for row in predictions {
        for (sum, p) in mean_fit.iter_mut().zip(row) {
            *sum += p;
        }
    }
    for v in &mut mean_fit {
        *v /= r;
    }
    let bias: Vec<f64> = mean_fit
        .iter()
        .zip(truth)
        .map(|(fbar, f)| fbar - f)
        .collect();
    let mut squares = vec![0.0; m_count];
    for row in predictions {
        for ((ss, p), fbar) in squares.iter_mut().zip(row).zip(&mean_fit) {
            *ss += (p - fbar) * (p - fbar);
        }
    }
    // Unbiased pair: bias² = (f̄ − f)² − SS/(R(R − 1)), variance = SS/(R − 1).
    let unbiased = |b: f64, ss: f64, replicates: f64| {
        (
            b * b - ss / (replicates * (replicates - 1.0)),
            ss / (replicates - 1.0),
        )
    };
    let (bias_sq_at, variance_at): (Vec<f64>, Vec<f64>) = bias
        .iter()
        .zip(&squares)
        .map(|(&b, &ss)| unbiased(b, ss, r))
        .unzip();
    let bias_sq = bias_sq_at.iter().sum::<f64>() / m;
    let variance = variance_at.iter().sum::<f64>() / m;

    // Leave-one-replicate-out: f̄₋ᵣ − f = bias − dᵣ/(R − 1) and
    // SS₋ᵣ = SS − R/(R − 1)·dᵣ², with dᵣ = f̂ᵣ − f̄ (exact updates).
    let shrink = r / (r - 1.0);
    let mut bias_loo = Vec::with_capacity(r_count);
    let mut variance_loo = Vec::with_capacity(r_count);
    let mut variance_loo_at = vec![Vec::with_capacity(r_count); m_count];
    let mut errors = Vec::with_capacity(r_count);
    let mut gaps = Vec::with_capacity(r_count);
    for (row, eps) in predictions.iter().zip(test_noise) {
        let (mut b_sum, mut v_sum, mut e_sum, mut g_sum) = (0.0, 0.0, 0.0, 0.0);
        for j in 0..m_count {
            let d = row[j] - mean_fit[j];
            let (b, v) = unbiased(
                bias[j] - d / (r - 1.0),
                squares[j] - shrink * d * d,
                r - 1.0,
            );
            b_sum += b;
            v_sum += v;
            variance_loo_at[j].push(v);
            let miss = truth[j] - row[j];
            let e = miss + eps[j];
            e_sum += e * e;
            g_sum += eps[j] * eps[j] - noise + 2.0 * eps[j] * miss;
        }
        bias_loo.push(b_sum / m);
        variance_loo.push(v_sum / m);
        errors.push(e_sum / m);
        gaps.push(g_sum / m);
    }
    let (expected_mse, mc_se) = mean_and_se(&errors);
    let (_, identity_gap_se) = mean_and_se(&gaps);
    Decomposition {
        bias_sq,
        bias_sq_se: jackknife_se(&bias_loo),
        variance,
        variance_se: jackknife_se(&variance_loo),
        noise,
        expected_mse,
        mc_se,
        identity_gap: expected_mse - (bias_sq + variance + noise),
        identity_gap_se,
        pointwise: Pointwise {
            mean_fit,
            bias_sq: bias_sq_at,
            variance: variance_at,
            variance_se: variance_loo_at.iter().map(|v| jackknife_se(v)).collect(),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A small hand-made table: 3 replicates, 2 test points.
    fn table() -> (Vec<f64>, Vec<Vec<f64>>, Vec<Vec<f64>>) {
        let truth = vec![1.0, 2.0];
        let predictions = vec![vec![1.5, 2.0], vec![0.5, 3.0], vec![1.3, 1.0]];
        let noise = vec![vec![0.2, -0.1], vec![0.0, 0.4], vec![-0.3, 0.1]];
        (truth, predictions, noise)
    }

    #[test]
    fn hand_computed_pieces() {
        // Point 1: fits 1.5, 0.5, 1.3 → mean 1.1, SS = 0.16 + 0.36 + 0.04 =
        // 0.56, variance 0.56/2, bias² 0.1² − 0.56/6. Point 2: fits 2, 3, 1 →
        // mean 2, SS = 2, variance 1, bias² 0 − 2/6 (definitions above).
        let (truth, predictions, noise) = table();
        let d = decompose(&truth, &predictions, &noise, 0.04);
        assert!((d.pointwise.mean_fit[0] - 1.1).abs() < 1e-15);
        assert!((d.pointwise.bias_sq[0] - (0.01 - 0.56 / 6.0)).abs() < 1e-15);
        assert!((d.pointwise.variance[0] - 0.28).abs() < 1e-15);
        assert!((d.pointwise.bias_sq[1] + 2.0 / 6.0).abs() < 1e-15);
        assert!((d.pointwise.variance[1] - 1.0).abs() < 1e-15);
        let bias_sq = (0.01 - 0.56 / 6.0 - 2.0 / 6.0) / 2.0;
        assert!((d.bias_sq - bias_sq).abs() < 1e-15);
        assert!((d.variance - 0.64).abs() < 1e-15);
    }

    #[test]
    fn bias_and_variance_are_unbiased_on_average() {
        // Definition of unbiasedness, checked over many independent tables:
        // fits f̂ = f + b + e with e ~ N(0, v) have true bias² b² and
        // variance v; the average of the estimates over 4000 tables of R = 5
        // must be within 4 standard errors of them (the plain (f̄ − f)² would
        // be off by v/R = 0.8).
        let mut stream = crate::simulate::random::Stream::new(5, "unbiased");
        let (b, v, tables): (f64, f64, usize) = (0.5, 4.0, 4000);
        let (mut biases, mut variances) = (Vec::new(), Vec::new());
        for _ in 0..tables {
            let predictions: Vec<Vec<f64>> = (0..5)
                .map(|_| vec![1.0 + b + v.sqrt() * stream.normal()])
                .collect();
            let d = decompose(&[1.0], &predictions, &vec![vec![0.0]; 5], 0.0);
            biases.push(d.bias_sq);
            variances.push(d.variance);
        }
        let (bias_mean, bias_se) = mean_and_se(&biases);
        let (variance_mean, variance_se) = mean_and_se(&variances);
        assert!(
            (bias_mean - b * b).abs() < 4.0 * bias_se,
            "{bias_mean} ± {bias_se}"
        );
        assert!(
            (variance_mean - v).abs() < 4.0 * variance_se,
            "{variance_mean} ± {variance_se}"
        );
    }

    #[test]
    fn mean_squared_miss_equals_bias_sq_plus_variance_exactly() {
        // Algebraic identity: (1/R)Σ(f − f̂ᵣ)² = (f̄ − f)² + SS/R, and the
        // unbiased corrections cancel in the sum. With zero test noise and
        // σ² = 0 the gap is therefore only rounding.
        let (truth, predictions, _) = table();
        let zero = vec![vec![0.0; 2]; 3];
        let d = decompose(&truth, &predictions, &zero, 0.0);
        assert!(d.identity_gap.abs() < 1e-15, "{}", d.identity_gap);
        let direct: f64 = predictions
            .iter()
            .flat_map(|row| row.iter().zip(&truth).map(|(p, f)| (f - p) * (f - p)))
            .sum::<f64>()
            / 6.0;
        assert!((d.expected_mse - direct).abs() < 1e-15);
    }

    #[test]
    fn gap_is_the_test_noise_term() {
        // expected − (bias² + variance + σ²) = mean of ε² − σ² + 2ε(f − f̂).
        let (truth, predictions, noise) = table();
        let d = decompose(&truth, &predictions, &noise, 0.04);
        let mut term = 0.0;
        for (row, eps) in predictions.iter().zip(&noise) {
            for j in 0..2 {
                term += eps[j] * eps[j] - 0.04 + 2.0 * eps[j] * (truth[j] - row[j]);
            }
        }
        assert!((d.identity_gap - term / 6.0).abs() < 1e-14);
    }

    #[test]
    fn jackknife_updates_equal_refits() {
        // The O(RM) leave-one-out updates against recomputation from scratch
        // on the other R − 1 replicates (identity).
        let (truth, mut predictions, mut noise) = table();
        predictions.push(vec![0.9, 2.5]);
        noise.push(vec![0.1, 0.0]);
        let d = decompose(&truth, &predictions, &noise, 0.04);
        let loo: Vec<(f64, f64)> = (0..4)
            .map(|skip| {
                let rest: Vec<Vec<f64>> = (0..4)
                    .filter(|&r| r != skip)
                    .map(|r| predictions[r].clone())
                    .collect();
                let eps: Vec<Vec<f64>> = (0..4)
                    .filter(|&r| r != skip)
                    .map(|r| noise[r].clone())
                    .collect();
                let part = decompose(&truth, &rest, &eps, 0.04);
                (part.bias_sq, part.variance)
            })
            .collect();
        let se = |values: Vec<f64>| {
            let mean = values.iter().sum::<f64>() / 4.0;
            (3.0 / 4.0 * values.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>()).sqrt()
        };
        let bias_se = se(loo.iter().map(|p| p.0).collect());
        let variance_se = se(loo.iter().map(|p| p.1).collect());
        assert!(
            (d.bias_sq_se - bias_se).abs() < 1e-14,
            "{} {bias_se}",
            d.bias_sq_se
        );
        assert!((d.variance_se - variance_se).abs() < 1e-14);
    }
}
