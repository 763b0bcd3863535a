//! Benchmark: path-aware fitting (one `fit_path` call for a whole grid)
//! against a naive refit per setting, for every model family.
//!
//! Run: `cargo run --release --example path_bench -- [ROWS] [REPS] [FILTER]`
//! (defaults 20000 rows, 5 repetitions, every family; medians are reported;
//! FILTER keeps the families whose name contains it). The data is
//! invented: a smooth curve in two features plus noise, from a fixed seed.

use std::time::Instant;

use heldout::spec::bind_candidate;
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

/// One benchmark: a family, its grid key and values, other keys, and how
/// many features it takes.
struct Grid {
    name: &'static str,
    family: &'static str,
    key: &'static str,
    values: &'static [&'static str],
    other: &'static str,
    dims: usize,
}

impl Grid {
    /// The candidate as TOML lines, with the whole grid or only setting `index`.
    fn candidate(&self, index: Option<usize>) -> String {
        let values = match index {
            Some(i) => self.values[i].to_string(),
            None => self.values.join(", "),
        };
        let grid = if self.key.is_empty() {
            String::new()
        } else {
            format!("{} = [{values}]", self.key)
        };
        format!("family = \"{}\"\n{grid}\n{}", self.family, self.other)
    }
}

const GRIDS: &[Grid] = &[
    Grid {
        name: "polynomial (12 degrees)",
        family: "polynomial",
        key: "degree",
        values: &[
            "1", "2", "3", "4", "5", "6", "7", "8", "9", "10", "11", "12",
        ],
        other: "",
        dims: 1,
    },
    Grid {
        name: "nearest-neighbors, 1 feature (8 k)",
        family: "nearest-neighbors",
        key: "k",
        values: &["1", "2", "5", "10", "20", "50", "100", "200"],
        other: "",
        dims: 1,
    },
    Grid {
        name: "nearest-neighbors, 2 features (8 k)",
        family: "nearest-neighbors",
        key: "k",
        values: &["1", "2", "5", "10", "20", "50", "100", "200"],
        other: "",
        dims: 2,
    },
    Grid {
        name: "ridge (12 penalties)",
        family: "ridge",
        key: "penalty",
        values: &[
            "1e-4", "1e-3", "1e-2", "1e-1", "1", "1e1", "1e2", "1e3", "1e4", "1e5", "1e6", "1e7",
        ],
        other: "",
        dims: 2,
    },
    Grid {
        name: "lasso (12 penalties)",
        family: "lasso",
        key: "penalty",
        values: &[
            "1e-8", "1e-7", "1e-6", "1e-5", "1e-4", "1e-3", "1e-2", "1e-1", "1", "1e1", "1e2",
            "1e3",
        ],
        other: "",
        dims: 2,
    },
    Grid {
        name: "smoothing-spline (12 penalties)",
        family: "smoothing-spline",
        key: "penalty",
        values: &[
            "1e-6", "1e-5", "1e-4", "1e-3", "1e-2", "1e-1", "1", "1e1", "1e2", "1e3", "1e4", "1e5",
        ],
        other: "",
        dims: 1,
    },
    Grid {
        name: "smoothing-spline (8 df)",
        family: "smoothing-spline",
        key: "df",
        values: &["3", "4", "5", "6", "8", "12", "20", "40"],
        other: "",
        dims: 1,
    },
    Grid {
        name: "spline (8 df)",
        family: "spline",
        key: "df",
        values: &["2", "3", "4", "5", "6", "8", "10", "12"],
        other: "",
        dims: 1,
    },
];

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
    for grid in GRIDS.iter().filter(|g| g.name.contains(&filter)) {
        let name = grid.name;
        let x = train.columns(0, grid.dims).into_owned();
        let x_eval = eval.columns(0, grid.dims).into_owned();
        let features: Vec<String> = ["u", "v"][..grid.dims]
            .iter()
            .map(|f| f.to_string())
            .collect();
        let bind = |index| bind_candidate(&grid.candidate(index), features.clone()).expect("grid");
        let family = bind(None);
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
                let one = bind(Some(s));
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
