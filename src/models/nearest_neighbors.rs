//! `nearest-neighbors`: the average target of the k training rows nearest in
//! Euclidean distance, for a whole grid of k from one neighbour search.
//!
//! Features are standardised with the training fold's mean and population
//! standard deviation. For each query the neighbours up to the largest k are
//! found once and sorted by (distance, training row); prefix sums of their
//! targets then give every k at once. Ties in distance go to the earlier
//! training row, so results never depend on a search order.
//!
//! With one feature no scaling is needed (it cannot change the order of
//! distances) and the search walks outwards from the query's place in the
//! sorted training values (O(log n + k) per query). With 2 to
//! [`TREE_MAX_DIMS`] features the training rows go into one k-d tree per fit
//! (`kd_tree`; O(n log n) to build, about O(log n + k) per query in low
//! dimension), which serves the evaluation rows and the training-error pass
//! alike. With more features the search scans all training rows and selects
//! the k nearest (O(n) per query), since there a tree no longer pays. All
//! three give exactly the same neighbours in the same order, boundary ties
//! included, so the averages agree to the bit.

use nalgebra::DMatrix;
use rayon::prelude::*;

use super::kd_tree::{by_distance_then_row, squared_distance, KdTree, LEAF_SIZE};
use super::registry::{
    CategoricalUse, FamilyDef, KeyDef, KeyKind, SettingProblem, Settings, Targets,
};
use super::{
    mean_and_sd, neighbour_vote, require_spread, Family, FitRequest, LeaveOneOut, Setting,
    SettingFit, TrainingShape,
};
use crate::error::FitError;

/// The most features for which the search goes through a k-d tree; above
/// it every query scans every training row.
///
/// Measured (2026-12-03, 2-core machine shared with other builds, load
/// average about 4): uniform random features, 2 000 queries, 18 000 and
/// 72 000 training rows, k = 10 and 89. The tree's speed-up over the scan
/// was 6–44× with 2 features, 2.3–14× with 5, 1.3–3.1× with 8, and from 9
/// features on it ranged 0.7–1.4× with no consistent gain (every leaf gets
/// visited, and the tree's bookkeeping costs what the pruning saves).
const TREE_MAX_DIMS: usize = 8;

/// k-nearest-neighbour averages for the listed k.
#[derive(Debug, Clone)]
pub(crate) struct NearestNeighbors {
    pub(crate) features: Vec<String>,
    pub(crate) ks: Vec<usize>,
}

/// The registry entry of `nearest-neighbors` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new(
    "nearest-neighbors",
    &[KeyDef::new(
        "k",
        KeyKind::Counts,
        "The neighbour counts to compare.",
    )],
    build,
)
.about(
    "The mean target of the k nearest training rows (features standardised); with a class \
     target, their majority vote.",
)
.grid("k = [1, 3, 5, 10, 20, 40]")
.predicts(Targets::Both)
.takes_categorical(CategoricalUse::EveryLevel);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    Ok(Box::new(NearestNeighbors {
        features,
        ks: settings.whole_grid("k", 1, usize::MAX)?,
    }))
}

/// Training points in standardised coordinates, row-major for fast scans.
struct Standardised {
    points: Vec<f64>,
    dims: usize,
    means: Vec<f64>,
    sds: Vec<f64>,
    /// With one feature: (value, row) sorted, for the outward walk.
    sorted: Option<Vec<(f64, usize)>>,
    /// With 2 to [`TREE_MAX_DIMS`] features: the k-d tree of the points.
    tree: Option<KdTree>,
}

impl Standardised {
    fn fit(x: &DMatrix<f64>) -> Self {
        // With one feature an affine map cannot change which rows are
        // nearest, so raw values are used: no rounding from scaling can
        // break a tie differently in different folds.
        let (means, sds): (Vec<f64>, Vec<f64>) = if x.ncols() == 1 {
            (vec![0.0], vec![1.0])
        } else {
            x.column_iter()
                .map(|c| mean_and_sd(c.iter().copied()))
                .unzip()
        };
        let mut s = Standardised {
            points: Vec::new(),
            dims: x.ncols(),
            means,
            sds,
            sorted: None,
            tree: None,
        };
        s.points = s.transform(x);
        if s.dims == 1 {
            let mut sorted: Vec<(f64, usize)> = s.points.iter().copied().zip(0..).collect();
            sorted.sort_unstable_by(by_distance_then_row);
            s.sorted = Some(sorted);
        } else if s.dims <= TREE_MAX_DIMS {
            s.tree = Some(KdTree::build(&s.points, s.dims, LEAF_SIZE));
        }
        s
    }

    fn transform(&self, x: &DMatrix<f64>) -> Vec<f64> {
        let mut out = Vec::with_capacity(x.nrows() * self.dims);
        for i in 0..x.nrows() {
            for j in 0..self.dims {
                out.push((x[(i, j)] - self.means[j]) / self.sds[j]);
            }
        }
        out
    }

    /// The `k_max` nearest training rows of `query` (plus any rows tied with
    /// the last of them), in `scratch`, in no particular order.
    fn gather_candidates(&self, query: &[f64], k_max: usize, scratch: &mut Vec<(f64, usize)>) {
        scratch.clear();
        let Some(sorted) = &self.sorted else {
            scratch.extend(
                self.points
                    .chunks_exact(self.dims)
                    .enumerate()
                    .map(|(row, p)| (squared_distance(p, query), row)),
            );
            return;
        };
        let q = query[0];
        let distance = |i: usize| {
            let (v, row) = sorted[i];
            ((v - q) * (v - q), row)
        };
        let start = sorted.partition_point(|(v, _)| *v < q);
        let (mut below, mut above) = (start, start);
        let mut kth = f64::INFINITY;
        loop {
            let left = (below > 0).then(|| distance(below - 1));
            let right = (above < sorted.len()).then(|| distance(above));
            let next = match (left, right) {
                (Some(l), Some(r)) if l.0 <= r.0 => {
                    below -= 1;
                    l
                }
                (_, Some(r)) => {
                    above += 1;
                    r
                }
                (Some(l), None) => {
                    below -= 1;
                    l
                }
                (None, None) => break,
            };
            // Distances come in non-decreasing order; stop past the k-th,
            // once every row tied with it is in.
            if scratch.len() >= k_max && next.0 > kth {
                break;
            }
            scratch.push(next);
            if scratch.len() == k_max {
                kth = next.0;
            }
        }
    }

    /// The `k_max` nearest training rows of `query` (without row `skip`), in
    /// `scratch`, ordered by (distance, row).
    fn ordered_neighbours(
        &self,
        query: &[f64],
        k_max: usize,
        skip: Option<usize>,
        scratch: &mut Vec<(f64, usize)>,
    ) {
        if let Some(tree) = &self.tree {
            // Already the k_max nearest, nearest first. Without a row to
            // skip, the last query's neighbours (in `scratch`) bound this
            // one's search.
            let bound = match skip {
                None => self.bound_from(scratch, k_max, query),
                Some(_) => f64::INFINITY,
            };
            tree.nearest(query, k_max, skip, bound, scratch);
            return;
        }
        let wanted = k_max + usize::from(skip.is_some());
        self.gather_candidates(query, wanted, scratch);
        if let Some(skip) = skip {
            scratch.retain(|&(_, row)| row != skip);
        }
        if k_max < scratch.len() {
            scratch.select_nth_unstable_by(k_max - 1, by_distance_then_row);
            scratch.truncate(k_max);
        }
        scratch.sort_unstable_by(by_distance_then_row);
    }

    /// An upper bound on the squared distance from `query` to its k-th
    /// nearest training row: the farthest of the k rows in `previous` (the
    /// neighbours of the query before, which [`Self::answer_all`] takes in
    /// an order that keeps consecutive queries close), measured from `query`
    /// exactly as the search measures. Infinite when `previous` holds fewer
    /// than k rows.
    fn bound_from(&self, previous: &[(f64, usize)], k: usize, query: &[f64]) -> f64 {
        if previous.len() < k {
            return f64::INFINITY;
        }
        let dims = self.dims;
        previous
            .iter()
            .map(|&(_, row)| squared_distance(&self.points[row * dims..(row + 1) * dims], query))
            .fold(0.0, f64::max)
    }

    /// The `k_max` nearest training rows of `query` in `scratch`, in no
    /// particular order (the class vote orders only what it needs).
    fn unordered_neighbours(&self, query: &[f64], k_max: usize, scratch: &mut Vec<(f64, usize)>) {
        if let Some(tree) = &self.tree {
            let bound = self.bound_from(scratch, k_max, query);
            tree.nearest_unordered(query, k_max, bound, scratch);
            return;
        }
        self.gather_candidates(query, k_max, scratch);
        if k_max < scratch.len() {
            scratch.select_nth_unstable_by(k_max - 1, by_distance_then_row);
            scratch.truncate(k_max);
        }
    }

    /// Prefix sums of the targets of the `k_max` nearest training rows of
    /// `query` (for tests that compare the three searches).
    #[cfg(test)]
    fn neighbour_prefix_sums(
        &self,
        query: &[f64],
        y: &[f64],
        k_max: usize,
        scratch: &mut Vec<(f64, usize)>,
    ) -> Vec<f64> {
        self.ordered_neighbours(query, k_max, None, scratch);
        let mut sums = Vec::with_capacity(k_max + 1);
        sums.push(0.0);
        let mut total = 0.0;
        for &(_, row) in scratch.iter() {
            total += y[row];
            sums.push(total);
        }
        sums
    }

    /// Calls `answer(query number, query, scratch, out)` for every query of
    /// `queries` (row-major, `dims` per row), which appends `width` numbers
    /// per setting to `out[s]`; returns per setting the answers in query
    /// order. Queries go in blocks, in parallel, in the order of a k-d tree
    /// over the queries themselves, so that consecutive queries visit the
    /// same part of the training tree while it is in cache. Each answer
    /// depends on its query alone, so neither the order nor the blocks can
    /// change a number.
    fn answer_all(
        &self,
        queries: &[f64],
        settings: usize,
        width: usize,
        answer: impl Fn(usize, &[f64], &mut Vec<(f64, usize)>, &mut [Vec<f64>]) + Sync,
    ) -> Vec<Vec<f64>> {
        const BLOCK: usize = 512;
        let dims = self.dims;
        let count = queries.len() / dims;
        let order: Vec<usize> = if count > BLOCK {
            KdTree::build(queries, dims, LEAF_SIZE).into_order()
        } else {
            (0..count).collect()
        };
        let blocks: Vec<Vec<Vec<f64>>> = order
            .par_chunks(BLOCK)
            .map(|rows| {
                let mut scratch = Vec::new();
                let mut out = vec![Vec::with_capacity(rows.len() * width); settings];
                for &r in rows {
                    answer(
                        r,
                        &queries[r * dims..(r + 1) * dims],
                        &mut scratch,
                        &mut out,
                    );
                }
                out
            })
            .collect();
        let mut result = vec![vec![0.0; count * width]; settings];
        for (rows, block) in order.chunks(BLOCK).zip(blocks) {
            for (all, part) in result.iter_mut().zip(block) {
                for (&r, values) in rows.iter().zip(part.chunks_exact(width)) {
                    all[r * width..(r + 1) * width].copy_from_slice(values);
                }
            }
        }
        result
    }

    /// Per setting, the mean target of the `k` nearest training rows of
    /// every query (leaving out training row `skip(query number)`, if any).
    /// The targets are summed nearest first, so each mean is the prefix sum
    /// up to `k` divided by `k`, for the whole grid from one search.
    fn means(
        &self,
        queries: &[f64],
        y: &[f64],
        ks: &[usize],
        skip: impl Fn(usize) -> Option<usize> + Sync,
    ) -> Vec<Vec<f64>> {
        let k_max = ks.iter().copied().max().unwrap_or(1);
        let mut ascending: Vec<(usize, usize)> = ks.iter().copied().zip(0..).collect();
        ascending.sort_unstable();
        self.answer_all(queries, ks.len(), 1, |r, query, scratch, out| {
            self.ordered_neighbours(query, k_max, skip(r), scratch);
            let (mut taken, mut total) = (0, 0.0);
            for &(k, s) in &ascending {
                while taken < k {
                    total += y[scratch[taken].1];
                    taken += 1;
                }
                out[s].push(total / k as f64);
            }
        })
    }
}

impl NearestNeighbors {
    fn k_max(&self) -> usize {
        self.ks.iter().copied().max().unwrap_or(1)
    }

    /// The training points standardised for distances, once the fold is
    /// known to hold `needed` rows and no constant feature.
    fn space(&self, x_train: &DMatrix<f64>, needed: usize) -> Result<Standardised, FitError> {
        if x_train.nrows() < needed {
            return Err(FitError::TooFewRows {
                setting: format!("k={}", self.k_max()),
                needed,
                available: x_train.nrows(),
            });
        }
        require_spread(
            &self.features,
            x_train,
            "it cannot be standardised for distances",
        )?;
        Ok(Standardised::fit(x_train))
    }

    /// Leave-one-out predictions: each training row's neighbours among the others.
    fn loo_by_exclusion(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> LeaveOneOut {
        let k_max = self.k_max();
        // Each row's k_max neighbours come from the other rows.
        let space = self.space(x_train, k_max + 1)?;
        Ok(space.means(&space.points, y_train, &self.ks, Some))
    }
}

impl Family for NearestNeighbors {
    /// Exact only with one feature: with several, leaving a row out changes
    /// the standardisation and so possibly the neighbours; then refit.
    fn leave_one_out(&self, x_train: &DMatrix<f64>, y_train: &[f64]) -> Option<LeaveOneOut> {
        (self.features.len() == 1).then(|| self.loo_by_exclusion(x_train, y_train))
    }

    fn settings(&self) -> Vec<Setting> {
        self.ks.iter().map(|&k| Setting::count("k", k)).collect()
    }

    fn infeasible(&self, setting: usize, shape: &TrainingShape<'_>) -> Option<String> {
        let k = self.ks[setting];
        (k > shape.rows()).then(|| {
            format!(
                "k={k} needs at least {k} training rows, the fit has {}",
                shape.rows()
            )
        })
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        let n = x_train.nrows();
        let k_max = self.k_max();
        let space = self.space(x_train, k_max)?;
        if request.classes > 0 {
            // A class target: the k nearest rows vote (neighbour_vote.rs).
            let width = request.classes + 1;
            let vote_all = |queries: &[f64]| -> Vec<Vec<f64>> {
                space.answer_all(queries, self.ks.len(), width, |_, q, scratch, out| {
                    space.unordered_neighbours(q, k_max, scratch);
                    let class_of = |row: usize| y_train[row] as usize;
                    neighbour_vote::vote(scratch, class_of, &self.ks, request.classes, out);
                })
            };
            let mut train = if final_fit {
                vote_all(&space.points)
            } else {
                vec![Vec::new(); self.ks.len()]
            };
            let eval = vote_all(&space.transform(x_eval));
            return Ok(self
                .ks
                .iter()
                .zip(eval)
                .enumerate()
                .map(|(s, (&k, eval_pred))| SettingFit {
                    train_pred: std::mem::take(&mut train[s]),
                    eval_pred,
                    effective_df: n as f64 / k as f64,
                    coefficients: None,
                })
                .collect());
        }
        let mut train = if final_fit {
            space.means(&space.points, y_train, &self.ks, |_| None)
        } else {
            vec![Vec::new(); self.ks.len()]
        };
        let eval = space.means(&space.transform(x_eval), y_train, &self.ks, |_| None);
        Ok(self
            .ks
            .iter()
            .zip(eval)
            .enumerate()
            .map(|(s, (&k, eval_pred))| SettingFit {
                train_pred: std::mem::take(&mut train[s]),
                eval_pred,
                effective_df: n as f64 / k as f64,
                coefficients: None,
            })
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn data() -> (DMatrix<f64>, Vec<f64>) {
        let x = DMatrix::from_fn(10, 2, |i, j| {
            ((i * 37 + j * 11) % 17) as f64 + 0.1 * i as f64
        });
        let y: Vec<f64> = (0..10).map(|i| (i as f64).sin() * 3.0).collect();
        (x, y)
    }

    #[test]
    fn one_neighbour_training_error_is_zero() {
        // Common practice: with distinct inputs each row is its own nearest neighbour.
        let (x, y) = data();
        let knn = NearestNeighbors {
            features: vec!["a".into(), "b".into()],
            ks: vec![1],
        };
        let fit = &knn.fit_path(&x, &y, &x, true).unwrap()[0];
        assert_eq!(fit.train_pred, y);
    }

    #[test]
    fn all_neighbours_predict_the_training_mean() {
        // Common practice: k = n averages every training row.
        let (x, y) = data();
        let knn = NearestNeighbors {
            features: vec!["a".into(), "b".into()],
            ks: vec![10],
        };
        let fit = &knn.fit_path(&x, &y, &x, true).unwrap()[0];
        let mean = y.iter().sum::<f64>() / 10.0;
        for p in &fit.eval_pred {
            assert!((p - mean).abs() < 1e-12);
        }
        assert_eq!(fit.effective_df, 1.0);
    }

    #[test]
    fn grid_equals_separate_fits() {
        let (x, y) = data();
        let together = NearestNeighbors {
            features: vec!["a".into(), "b".into()],
            ks: vec![1, 3, 7],
        }
        .fit_path(&x, &y, &x, true)
        .unwrap();
        for (i, k) in [1, 3, 7].into_iter().enumerate() {
            let alone = NearestNeighbors {
                features: vec!["a".into(), "b".into()],
                ks: vec![k],
            }
            .fit_path(&x, &y, &x, true)
            .unwrap();
            assert_eq!(together[i], alone[0]);
        }
    }
}

#[cfg(test)]
mod search_tests {
    use super::*;

    #[test]
    fn sorted_walk_equals_full_scan_with_ties() {
        // Many repeated values: the walk must pick the same rows as a scan,
        // ties broken by row.
        let x = DMatrix::from_fn(40, 1, |i, _| ((i * 7) % 9) as f64);
        let y: Vec<f64> = (0..40).map(|i| i as f64).collect();
        let walk = Standardised::fit(&x);
        let mut scan = Standardised::fit(&x);
        scan.sorted = None;
        let queries = DMatrix::from_fn(15, 1, |i, _| i as f64 * 0.6 - 0.5);
        let (mut a, mut b) = (Vec::new(), Vec::new());
        for q in walk.transform(&queries) {
            for k in [1, 3, 5, 12, 40] {
                assert_eq!(
                    walk.neighbour_prefix_sums(&[q], &y, k, &mut a),
                    scan.neighbour_prefix_sums(&[q], &y, k, &mut b),
                    "query {q}, k {k}"
                );
            }
        }
    }
}

#[cfg(test)]
mod tree_tests {
    use super::*;

    /// Rows on a coarse grid (so many share a distance to a query, and some
    /// are exact duplicates), plus a few off-grid rows.
    fn tied_rows(n: usize, dims: usize) -> DMatrix<f64> {
        DMatrix::from_fn(n, dims, |i, j| {
            if i % 11 == 10 {
                (i * (j + 3)) as f64 * 0.137 % 4.0
            } else {
                ((i * (2 * j + 5) + j) % (3 + j)) as f64
            }
        })
    }

    #[test]
    fn tree_equals_full_scan_with_ties_and_duplicates() {
        // Invariant (docs/spec.md, nearest-neighbors): the k-d tree finds the
        // same neighbours in the same (distance, row) order as the scan, so
        // the prefix sums agree to the bit, with and without a left-out row.
        for dims in [2, 3, 4, TREE_MAX_DIMS] {
            let n = 150;
            let x = tied_rows(n, dims);
            let y: Vec<f64> = (0..n).map(|i| (i as f64 * 0.7).sin() * 10.0).collect();
            let tree = Standardised::fit(&x);
            assert!(tree.tree.is_some(), "dims {dims}");
            let mut scan = Standardised::fit(&x);
            scan.tree = None;
            let queries = DMatrix::from_fn(40, dims, |i, j| {
                x[((i * 13) % n, j)] + if i % 3 == 0 { 0.0 } else { 0.25 * j as f64 }
            });
            let (mut a, mut b) = (Vec::new(), Vec::new());
            for q in tree.transform(&queries).chunks_exact(dims) {
                for k in [1, 2, 5, 9, 30, n] {
                    assert_eq!(
                        tree.neighbour_prefix_sums(q, &y, k, &mut a),
                        scan.neighbour_prefix_sums(q, &y, k, &mut b),
                        "dims {dims}, query {q:?}, k {k}"
                    );
                }
            }
            // Leave-one-out: every row's neighbours among the others.
            let ks = [1, 4, 25];
            assert_eq!(
                tree.means(&tree.points, &y, &ks, Some),
                scan.means(&scan.points, &y, &ks, Some),
                "dims {dims}, leave-one-out"
            );
        }
    }

    #[test]
    fn queries_in_blocks_and_tree_order_give_each_query_its_own_answer() {
        // More queries than one block, so they are reordered and split:
        // every answer must still be its own query's prefix sum over k.
        let (n, dims) = (700, 3);
        let x = tied_rows(n, dims);
        let y: Vec<f64> = (0..n).map(|i| (i as f64 * 1.3).cos() * 5.0).collect();
        let space = Standardised::fit(&x);
        let queries = DMatrix::from_fn(1500, dims, |i, j| ((i * 17 + j * 5) % 23) as f64 * 0.2);
        let queries = space.transform(&queries);
        let ks = [7, 1, 40];
        let means = space.means(&queries, &y, &ks, |_| None);
        let mut scratch = Vec::new();
        for (r, q) in queries.chunks_exact(dims).enumerate() {
            let sums = space.neighbour_prefix_sums(q, &y, 40, &mut scratch);
            for (s, &k) in ks.iter().enumerate() {
                assert_eq!(means[s][r], sums[k] / k as f64, "query {r}, k {k}");
            }
        }
    }

    #[test]
    fn earlier_twin_wins_the_tie_in_training_error() {
        // docs/spec.md: a duplicate training row is not its own first
        // neighbour; the earlier twin comes first. Rows 1 and 4 coincide.
        let x = DMatrix::from_row_slice(
            6,
            2,
            &[0.0, 0.0, 1.0, 2.0, 3.0, 1.0, 5.0, 5.0, 1.0, 2.0, 4.0, 0.5],
        );
        let y = [10.0, 20.0, 30.0, 40.0, 50.0, 60.0];
        let knn = NearestNeighbors {
            features: vec!["a".into(), "b".into()],
            ks: vec![1, 2],
        };
        let fits = knn.fit_path(&x, &y, &x, true).unwrap();
        assert_eq!(fits[0].train_pred, vec![10.0, 20.0, 30.0, 40.0, 20.0, 60.0]);
        // k = 2: the twins are each other's first two neighbours.
        assert_eq!(fits[1].train_pred[1], 35.0);
        assert_eq!(fits[1].train_pred[4], 35.0);
    }

    #[test]
    fn more_features_than_the_tree_takes_scan() {
        // Above TREE_MAX_DIMS no tree is built (module doc), and one-nearest
        // training error is still zero on distinct rows.
        let dims = TREE_MAX_DIMS + 1;
        let x = DMatrix::from_fn(30, dims, |i, j| {
            ((i * (j + 2)) % 7) as f64 + i as f64 * 0.01
        });
        assert!(Standardised::fit(&x).tree.is_none());
        let y: Vec<f64> = (0..30).map(|i| i as f64).collect();
        let knn = NearestNeighbors {
            features: (0..dims).map(|j| format!("f{j}")).collect(),
            ks: vec![1],
        };
        assert_eq!(knn.fit_path(&x, &y, &x, true).unwrap()[0].train_pred, y);
    }
}

#[cfg(test)]
mod leave_one_out_tests {
    use super::*;
    use crate::models::test_support::shortcut_beside_refits;

    #[test]
    fn exclusion_equals_refits_with_ties() {
        // Identity: leaving row i out of the search equals refitting without
        // it; repeated values make boundary ties likely.
        let n = 30;
        let x = DMatrix::from_fn(n, 1, |i, _| ((i * 5) % 7) as f64);
        let y: Vec<f64> = (0..n).map(|i| (i as f64 * 0.3).sin()).collect();
        let knn = NearestNeighbors {
            features: vec!["x".into()],
            ks: vec![1, 4, 9],
        };
        for pair in shortcut_beside_refits(&knn, &x, &y) {
            assert_eq!(pair.shortcut, pair.refit, "{pair}");
        }
    }
}
