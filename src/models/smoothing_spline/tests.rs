//! Invariants and edge cases of the smoothing spline (reference values are in
//! `reference_tests.rs`). Data are invented and generated deterministically.

use nalgebra::DMatrix;

use super::*;

/// Deterministic numbers in [0, 1) from a 64-bit linear congruential
/// generator (Knuth's MMIX multiplier and increment; common practice).
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn column(values: &[f64]) -> DMatrix<f64> {
    DMatrix::from_column_slice(values.len(), 1, values)
}

fn spline(grid: SmootherGrid) -> SmoothingSpline {
    SmoothingSpline {
        features: vec!["x".into()],
        grid,
    }
}

fn by_penalty(penalties: &[f64]) -> SmoothingSpline {
    spline(SmootherGrid::Penalty(penalties.to_vec()))
}

/// `n` invented rows: irregular x in [lo, lo + width), a smooth curve plus noise.
fn invented(n: usize, lo: f64, width: f64, seed: u64) -> (Vec<f64>, Vec<f64>) {
    let mut rng = Lcg(seed);
    let x: Vec<f64> = (0..n).map(|_| lo + width * rng.next()).collect();
    let y = x
        .iter()
        .map(|&v| {
            let u = (v - lo) / width;
            3.0 + 2.0 * u + libm::sin(6.0 * u) + 0.5 * (rng.next() - 0.5)
        })
        .collect();
    (x, y)
}

fn relative(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

fn mean_squared_error(y: &[f64], f: &[f64]) -> f64 {
    y.iter().zip(f).map(|(y, f)| (y - f) * (y - f)).sum::<f64>() / y.len() as f64
}

/// Least-squares line through (x, y), evaluated at x (centred formulas, row order).
fn straight_line(x: &[f64], y: &[f64]) -> Vec<f64> {
    let n = x.len() as f64;
    let (xm, ym) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(y).map(|(x, y)| (x - xm) * (y - ym)).sum();
    let sxx: f64 = x.iter().map(|x| (x - xm) * (x - xm)).sum();
    x.iter().map(|x| ym + sxy / sxx * (x - xm)).collect()
}

#[test]
fn settings_are_named_after_the_grid() {
    // Source: the ids of docs/spec.md, `[[candidate]]` (`family/key=value`).
    let by_df = spline(SmootherGrid::Df(vec![2.5, 4.0]));
    let names: Vec<String> = by_df.settings().iter().map(|s| s.to_string()).collect();
    assert_eq!(names, ["df=2.5", "df=4"]);
    let names: Vec<String> = by_penalty(&[0.001, 10.0])
        .settings()
        .iter()
        .map(|s| s.to_string())
        .collect();
    assert_eq!(names, ["penalty=0.001", "penalty=10"]);
}

#[test]
fn straight_beyond_the_boundary_knots() {
    // Natural spline: f'' = 0 at and beyond the boundary knots, so outside
    // predictions lie on the tangent line at the end knot (Reinsch 1967).
    let (x, y) = invented(30, 2.0, 9.0, 7);
    let lo = x.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let delta = 1e-4;
    let eval = [
        lo - 3.5,
        lo - 2.0,
        lo - 0.5,
        lo,
        lo + delta,
        lo + 2.0 * delta,
        hi + 0.25,
        hi + 1.0,
        hi + 6.0,
        hi,
        hi - delta,
        hi - 2.0 * delta,
    ];
    let fit = &by_penalty(&[0.05])
        .fit_path(&column(&x), &y, &column(&eval), false)
        .unwrap()[0];
    let p = &fit.eval_pred;
    for (side, [a, b, c, knot, in1, in2]) in [
        ("left", [0, 1, 2, 3, 4, 5]),
        ("right", [6, 7, 8, 9, 10, 11]),
    ] {
        let slope_ab = (p[b] - p[a]) / (eval[b] - eval[a]);
        let slope_bc = (p[c] - p[b]) / (eval[c] - eval[b]);
        let slope_to_knot = (p[knot] - p[c]) / (eval[knot] - eval[c]);
        assert!(relative(slope_bc, slope_ab) < 1e-10, "{side}: not a line");
        assert!(
            relative(slope_to_knot, slope_ab) < 1e-10,
            "{side}: kink at the knot"
        );
        // Inside, the one-sided slope matches (continuity of f') and the
        // second difference vanishes to first order in δ (f'' = 0 there).
        let inside = (p[in1] - p[knot]) / (eval[in1] - eval[knot]);
        assert!(
            relative(inside, slope_ab) < 1e-3,
            "{side}: slope {inside} vs {slope_ab}"
        );
        let curvature = (p[in2] - 2.0 * p[in1] + p[knot]) / (delta * delta);
        assert!(
            curvature.abs() < 1e-2,
            "{side}: f'' ≈ {curvature} at the knot"
        );
    }
}

#[test]
fn stable_on_45000_points() {
    // The heaviest unit test here: about 0.3 s of CPU in the test profile.
    // Stability (common practice): every value finite, the trace falls
    // strictly with λ over 1e-4..1e6, and at λ = 1e6 (on x in [0, 1)) the fit
    // is the least-squares line to 1e-3 in MSE. Then df = 7.5 round-trips.
    let started = std::time::Instant::now();
    let (x, y) = invented(45_000, 0.0, 1.0, 12345);
    let penalties: Vec<f64> = (-4..=6).map(|k| libm::pow(10.0, f64::from(k))).collect();
    let fits = by_penalty(&penalties)
        .fit_path(&column(&x), &y, &column(&[0.5, 1.5]), true)
        .unwrap();
    for (fit, lambda) in fits.iter().zip(&penalties) {
        let finite = fit
            .train_pred
            .iter()
            .chain(&fit.eval_pred)
            .all(|v| v.is_finite());
        assert!(finite && fit.effective_df.is_finite(), "penalty {lambda}");
    }
    for pair in fits.windows(2) {
        assert!(
            pair[1].effective_df < pair[0].effective_df,
            "trace not decreasing: {} then {}",
            pair[0].effective_df,
            pair[1].effective_df
        );
    }
    let line_mse = mean_squared_error(&y, &straight_line(&x, &y));
    let stiff = &fits[penalties.len() - 1];
    let stiff_mse = mean_squared_error(&y, &stiff.train_pred);
    assert!(
        relative(stiff_mse, line_mse) < 1e-3,
        "{stiff_mse} vs line {line_mse}"
    );
    assert!(
        stiff_mse <= line_mse * (1.0 + 1e-12),
        "the line is a feasible fit"
    );
    assert!(stiff.effective_df > 2.0 && stiff.effective_df < 2.001);

    let by_df = spline(SmootherGrid::Df(vec![7.5]))
        .fit_path(&column(&x), &y, &column(&[0.5]), false)
        .unwrap();
    assert!((by_df[0].effective_df - 7.5).abs() <= 1e-8 * 7.5);
    println!(
        "45 000 points, 11 penalties and one df: {:?}",
        started.elapsed()
    );
}

#[test]
fn trace_falls_with_the_penalty_between_its_limits() {
    // Effective df of a linear smoother: m at λ = 0 (interpolation), 2 as
    // λ → ∞ (the line), decreasing in between (common practice).
    let (x, y) = invented(30, -4.0, 11.0, 99);
    let penalties: Vec<f64> = (0..=56)
        .map(|k| libm::pow(10.0, -16.0 + 0.5 * f64::from(k)))
        .collect();
    let fits = by_penalty(&penalties)
        .fit_path(&column(&x), &y, &column(&[0.0]), false)
        .unwrap();
    for pair in fits.windows(2) {
        assert!(pair[1].effective_df < pair[0].effective_df);
    }
    let (first, last) = (&fits[0], &fits[fits.len() - 1]);
    assert!(
        30.0 - first.effective_df < 1e-6,
        "λ = 1e-16: {}",
        first.effective_df
    );
    assert!(
        last.effective_df - 2.0 < 1e-6,
        "λ = 1e12: {}",
        last.effective_df
    );
    let zero = &by_penalty(&[0.0])
        .fit_path(&column(&x), &y, &column(&[0.0]), true)
        .unwrap()[0];
    assert_eq!(zero.effective_df, 30.0);
    assert_eq!(zero.train_pred, y, "λ = 0 interpolates");
}

#[test]
#[allow(clippy::needless_range_loop)] // row i indexes several parallel arrays
fn leave_one_out_equals_refits() {
    // Identity (Craven & Wahba 1979, leaving-out-one lemma): the hat-diagonal
    // shortcut equals refitting without each row, here to 1e-9 relative; with
    // distinct x and with tied x (leverage Sᵢᵢ/w).
    let (x, y) = invented(25, 1.0, 6.0, 3);
    let mut tied_x = x.clone();
    for i in [4, 9, 17] {
        tied_x[i] = tied_x[i + 1];
    }
    tied_x[20] = tied_x[5];
    for x in [x, tied_x] {
        let model = by_penalty(&[0.002, 0.1, 3.0]);
        let shortcut = model.leave_one_out(&column(&x), &y).unwrap().unwrap();
        for i in 0..x.len() {
            let keep: Vec<usize> = (0..x.len()).filter(|&r| r != i).collect();
            let x_rest: Vec<f64> = keep.iter().map(|&r| x[r]).collect();
            let y_rest: Vec<f64> = keep.iter().map(|&r| y[r]).collect();
            let refit = model
                .fit_path(&column(&x_rest), &y_rest, &column(&[x[i]]), false)
                .unwrap();
            for (setting, fit) in refit.iter().enumerate() {
                let (a, b) = (shortcut[setting][i], fit.eval_pred[0]);
                assert!(
                    relative(a, b) <= 1e-9,
                    "row {i}, setting {setting}: {a} vs {b}"
                );
            }
        }
    }
}

#[test]
fn penalty_is_in_raw_units_of_x() {
    // ∫f''(x)²dx scales as c⁻³ when x is stretched by c, so (c·x, c³·λ) must
    // give the same fit as (x, λ), and a shift of x must change nothing
    // (common practice; c = 10 is not a power of two, so this also checks the
    // internal rescaling).
    let (x, y) = invented(40, 0.0, 3.0, 11);
    let base = &by_penalty(&[0.02])
        .fit_path(&column(&x), &y, &column(&[1.234]), true)
        .unwrap()[0];
    let stretched: Vec<f64> = x.iter().map(|v| 10.0 * v + 250.0).collect();
    let other = &by_penalty(&[0.02 * 1000.0])
        .fit_path(&column(&stretched), &y, &column(&[262.34]), true)
        .unwrap()[0];
    for (a, b) in other
        .train_pred
        .iter()
        .chain(&other.eval_pred)
        .zip(base.train_pred.iter().chain(&base.eval_pred))
    {
        assert!(relative(*a, *b) < 1e-11, "{a} vs {b}");
    }
    assert!(relative(other.effective_df, base.effective_df) < 1e-11);
}

#[test]
fn tied_rows_act_as_weights() {
    // Ties collapse to weighted knots: repeating every row twice doubles the
    // residual sum of squares, which is the same fit as halving λ (common
    // practice: Σ2(y − f)² + λJ = 2[Σ(y − f)² + (λ/2)J]).
    let (x, y) = invented(20, 0.0, 5.0, 5);
    let doubled_x: Vec<f64> = x.iter().chain(&x).copied().collect();
    let doubled_y: Vec<f64> = y.iter().chain(&y).copied().collect();
    let single = &by_penalty(&[0.05])
        .fit_path(&column(&x), &y, &column(&[2.5]), true)
        .unwrap()[0];
    let double = &by_penalty(&[0.1])
        .fit_path(&column(&doubled_x), &doubled_y, &column(&[2.5]), true)
        .unwrap()[0];
    for (a, b) in double
        .train_pred
        .iter()
        .zip(single.train_pred.iter().chain(&single.train_pred))
    {
        assert!(relative(*a, *b) < 1e-12, "{a} vs {b}");
    }
    assert!(relative(double.eval_pred[0], single.eval_pred[0]) < 1e-12);
    assert!(relative(double.effective_df, single.effective_df) < 1e-12);
}

#[test]
fn near_tie_behaves_like_a_tie() {
    // Two x one unit in the last place apart are two knots; the fit must stay
    // finite and agree with the tied fit (the spline is continuous in its
    // knots) to close to rounding (common practice).
    let (mut x, y) = invented(15, 1.0, 4.0, 21);
    x[3] = x[8];
    let tied = &by_penalty(&[0.01])
        .fit_path(&column(&x), &y, &column(&[2.0]), true)
        .unwrap()[0];
    x[3] = f64::from_bits(x[8].to_bits() + 1);
    let near = &by_penalty(&[0.01])
        .fit_path(&column(&x), &y, &column(&[2.0]), true)
        .unwrap()[0];
    for (a, b) in near
        .train_pred
        .iter()
        .chain(&near.eval_pred)
        .zip(tied.train_pred.iter().chain(&tied.eval_pred))
    {
        assert!(relative(*a, *b) < 1e-8, "{a} vs {b}");
    }
    assert!((near.effective_df - tied.effective_df).abs() < 1e-6);
}

#[test]
fn two_distinct_values_give_the_line_through_their_means() {
    // Hand-computed: with two knots the penalty can be zero, so the fit is
    // the line through the two knot means.
    let x = [1.0, 1.0, 3.0, 3.0, 3.0];
    let y = [2.0, 4.0, 5.0, 6.0, 7.0];
    let fit = &by_penalty(&[0.5])
        .fit_path(&column(&x), &y, &column(&[0.0, 2.0, 5.0]), true)
        .unwrap()[0];
    // Means 3 at x = 1 and 6 at x = 3: the line 1.5 + 1.5x.
    for (got, want) in fit.eval_pred.iter().zip([1.5, 4.5, 9.0]) {
        assert!((got - want).abs() < 1e-12, "{got} vs {want}");
    }
    assert!((fit.effective_df - 2.0).abs() < 1e-12);
}

#[test]
fn df_outside_its_range_is_an_error() {
    // Source: the trace of a cubic smoothing spline lies in [2, m] (common
    // practice); outside it no penalty exists, and the error names the setting.
    let (x, y) = invented(12, 0.0, 1.0, 8);
    for df in [1.5, 12.5] {
        let err = spline(SmootherGrid::Df(vec![df]))
            .fit_path(&column(&x), &y, &column(&[0.5]), false)
            .unwrap_err();
        assert_eq!(
            err,
            FitError::DfOutOfRange {
                setting: format!("df={df}"),
                feature: "x".into(),
                distinct: 12,
            }
        );
        assert!(err.to_string().contains("[2, 12]"), "{err}");
    }
    // df = m is allowed: the interpolating spline.
    let fit = &spline(SmootherGrid::Df(vec![12.0]))
        .fit_path(&column(&x), &y, &column(&[0.5]), true)
        .unwrap()[0];
    assert_eq!(fit.train_pred, y);
}

#[test]
fn df_two_is_the_least_squares_line_with_its_leave_one_out() {
    // df = 2 is the limit of an unbounded penalty: the least-squares line
    // (common practice), its trace 2, and leave-one-out equal to refitting
    // the line without each row; with a tie, so weights enter.
    let (mut x, y) = invented(20, -2.0, 5.0, 11);
    x[7] = x[3];
    let model = spline(SmootherGrid::Df(vec![2.0, 5.0]));
    let fits = model.fit_path(&column(&x), &y, &column(&x), true).unwrap();
    let line = straight_line(&x, &y);
    for (got, want) in fits[0].train_pred.iter().zip(&line) {
        assert!(relative(*got, *want) < 1e-12, "{got} vs {want}");
    }
    for (got, want) in fits[0].eval_pred.iter().zip(&line) {
        assert!(relative(*got, *want) < 1e-12, "{got} vs {want}");
    }
    assert!((fits[0].effective_df - 2.0).abs() < 1e-12);
    assert!(fits[1].effective_df > 4.999);
    let shortcut = model.leave_one_out(&column(&x), &y).unwrap().unwrap();
    for i in 0..x.len() {
        let keep: Vec<usize> = (0..x.len()).filter(|&r| r != i).collect();
        let x_rest: Vec<f64> = keep.iter().map(|&r| x[r]).collect();
        let y_rest: Vec<f64> = keep.iter().map(|&r| y[r]).collect();
        let n = x_rest.len() as f64;
        let (xm, ym) = (
            x_rest.iter().sum::<f64>() / n,
            y_rest.iter().sum::<f64>() / n,
        );
        let sxy: f64 = x_rest
            .iter()
            .zip(&y_rest)
            .map(|(a, b)| (a - xm) * (b - ym))
            .sum();
        let sxx: f64 = x_rest.iter().map(|a| (a - xm) * (a - xm)).sum();
        let refit = ym + sxy / sxx * (x[i] - xm);
        assert!(relative(shortcut[0][i], refit) <= 1e-9, "row {i}");
    }
}

#[test]
fn constant_feature_is_an_error() {
    // Common practice: a spline in a feature with one value is undefined.
    let err = by_penalty(&[1.0])
        .fit_path(
            &column(&[2.0; 6]),
            &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
            &column(&[2.0]),
            false,
        )
        .unwrap_err();
    assert!(matches!(err, FitError::ConstantFeature { .. }), "{err:?}");
}

/// Heavy, manual: writes the 45 000-point fits of `stable_on_45000_points` to
/// the JSON file named by `HELDOUT_SPLINE_DUMP`, for
/// `tests/fixtures/smoothing_spline/check_large.py`, which recomputes them in
/// 60-digit mpmath. Run with
/// `HELDOUT_SPLINE_DUMP=/tmp/large.json cargo test --lib dump_45000 -- --ignored`.
#[test]
#[ignore = "manual high-precision check; needs HELDOUT_SPLINE_DUMP and Python"]
fn dump_45000_points_for_the_high_precision_check() {
    let path =
        std::env::var("HELDOUT_SPLINE_DUMP").expect("set HELDOUT_SPLINE_DUMP to a file path");
    let (x, y) = invented(45_000, 0.0, 1.0, 12345);
    let penalties: Vec<f64> = (-4..=6).map(|k| libm::pow(10.0, f64::from(k))).collect();
    let fits = by_penalty(&penalties)
        .fit_path(&column(&x), &y, &column(&[]), true)
        .unwrap();
    let list = |v: &[f64]| {
        v.iter()
            .map(|v| format!("{v:?}"))
            .collect::<Vec<_>>()
            .join(",")
    };
    let fits: Vec<String> = fits
        .iter()
        .zip(&penalties)
        .map(|(fit, lambda)| {
            format!(
                "{{\"penalty\":{lambda:?},\"effective_df\":{:?},\"fitted\":[{}]}}",
                fit.effective_df,
                list(&fit.train_pred)
            )
        })
        .collect();
    let text = format!(
        "{{\"x\":[{}],\"y\":[{}],\"fits\":[{}]}}\n",
        list(&x),
        list(&y),
        fits.join(",")
    );
    std::fs::write(&path, text).unwrap();
}
