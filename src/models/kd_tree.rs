//! An exact k-nearest-neighbour search by k-d tree (Bentley 1975,
//! "Multidimensional binary search trees used for associative searching",
//! Comm. ACM 18), with the search order of Friedman, Bentley & Finkel 1977
//! ("An algorithm for finding best matches in logarithmic expected time",
//! ACM Trans. Math. Softw. 3): visit the nearer child first, skip a node
//! whose bounding box lies farther than the current k-th neighbour.
//!
//! Neighbours are ranked by (squared distance, training row), a total
//! order, so the k nearest are one definite set in one definite order: the
//! same as a full scan that sorts every row by that order (the tie rule of
//! `docs/spec.md`, nearest-neighbors: the earlier row wins a tie). The tree
//! only decides which rows are looked at, never how a distance is computed,
//! so its shape cannot change a result:
//!
//! - every distance is [`squared_distance`], the scan's own arithmetic;
//! - a node is skipped only when the lower bound of its box is *strictly*
//!   greater than the current k-th distance, so a row tied with the k-th
//!   (which may win the tie by its row number) is always looked at;
//! - the bound cannot exceed the computed distance of any row inside the
//!   box, in floating point too: each term uses the gap to the box edge,
//!   which is at most that row's coordinate difference, and rounding of a
//!   difference, a square and a sum is monotone, so term by term and sum by
//!   sum (in the same dimension order) the bound stays at or below.

use std::cmp::Ordering;

/// Rows per leaf of the trees the neighbour search builds.
///
/// Measured (2026-12-03, 2-core machine shared with three builds, CPU
/// seconds of one thread, same results to the bit): W2 (20 000 rows, 2
/// features, k up to 89, 10 folds) 0.62 / 0.57 / 0.44 / 0.47 s with leaves
/// of 8 / 12 / 24 / 48 rows; 250 000 rows, 4 features, k up to 100:
/// 13.7 / 12.4 / 12.8 / 13.5 s with 16 / 32 / 48 / 96 (with the heap search
/// this file used before the buffer of 2k candidates). Large k visits many
/// leaves anyway, and a longer leaf scan is cheaper than more nodes.
pub(crate) const LEAF_SIZE: usize = 32;

/// Σ (a − b)² over the coordinates, summed in dimension order. The scan and
/// the tree both measure with this one function.
pub(crate) fn squared_distance(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(a, b)| (a - b) * (a - b)).sum()
}

/// Order of neighbours: squared distance, then training row.
pub(crate) fn by_distance_then_row(a: &(f64, usize), b: &(f64, usize)) -> Ordering {
    a.0.total_cmp(&b.0).then(a.1.cmp(&b.1))
}

/// A node: the rows `order[start..end]` and, unless a leaf, its two
/// children. Its bounding box is in [`KdTree::bounds`].
struct Node {
    start: usize,
    end: usize,
    children: Option<(usize, usize)>,
}

/// A k-d tree over points stored row-major (`dims` values per row).
pub(crate) struct KdTree {
    dims: usize,
    /// Rows per leaf: a node of no more rows is scanned, not split.
    leaf_size: usize,
    /// Row numbers, permuted so each node holds a contiguous range.
    order: Vec<usize>,
    /// The points in `order`'s order, so a leaf's rows are read from one
    /// contiguous stretch of memory (the same values, copied).
    ordered_points: Vec<f64>,
    nodes: Vec<Node>,
    /// Per node, per dimension, the smallest then the largest coordinate of
    /// its rows (`2 · dims` values per node, in node order).
    bounds: Vec<f64>,
}

impl KdTree {
    /// Builds the tree over `points` (row-major, `dims` per row), splitting
    /// each node at the median of its widest dimension until a node holds
    /// at most `leaf_size` rows.
    pub(crate) fn build(points: &[f64], dims: usize, leaf_size: usize) -> Self {
        let rows = points.len() / dims;
        let leaf_size = leaf_size.max(1);
        let mut tree = KdTree {
            dims,
            leaf_size,
            order: (0..rows).collect(),
            ordered_points: Vec::new(),
            nodes: Vec::with_capacity(2 * rows / leaf_size + 1),
            bounds: Vec::with_capacity((2 * rows / leaf_size + 1) * 2 * dims),
        };
        if rows > 0 {
            tree.grow(points, 0, rows);
        }
        tree.ordered_points = tree
            .order
            .iter()
            .flat_map(|&row| points[row * dims..(row + 1) * dims].iter().copied())
            .collect();
        tree
    }

    /// The rows in the tree's order: nodes hold contiguous ranges of it, so
    /// rows near each other in space are near each other in the order.
    pub(crate) fn into_order(self) -> Vec<usize> {
        self.order
    }

    /// Adds the node of `order[start..end]` and its subtree; returns its index.
    fn grow(&mut self, points: &[f64], start: usize, end: usize) -> usize {
        let dims = self.dims;
        let mut bounds = Vec::with_capacity(2 * dims);
        for j in 0..dims {
            let (lo, hi) = self.order[start..end]
                .iter()
                .map(|&row| points[row * dims + j])
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                    (lo.min(v), hi.max(v))
                });
            bounds.push(lo);
            bounds.push(hi);
        }
        let (widest, width) = (0..dims)
            .map(|j| (j, bounds[2 * j + 1] - bounds[2 * j]))
            .fold((0, -1.0), |best, d| if d.1 > best.1 { d } else { best });
        let index = self.nodes.len();
        self.nodes.push(Node {
            start,
            end,
            children: None,
        });
        self.bounds.extend_from_slice(&bounds);
        // A leaf when small, or when every row sits at one point.
        if end - start <= self.leaf_size || width <= 0.0 {
            return index;
        }
        let middle = start + (end - start) / 2;
        self.order[start..end].select_nth_unstable_by(middle - start, |&a, &b| {
            points[a * dims + widest].total_cmp(&points[b * dims + widest])
        });
        let left = self.grow(points, start, middle);
        let right = self.grow(points, middle, end);
        self.nodes[index].children = Some((left, right));
        index
    }

    /// Lower bound of the squared distance from `query` to any point of
    /// node `index`'s box (see the module documentation on why it never
    /// exceeds a computed distance).
    fn box_bound(&self, index: usize, query: &[f64]) -> f64 {
        let bounds = &self.bounds[index * 2 * self.dims..(index + 1) * 2 * self.dims];
        query
            .iter()
            .enumerate()
            .map(|(j, &q)| {
                let (lo, hi) = (bounds[2 * j], bounds[2 * j + 1]);
                let gap = if q < lo {
                    lo - q
                } else if q > hi {
                    q - hi
                } else {
                    0.0
                };
                gap * gap
            })
            .sum()
    }

    /// The `k` nearest rows of `query` by (squared distance, row), nearest
    /// first, into `found` (fewer when the tree holds fewer rows); the row
    /// `skip`, if given, is passed over (leave-one-out).
    ///
    /// `bound`, when finite, is a squared distance that the k-th nearest row
    /// is known not to exceed (the farthest of k rows measured from the
    /// query): the search then prunes from the start instead of after its
    /// first k rows. It changes how much is searched, never what is found.
    pub(crate) fn nearest(
        &self,
        query: &[f64],
        k: usize,
        skip: Option<usize>,
        bound: f64,
        found: &mut Vec<(f64, usize)>,
    ) {
        self.nearest_unordered_skipping(query, k, skip, bound, found);
        found.sort_unstable_by(by_distance_then_row);
    }

    /// [`Self::nearest`] without the final sort: the same rows, in no
    /// particular order, for a caller that needs only which rows they are.
    pub(crate) fn nearest_unordered(
        &self,
        query: &[f64],
        k: usize,
        bound: f64,
        found: &mut Vec<(f64, usize)>,
    ) {
        self.nearest_unordered_skipping(query, k, None, bound, found);
    }

    fn nearest_unordered_skipping(
        &self,
        query: &[f64],
        k: usize,
        skip: Option<usize>,
        bound: f64,
        found: &mut Vec<(f64, usize)>,
    ) {
        found.clear();
        if self.nodes.is_empty() || k == 0 {
            return;
        }
        let mut search = Search {
            k,
            found: Vec::with_capacity(2 * k),
            bound,
        };
        self.visit(0, query, skip, &mut search);
        search.keep_nearest();
        found.extend(search.found.iter().map(|&key| unpack(key)));
    }

    /// Depth-first search of node `index`, nearer child first.
    fn visit(&self, index: usize, query: &[f64], skip: Option<usize>, search: &mut Search) {
        let node = &self.nodes[index];
        match node.children {
            None => {
                let rows = &self.order[node.start..node.end];
                let stretch = &self.ordered_points[node.start * self.dims..node.end * self.dims];
                for (&row, p) in rows.iter().zip(stretch.chunks_exact(self.dims)) {
                    if Some(row) != skip {
                        search.offer(squared_distance(p, query), row);
                    }
                }
            }
            Some((left, right)) => {
                let (near, far) = {
                    let (bl, br) = (self.box_bound(left, query), self.box_bound(right, query));
                    if br < bl {
                        ((right, br), (left, bl))
                    } else {
                        ((left, bl), (right, br))
                    }
                };
                for (child, bound) in [near, far] {
                    // Strictly farther than k rows already found: no row
                    // inside can be among the k nearest, nor tie with one.
                    if bound <= search.bound {
                        self.visit(child, query, skip, search);
                    }
                }
            }
        }
    }
}

/// The rows found so far by one search: up to 2k candidates, thinned to
/// the k nearest whenever the buffer fills (a selection, O(k), so each
/// candidate costs O(1) amortised where a heap costs O(log k)). `bound` is
/// the k-th smallest distance at the last thinning (infinite before k
/// rows are found): a row farther than it cannot be among the k nearest,
/// while a row at exactly that distance may still win the tie by its row
/// number and is kept. Candidates are kept as [`pack`]ed keys, whose integer
/// order is the (distance, row) order, so the selection compares integers.
struct Search {
    k: usize,
    found: Vec<u128>,
    bound: f64,
}

/// (squared distance, row) as one integer with the same order: the bits of
/// a non-negative double (a sum of squares is never −0 or NaN) order as the
/// numbers do, and the row breaks ties below them.
#[inline]
fn pack(distance: f64, row: usize) -> u128 {
    (u128::from(distance.to_bits()) << 64) | row as u128
}

#[inline]
fn unpack(key: u128) -> (f64, usize) {
    (f64::from_bits((key >> 64) as u64), key as u64 as usize)
}

impl Search {
    #[inline]
    fn offer(&mut self, distance: f64, row: usize) {
        if distance > self.bound {
            return;
        }
        self.found.push(pack(distance, row));
        if self.found.len() == self.k {
            // The first k rows found (the buffer reaches k only once: after
            // a thinning it holds k and grows past it): the farthest of them
            // bounds the k-th nearest, unless a given bound is tighter.
            let farthest = unpack(self.found.iter().copied().max().unwrap_or(0)).0;
            self.bound = self.bound.min(farthest);
        } else if self.found.len() >= 2 * self.k {
            self.keep_nearest();
        }
    }

    /// Keeps the k nearest by (distance, row) and tightens the bound.
    fn keep_nearest(&mut self) {
        if self.found.len() > self.k {
            self.found.select_nth_unstable(self.k - 1);
            self.found.truncate(self.k);
            self.bound = unpack(self.found[self.k - 1]).0;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The brute-force reference: every row ranked by (distance, row).
    fn scan(points: &[f64], dims: usize, query: &[f64], k: usize) -> Vec<(f64, usize)> {
        let mut all: Vec<(f64, usize)> = points
            .chunks_exact(dims)
            .enumerate()
            .map(|(row, p)| (squared_distance(p, query), row))
            .collect();
        all.sort_by(by_distance_then_row);
        all.truncate(k);
        all
    }

    #[test]
    fn tree_equals_scan_on_a_lattice_full_of_ties() {
        // Invariant (module doc): the tree returns exactly the scan's
        // neighbours. Integer lattice points with many duplicates make equal
        // distances, and ties at the k-th place, the rule rather than the
        // exception.
        for dims in [2, 3, 5] {
            let rows = 400;
            let points: Vec<f64> = (0..rows * dims)
                .map(|i| ((i * 7919 + i / dims * 31) % 5) as f64)
                .collect();
            for leaf_size in [1, 12, LEAF_SIZE] {
                let tree = KdTree::build(&points, dims, leaf_size);
                let mut found = Vec::new();
                for q in (0..rows).step_by(7) {
                    let query = &points[q * dims..(q + 1) * dims];
                    for k in [1, 2, 5, 17, 60, rows] {
                        let expected = scan(&points, dims, query, k);
                        // A bound changes the work, never the answer: none,
                        // exactly the k-th distance (rows tied with it must
                        // still compete), and the farthest of k other rows
                        // (the neighbours of the query before).
                        let exact = expected.last().map_or(f64::INFINITY, |n| n.0);
                        let previous = &points[((q + 1) % rows) * dims..][..dims];
                        let loose = scan(&points, dims, previous, k)
                            .iter()
                            .map(|&(_, r)| squared_distance(&points[r * dims..][..dims], query))
                            .fold(0.0, f64::max);
                        for bound in [f64::INFINITY, exact, loose] {
                            tree.nearest(query, k, None, bound, &mut found);
                            assert_eq!(
                                found, expected,
                                "dims {dims} k {k} leaf {leaf_size} bound {bound}"
                            );
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn skipped_row_is_left_out() {
        // The skipped row never appears; the rest are the scan's order.
        let points = [0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 2.0, 2.0];
        let tree = KdTree::build(&points, 2, 1);
        let mut found = Vec::new();
        tree.nearest(&[0.0, 0.0], 3, Some(0), f64::INFINITY, &mut found);
        assert_eq!(found, vec![(0.0, 2), (1.0, 1), (8.0, 3)]);
    }
}
