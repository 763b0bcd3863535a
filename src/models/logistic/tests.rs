use nalgebra::DMatrix;

use super::*;
use crate::metrics::ClassPrediction;

fn logistic(grid: Vec<(usize, f64)>, label: Label) -> Logistic {
    Logistic {
        features: vec!["x".into()],
        grid,
        label,
        plain: 0,
    }
}

fn probability(fit: &SettingFit, classes: usize, row: usize, class: usize) -> f64 {
    ClassPrediction { classes }.probabilities(&fit.eval_pred, row)[class]
}

#[test]
fn binary_feature_gives_the_log_odds_of_each_group() {
    // Closed form (a saturated model): with x in {0, 1} the fitted
    // probabilities are the observed shares, so the intercept is the log-odds
    // at x = 0 (1 of 4 positive) and the slope the log odds ratio (3 of 4).
    let x = DMatrix::from_row_slice(8, 1, &[0., 0., 0., 0., 1., 1., 1., 1.]);
    let y = [0., 0., 0., 1., 0., 1., 1., 1.];
    let fit = &logistic(vec![(1, 0.0)], Label::None)
        .fit_classes(&x, &y, &x, true, 2)
        .unwrap()[0];
    let coefficients = fit.coefficients.as_ref().unwrap();
    let intercept = (1.0f64 / 3.0).ln();
    assert!(
        (coefficients[0].1 - intercept).abs() < 1e-12,
        "{coefficients:?}"
    );
    assert!((coefficients[1].1 - (3.0f64.ln() - intercept)).abs() < 1e-12);
    assert!((probability(fit, 2, 0, 1) - 0.25).abs() < 1e-12);
    assert!((probability(fit, 2, 7, 1) - 0.75).abs() < 1e-12);
    assert_eq!(fit.effective_df, 2.0);
}

#[test]
fn separated_classes_fail_naming_the_setting_unless_penalised() {
    let x = DMatrix::from_row_slice(6, 1, &[1., 2., 3., 4., 5., 6.]);
    let y = [0., 0., 0., 1., 1., 1.];
    let err = logistic(vec![(1, 0.0)], Label::None)
        .fit_classes(&x, &y, &x, false, 2)
        .unwrap_err();
    assert!(matches!(err, FitError::Separation { .. }), "{err}");
    assert!(err.to_string().contains("penalty"), "{err}");
    let fits = logistic(vec![(1, 0.5)], Label::Penalty)
        .fit_classes(&x, &y, &x, false, 2)
        .unwrap();
    // Penalised: finite, and on the right side of 1/2 at the ends.
    assert!(probability(&fits[0], 2, 0, 1) < 0.5);
    assert!(probability(&fits[0], 2, 5, 1) > 0.5);
    assert!(fits[0].effective_df > 1.0 && fits[0].effective_df < 2.0);
}

fn three_classes() -> (DMatrix<f64>, Vec<f64>) {
    let n = 60;
    let x = DMatrix::from_fn(n, 1, |i, _| (i as f64 * 0.37).sin() * 3.0 + i as f64 * 0.05);
    let y: Vec<f64> = (0..n).map(|i| ((i * 7 + i / 5) % 3) as f64).collect();
    (x, y)
}

#[test]
fn grid_equals_separate_fits_and_probabilities_sum_to_one() {
    let (x, y) = three_classes();
    let together = logistic(vec![(1, 0.0), (2, 0.0), (3, 0.0)], Label::Degree)
        .fit_classes(&x, &y, &x, true, 3)
        .unwrap();
    for (i, degree) in [1, 2, 3].into_iter().enumerate() {
        let alone = logistic(vec![(degree, 0.0)], Label::Degree)
            .fit_classes(&x, &y, &x, true, 3)
            .unwrap();
        assert_eq!(together[i], alone[0]);
        assert_eq!(together[i].effective_df, (2 * (1 + degree)) as f64);
    }
    for row in 0..x.nrows() {
        let p = ClassPrediction { classes: 3 }.probabilities(&together[0].eval_pred, row);
        assert!((p.iter().sum::<f64>() - 1.0).abs() < 1e-12);
    }
}

#[test]
fn a_class_absent_from_training_gets_probability_zero() {
    // Class 1 of 3 never appears in the training rows.
    let (x, y) = three_classes();
    let y: Vec<f64> = y.iter().map(|&c| if c == 1.0 { 2.0 } else { c }).collect();
    let fits = logistic(vec![(1, 0.0)], Label::None)
        .fit_classes(&x, &y, &x, false, 3)
        .unwrap();
    for row in 0..x.nrows() {
        assert_eq!(probability(&fits[0], 3, row, 1), 0.0);
    }
}

#[test]
fn a_constant_feature_is_an_error_not_a_panic() {
    let x = DMatrix::from_element(5, 1, 2.0);
    let y = [0., 1., 0., 1., 1.];
    let err = logistic(vec![(1, 0.0)], Label::None)
        .fit_classes(&x, &y, &x, false, 2)
        .unwrap_err();
    assert!(matches!(err, FitError::ConstantFeature { .. }), "{err}");
}

#[test]
fn plain_columns_enter_once_in_a_degree_grid() {
    // A numeric feature and a 0/1 indicator (the last, plain column): at
    // degree 2 the design is 1, z(x), z(x)², z(g) — four coefficients, the
    // indicator never squared (its square would repeat it).
    let n = 40;
    let x = DMatrix::from_fn(n, 2, |i, j| match j {
        0 => (i % 10) as f64,
        _ => f64::from(u8::from(i % 4 == 1)),
    });
    // Classes overlap everywhere: no separation.
    let y: Vec<f64> = (0..n)
        .map(|i| f64::from(u8::from((i * 7 + i / 3) % 5 < 2)))
        .collect();
    let model = Logistic {
        features: vec!["x".into(), "g=b".into()],
        grid: vec![(1, 0.0), (2, 0.0)],
        label: Label::Degree,
        plain: 1,
    };
    let fits = model.fit_classes(&x, &y, &x, true, 2).unwrap();
    let names = |fit: &SettingFit| -> Vec<String> {
        fit.coefficients
            .as_ref()
            .unwrap()
            .iter()
            .map(|(name, _)| name.clone())
            .collect()
    };
    assert_eq!(
        names(&fits[0]),
        ["class 2: intercept", "class 2: x", "class 2: g=b"]
    );
    assert_eq!(
        names(&fits[1]),
        [
            "class 2: intercept",
            "class 2: z(x)^1",
            "class 2: z(x)^2",
            "class 2: z(g=b)"
        ]
    );
    assert_eq!(fits[1].effective_df, 4.0);
}

#[test]
fn the_fast_exponential_is_within_two_units_of_libm() {
    // Reference: the libm crate's exp (a port of musl's, itself fdlibm's,
    // accurate to under one unit in the last place). Every tenth of a unit
    // step across [-708, 0] and a fine grid near 0, where e^x ≈ 1 + x.
    let mut worst: f64 = 0.0;
    let grid = (0..=7080).map(|i| -f64::from(i) / 10.0);
    let near_zero = (0..2000).map(|i| -f64::from(i) * 1e-9);
    for x in grid
        .chain(near_zero)
        .chain([-1e-300, -0.0, -0.5 * std::f64::consts::LN_2])
    {
        let (fast, reference) = (exp_of_nonpositive(x), libm::exp(x));
        let ulp = f64::from_bits(reference.to_bits() + 1) - reference;
        worst = worst.max((fast - reference).abs() / ulp);
    }
    assert!(
        worst <= 2.0,
        "worst difference {worst} units in the last place"
    );
    // Below -708 the floor e^-708 stands in.
    assert_eq!(exp_of_nonpositive(-800.0), exp_of_nonpositive(-708.0));
}
