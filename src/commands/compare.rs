//! `heldout compare A.json B.json`: what changed between two result sets, as
//! Markdown for a pull-request comment. Inputs are told apart by digest,
//! candidates by id, numbers bit for bit. The results are read as plain JSON,
//! so files written by other versions of heldout compare as far as they share
//! fields.
//!
//! This module reads the two files and works out what differs, as a
//! [`Comparison`]; `report::compare` decides how that reads.

use std::path::Path;

use anyhow::Context as _;
use serde_json::Value;

use crate::cli::CompareArgs;
use crate::error::UsageError;
use crate::report::compare::{
    same_bits, BeforeAfter, CandidateChange, CandidateOnly, Comparison, FoldsMoved, Input,
    InputRow, Moved, SetupChange,
};

pub(crate) fn compare(args: &CompareArgs) -> anyhow::Result<()> {
    let comparison = read_and_compare(args);
    if args.json {
        return super::summary::print_compare(args, comparison);
    }
    let text = crate::report::compare::render(&comparison?)
        .context("internal error: cannot render the comparison")?;
    super::summary::write_stdout(&text)
}

fn read_and_compare(args: &CompareArgs) -> anyhow::Result<Comparison> {
    let before = read(&args.before)?;
    let after = read(&args.after)?;
    let files = BeforeAfter {
        before: args.before.display().to_string(),
        after: args.after.display().to_string(),
    };
    Ok(comparison(&before, &after, files, args.all))
}

fn read(path: &Path) -> anyhow::Result<Value> {
    let bytes = std::fs::read(path)
        .map_err(|e| UsageError(format!("{}: cannot read the results: {e}", path.display())))?;
    let value: Value = serde_json::from_slice(&bytes)
        .map_err(|e| UsageError(format!("{}: not JSON: {e}", path.display())))?;
    let schema = value["schema"].as_str().unwrap_or_default();
    if !schema.starts_with("heldout-results/") {
        return Err(UsageError(format!(
            "{}: not a heldout results.json (schema {:?})",
            path.display(),
            value["schema"]
        ))
        .into());
    }
    Ok(value)
}

/// Compares the numbers at the same keys of two JSON objects.
fn scalars(place: &str, keys: &[&str], before: &Value, after: &Value, out: &mut Vec<Moved>) {
    for key in keys {
        let (b, a) = (before[key].as_f64(), after[key].as_f64());
        if !same_bits(b, a) {
            out.push(Moved {
                place: place.to_string(),
                number: (*key).to_string(),
                before: b,
                after: a,
            });
        }
    }
}

fn candidates(results: &Value) -> Vec<&Value> {
    results["candidates"]
        .as_array()
        .map(|a| a.iter().collect())
        .unwrap_or_default()
}

fn id(candidate: &Value) -> &str {
    candidate["id"].as_str().unwrap_or("?")
}

/// The name `verify` gives the fold at `position` in `fold_scores` (repeats
/// concatenated), from the split a result set records: `fold 3 of repeat 2`.
/// A fold column's labels are not in results.json, so those folds are named
/// by their place in label order (`fold #2`).
fn fold_name(split: &Value, position: usize) -> String {
    let per_repeat = split["folds"]
        .as_u64()
        .and_then(|n| usize::try_from(n).ok())
        .filter(|&n| n > 0)
        .unwrap_or(usize::MAX);
    let repeats = split["repeats"]
        .as_u64()
        .and_then(|n| usize::try_from(n).ok())
        .unwrap_or(1);
    let (repeat, index) = (position / per_repeat, position % per_repeat);
    let label = if folds_by_position(split) {
        format!("#{}", index + 1)
    } else {
        (index + 1).to_string()
    };
    crate::split::describe_fold(&label, repeat, repeats)
}

/// Whether the folds are a fold column's, known here only by position.
fn folds_by_position(split: &Value) -> bool {
    split["method"] == "column"
}

/// Every number that moved, in results order, and the fold scores that moved
/// by candidate.
fn moved_numbers(before: &Value, after: &Value) -> (Vec<Moved>, Vec<FoldsMoved>) {
    let mut out = Vec::new();
    let mut fold_changes = Vec::new();
    scalars(
        "rows",
        &["total", "train", "test", "dropped"],
        &before["rows"],
        &after["rows"],
        &mut out,
    );
    // Fold sizes follow from the data and the split; they are counts, not
    // settings, so they are listed with the numbers.
    for (i, key) in ["fold_rows[0]", "fold_rows[1]"].into_iter().enumerate() {
        let (b, a) = (
            before["split"]["fold_rows"][i].as_f64(),
            after["split"]["fold_rows"][i].as_f64(),
        );
        if !same_bits(b, a) {
            out.push(Moved {
                place: "split".into(),
                number: key.into(),
                before: b,
                after: a,
            });
        }
    }
    let pair_folds = same_fold_layout(before, after);
    for c in candidates(before) {
        let Some(d) = candidates(after).into_iter().find(|d| id(d) == id(c)) else {
            continue;
        };
        scalars(
            id(c),
            &["effective_df", "train_score", "cv_score", "cv_se"],
            c,
            d,
            &mut out,
        );
        if pair_folds {
            fold_changes.extend(fold_scores_moved(c, d, &after["split"]));
        }
    }
    scalars(
        "choice",
        &["best_cv_score", "best_cv_se", "threshold", "eligible"],
        &before["choice"],
        &after["choice"],
        &mut out,
    );
    scalars(
        "final",
        &["test_score", "train_score"],
        &before["final"],
        &after["final"],
        &mut out,
    );
    if let (Some(cb), Some(ca)) = (
        before["final"]["coefficients"].as_object(),
        after["final"]["coefficients"].as_object(),
    ) {
        if before["final"]["id"] == after["final"]["id"] {
            for (name, b) in cb {
                let a = ca.get(name).and_then(Value::as_f64);
                if !same_bits(b.as_f64(), a) {
                    out.push(Moved {
                        place: "final coefficients".into(),
                        number: name.clone(),
                        before: b.as_f64(),
                        after: a,
                    });
                }
            }
        }
    }
    (out, fold_changes)
}

/// Whether fold scores pair up position by position: the same split method,
/// folds per repeat and repeats. (With another seed or other rows the folds
/// hold other rows, but a fold still has the same name in both.)
fn same_fold_layout(before: &Value, after: &Value) -> bool {
    ["method", "folds", "repeats"]
        .iter()
        .all(|key| before["split"][key] == after["split"][key])
}

/// How the fold scores of one setting (`c` before, `d` after) moved: how
/// many, and the one that moved most, named from `split`.
fn fold_scores_moved(c: &Value, d: &Value, split: &Value) -> Option<FoldsMoved> {
    let (fb, fa) = (
        c["fold_scores"].as_array().cloned().unwrap_or_default(),
        d["fold_scores"].as_array().cloned().unwrap_or_default(),
    );
    let folds = fb.len().max(fa.len());
    let mut moved_folds = 0;
    let mut largest: Option<(usize, Moved)> = None;
    for i in 0..folds {
        let m = Moved {
            place: id(c).to_string(),
            number: String::new(),
            before: fb.get(i).and_then(Value::as_f64),
            after: fa.get(i).and_then(Value::as_f64),
        };
        if !same_bits(m.before, m.after) {
            moved_folds += 1;
            if largest
                .as_ref()
                .is_none_or(|(_, l)| m.relative() > l.relative())
            {
                largest = Some((i, m));
            }
        }
    }
    let (i, values) = largest?;
    Some(FoldsMoved {
        moved: moved_folds,
        folds,
        largest: i,
        largest_fold: fold_name(split, i),
        values,
    })
}

/// What a comparison of two result sets says: every difference, as data.
fn comparison(
    before: &Value,
    after: &Value,
    files: BeforeAfter<String>,
    list_all: bool,
) -> Comparison {
    let both = |text: fn(&Value) -> String| BeforeAfter {
        before: text(before),
        after: text(after),
    };
    let input = |input: Input, value: fn(&Value) -> &Value| InputRow {
        input,
        values: BeforeAfter {
            before: value(before).as_str().map(str::to_string),
            after: value(after).as_str().map(str::to_string),
        },
        changed: value(before) != value(after),
    };
    let inputs = vec![
        input(Input::Data, |r| &r["data"]["digest"]),
        input(Input::Tool, |r| &r["inputs"]["tool"]),
        input(Input::Spec, |r| &r["inputs"]["spec"]),
        input(Input::Folds, |r| &r["inputs"]["folds"]),
        input(Input::Templates, |r| &r["inputs"]["templates"]),
    ];

    let setup = setup_changes(before, after);
    let (before_groups, after_groups) = (groups(before), groups(after));
    let families = |groups: &[Group<'_>]| {
        let mut names: Vec<String> = Vec::new();
        for g in groups {
            if !names.iter().any(|n| n == g.family) {
                names.push(g.family.to_string());
            }
        }
        names
    };
    let (families_before, families_after) = (families(&before_groups), families(&after_groups));
    let only = |groups: &[Group<'_>], others: &[Group<'_>]| -> Vec<CandidateOnly> {
        groups
            .iter()
            .filter(|g| !others.iter().any(|o| o.stem == g.stem))
            .map(|g| CandidateOnly {
                candidate: g.stem.to_string(),
                family: g.family.to_string(),
                features: g.features.clone(),
                settings: g.settings.len(),
            })
            .collect()
    };
    let candidates_changed = before_groups
        .iter()
        .filter_map(|b| {
            let a = after_groups.iter().find(|a| a.stem == b.stem)?;
            candidate_change(b, a)
        })
        .collect();

    let ids = |r: &Value| {
        candidates(r)
            .into_iter()
            .map(id)
            .map(str::to_string)
            .collect::<Vec<_>>()
    };
    let (ids_before, ids_after) = (ids(before), ids(after));
    let added = not_in(&ids_after, &ids_before);
    let removed = not_in(&ids_before, &ids_after);

    let (mut moved, folds_moved) = moved_numbers(before, after);
    // Largest relative change first; ties keep results order.
    moved.sort_by(|a, b| b.relative().total_cmp(&a.relative()));

    Comparison {
        experiment: both(|r| r["experiment"].as_str().unwrap_or("?").to_string()),
        files,
        chosen: both(|r| r["chosen"].as_str().unwrap_or("?").to_string()),
        metric: after["metric"].as_str().unwrap_or("score").to_string(),
        test_score: BeforeAfter {
            before: before["test_score"].as_f64(),
            after: after["test_score"].as_f64(),
        },
        tables: both(|r| r["data"]["table"].as_str().unwrap_or("?").to_string()),
        inputs,
        setup,
        families_added: not_in(&families_after, &families_before),
        families_removed: not_in(&families_before, &families_after),
        candidates_added: only(&after_groups, &before_groups),
        candidates_removed: only(&before_groups, &after_groups),
        candidates_changed,
        settings_in_both: ids_before.len() - removed.len(),
        added,
        removed,
        moved,
        folds_moved,
        folds_compared: same_fold_layout(before, after),
        folds_by_position: folds_by_position(&after["split"]),
        list_all,
    }
}

/// The items of `these` that `those` lacks, in order.
fn not_in(these: &[String], those: &[String]) -> Vec<String> {
    these
        .iter()
        .filter(|item| !those.contains(item))
        .cloned()
        .collect()
}

/// The settings of the run that differ: metric and rule, every `[split]`
/// value results.json records (fold sizes are numbers, listed with them),
/// and the `[data]` columns. The table itself is an input, compared by digest.
fn setup_changes(before: &Value, after: &Value) -> Vec<SetupChange> {
    let mut setup = Vec::new();
    let mut differ = |what: String, b: &Value, a: &Value| {
        if a != b {
            setup.push(SetupChange {
                what,
                before: b.clone(),
                after: a.clone(),
            });
        }
    };
    for key in ["metric", "rule"] {
        differ(key.to_string(), &before[key], &after[key]);
    }
    let keys = |v: &Value| -> Vec<String> {
        v.as_object()
            .map(|o| o.keys().cloned().collect())
            .unwrap_or_default()
    };
    let (split_before, split_after) = (keys(&before["split"]), keys(&after["split"]));
    let split_keys = split_before
        .iter()
        .chain(not_in(&split_after, &split_before).iter())
        .filter(|key| *key != "fold_rows")
        .cloned()
        .collect::<Vec<_>>();
    for key in split_keys {
        differ(
            format!("split.{key}"),
            &before["split"][&key],
            &after["split"][&key],
        );
    }
    for key in ["target", "features", "key", "group", "order"] {
        differ(
            format!("data.{key}"),
            &before["data"][key],
            &after["data"][key],
        );
    }
    setup
}

/// One `[[candidate]]` table as results.json shows it: the settings whose
/// ids share a stem (the candidate's label, or its family's name).
struct Group<'a> {
    stem: &'a str,
    family: &'a str,
    features: Vec<String>,
    /// Grid points by label (`degree=3`; empty for a family without settings).
    settings: Vec<&'a str>,
}

/// The candidates of a result set, in results order.
fn groups(results: &Value) -> Vec<Group<'_>> {
    let mut out: Vec<Group<'_>> = Vec::new();
    for c in candidates(results) {
        let (stem, label) = id(c).split_once('/').unwrap_or((id(c), ""));
        let at = match out.iter().position(|g| g.stem == stem) {
            Some(at) => at,
            None => {
                out.push(Group {
                    stem,
                    family: c["family"].as_str().unwrap_or("?"),
                    features: c["features"]
                        .as_array()
                        .map(|f| {
                            f.iter()
                                .map(|name| name.as_str().unwrap_or("?").to_string())
                                .collect()
                        })
                        .unwrap_or_default(),
                    settings: Vec::new(),
                });
                out.len() - 1
            }
        };
        out[at].settings.push(label);
    }
    out
}

/// How a candidate both result sets have changed, if it did.
fn candidate_change(before: &Group<'_>, after: &Group<'_>) -> Option<CandidateChange> {
    let labels = |these: &[&str], those: &[&str]| -> Vec<String> {
        these
            .iter()
            .filter(|s| !those.contains(s))
            .map(|s| s.to_string())
            .collect()
    };
    let change = CandidateChange {
        candidate: before.stem.to_string(),
        family: (before.family != after.family).then(|| BeforeAfter {
            before: before.family.to_string(),
            after: after.family.to_string(),
        }),
        features: (before.features != after.features).then(|| BeforeAfter {
            before: before.features.clone(),
            after: after.features.clone(),
        }),
        settings_added: labels(&after.settings, &before.settings),
        settings_removed: labels(&before.settings, &after.settings),
    };
    let changed = change.family.is_some()
        || change.features.is_some()
        || !change.settings_added.is_empty()
        || !change.settings_removed.is_empty();
    changed.then_some(change)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn results(dropped: u32, cv_scores: &[(&str, f64)], folds: &[f64]) -> Value {
        let candidates: Vec<Value> = cv_scores
            .iter()
            .map(|(id, cv)| json!({"id": id, "cv_score": cv, "fold_scores": folds}))
            .collect();
        json!({
            "schema": "heldout-results/1",
            "experiment": "e",
            "metric": "mse",
            "rows": {"total": 10, "dropped": dropped},
            "candidates": candidates,
            "split": {"folds": 5},
        })
    }

    #[test]
    fn moved_numbers_come_largest_relative_change_first() {
        let before = results(0, &[("a", 2.0), ("b", 1.0)], &[1.0, 1.0]);
        let after = results(1, &[("a", 2.2), ("c", 1.0)], &[1.0, 1.5]);
        let files = BeforeAfter {
            before: "x".to_string(),
            after: "y".to_string(),
        };
        let c = comparison(&before, &after, files, false);
        // rows.dropped moved from 0: infinitely far, so first; then a's 10 %.
        let places: Vec<(&str, &str)> = c
            .moved
            .iter()
            .map(|m| (m.place.as_str(), m.number.as_str()))
            .collect();
        assert_eq!(places, [("rows", "dropped"), ("a", "cv_score")]);
        assert_eq!((c.added, c.removed), (vec!["c".into()], vec!["b".into()]));
        assert_eq!(c.settings_in_both, 1);
        assert_eq!(c.folds_moved.len(), 1);
        assert_eq!((c.folds_moved[0].moved, c.folds_moved[0].largest), (1, 1));
        assert!(c.setup.is_empty());
        assert!(c.inputs.iter().all(|row| !row.changed));
    }

    /// Results with two candidates (a polynomial in x with two degrees, a
    /// linear fit in x and z), 4 folds repeated twice.
    fn setup() -> Value {
        let entry = |id: &str, family: &str, features: &[&str]| {
            json!({
                "id": id, "family": family, "features": features,
                "cv_score": 1.0, "fold_scores": vec![1.0; 8],
            })
        };
        json!({
            "schema": "heldout-results/1",
            "experiment": "e",
            "metric": "mse",
            "rule": "one-se",
            "data": {"table": "t.csv", "target": "y", "features": ["x", "z"], "key": null},
            "split": {
                "method": "kfold", "seed": 7, "holdout": 0.2,
                "folds": 4, "repeats": 2, "fold_rows": [5, 6],
            },
            "candidates": [
                entry("polynomial/degree=1", "polynomial", &["x"]),
                entry("polynomial/degree=2", "polynomial", &["x"]),
                entry("linear", "linear", &["x", "z"]),
            ],
        })
    }

    fn compared(before: &Value, after: &Value) -> Comparison {
        let files = BeforeAfter {
            before: "a.json".to_string(),
            after: "b.json".to_string(),
        };
        comparison(before, after, files, false)
    }

    /// The setup changes as (what, before, after) text.
    fn setup_of(c: &Comparison) -> Vec<(String, String, String)> {
        c.setup
            .iter()
            .map(|s| (s.what.clone(), s.before.to_string(), s.after.to_string()))
            .collect()
    }

    /// Nothing about the candidates changed.
    fn candidates_unchanged(c: &Comparison) -> bool {
        c.families_added.is_empty()
            && c.families_removed.is_empty()
            && c.candidates_added.is_empty()
            && c.candidates_removed.is_empty()
            && c.candidates_changed.is_empty()
    }

    #[test]
    fn each_split_setting_is_named_alone() {
        let cases: [(&str, Value); 5] = [
            ("method", json!("leave-one-out")),
            ("folds", json!(5)),
            ("repeats", json!(3)),
            ("holdout", json!(0.25)),
            ("seed", json!(8)),
        ];
        for (key, value) in cases {
            let before = setup();
            let mut after = setup();
            let old = after["split"][key].to_string();
            after["split"][key] = value.clone();
            let c = compared(&before, &after);
            assert_eq!(
                setup_of(&c),
                [(format!("split.{key}"), old, value.to_string())],
                "{key}"
            );
            assert!(candidates_unchanged(&c), "{key}");
            // Only another seed or holdout keeps the folds' positions.
            let pairs = matches!(key, "holdout" | "seed");
            assert_eq!(c.folds_compared, pairs, "{key}");
        }
    }

    #[test]
    fn data_features_and_a_candidates_features_are_named() {
        let before = setup();
        let mut after = setup();
        after["data"]["features"] = json!(["x"]);
        let c = compared(&before, &after);
        assert_eq!(
            setup_of(&c),
            [(
                "data.features".to_string(),
                r#"["x","z"]"#.to_string(),
                r#"["x"]"#.to_string()
            )]
        );
        assert!(candidates_unchanged(&c));

        let mut after = setup();
        after["candidates"][2]["features"] = json!(["z"]);
        let c = compared(&before, &after);
        assert!(c.setup.is_empty());
        assert_eq!(c.candidates_changed.len(), 1);
        let change = &c.candidates_changed[0];
        assert_eq!(change.candidate, "linear");
        assert_eq!(
            change.features,
            Some(BeforeAfter {
                before: vec!["x".to_string(), "z".to_string()],
                after: vec!["z".to_string()],
            })
        );
        assert!(change.family.is_none() && change.settings_added.is_empty());
    }

    #[test]
    fn families_added_and_removed_are_named_with_their_candidates() {
        let before = setup();
        let mut after = setup();
        let candidates = after["candidates"].as_array_mut().unwrap();
        candidates.pop();
        candidates.push(json!({
            "id": "nearest-neighbors/k=3", "family": "nearest-neighbors",
            "features": ["x", "z"], "cv_score": 1.0, "fold_scores": vec![1.0; 8],
        }));
        let c = compared(&before, &after);
        assert_eq!(c.families_added, ["nearest-neighbors"]);
        assert_eq!(c.families_removed, ["linear"]);
        assert_eq!(
            c.candidates_added,
            [CandidateOnly {
                candidate: "nearest-neighbors".into(),
                family: "nearest-neighbors".into(),
                features: vec!["x".into(), "z".into()],
                settings: 1,
            }]
        );
        assert_eq!(c.candidates_removed[0].candidate, "linear");
        assert!(c.candidates_changed.is_empty());
        assert!(c.setup.is_empty());
    }

    #[test]
    fn a_changed_grid_names_the_settings_added_and_removed() {
        let before = setup();
        let mut after = setup();
        after["candidates"][0]["id"] = json!("polynomial/degree=3");
        let c = compared(&before, &after);
        assert_eq!(
            c.candidates_changed,
            [CandidateChange {
                candidate: "polynomial".into(),
                family: None,
                features: None,
                settings_added: vec!["degree=3".into()],
                settings_removed: vec!["degree=1".into()],
            }]
        );
        // The family is still there: nothing added or removed at that level.
        assert!(c.families_added.is_empty() && c.families_removed.is_empty());
        assert_eq!(c.added, ["polynomial/degree=3"]);
        assert_eq!(c.removed, ["polynomial/degree=1"]);
    }

    #[test]
    fn folds_are_named_within_their_repeat_as_verify_names_them() {
        let before = setup();
        let mut after = setup();
        after["candidates"][1]["fold_scores"][5] = json!(1.5);
        let c = compared(&before, &after);
        assert_eq!(c.folds_moved.len(), 1);
        let moved = &c.folds_moved[0];
        assert_eq!((moved.largest, moved.moved, moved.folds), (5, 1, 8));
        assert_eq!(moved.largest_fold, "fold 2 of repeat 2");

        // Without repeats, as verify says it: no repeat named.
        assert_eq!(fold_name(&json!({"folds": 8, "repeats": 1}), 5), "fold 6");
        // A fold column's labels are not in results.json: named by position.
        let column = json!({"method": "column", "folds": 8, "repeats": 1});
        assert_eq!(fold_name(&column, 5), "fold #6");
    }
}
