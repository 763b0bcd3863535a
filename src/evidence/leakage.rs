//! The leakage inspection (docs/reports.md, "Leakage"): rows whose features
//! and target repeat exactly on both sides of a split, features that nearly copy the
//! target, and groups on both sides. Everything is ordered by row index or by
//! text, never by a hash map's order.

use std::collections::BTreeMap;

use crate::data::Table;
use crate::results::{Duplicates, Leakage, SharedGroups, TargetCopy};
use crate::split::Assignment;

/// A feature whose absolute correlation with the target exceeds this nearly
/// copies it (the threshold of issue 15; common practice has no sharper one).
pub(crate) const COPY_CORRELATION: f64 = 0.99;

/// Most row lines or group labels listed per finding.
pub(crate) const EXAMPLES: usize = 5;

/// What the inspection needs of a plan.
pub(crate) struct Rows<'a> {
    pub(crate) table: &'a Table,
    pub(crate) target: &'a [f64],
    pub(crate) features: &'a [String],
    pub(crate) group: Option<&'a [String]>,
    pub(crate) assignment: &'a Assignment,
}

/// Inspects a plan's rows over its declared features (those read as numbers,
/// not categorical level codes)
/// and its group column.
pub(crate) fn of_plan(plan: &crate::plan::ExperimentPlan) -> Leakage {
    let data = plan.spec.data();
    let group = data.group.as_deref().map(|g| plan.table.text_column(g));
    let features: Vec<String> = data
        .features
        .iter()
        .filter(|f| plan.table.numeric.contains_key(*f) && !plan.table.levels.contains_key(*f))
        .cloned()
        .collect();
    inspect(&Rows {
        table: &plan.table,
        target: &plan.target,
        features: &features,
        group,
        assignment: &plan.assignment,
    })
}

/// One sentence per finding, naming the rows (file lines) or groups; empty
/// when nothing was found.
pub(crate) fn describe(leakage: &Leakage) -> Vec<String> {
    let mut out = Vec::new();
    let lines = |d: &Duplicates| {
        let shown: Vec<String> = d.lines.iter().map(u64::to_string).collect();
        let more = if d.rows > d.lines.len() { ", …" } else { "" };
        format!("lines {}{more}", shown.join(", "))
    };
    let d = &leakage.duplicates_across_folds;
    if d.sets > 0 {
        out.push(format!(
            "{} rows ({} distinct) repeat another row's features and target exactly, one copy validated while another trains ({})",
            d.rows,
            d.sets,
            lines(d)
        ));
    }
    let d = &leakage.duplicates_across_test;
    if d.sets > 0 {
        out.push(format!(
            "{} rows ({} distinct) repeat another row's features and target exactly across the locked test set and the rest ({})",
            d.rows,
            d.sets,
            lines(d)
        ));
    }
    for copy in &leakage.target_copies {
        let why = if copy.same_order {
            "orders the rows exactly as the target does".to_string()
        } else {
            format!("correlates with the target at {:.4}", copy.correlation)
        };
        out.push(format!("feature \"{}\" {why}", copy.feature));
    }
    for (groups, side) in [
        (
            &leakage.groups_across_folds,
            "validated while others of it train",
        ),
        (
            &leakage.groups_across_test,
            "in the locked test set and among the rest",
        ),
    ] {
        if groups.groups > 0 {
            let more = if groups.groups > groups.examples.len() {
                ", …"
            } else {
                ""
            };
            out.push(format!(
                "{} groups have rows {side} ({}{more})",
                groups.groups,
                groups.examples.join(", ")
            ));
        }
    }
    out
}

/// Inspects the rows of a plan.
pub(crate) fn inspect(rows: &Rows<'_>) -> Leakage {
    let n = rows.table.len();
    let columns: Vec<&[f64]> = rows.features.iter().map(|f| rows.table.column(f)).collect();
    // Rows with identical features and target, in order of their first row;
    // -0 and +0 are the same value. Identical features with another target
    // are not counted: coarse features (a temperature to 0.1 degree) repeat
    // by chance, and such a pair does not hand the target over.
    // Rows sorted by their bits (features, then target, then row number), so
    // identical rows sit side by side, each run in row order; no key is
    // allocated, which matters at a million rows.
    let bits = |row: usize, j: usize| -> u64 {
        let v = columns.get(j).map_or(rows.target[row], |c| c[row]);
        (v + 0.0).to_bits()
    };
    let width = columns.len() + 1;
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_unstable_by(|&a, &b| {
        (0..width)
            .map(|j| bits(a, j).cmp(&bits(b, j)))
            .find(|o| o.is_ne())
            .unwrap_or(std::cmp::Ordering::Equal)
            .then(a.cmp(&b))
    });
    let same = |a: usize, b: usize| (0..width).all(|j| bits(a, j) == bits(b, j));
    let mut clusters: Vec<Vec<usize>> = Vec::new();
    let mut start = 0;
    while start < n {
        let mut end = start + 1;
        while end < n && same(order[start], order[end]) {
            end += 1;
        }
        if end - start > 1 {
            clusters.push(order[start..end].to_vec());
        }
        start = end;
    }
    clusters.sort_by_key(|c| c[0]);
    let group_clusters: Vec<Vec<usize>> = match rows.group {
        Some(labels) => {
            let mut by_label: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
            for (row, label) in labels.iter().enumerate() {
                by_label.entry(label.as_str()).or_default().push(row);
            }
            by_label.into_values().filter(|r| r.len() > 1).collect()
        }
        None => Vec::new(),
    };

    let a = rows.assignment;
    let mut is_test = vec![false; n];
    for &r in &a.test {
        is_test[r] = true;
    }
    let straddling_test = |cluster: &[usize]| {
        cluster.iter().any(|&r| is_test[r]) && cluster.iter().any(|&r| !is_test[r])
    };

    // Across folds: a cluster straddles when, in some fold, one copy is
    // validated while another trains.
    let mut cluster_straddles = vec![false; clusters.len()];
    let mut group_straddles = vec![false; group_clusters.len()];
    let mut in_valid = vec![false; n];
    let mut in_train = vec![false; n];
    for f in 0..a.folds.len() {
        let valid = &a.folds[f].valid;
        let train = a.fold_train(f);
        for &r in valid {
            in_valid[r] = true;
        }
        for &r in &train {
            in_train[r] = true;
        }
        for (c, cluster) in clusters.iter().enumerate() {
            if cluster.iter().any(|&r| in_valid[r]) && cluster.iter().any(|&r| in_train[r]) {
                cluster_straddles[c] = true;
            }
        }
        for (g, cluster) in group_clusters.iter().enumerate() {
            if cluster.iter().any(|&r| in_valid[r]) && cluster.iter().any(|&r| in_train[r]) {
                group_straddles[g] = true;
            }
        }
        for &r in valid {
            in_valid[r] = false;
        }
        for &r in &train {
            in_train[r] = false;
        }
    }
    let across_folds = duplicates(
        rows.table,
        clusters
            .iter()
            .zip(&cluster_straddles)
            .filter(|(_, &s)| s)
            .map(|(c, _)| c.as_slice()),
    );
    let across_test = duplicates(
        rows.table,
        clusters
            .iter()
            .filter(|c| straddling_test(c))
            .map(Vec::as_slice),
    );
    let group_label = |cluster: &[usize]| rows.group.map(|l| l[cluster[0]].clone());
    let shared = |labels: Vec<String>| SharedGroups {
        groups: labels.len(),
        examples: labels.into_iter().take(EXAMPLES).collect(),
    };
    Leakage {
        duplicates_across_folds: across_folds,
        duplicates_across_test: across_test,
        target_copies: target_copies(rows),
        groups_across_folds: shared(
            group_clusters
                .iter()
                .zip(&group_straddles)
                .filter(|(_, &s)| s)
                .filter_map(|(c, _)| group_label(c))
                .collect(),
        ),
        groups_across_test: shared(
            group_clusters
                .iter()
                .filter(|c| straddling_test(c))
                .filter_map(|c| group_label(c))
                .collect(),
        ),
    }
}

fn duplicates<'c>(table: &Table, found: impl Iterator<Item = &'c [usize]>) -> Duplicates {
    let mut out = Duplicates::default();
    let mut involved = Vec::new();
    for cluster in found {
        out.sets += 1;
        involved.extend_from_slice(cluster);
    }
    involved.sort_unstable();
    out.rows = involved.len();
    out.lines = involved
        .iter()
        .take(EXAMPLES)
        .map(|&r| table.lines[r])
        .collect();
    out
}

/// Features whose |Pearson correlation| with the target exceeds
/// [`COPY_CORRELATION`], or whose order is exactly the target's.
fn target_copies(rows: &Rows<'_>) -> Vec<TargetCopy> {
    let y = rows.target;
    let n = y.len();
    if n < 3 {
        return Vec::new();
    }
    let mut out = Vec::new();
    for name in rows.features {
        let x = rows.table.column(name);
        let correlation = pearson(x, y);
        let same_order = same_order(x, y);
        if correlation.abs() > COPY_CORRELATION || same_order {
            out.push(TargetCopy {
                feature: name.clone(),
                correlation,
                same_order,
            });
        }
    }
    out
}

/// Pearson's correlation, sums in row order; NaN when either side is constant.
pub(crate) fn pearson(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        sxy += (a - mx) * (b - my);
        sxx += (a - mx) * (a - mx);
        syy += (b - my) * (b - my);
    }
    sxy / (sxx * syy).sqrt()
}

/// Whether sorting by `x` sorts `y` strictly the same way, or strictly the
/// opposite way: equal x exactly where equal y (a rank correlation of ±1
/// with the same ties). A constant column orders nothing.
pub(crate) fn same_order(x: &[f64], y: &[f64]) -> bool {
    // One pass over neighbouring rows in file order first: a pair tied in
    // one column and not the other, or two pairs that move y in opposite
    // directions as x rises, already rule out an exact order, and that
    // settles almost every real feature without sorting.
    let (mut up, mut down) = (false, false);
    for i in 1..x.len().min(y.len()) {
        let (x_tie, y_tie) = (x[i] == x[i - 1], y[i] == y[i - 1]);
        if x_tie != y_tie {
            return false;
        }
        if !x_tie {
            if (x[i] > x[i - 1]) == (y[i] > y[i - 1]) {
                up = true;
            } else {
                down = true;
            }
            if up && down {
                return false;
            }
        }
    }
    let mut order: Vec<usize> = (0..x.len()).collect();
    order.sort_by(|&a, &b| x[a].total_cmp(&x[b]).then(y[a].total_cmp(&y[b])));
    let mut rising = true;
    let mut falling = true;
    let mut steps = 0;
    for pair in order.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let x_tie = x[a] == x[b];
        let y_tie = y[a] == y[b];
        if x_tie != y_tie {
            return false;
        }
        if !x_tie {
            steps += 1;
            rising &= y[b] > y[a];
            falling &= y[b] < y[a];
        }
    }
    steps > 0 && (rising || falling)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The order check by sorting alone (the definition), to hold the
    /// one-pass rejection in `same_order` to it.
    fn same_order_by_sorting(x: &[f64], y: &[f64]) -> bool {
        let mut order: Vec<usize> = (0..x.len()).collect();
        order.sort_by(|&a, &b| x[a].total_cmp(&x[b]).then(y[a].total_cmp(&y[b])));
        let (mut rising, mut falling, mut steps) = (true, true, 0);
        for pair in order.windows(2) {
            let (a, b) = (pair[0], pair[1]);
            if (x[a] == x[b]) != (y[a] == y[b]) {
                return false;
            }
            if x[a] != x[b] {
                steps += 1;
                rising &= y[b] > y[a];
                falling &= y[b] < y[a];
            }
        }
        steps > 0 && (rising || falling)
    }

    #[test]
    fn the_quick_rejection_agrees_with_sorting() {
        // Small integer vectors (many ties), monotone transforms of them
        // and their reversals: every verdict equals the definition's.
        let mut state = 12345u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 33) % 5
        };
        let mut agreed_true = 0;
        for case in 0..3000 {
            let n = 2 + case % 7;
            let x: Vec<f64> = (0..n).map(|_| next() as f64).collect();
            let y: Vec<f64> = match case % 3 {
                0 => (0..n).map(|_| next() as f64).collect(),
                1 => x.iter().map(|v| v * v * v + 1.0).collect(),
                _ => x.iter().map(|v| -2.0 * v).collect(),
            };
            let expected = same_order_by_sorting(&x, &y);
            assert_eq!(same_order(&x, &y), expected, "{x:?} {y:?}");
            agreed_true += usize::from(expected);
        }
        // Two of every three cases are monotone by construction (a cube and
        // a reversal), so most verdicts must be "same order": the test
        // exercises both answers, not only the rejection.
        assert!(agreed_true > 1000, "{agreed_true}");
    }

    #[test]
    fn order_and_correlation_of_a_copy() {
        let y = [3.0, 1.0, 2.0, 5.0, 4.0];
        let monotone: Vec<f64> = y.iter().map(|v: &f64| v.powi(3)).collect();
        assert!(same_order(&monotone, &y));
        let reversed: Vec<f64> = y.iter().map(|v| -v).collect();
        assert!(same_order(&reversed, &y));
        assert!((pearson(&reversed, &y) + 1.0).abs() < 1e-15);
        let shuffled = [1.0, 3.0, 2.0, 5.0, 4.0];
        assert!(!same_order(&shuffled, &y));
        // A tie in x where y differs is not the same order.
        assert!(!same_order(&[1.0, 1.0, 2.0], &[1.0, 2.0, 3.0]));
        assert!(!same_order(&[1.0, 1.0, 1.0], &[1.0, 1.0, 1.0]));
    }

    /// Grouped k-fold, over many seeds: no group straddles a fold or the
    /// test set (a property of docs/splits.md's algorithm, checked through
    /// this inspection), while rows repeated across groups are still found.
    #[test]
    fn grouped_folds_never_split_a_group_over_many_seeds() {
        let rows = 90;
        // 23 groups of uneven size; the features never repeat.
        let labels: Vec<String> = (0..rows)
            .map(|r| format!("g{}", (r * r + 3 * r) % 23))
            .collect();
        let mut index = BTreeMap::new();
        let mut names: Vec<String> = Vec::new();
        let unit_of_row: Vec<usize> = labels
            .iter()
            .map(|l| {
                *index.entry(l.clone()).or_insert_with(|| {
                    names.push(l.clone());
                    names.len() - 1
                })
            })
            .collect();
        let x: Vec<f64> = (0..rows).map(|r| r as f64 * 0.5).collect();
        let y: Vec<f64> = (0..rows).map(|r| ((r * 37) % 11) as f64).collect();
        let table = Table {
            path: "t.csv".into(),
            digest: String::new(),
            numeric: BTreeMap::from([("x".to_string(), x)]),
            text: BTreeMap::new(),
            levels: BTreeMap::new(),
            lines: (2..rows as u64 + 2).collect(),
            row_numbers: (1..=rows as u64).collect(),
            dropped: 0,
            unterminated: false,
            missing_cells: BTreeMap::new(),
        };
        let features = vec!["x".to_string()];
        for seed in 0..200 {
            let assignment = crate::split::assign(
                seed,
                0.2,
                &crate::split::FoldScheme::Kfold {
                    folds: 5,
                    repeats: 2,
                },
                crate::split::Identities::Text(&names),
                &unit_of_row,
            )
            .unwrap();
            let found = inspect(&Rows {
                table: &table,
                target: &y,
                features: &features,
                group: Some(&labels),
                assignment: &assignment,
            });
            assert_eq!(found, Leakage::default(), "seed {seed}");
        }
    }
}
