//! Benchmark: path-aware fitting (one `fit_path` call for a whole grid)
//! against a naive refit per setting, for every model family.
//!
//! Run: `cargo run --release --example path_bench -- [ROWS] [REPS] [FILTER]`
//! (defaults 20000 rows, 5 repetitions, every family; medians are reported;
//! FILTER keeps the families whose name contains it). The data is
//! invented: a smooth curve in two features plus noise, from a fixed seed.

use std::time::Instant;

use heldout::models::{self, Family};
use heldout::spec::{FamilyKind, FamilySpec, SmootherGrid};
use nalgebra::DMatrix;

/// Median wall time of `reps` runs of `work`, in seconds.
fn median_seconds(reps: usize, mut work: impl FnMut()) -> f64 {
    let mut times: Vec<f64> = (0..reps)
        .map(|_| {
            let start = Instant::now();
            work();
            start.elapsed().as_secs_f64()
        })
        .collect();
    times.sort_by(f64::total_cmp);
    times[reps / 2]
}

/// A small deterministic generator (splitmix64), so the bench needs no crate.
fn uniform(state: &mut u64) -> f64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
}

fn grids() -> Vec<(&'static str, FamilySpec, usize)> {
    let on = |features: &[&str], kind: FamilyKind| FamilySpec {
        label: None,
        features: Some(features.iter().map(|f| f.to_string()).collect()),
        kind,
    };
    let one = ["u"];
    let two = ["u", "v"];
    vec![
        (
            "polynomial (12 degrees)",
            on(
                &one,
                FamilyKind::Polynomial {
                    intercept: true,
                    degree: (1..=12).collect(),
                },
            ),
            1,
        ),
        (
            "nearest-neighbors, 1 feature (8 k)",
            on(
                &one,
                FamilyKind::NearestNeighbors {
                    k: vec![1, 2, 5, 10, 20, 50, 100, 200],
                },
            ),
            1,
        ),
        (
            "nearest-neighbors, 2 features (8 k)",
            on(
                &two,
                FamilyKind::NearestNeighbors {
                    k: vec![1, 2, 5, 10, 20, 50, 100, 200],
                },
            ),
            2,
        ),
        (
            "ridge (12 penalties)",
            on(
                &two,
                FamilyKind::Ridge {
                    penalty: (0..12).map(|i| 10f64.powi(i - 4)).collect(),
                },
            ),
            2,
        ),
        (
            "lasso (12 penalties)",
            on(
                &two,
                FamilyKind::Lasso {
                    penalty: (0..12).map(|i| 10f64.powi(i - 8)).collect(),
                },
            ),
            2,
        ),
        (
            "smoothing-spline (12 penalties)",
            on(
                &one,
                FamilyKind::SmoothingSpline {
                    grid: SmootherGrid::Penalty((0..12).map(|i| 10f64.powi(i - 6)).collect()),
                },
            ),
            1,
        ),
        (
            "smoothing-spline (8 df)",
            on(
                &one,
                FamilyKind::SmoothingSpline {
                    grid: SmootherGrid::Df(vec![3.0, 4.0, 5.0, 6.0, 8.0, 12.0, 20.0, 40.0]),
                },
            ),
            1,
        ),
        (
            "spline (8 df)",
            on(
                &one,
                FamilyKind::Spline {
                    df: vec![2, 3, 4, 5, 6, 8, 10, 12],
                },
            ),
            1,
        ),
    ]
}

/// The same family with only the `index`-th setting of its grid.
fn single(spec: &FamilySpec, index: usize) -> FamilySpec {
    let mut spec = spec.clone();
    match &mut spec.kind {
        FamilyKind::Polynomial { degree, .. } => *degree = vec![degree[index]],
        FamilyKind::NearestNeighbors { k } => *k = vec![k[index]],
        FamilyKind::Ridge { penalty } | FamilyKind::Lasso { penalty } => {
            *penalty = vec![penalty[index]]
        }
        FamilyKind::SmoothingSpline { grid } | FamilyKind::ThinPlate { grid, .. } => {
            *grid = match grid {
                SmootherGrid::Penalty(v) => SmootherGrid::Penalty(vec![v[index]]),
                SmootherGrid::Df(v) => SmootherGrid::Df(vec![v[index]]),
            }
        }
        FamilyKind::Spline { df } => *df = vec![df[index]],
        FamilyKind::Linear { .. } => {}
    }
    spec
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let rows: usize = args.get(1).and_then(|a| a.parse().ok()).unwrap_or(20_000);
    let reps: usize = args.get(2).and_then(|a| a.parse().ok()).unwrap_or(5);
    let filter = args.get(3).cloned().unwrap_or_default();
    let mut state = 20_261_201u64;
    let train = DMatrix::from_fn(rows, 2, |_, _| uniform(&mut state) * 10.0);
    let y: Vec<f64> = (0..rows)
        .map(|i| {
            let (u, v) = (train[(i, 0)], train[(i, 1)]);
            libm::sin(u) * 2.0 + 0.3 * v + (uniform(&mut state) - 0.5)
        })
        .collect();
    let eval = DMatrix::from_fn(rows / 10, 2, |_, _| uniform(&mut state) * 10.0);

    println!(
        "rows={rows} (eval {}), reps={reps}, median seconds",
        rows / 10
    );
    println!(
        "{:<38} {:>9} {:>10} {:>10} {:>10} {:>9} {:>9} {:>9}",
        "family (grid)",
        "grid fit",
        "mean one",
        "max one",
        "naive sum",
        "grid/mean",
        "grid/max",
        "speed-up"
    );
    for (name, spec, dims) in grids().into_iter().filter(|(n, ..)| n.contains(&filter)) {
        let x = train.columns(0, dims).into_owned();
        let x_eval = eval.columns(0, dims).into_owned();
        let features: Vec<String> = spec.features.clone().unwrap_or_default();
        let family: Box<dyn Family> = models::build(&spec, features.clone());
        if let Err(e) = family.fit_path(&x, &y, &x_eval, false) {
            println!("{name:<38} skipped: {e}");
            continue;
        }
        let grid_time = median_seconds(reps, || {
            family.fit_path(&x, &y, &x_eval, false).expect("fits");
        });
        let settings = family.settings().len();
        let singles: Vec<f64> = (0..settings)
            .map(|s| {
                let one = models::build(&single(&spec, s), features.clone());
                median_seconds(reps, || {
                    one.fit_path(&x, &y, &x_eval, false).expect("fits");
                })
            })
            .collect();
        let naive: f64 = singles.iter().sum();
        let mean_single = naive / settings as f64;
        let max_single = singles.iter().copied().fold(0.0, f64::max);
        println!(
            "{name:<38} {grid_time:>9.4} {mean_single:>10.4} {max_single:>10.4} {naive:>10.4} \
             {:>9.2} {:>9.2} {:>8.1}x",
            grid_time / mean_single,
            grid_time / max_single,
            naive / grid_time
        );
    }
}
