//! Monte-Carlo estimates against exact results for fixed designs, where the
//! mean and variance of a fit at a test point are known in closed form.

use nalgebra::{DMatrix, DVector};

use super::decompose::{self, Decomposition};
use super::run::{self, ReplicateOutcome, SimulationPlan};
use crate::execute::CachePolicy;

/// Loads a simulation spec from text (through a temporary file, as a user's).
fn plan_from(text: &str) -> SimulationPlan {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sim.toml");
    std::fs::write(&path, text).unwrap();
    let loaded = crate::spec::load(&path).unwrap();
    super::resolve(loaded).unwrap()
}

/// Runs every replicate without a cache.
fn outcomes(plan: &SimulationPlan) -> Vec<ReplicateOutcome> {
    let policy = CachePolicy {
        read: None,
        write: None,
    };
    run::run(plan, policy, None, &|_| {}).unwrap().0.unwrap()
}

/// The decomposition of setting `s`, with its pointwise standard errors.
fn decomposition(plan: &SimulationPlan, outcomes: &[ReplicateOutcome], s: usize) -> Decomposition {
    let predictions: Vec<Vec<f64>> = outcomes.iter().map(|o| o.test_pred[s].clone()).collect();
    let noise: Vec<Vec<f64>> = outcomes.iter().map(|o| o.test_noise.clone()).collect();
    let sd = plan.setup.noise_sd;
    decompose::decompose(&plan.test_truth, &predictions, &noise, sd * sd)
}

/// Raw monomial design 1, x, …, x^degree of a column.
fn monomials(x: &[f64], degree: usize) -> DMatrix<f64> {
    DMatrix::from_fn(x.len(), degree + 1, |i, j| x[i].powi(j as i32))
}

#[test]
fn least_squares_variance_and_bias_match_the_exact_formulas() {
    // Standard least-squares results for a fixed design X and y = f + ε,
    // ε ~ N(0, σ²I): the fit at x₀ has mean h(x₀)ᵀ(XᵀX)⁻¹Xᵀf (the projection
    // of the truth) and variance σ² h(x₀)ᵀ(XᵀX)⁻¹h(x₀). The Monte-Carlo mean
    // fit must lie within 4 standard errors (√(variance/R), exact here) of the
    // projection, and the Monte-Carlo variance within 4 of its jackknife
    // standard errors of the formula, at every test point.
    let plan = plan_from(
        r#"
[experiment]
name = "ls-check"
seed = 11

[simulate]
truth = "exp(x) + sin(3*x)"
inputs = { x = { grid = [0, 1] } }
noise_sd = 0.3
train_size = 12
replicates = 400
test_grid = 7

[split]
holdout = 0
folds = 3

[[candidate]]
family = "polynomial"
degree = [1, 3]
"#,
    );
    let outcomes = outcomes(&plan);
    let x_train: Vec<f64> = plan
        .setup
        .training_inputs(0)
        .column(0)
        .iter()
        .copied()
        .collect();
    let truth_train = plan
        .setup
        .truth_at(&plan.setup.training_inputs(0), "check")
        .unwrap();
    let x_test: Vec<f64> = plan.test_x.column(0).iter().copied().collect();
    let r = plan.setup.replicates as f64;
    let sigma2 = 0.3 * 0.3;
    for (s, degree) in [1usize, 3].into_iter().enumerate() {
        let d = decomposition(&plan, &outcomes, s);
        let x = monomials(&x_train, degree);
        let gram_inverse = (x.transpose() * &x).try_inverse().unwrap();
        let beta = &gram_inverse * x.transpose() * DVector::from_vec(truth_train.clone());
        let h = monomials(&x_test, degree);
        for (j, x0) in x_test.iter().enumerate() {
            let hj = h.row(j).transpose();
            let exact_variance = sigma2 * (hj.transpose() * &gram_inverse * &hj)[(0, 0)];
            let projection = (hj.transpose() * &beta)[(0, 0)];
            let mean_se = (exact_variance / r).sqrt();
            let mean = d.pointwise.mean_fit[j];
            assert!(
                (mean - projection).abs() <= 4.0 * mean_se,
                "degree {degree}, x = {x0}: mean fit {mean} vs projection {projection} (se {mean_se})"
            );
            let (variance, se) = (d.pointwise.variance[j], d.pointwise.variance_se[j]);
            assert!(
                (variance - exact_variance).abs() <= 4.0 * se,
                "degree {degree}, x = {x0}: variance {variance} vs {exact_variance} (se {se})"
            );
        }
        // The bias is the projection error of the truth: for the straight
        // line on this curved truth it must be clearly nonzero.
        if degree == 1 {
            assert!(
                d.bias_sq > 10.0 * d.bias_sq_se,
                "{} ± {}",
                d.bias_sq,
                d.bias_sq_se
            );
        }
    }
}

#[test]
fn nearest_neighbour_variance_at_a_training_input_is_sigma_squared_over_k() {
    // Standard result for a k-NN average with fixed inputs: the prediction at
    // a training input averages k fixed noisy targets, so its variance is
    // σ²/k. The test grid coincides with the training grid.
    let plan = plan_from(
        r#"
[experiment]
name = "knn-check"
seed = 12

[simulate]
truth = "x^2"
inputs = { x = { grid = [0, 1] } }
noise = { normal = 0.5 }
train_size = 21
replicates = 400
test_grid = 21

[split]
holdout = 0
folds = 3

[[candidate]]
family = "nearest-neighbors"
k = [1, 3, 7]
"#,
    );
    assert_eq!(plan.test_x, plan.setup.training_inputs(0));
    let outcomes = outcomes(&plan);
    for (s, k) in [1.0, 3.0, 7.0].into_iter().enumerate() {
        let d = decomposition(&plan, &outcomes, s);
        let exact = 0.25 / k;
        for (j, (&v, &se)) in d
            .pointwise
            .variance
            .iter()
            .zip(&d.pointwise.variance_se)
            .enumerate()
        {
            assert!(
                (v - exact).abs() <= 4.0 * se,
                "k = {k}, point {j}: variance {v} vs σ²/k = {exact} (se {se})"
            );
        }
    }
}

#[test]
fn decomposition_sum_matches_expected_error_within_its_error() {
    // The identity bias² + variance + σ² = expected error holds up to the
    // Monte-Carlo error of the test noise (see `decompose`): within 4 of its
    // standard errors, on a random design.
    let plan = plan_from(
        r#"
[experiment]
name = "identity-check"
seed = 13

[simulate]
truth = "2 + 0.8*x - 0.12*x^2 + 1.5*sin(1.3*x)"
inputs = { x = { uniform = [0, 10] } }
noise_sd = 0.5
train_size = 40
replicates = 60
test_points = 50

[split]
holdout = 0
folds = 5

[[candidate]]
family = "polynomial"
degree = [1, 4, 9]
"#,
    );
    let outcomes = outcomes(&plan);
    for s in 0..3 {
        let d = decomposition(&plan, &outcomes, s);
        assert!(d.identity_gap_se > 0.0);
        assert!(
            d.identity_gap.abs() <= 4.0 * d.identity_gap_se,
            "setting {s}: gap {} ± {}",
            d.identity_gap,
            d.identity_gap_se
        );
    }
}
