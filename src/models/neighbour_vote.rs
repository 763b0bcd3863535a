//! The vote of `nearest-neighbors` with a class target: for each k, the k
//! nearest training rows vote with their classes; each class's probability
//! is its share of the k votes, and the predicted class is the one with the
//! most votes. A tie in votes goes to the tied class whose nearest member is
//! nearest the query (the first in the neighbours' (distance, row) order),
//! so with k = 1 the prediction is the nearest row's class (docs/spec.md,
//! "nearest-neighbors"). Kept apart from the neighbour search, which only
//! has to hand over the neighbours' classes in order.

use std::cmp::Ordering;

use super::kd_tree::by_distance_then_row;
use crate::metrics::ClassPrediction;

/// Appends to `out[s]` the prediction of setting `ks[s]` for one query whose
/// nearest training rows are `neighbours` ((squared distance, row), the max k
/// nearest, in any order; reordered here), on a target of `classes` classes
/// with `class_of(row)` the class of a training row.
///
/// No full sort is needed: a selection inside the first k' of the
/// neighbours for each next smaller k of the grid leaves the k nearest
/// first for every k (O(k_max) per grid point, where a sort costs
/// O(k_max log k_max)), and the counts and each class's nearest member are
/// then added up stretch by stretch.
pub(crate) fn vote(
    neighbours: &mut [(f64, usize)],
    class_of: impl Fn(usize) -> usize,
    ks: &[usize],
    classes: usize,
    out: &mut [Vec<f64>],
) {
    let layout = ClassPrediction { classes };
    let mut order: Vec<(usize, usize)> = ks.iter().copied().zip(0..).collect();
    order.sort_unstable();
    for pair in order.windows(2).rev() {
        let (smaller, larger) = (pair[0].0, pair[1].0);
        if smaller < larger && smaller > 0 {
            neighbours[..larger].select_nth_unstable_by(smaller - 1, by_distance_then_row);
        }
    }
    let mut counts = vec![0usize; classes];
    // Each class's nearest member among the neighbours counted so far.
    let mut nearest: Vec<Option<(f64, usize)>> = vec![None; classes];
    let nearer = |a: Option<(f64, usize)>, b: Option<(f64, usize)>| match (a, b) {
        (Some(a), Some(b)) => by_distance_then_row(&a, &b) == Ordering::Less,
        (Some(_), None) => true,
        _ => false,
    };
    let mut taken = 0;
    for (k, s) in order {
        while taken < k {
            let found = neighbours[taken];
            let class = class_of(found.1);
            counts[class] += 1;
            if nearer(Some(found), nearest[class]) {
                nearest[class] = Some(found);
            }
            taken += 1;
        }
        let mut winner = 0;
        for class in 1..classes {
            let more = counts[class] > counts[winner];
            let tied_but_nearer =
                counts[class] == counts[winner] && nearer(nearest[class], nearest[winner]);
            if more || tied_but_nearer {
                winner = class;
            }
        }
        let target = &mut out[s];
        target.extend(counts.iter().map(|&c| c as f64 / k as f64));
        target.push(winner as f64);
        debug_assert_eq!(target.len() % layout.width(), 0);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Neighbours at distances 0, 1, 2, … whose classes are `ordered`,
    /// handed over shuffled (reversed, then the halves swapped).
    fn neighbours(ordered: &[usize]) -> (Vec<(f64, usize)>, impl Fn(usize) -> usize + '_) {
        let mut found: Vec<(f64, usize)> = (0..ordered.len()).map(|r| (r as f64, r)).collect();
        found.reverse();
        let half = found.len() / 2;
        found.rotate_left(half);
        (found, move |row: usize| ordered[row])
    }

    fn one(ordered: &[usize], k: usize, classes: usize) -> Vec<f64> {
        let mut out = vec![Vec::new()];
        let (mut found, class_of) = neighbours(ordered);
        // The k nearest only, as the search hands them over.
        found.retain(|&(_, row)| row < k);
        vote(&mut found, class_of, &[k], classes, &mut out);
        out.remove(0)
    }

    #[test]
    fn shares_are_probabilities_and_the_majority_wins() {
        // Hand-computed: neighbours' classes 2, 0, 2, 1, 2 with k = 5.
        assert_eq!(one(&[2, 0, 2, 1, 2], 5, 3), vec![0.2, 0.2, 0.6, 2.0]);
    }

    #[test]
    fn a_tie_goes_to_the_class_of_the_nearest_tied_neighbour() {
        // Two votes each for classes 0 and 1; class 1 holds the nearest row.
        assert_eq!(one(&[1, 0, 0, 1], 4, 2), vec![0.5, 0.5, 1.0]);
        assert_eq!(one(&[0, 1, 1, 0], 4, 2), vec![0.5, 0.5, 0.0]);
        // Class 2 has the most votes although class 0 holds the nearest row.
        assert_eq!(one(&[0, 2, 2], 3, 3), vec![1.0 / 3.0, 0.0, 2.0 / 3.0, 2.0]);
    }

    #[test]
    fn a_grid_equals_one_vote_per_k_in_spec_order() {
        let ordered = [1, 0, 0, 1, 1, 0, 1];
        let ks = [7, 1, 3];
        let mut together = vec![Vec::new(); 3];
        let (mut found, class_of) = neighbours(&ordered);
        vote(&mut found, class_of, &ks, 2, &mut together);
        for (s, &k) in ks.iter().enumerate() {
            assert_eq!(together[s], one(&ordered, k, 2), "k = {k}");
        }
    }
}
