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
    same_bits, BeforeAfter, Comparison, FoldsMoved, Input, InputRow, Moved, SetupChange,
};

pub(crate) fn compare(args: &CompareArgs) -> anyhow::Result<()> {
    let before = read(&args.before)?;
    let after = read(&args.after)?;
    let files = BeforeAfter {
        before: args.before.display().to_string(),
        after: args.after.display().to_string(),
    };
    let comparison = comparison(&before, &after, files, args.all);
    let text = crate::report::compare::render(&comparison)
        .context("internal error: cannot render the comparison")?;
    print!("{text}");
    Ok(())
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
        if let Some((i, m)) = largest {
            fold_changes.push(FoldsMoved {
                moved: moved_folds,
                folds,
                largest: i,
                values: m,
            });
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

    let mut setup = Vec::new();
    for key in ["metric", "rule"] {
        if before[key] != after[key] {
            setup.push(SetupChange {
                what: key.to_string(),
                before: before[key].to_string(),
                after: after[key].to_string(),
            });
        }
    }
    if let (Some(sb), Some(sa)) = (before["split"].as_object(), after["split"].as_object()) {
        for (key, b) in sb {
            let a = sa.get(key).unwrap_or(&Value::Null);
            if a != b {
                setup.push(SetupChange {
                    what: format!("split {key}"),
                    before: b.to_string(),
                    after: a.to_string(),
                });
            }
        }
    }

    let ids = |r: &Value| {
        candidates(r)
            .into_iter()
            .map(id)
            .map(str::to_string)
            .collect::<Vec<_>>()
    };
    let (ids_before, ids_after) = (ids(before), ids(after));
    let added: Vec<String> = ids_after
        .iter()
        .filter(|i| !ids_before.contains(i))
        .cloned()
        .collect();
    let removed: Vec<String> = ids_before
        .iter()
        .filter(|i| !ids_after.contains(i))
        .cloned()
        .collect();

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
        settings_in_both: ids_before.len() - removed.len(),
        added,
        removed,
        moved,
        folds_moved,
        list_all,
    }
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
}
