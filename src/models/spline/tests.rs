//! Tests of the `spline` family: the basis against the definition of a natural
//! spline, identities of least squares, the scipy/numpy fixture, and errors.

use super::*;

/// |a − b| ≤ tol · max(|b|, 1).
fn assert_close(what: &str, a: f64, b: f64, tol: f64) {
    assert!(
        (a - b).abs() <= tol * b.abs().max(1.0),
        "{what}: {a:e} vs {b:e} (tolerance {tol:e})"
    );
}

fn values_at(basis: &NaturalBasis, x: f64) -> Vec<f64> {
    let mut out = vec![0.0; basis.knots().len()];
    basis.values(x, &mut out);
    out
}

#[test]
fn knots_follow_linear_interpolation_between_order_statistics() {
    // Hyndman & Fan (1996) type 7, worked by hand: n = 5, levels k/3 sit at
    // positions 0, 4/3, 8/3, 4 of the sorted values.
    let sorted = [1.0, 2.0, 4.0, 8.0, 16.0];
    let knots = quantile_knots(&sorted, 3);
    let expected = [1.0, 2.0 + 2.0 / 3.0, 4.0 + 4.0 * 2.0 / 3.0, 16.0];
    for (k, e) in knots.iter().zip(expected) {
        assert_close("knot", *k, e, 1e-15);
    }
    // Levels k/4 sit exactly on the order statistics.
    assert_eq!(quantile_knots(&sorted, 4), sorted.to_vec());
}

#[test]
fn cardinal_basis_is_natural_and_linear_beyond_the_ends() {
    // Definition of a natural cubic spline (Green & Silverman 1994, §2.1):
    // N_j'' = 0 at both boundary knots, linear outside; N_j(t_k) = δ_jk; the
    // N_j sum to 1 because natural interpolation reproduces constants.
    let basis = NaturalBasis::new(vec![0.0, 0.7, 1.1, 2.5, 4.0, 4.2]);
    let count = basis.knots().len();
    let at = |x: f64| values_at(&basis, x);
    // One-sided second difference, exact for cubics:
    // f''(a) = (2f(a) − 5f(a+h) + 4f(a+2h) − f(a+3h)) / h².
    let second = |a: f64, h: f64, j: usize| {
        (2.0 * at(a)[j] - 5.0 * at(a + h)[j] + 4.0 * at(a + 2.0 * h)[j] - at(a + 3.0 * h)[j])
            / (h * h)
    };
    let mut largest_interior = 0.0_f64;
    for j in 0..count {
        assert!(second(0.0, 0.05, j).abs() < 1e-9, "N_{j}'' at t_0");
        assert!(second(4.2, -0.05, j).abs() < 1e-9, "N_{j}'' at t_5");
        // The same difference at an interior knot is not 0 for every N_j, so
        // the check above can fail.
        largest_interior = largest_interior.max(second(1.1, 0.05, j).abs());
        // Linear beyond both ends: second differences of equally spaced points vanish.
        for (a, b, c) in [(-3.0, -2.0, -1.0), (5.0, 6.5, 8.0)] {
            let curvature = at(a)[j] - 2.0 * at(b)[j] + at(c)[j];
            assert!(curvature.abs() < 1e-12, "N_{j} is not linear outside");
        }
        for (k, &t) in basis.knots().iter().enumerate() {
            let want = if j == k { 1.0 } else { 0.0 };
            assert_close(&format!("N_{j}(t_{k})"), at(t)[j], want, 1e-14);
        }
    }
    assert!(largest_interior > 1e-2, "{largest_interior}");
    for x in [-2.0, 0.3, 1.1, 2.0, 4.1, 7.0] {
        assert_close("partition of unity", at(x).iter().sum(), 1.0, 1e-13);
    }
}

/// A natural cubic spline with knots 0, 10, 20, 30 built from truncated
/// powers: Σ a_k = Σ a_k t_k = 0 removes x³ and x² beyond the last knot.
fn natural_on(x: f64, knots: [f64; 4], scale: f64, slope: f64) -> f64 {
    let a = [1.0, -3.0, 3.0, -1.0];
    let cubic: f64 = knots
        .iter()
        .zip(a)
        .map(|(&t, ak)| ak * (x - t).max(0.0).powi(3))
        .sum();
    slope * x + scale * cubic
}

#[test]
fn an_exact_additive_natural_spline_is_reproduced() {
    // Identity: least squares reproduces any member of the model space. With
    // n = 31, df = 3 puts knots at order statistics 0, 10, 20, 30 (type 7).
    let n = 31;
    let x = DMatrix::from_fn(n, 2, |i, j| {
        if j == 0 {
            i as f64
        } else {
            ((7 * i) % n) as f64 * 0.5
        }
    });
    let truth = |a: f64, b: f64| {
        2.0 + natural_on(a, [0.0, 10.0, 20.0, 30.0], 1e-3, -0.5)
            + natural_on(b, [0.0, 5.0, 10.0, 15.0], 2e-3, 0.3)
    };
    let y: Vec<f64> = (0..n).map(|i| truth(x[(i, 0)], x[(i, 1)])).collect();
    let eval = DMatrix::from_row_slice(
        5,
        2,
        &[-4.0, -2.0, 3.3, 1.1, 17.5, 7.7, 29.9, 14.2, 35.0, 18.0],
    );
    let spline = Spline {
        features: vec!["a".into(), "b".into()],
        dfs: vec![3],
    };
    let fits = spline.fit_path(&x, &y, &eval, true).unwrap();
    for i in 0..eval.nrows() {
        let want = truth(eval[(i, 0)], eval[(i, 1)]);
        assert_close("prediction", fits[0].eval_pred[i], want, 1e-9);
    }
    for (got, want) in fits[0].train_pred.iter().zip(&y) {
        assert_close("fitted", *got, *want, 1e-9);
    }
}

#[test]
fn df_one_is_the_least_squares_line() {
    // Two knots (min and max) leave a natural spline no room to bend: the fit
    // is ordinary least squares on x (closed form slope = Sxy / Sxx).
    let n = 17;
    let xs: Vec<f64> = (0..n)
        .map(|i| (i as f64 * 0.61).sin() * 3.0 + i as f64)
        .collect();
    let y: Vec<f64> = xs.iter().map(|v| (0.4 * v).cos() * 2.0 + 0.1 * v).collect();
    let mean_x = xs.iter().sum::<f64>() / n as f64;
    let mean_y = y.iter().sum::<f64>() / n as f64;
    let sxy: f64 = xs
        .iter()
        .zip(&y)
        .map(|(a, b)| (a - mean_x) * (b - mean_y))
        .sum();
    let sxx: f64 = xs.iter().map(|a| (a - mean_x) * (a - mean_x)).sum();
    let slope = sxy / sxx;
    let x = DMatrix::from_column_slice(n, 1, &xs);
    let eval = DMatrix::from_column_slice(3, 1, &[-10.0, 5.5, 40.0]);
    let spline = Spline {
        features: vec!["x".into()],
        dfs: vec![1],
    };
    let fit = &spline.fit_path(&x, &y, &eval, false).unwrap()[0];
    for (i, got) in fit.eval_pred.iter().enumerate() {
        let want = mean_y + slope * (eval[(i, 0)] - mean_x);
        assert_close("line", *got, want, 1e-12);
    }
    assert_eq!(fit.effective_df, 2.0);
}

#[test]
fn effective_df_counts_the_columns_and_grows_with_df() {
    // 1 + p·df columns (common practice: the df of a least-squares fit is its
    // number of coefficients).
    let n = 40;
    let x = DMatrix::from_fn(n, 2, |i, j| ((i * (3 + j)) % 41) as f64 + 0.25 * j as f64);
    let y: Vec<f64> = (0..n).map(|i| (i as f64 * 0.3).sin()).collect();
    let spline = Spline {
        features: vec!["a".into(), "b".into()],
        dfs: vec![1, 3, 6],
    };
    let df: Vec<f64> = spline
        .fit_path(&x, &y, &x, false)
        .unwrap()
        .iter()
        .map(|f| f.effective_df)
        .collect();
    assert_eq!(df, vec![3.0, 7.0, 13.0]);
}

#[test]
#[allow(clippy::needless_range_loop)] // row i indexes several parallel arrays
fn hat_diagonal_shortcut_equals_refits_with_the_same_knots() {
    // Identity (common practice for linear smoothers): with the knots held
    // fixed, the shortcut equals refitting without each row, to 1e-9 relative.
    let n = 25;
    let x = DMatrix::from_fn(n, 2, |i, j| {
        let t = i as f64;
        if j == 0 {
            (t * 0.37).sin() * 4.0 + t * 0.1
        } else {
            (t * 1.7).cos() * 2.0
        }
    });
    let y: Vec<f64> = (0..n)
        .map(|i| (x[(i, 0)] * 0.8).cos() + 0.3 * x[(i, 1)] + 0.05 * i as f64)
        .collect();
    let spline = Spline {
        features: vec!["a".into(), "b".into()],
        dfs: vec![2, 4],
    };
    let shortcut = spline.leave_one_out(&x, &y).unwrap().unwrap();
    for (setting, &df) in spline.dfs.iter().enumerate() {
        let bases = spline.bases(&x, df).unwrap();
        for i in 0..n {
            let keep: Vec<usize> = (0..n).filter(|&r| r != i).collect();
            let y_rest: Vec<f64> = keep.iter().map(|&r| y[r]).collect();
            let (refit, _) = spline
                .fit_with_bases(
                    &bases,
                    df,
                    &x.select_rows(&keep),
                    &y_rest,
                    &x.rows(i, 1).into_owned(),
                    false,
                )
                .unwrap();
            assert_close(
                &format!("df={df}, row {i}"),
                shortcut[setting][i],
                refit.eval_pred[0],
                1e-9,
            );
        }
    }
}

#[test]
fn matches_the_scipy_reference_fixture() {
    // Reference: tests/fixtures/splines/expected.json, made by make_fixture.py
    // with numpy 2.4.6 and scipy 1.17.1 (CubicSpline natural cardinal basis,
    // lstsq) and checked there against exact rational arithmetic to 1e-12.
    let text = include_str!("../../../tests/fixtures/splines/expected.json");
    let fixture: serde_json::Value = serde_json::from_str(text).unwrap();
    let rows = |key: &str| -> DMatrix<f64> {
        let rows = fixture[key].as_array().unwrap();
        DMatrix::from_fn(rows.len(), 2, |i, j| rows[i][j].as_f64().unwrap())
    };
    let numbers = |v: &serde_json::Value| -> Vec<f64> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|n| n.as_f64().unwrap())
            .collect()
    };
    let (x, x_eval) = (rows("x_train"), rows("x_eval"));
    let y = numbers(&fixture["y_train"]);
    let fits = fixture["fits"].as_array().unwrap();
    let dfs: Vec<usize> = fits
        .iter()
        .map(|f| f["df"].as_u64().unwrap() as usize)
        .collect();
    let spline = Spline {
        features: vec!["light_mol".into(), "night_c".into()],
        dfs: dfs.clone(),
    };
    let ours = spline.fit_path(&x, &y, &x_eval, true).unwrap();
    assert_eq!(ours.len(), fits.len());
    for ((reference, fit), &df) in fits.iter().zip(&ours).zip(&dfs) {
        let bases = spline.bases(&x, df).unwrap();
        for (f, basis) in bases.iter().enumerate() {
            let want = numbers(&reference["knots"][f]);
            assert_eq!(basis.knots().len(), want.len());
            for (k, w) in basis.knots().iter().zip(want) {
                assert_close(&format!("df={df} knot"), *k, w, 1e-14);
            }
        }
        let pairs = [
            (&fit.train_pred, numbers(&reference["train_pred"])),
            (&fit.eval_pred, numbers(&reference["eval_pred"])),
        ];
        for (got, want) in pairs {
            assert_eq!(got.len(), want.len());
            for (g, w) in got.iter().zip(want) {
                assert_close(&format!("df={df} prediction"), *g, w, 1e-9);
            }
        }
    }
}

#[test]
fn tied_quantiles_name_the_feature_and_ask_for_a_lower_df() {
    // Half the values are 0, so the quantiles at 1/4 and 1/2 are both 0.
    let x = DMatrix::from_fn(20, 1, |i, _| if i < 10 { 0.0 } else { i as f64 });
    let y: Vec<f64> = (0..20).map(|i| i as f64).collect();
    let spline = Spline {
        features: vec!["dose".into()],
        dfs: vec![4],
    };
    let err = spline.fit_path(&x, &y, &x, false).unwrap_err();
    assert!(
        matches!(&err, FitError::CoincidentKnots { feature, knot: 1, .. } if feature == "dose"),
        "{err:?}"
    );
    assert!(
        err.to_string().contains("knots 1 and 2") && err.to_string().contains("lower df"),
        "{err}"
    );
}

#[test]
fn too_few_rows_and_constant_features_fail_before_fitting() {
    let x = DMatrix::from_fn(6, 1, |i, _| i as f64);
    let y = [1.0, 3.0, 2.0, 5.0, 4.0, 6.0];
    let spline = Spline {
        features: vec!["x".into()],
        dfs: vec![6],
    };
    let err = spline.fit_path(&x, &y, &x, false).unwrap_err();
    assert!(
        matches!(
            err,
            FitError::TooFewRows {
                needed: 7,
                available: 6,
                ..
            }
        ),
        "{err:?}"
    );
    let flat = DMatrix::from_element(6, 1, 2.5);
    let err = spline.fit_path(&flat, &y, &flat, false).unwrap_err();
    assert!(matches!(err, FitError::ConstantFeature { .. }), "{err:?}");
}
