//! The vote of `nearest-neighbors` with a class target: for each k, the k
//! nearest training rows vote with their classes; each class's probability
//! is its share of the k votes, and the predicted class is the one with the
//! most votes. A tie in votes goes to the tied class whose nearest member is
//! nearest the query (the first in the neighbours' (distance, row) order),
//! so with k = 1 the prediction is the nearest row's class (docs/spec.md,
//! "nearest-neighbors"). Kept apart from the neighbour search, which only
//! has to hand over the neighbours' classes in order.

use crate::metrics::ClassPrediction;

/// Appends to `out[s]` the prediction of setting `ks[s]` for one query whose
/// neighbours' classes are `ordered` (nearest first, at least max k of them),
/// on a target of `classes` classes.
pub(crate) fn vote(ordered: &[usize], ks: &[usize], classes: usize, out: &mut [Vec<f64>]) {
    let layout = ClassPrediction { classes };
    // For every k: counts over the first k neighbours, built incrementally.
    let mut order: Vec<(usize, usize)> = ks.iter().copied().zip(0..).collect();
    order.sort_unstable();
    let mut counts = vec![0usize; classes];
    // First position at which each class appears among the neighbours.
    let mut first_seen = vec![usize::MAX; classes];
    let mut taken = 0;
    for (k, s) in order {
        while taken < k {
            let class = ordered[taken];
            counts[class] += 1;
            first_seen[class] = first_seen[class].min(taken);
            taken += 1;
        }
        let mut winner = 0;
        for class in 1..classes {
            let more = counts[class] > counts[winner];
            let tied_but_nearer =
                counts[class] == counts[winner] && first_seen[class] < first_seen[winner];
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

    fn one(ordered: &[usize], k: usize, classes: usize) -> Vec<f64> {
        let mut out = vec![Vec::new()];
        vote(ordered, &[k], classes, &mut out);
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
        vote(&ordered, &ks, 2, &mut together);
        for (s, &k) in ks.iter().enumerate() {
            assert_eq!(together[s], one(&ordered, k, 2), "k = {k}");
        }
    }
}
