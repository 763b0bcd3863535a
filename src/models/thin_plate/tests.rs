//! Tests of the `thin-plate` family: the penalty convention, the limits in the
//! penalty, df round trips, the leave-one-out shortcut, exact against low-rank,
//! the knot rule, and degenerate point sets.

use super::*;

/// |a − b| ≤ tol · max(|b|, 1).
fn assert_close(what: &str, a: f64, b: f64, tol: f64) {
    assert!(
        (a - b).abs() <= tol * b.abs().max(1.0),
        "{what}: {a:e} vs {b:e} (tolerance {tol:e})"
    );
}

/// Invented scattered points on raw scales that differ (about [1, 5] and
/// [−3, 7]), from two irrational rotations, and a smooth response with a
/// deterministic wobble standing in for noise.
fn scattered(n: usize) -> (DMatrix<f64>, Vec<f64>) {
    let x = DMatrix::from_fn(n, 2, |i, j| {
        let t = (i + 1) as f64;
        if j == 0 {
            1.0 + 4.0 * (t * 0.618_033_988_7).fract()
        } else {
            -3.0 + 10.0 * (t * 0.754_877_666_2).fract()
        }
    });
    let y = (0..n)
        .map(|i| {
            let (a, b) = (x[(i, 0)], x[(i, 1)]);
            libm::sin(1.3 * a) + 0.05 * b * b - 0.2 * a * b / 5.0 + 0.1 * libm::sin(37.0 * i as f64)
        })
        .collect();
    (x, y)
}

fn thin_plate(grid: SmootherGrid, knots: usize, exact_limit: usize) -> ThinPlate {
    ThinPlate {
        features: vec!["a".into(), "b".into()],
        grid,
        knots,
        exact_limit,
    }
}

fn eval_points() -> DMatrix<f64> {
    DMatrix::from_row_slice(
        6,
        2,
        &[0.5, -4.0, 1.7, 0.2, 2.9, 3.3, 4.4, 6.1, 3.0, -2.5, 5.6, 8.0],
    )
}

#[test]
fn penalty_constant_makes_the_roughness_integral_equal_the_quadratic_form() {
    // Identity of the method (Duchon 1977; Wahba 1990, §2.4): for
    // f = Σ δᵢ η(‖u − cᵢ‖) with Σδᵢ = Σδᵢcᵢ = 0 and η = r² log r / (8π),
    // ∫∫ f_uu² + 2f_uv² + f_vv² = δᵀEδ. Checked by Gauss–Legendre quadrature
    // of the closed-form Hessian, ∇²η = [(2 log r + 1)I + 2xxᵀ/r²] / (8π), over
    // [−256, 256]² (the integrand decays as r⁻⁴). Another constant (4π, 16π)
    // would miss by a factor of 2.
    let centres = [
        [0.13, -0.41],
        [0.77, 0.29],
        [-0.52, 0.61],
        [-0.33, -0.68],
        [0.49, 0.91],
    ];
    // Project arbitrary weights onto {Σδ = Σδu = Σδv = 0}.
    let plane = plane::PlaneQr::new(&centres).unwrap();
    let mut delta = vec![0.0, 0.0, 0.0, 1.0, -0.7];
    plane.apply_q(&mut delta);
    let e = kernel(&centres, &centres);
    let quadratic: f64 = (0..5)
        .map(|i| (0..5).map(|j| delta[i] * e[(i, j)] * delta[j]).sum::<f64>())
        .sum();

    let nodes = [
        -0.906_179_845_938_664,
        -0.538_469_310_105_683,
        0.0,
        0.538_469_310_105_683,
        0.906_179_845_938_664,
    ];
    let weights = [
        0.236_926_885_056_189,
        0.478_628_670_499_366,
        0.568_888_888_888_889,
        0.478_628_670_499_366,
        0.236_926_885_056_189,
    ];
    // Panels: width 1/16 on [−2, 2], then [2^k, 2^(k+1)] in 8 parts out to 256.
    let mut edges: Vec<f64> = (0..=64).map(|i| -2.0 + i as f64 / 16.0).collect();
    for k in 1..8 {
        let (a, b) = (f64::from(1 << k), f64::from(1 << (k + 1)));
        for part in 1..=8 {
            let edge = a + (b - a) * part as f64 / 8.0;
            edges.push(edge);
            edges.insert(0, -edge);
        }
    }
    let mut points = Vec::new();
    for w in edges.windows(2) {
        let (mid, half) = (0.5 * (w[0] + w[1]), 0.5 * (w[1] - w[0]));
        for (x, wt) in nodes.iter().zip(weights) {
            points.push((mid + half * x, half * wt));
        }
    }
    let scale = 1.0 / (8.0 * std::f64::consts::PI);
    let mut integral = 0.0;
    for &(u, wu) in &points {
        for &(v, wv) in &points {
            let (mut fuu, mut fuv, mut fvv) = (0.0, 0.0, 0.0);
            for (c, d) in centres.iter().zip(&delta) {
                let (x, y) = (u - c[0], v - c[1]);
                let r2 = x * x + y * y;
                let log_term = libm::log(r2) + 1.0;
                fuu += d * (log_term + 2.0 * x * x / r2);
                fuv += d * (2.0 * x * y / r2);
                fvv += d * (log_term + 2.0 * y * y / r2);
            }
            let density = (fuu * fuu + 2.0 * fuv * fuv + fvv * fvv) * scale * scale;
            integral += density * wu * wv;
        }
    }
    let relative = (integral - quadratic).abs() / quadratic;
    assert!(quadratic > 0.0);
    assert!(
        relative < 1e-3,
        "J = {integral} vs δᵀEδ = {quadratic} ({relative:e})"
    );
}

#[test]
fn a_tiny_penalty_interpolates_distinct_points() {
    // Property of the method (Wahba 1990, §2.4): as λ → 0 the fit interpolates.
    let (x, y) = scattered(30);
    let tps = thin_plate(SmootherGrid::Penalty(vec![0.0, 1e-9]), 300, 2000);
    let fits = tps.fit_path(&x, &y, &x, true).unwrap();
    for fit in &fits {
        for (i, (got, want)) in fit.train_pred.iter().zip(&y).enumerate() {
            assert!((got - want).abs() < 1e-6, "row {i}: {got} vs {want}");
            assert_close(
                "evaluation at a training point",
                fit.eval_pred[i],
                *want,
                1e-6,
            );
        }
    }
    assert_close("df at penalty 0", fits[0].effective_df, 30.0, 1e-12);
}

/// Least-squares plane a + b·x₁ + c·x₂ by the 3 × 3 normal equations
/// (well conditioned here), predicted at `at`.
fn least_squares_plane(x: &DMatrix<f64>, y: &[f64], at: &DMatrix<f64>) -> Vec<f64> {
    let design = DMatrix::from_fn(
        x.nrows(),
        3,
        |i, j| if j == 0 { 1.0 } else { x[(i, j - 1)] },
    );
    let gram = design.transpose() * &design;
    let rhs = design.transpose() * nalgebra::DVector::from_column_slice(y);
    let beta = gram.lu().solve(&rhs).unwrap();
    (0..at.nrows())
        .map(|i| beta[0] + beta[1] * at[(i, 0)] + beta[2] * at[(i, 1)])
        .collect()
}

#[test]
fn a_huge_penalty_gives_the_least_squares_plane() {
    // Property of the method: as λ → ∞ the roughness must vanish, leaving the
    // least-squares fit on the null space of J, the plane (effective df 3).
    let (x, y) = scattered(30);
    let eval = eval_points();
    let tps = thin_plate(SmootherGrid::Penalty(vec![1e12]), 300, 2000);
    let fit = &tps.fit_path(&x, &y, &eval, true).unwrap()[0];
    assert!(
        (fit.effective_df - 3.0).abs() < 1e-6,
        "{}",
        fit.effective_df
    );
    for (got, want) in fit.eval_pred.iter().zip(least_squares_plane(&x, &y, &eval)) {
        assert_close("plane at evaluation points", *got, want, 1e-6);
    }
    for (got, want) in fit.train_pred.iter().zip(least_squares_plane(&x, &y, &x)) {
        assert_close("plane at training points", *got, want, 1e-6);
    }
}

#[test]
fn effective_df_strictly_decreases_as_the_penalty_grows() {
    // 3 + Σ e/(e + λ) is strictly decreasing for e > 0 (method identity).
    let (x, y) = scattered(25);
    let penalties = vec![0.0, 1e-5, 1e-3, 1e-2, 0.1, 1.0, 10.0, 1e3];
    let tps = thin_plate(SmootherGrid::Penalty(penalties), 300, 2000);
    let df: Vec<f64> = tps
        .fit_path(&x, &y, &x, false)
        .unwrap()
        .iter()
        .map(|f| f.effective_df)
        .collect();
    assert_close("df at 0", df[0], 25.0, 1e-12);
    for pair in df.windows(2) {
        assert!(pair[1] < pair[0], "{df:?}");
    }
    assert!(df[df.len() - 1] > 3.0, "{df:?}");
}

#[test]
fn a_df_grid_round_trips_through_the_penalty() {
    // Requested df = trace of the smoother at the solved penalty, to 1e-8
    // (root finding on the trace; method identity).
    let (x, y) = scattered(30);
    let wanted = vec![3.5, 6.0, 12.0, 29.5];
    let tps = thin_plate(SmootherGrid::Df(wanted.clone()), 300, 2000);
    let fits = tps.fit_path(&x, &y, &eval_points(), false).unwrap();
    for (fit, want) in fits.iter().zip(&wanted) {
        assert!(
            (fit.effective_df - want).abs() < 1e-8,
            "{} vs {want}",
            fit.effective_df
        );
    }
    // df at or above the number of rows cannot be reached.
    let tps = thin_plate(SmootherGrid::Df(vec![30.0]), 300, 2000);
    let err = tps.fit_path(&x, &y, &x, false).unwrap_err();
    assert!(
        matches!(&err, FitError::DfOutOfReach { setting, highest, rows: 30, .. }
            if setting == "df=30" && *highest == 30.0),
        "{err:?}"
    );
}

/// Shortcut against refits with the same scaling (and knots), row by row.
#[allow(clippy::needless_range_loop)] // row i indexes several parallel arrays
fn assert_shortcut_equals_refits(tps: &ThinPlate, x: &DMatrix<f64>, y: &[f64]) {
    let n = y.len();
    let shortcut = tps.leave_one_out(x, y).unwrap().unwrap();
    let basis = tps.basis_for(x);
    for i in 0..n {
        let keep: Vec<usize> = (0..n).filter(|&r| r != i).collect();
        let y_rest: Vec<f64> = keep.iter().map(|&r| y[r]).collect();
        let refits = tps
            .fit_with_basis(
                &basis,
                &x.select_rows(&keep),
                &y_rest,
                &x.rows(i, 1).into_owned(),
                false,
                false,
            )
            .unwrap();
        for (setting, (refit, _)) in refits.iter().enumerate() {
            assert_close(
                &format!("setting {setting}, row {i}"),
                shortcut[setting][i],
                refit.eval_pred[0],
                1e-9,
            );
        }
    }
}

#[test]
fn exact_hat_diagonal_shortcut_equals_refits_with_the_same_scaling() {
    // Identity (common practice for linear smoothers), to 1e-9 relative.
    let (x, y) = scattered(20);
    let tps = thin_plate(SmootherGrid::Penalty(vec![1e-3, 0.1, 5.0]), 300, 2000);
    assert_eq!(tps.basis_for(&x).knots, None);
    assert_shortcut_equals_refits(&tps, &x, &y);
}

#[test]
fn low_rank_hat_diagonal_shortcut_equals_refits_with_the_same_knots() {
    // Same identity for the knot basis (exact_limit below n forces it).
    let (x, y) = scattered(30);
    let tps = thin_plate(SmootherGrid::Penalty(vec![1e-3, 0.5]), 12, 10);
    assert_eq!(tps.basis_for(&x).knots.map(|k| k.len()), Some(12));
    assert_shortcut_equals_refits(&tps, &x, &y);
}

#[test]
fn zero_penalty_leave_one_out_is_refused() {
    // An interpolant has every leverage 1: its leave-one-out is undefined.
    let (x, y) = scattered(12);
    let tps = thin_plate(SmootherGrid::Penalty(vec![0.0]), 300, 2000);
    let err = tps.leave_one_out(&x, &y).unwrap().unwrap_err();
    assert!(matches!(err, FitError::FullLeverage { .. }), "{err:?}");
}

#[test]
fn low_rank_with_every_point_a_knot_equals_the_exact_fit() {
    // Identity of the construction: with every training point a knot the
    // knot basis spans the exact solution and carries the same penalty.
    let (x, y) = scattered(40);
    let eval = eval_points();
    let grid = SmootherGrid::Penalty(vec![1e-3, 0.1, 10.0]);
    let exact = thin_plate(grid.clone(), 300, 40)
        .fit_path(&x, &y, &eval, true)
        .unwrap();
    let low_rank = thin_plate(grid, 40, 39)
        .fit_path(&x, &y, &eval, true)
        .unwrap();
    for (a, b) in low_rank.iter().zip(&exact) {
        assert_close("effective df", a.effective_df, b.effective_df, 1e-8);
        for (u, v) in a.eval_pred.iter().zip(&b.eval_pred) {
            assert_close("evaluation prediction", *u, *v, 1e-8);
        }
        for (u, v) in a.train_pred.iter().zip(&b.train_pred) {
            assert_close("training prediction", *u, *v, 1e-8);
        }
    }
}

#[test]
fn low_rank_fits_five_thousand_rows() {
    // 5 000 rows on 100 knots: the df grid is met (root finding) and the
    // surface recovers a smooth truth far better than the plane does
    // (common practice: a smoother beats its null-space fit on curved data).
    let n = 5000;
    let x = DMatrix::from_fn(n, 2, |i, j| {
        let t = (i + 1) as f64;
        if j == 0 {
            (t * 0.618_033_988_7).fract() * 6.0
        } else {
            (t * 0.754_877_666_2).fract() * 2.0 - 1.0
        }
    });
    let truth = |a: f64, b: f64| libm::sin(a) + b * b;
    let y: Vec<f64> = (0..n)
        .map(|i| truth(x[(i, 0)], x[(i, 1)]) + 0.2 * libm::sin(91.0 * i as f64))
        .collect();
    let grid = DMatrix::from_fn(49, 2, |i, j| {
        if j == 0 {
            0.5 + (i / 7) as f64 * (5.0 / 6.0)
        } else {
            -0.9 + (i % 7) as f64 * 0.3
        }
    });
    let tps = thin_plate(SmootherGrid::Df(vec![10.0, 30.0]), 100, 2000);
    let fits = tps.fit_path(&x, &y, &grid, false).unwrap();
    let plane = least_squares_plane(&x, &y, &grid);
    let rms = |pred: &[f64]| {
        let sum: f64 = (0..grid.nrows())
            .map(|i| (pred[i] - truth(grid[(i, 0)], grid[(i, 1)])).powi(2))
            .sum();
        (sum / grid.nrows() as f64).sqrt()
    };
    for (fit, want) in fits.iter().zip([10.0, 30.0]) {
        assert!(
            (fit.effective_df - want).abs() < 1e-8,
            "{}",
            fit.effective_df
        );
    }
    // Seen: plane 0.48, df 10 0.23, df 30 0.032.
    let (smooth, rough) = (rms(&fits[0].eval_pred), rms(&fits[1].eval_pred));
    assert!(smooth < 0.6 * rms(&plane), "{smooth} vs {}", rms(&plane));
    assert!(rough < 0.1 * rms(&plane), "{rough} vs {}", rms(&plane));
}

#[test]
fn knot_choice_depends_on_the_points_not_their_order() {
    // Documented rule: blake3 priority of each point's bits, distinct points.
    let (x, _) = scattered(50);
    let mut with_repeats = x.clone().insert_rows(50, 5, 0.0);
    for i in 0..5 {
        with_repeats.set_row(50 + i, &x.row(i * 7));
    }
    let reversed = DMatrix::from_fn(55, 2, |i, j| with_repeats[(54 - i, j)]);
    let points = |m: &DMatrix<f64>, rows: Vec<usize>| -> Vec<(f64, f64)> {
        rows.into_iter().map(|i| (m[(i, 0)], m[(i, 1)])).collect()
    };
    let a = points(&with_repeats, knot_rows(&with_repeats, 20));
    let b = points(&reversed, knot_rows(&reversed, 20));
    assert_eq!(a, b);
    assert_eq!(
        knot_rows(&with_repeats, 100).len(),
        50,
        "repeats are skipped"
    );
}

#[test]
fn points_on_a_line_are_refused() {
    let x = DMatrix::from_fn(10, 2, |i, j| {
        if j == 0 {
            i as f64
        } else {
            2.0 * i as f64 + 1.0
        }
    });
    let y: Vec<f64> = (0..10).map(|i| (i * i) as f64).collect();
    let err = thin_plate(SmootherGrid::Penalty(vec![1.0]), 300, 2000)
        .fit_path(&x, &y, &x, false)
        .unwrap_err();
    assert!(matches!(err, FitError::CollinearPoints { .. }), "{err:?}");
}

#[test]
fn repeated_points_are_smoothed_and_interpolated_at_their_mean() {
    // With a repeated point the interpolant (λ → 0⁺) passes through the mean
    // of its responses: the repeated direction carries no roughness.
    let (mut x, mut y) = scattered(15);
    x = x.insert_rows(15, 1, 0.0);
    x.set_row(15, &x.row(4).into_owned());
    y.push(y[4] + 1.0);
    let fit = &thin_plate(SmootherGrid::Penalty(vec![0.0]), 300, 2000)
        .fit_path(&x, &y, &x, true)
        .unwrap()[0];
    assert_close("repeated point", fit.train_pred[4], y[4] + 0.5, 1e-8);
    assert_close("repeated point", fit.train_pred[15], y[4] + 0.5, 1e-8);
    assert_close("df", fit.effective_df, 15.0, 1e-10);
}

/// Wall-clock times of whole-grid fits (exact up to 2000 rows, then 300
/// knots); prints only. Run by hand:
/// `cargo test --lib thin_plate::tests::timings -- --ignored --nocapture`.
#[test]
#[ignore = "timing report, run by hand with --ignored --nocapture"]
fn timings() {
    use std::time::Instant;
    for (n, knots, exact_limit) in [
        (500, 300, 2000),
        (1000, 300, 2000),
        (2000, 300, 2000),
        (5000, 300, 2000),
        (20000, 300, 2000),
    ] {
        let (x, y) = scattered(n);
        let tps = thin_plate(
            SmootherGrid::Df(vec![4.0, 8.0, 16.0, 32.0]),
            knots,
            exact_limit,
        );
        let start = Instant::now();
        let fits = tps.fit_path(&x, &y, &eval_points(), false).unwrap();
        eprintln!(
            "n={n} knots={knots} exact={}: {:?} df {:?}",
            n <= exact_limit,
            start.elapsed(),
            fits.iter().map(|f| f.effective_df).collect::<Vec<_>>()
        );
    }
}

#[test]
fn tridiagonal_route_equals_the_eigenvector_route() {
    // Identity (same smoother, two factorisations): a grid with a zero
    // penalty takes the eigenvector route, one without takes the tridiagonal
    // route; the shared penalties must agree to 1e-9.
    let (x, y) = scattered(40);
    let eval = eval_points();
    let penalties = vec![1e-4, 0.1, 10.0];
    let tridiagonal = thin_plate(SmootherGrid::Penalty(penalties.clone()), 300, 2000)
        .fit_path(&x, &y, &eval, true)
        .unwrap();
    let with_zero: Vec<f64> = std::iter::once(0.0).chain(penalties).collect();
    let eigen = thin_plate(SmootherGrid::Penalty(with_zero), 300, 2000)
        .fit_path(&x, &y, &eval, true)
        .unwrap();
    for (a, b) in tridiagonal.iter().zip(&eigen[1..]) {
        assert_close("effective df", a.effective_df, b.effective_df, 1e-9);
        for (u, v) in a.eval_pred.iter().zip(&b.eval_pred) {
            assert_close("evaluation prediction", *u, *v, 1e-9);
        }
        for (u, v) in a.train_pred.iter().zip(&b.train_pred) {
            assert_close("training prediction", *u, *v, 1e-9);
        }
    }
}
