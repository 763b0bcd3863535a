//! Effective degrees of freedom move the right way along a grid: up with
//! polynomial degree and with 1/k, down with the smoothing-spline penalty.
//! These follow from the definitions (common practice: df is the trace of
//! the smoother matrix for linear smoothers, n/k for k-nearest-neighbour
//! means). The other families check the same in their own tests:
//! `spline::tests::effective_df_counts_the_columns_and_grows_with_df`,
//! `thin_plate::tests::effective_df_strictly_decreases_as_the_penalty_grows`,
//! `ridge::tests::effective_df_falls_strictly_with_the_penalty` and
//! `lasso::tests::effective_df_never_rises_with_the_penalty`.

use nalgebra::DMatrix;

use super::nearest_neighbors::NearestNeighbors;
use super::polynomial::Polynomial;
use super::smoothing_spline::SmoothingSpline;
use super::Family;
use crate::models::SmootherGrid;

const ROWS: usize = 120;

/// Two invented features on [0, 10) from a fixed linear congruential
/// sequence, and a smooth response with a little deterministic wobble.
fn data() -> (DMatrix<f64>, Vec<f64>) {
    let mut state = 12_345u64;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64 * 10.0
    };
    let x = DMatrix::from_fn(ROWS, 2, |_, _| next());
    let y = (0..ROWS)
        .map(|i| {
            let (u, v) = (x[(i, 0)], x[(i, 1)]);
            libm::sin(u) + 0.3 * v + 0.2 * libm::cos(7.0 * u * v)
        })
        .collect();
    (x, y)
}

fn names(count: usize) -> Vec<String> {
    ["u", "v"][..count].iter().map(|s| s.to_string()).collect()
}

/// Effective df of every setting of `family`, fitted on the shared data.
fn path_df(family: &dyn Family, features: usize) -> Vec<f64> {
    let (x, y) = data();
    let x = x.columns(0, features).into_owned();
    family
        .fit_path(&x, &y, &x, false)
        .expect("the family fits the shared data")
        .iter()
        .map(|fit| fit.effective_df)
        .collect()
}

fn assert_strictly_decreasing(what: &str, df: &[f64]) {
    for pair in df.windows(2) {
        assert!(pair[0] > pair[1], "{what}: df {df:?} is not decreasing");
    }
}

#[test]
fn polynomial_df_grows_with_degree() {
    let df = path_df(
        &Polynomial {
            features: names(1),
            intercept: true,
            degrees: vec![1, 2, 3, 5, 8],
            plain: 0,
        },
        1,
    );
    // A full-rank polynomial of degree d with intercept has d + 1 columns.
    assert_eq!(df, vec![2.0, 3.0, 4.0, 6.0, 9.0]);
}

#[test]
fn nearest_neighbour_df_grows_with_one_over_k() {
    let ks = vec![1, 2, 5, 10, 30];
    for features in [1, 2] {
        let df = path_df(
            &NearestNeighbors {
                features: names(features),
                ks: ks.clone(),
            },
            features,
        );
        assert_strictly_decreasing("nearest-neighbors along k", &df);
        for (df, k) in df.iter().zip(&ks) {
            assert!(
                (df - ROWS as f64 / *k as f64).abs() < 1e-12,
                "k = {k}: df {df} is not n/k"
            );
        }
    }
}

#[test]
fn smoothing_spline_df_falls_as_the_penalty_grows_and_tracks_a_df_grid() {
    let penalties: Vec<f64> = (-6..=4).map(|e| libm::pow(10.0, f64::from(e))).collect();
    let df = path_df(
        &SmoothingSpline {
            features: names(1),
            grid: SmootherGrid::Penalty(penalties),
        },
        1,
    );
    assert_strictly_decreasing("smoothing-spline along the penalty", &df);
    let targets = vec![2.5, 4.0, 7.0, 15.0, 40.0];
    let reached = path_df(
        &SmoothingSpline {
            features: names(1),
            grid: SmootherGrid::Df(targets.clone()),
        },
        1,
    );
    for (reached, target) in reached.iter().zip(&targets) {
        assert!(
            (reached - target).abs() <= 1e-9 * target,
            "{reached} vs {target}"
        );
    }
}
