//! `heldout compare A.json B.json`: what changed between two result sets, as
//! Markdown for a pull-request comment. Inputs are told apart by digest,
//! candidates by id, numbers bit for bit. The results are read as plain JSON,
//! so files written by other versions of heldout compare as far as they share
//! fields.

use std::fmt::Write as _;
use std::path::Path;

use serde_json::Value;

use crate::cli::CompareArgs;
use crate::error::UsageError;
use crate::report::escape_markdown as md;

/// How many moved numbers are listed without `--all`.
const SHOWN: usize = 40;

pub(crate) fn compare(args: &CompareArgs) -> anyhow::Result<()> {
    let before = read(&args.before)?;
    let after = read(&args.after)?;
    let text = render(
        &before,
        &after,
        &args.before.display().to_string(),
        &args.after.display().to_string(),
        args.all,
    );
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

/// A number that differs between the two result sets.
#[derive(Debug, Clone, PartialEq)]
struct Moved {
    /// Where: a candidate id, or the part of the results.
    place: String,
    /// Which number, in the results' own words.
    number: String,
    before: Option<f64>,
    after: Option<f64>,
}

impl Moved {
    /// |after − before| / |before|, for ordering; infinite when there is no
    /// finite before value to compare against.
    fn relative(&self) -> f64 {
        match (self.before, self.after) {
            (Some(b), Some(a)) if b != 0.0 => ((a - b) / b).abs(),
            (Some(b), Some(a)) if a == b => 0.0,
            _ => f64::INFINITY,
        }
    }
}

fn same(a: Option<f64>, b: Option<f64>) -> bool {
    match (a, b) {
        (Some(x), Some(y)) => x.to_bits() == y.to_bits(),
        (None, None) => true,
        _ => false,
    }
}

/// Compares the numbers at the same keys of two JSON objects.
fn scalars(place: &str, keys: &[&str], before: &Value, after: &Value, out: &mut Vec<Moved>) {
    for key in keys {
        let (b, a) = (before[key].as_f64(), after[key].as_f64());
        if !same(b, a) {
            out.push(Moved {
                place: place.to_string(),
                number: (*key).to_string(),
                before: b,
                after: a,
            });
        }
    }
}

/// `value` with `digits` significant digits: plain decimals for ordinary
/// magnitudes, scientific otherwise.
fn significant(value: f64, digits: usize) -> String {
    if value == 0.0 || !value.is_finite() {
        return format!("{value}");
    }
    let digits = digits.max(1);
    let scientific = format!("{value:.*e}", digits - 1);
    let exponent: i32 = scientific
        .rsplit('e')
        .next()
        .and_then(|e| e.parse().ok())
        .unwrap_or(0);
    if (-4..7).contains(&exponent) {
        let decimals = (digits as i32 - 1 - exponent).max(0) as usize;
        format!("{value:.decimals$}")
    } else {
        scientific
    }
}

/// Both values with the fewest digits (at least 4) that tell them apart.
fn apart(before: Option<f64>, after: Option<f64>) -> (String, String) {
    let show = |v: Option<f64>, digits| v.map_or("—".to_string(), |x| significant(x, digits));
    for digits in 4..=17 {
        let (b, a) = (show(before, digits), show(after, digits));
        if b != a {
            return (b, a);
        }
    }
    (
        before.map_or("—".into(), |v| format!("{v:?}")),
        after.map_or("—".into(), |v| format!("{v:?}")),
    )
}

fn signed(value: f64, digits: usize) -> String {
    let text = significant(value, digits);
    if value > 0.0 {
        format!("+{text}")
    } else {
        text
    }
}

/// The change column and the relative change column.
fn change(m: &Moved) -> (String, String) {
    match (m.before, m.after) {
        (Some(b), Some(a)) => {
            let delta = a - b;
            let relative = if b != 0.0 {
                format!("{}%", signed(delta / b.abs() * 100.0, 2))
            } else {
                "—".to_string()
            };
            (signed(delta, 3), relative)
        }
        _ => ("—".to_string(), "—".to_string()),
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

/// How one candidate's fold scores moved.
#[derive(Debug, Clone, PartialEq)]
struct FoldsMoved {
    moved: usize,
    folds: usize,
    /// The fold whose score moved most (relative), 0-based, and its values.
    largest: usize,
    values: Moved,
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
            if !same(m.before, m.after) {
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
                if !same(b.as_f64(), a) {
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

/// An input's digest in short form.
fn short(value: &Value) -> String {
    match value.as_str() {
        Some(s) => format!("`{}`", s.chars().take(16).collect::<String>()),
        None => "—".to_string(),
    }
}

/// The comparison as Markdown.
fn render(before: &Value, after: &Value, before_name: &str, after_name: &str, all: bool) -> String {
    let mut out = String::new();
    let name = |r: &Value| r["experiment"].as_str().unwrap_or("?").to_string();
    let heading = if name(before) == name(after) {
        name(after)
    } else {
        format!("{} → {}", name(before), name(after))
    };
    let _ = writeln!(out, "## heldout compare: {}\n", md(&heading));
    let _ = writeln!(
        out,
        "Before: `{}`  \nAfter: `{}`\n",
        before_name.replace('`', "'"),
        after_name.replace('`', "'")
    );

    let (chosen_before, chosen_after) = (
        before["chosen"].as_str().unwrap_or("?"),
        after["chosen"].as_str().unwrap_or("?"),
    );
    if chosen_before == chosen_after {
        let _ = writeln!(out, "**The choice is unchanged:** `{chosen_after}`.");
    } else {
        let _ = writeln!(
            out,
            "**The choice changed:** `{chosen_before}` → `{chosen_after}`."
        );
    }
    let (tb, ta) = (before["test_score"].as_f64(), after["test_score"].as_f64());
    let metric = after["metric"].as_str().unwrap_or("score");
    if tb.is_some() || ta.is_some() {
        let (b, a) = apart(tb, ta);
        if same(tb, ta) {
            let _ = writeln!(out, "Test {metric}: {a}, unchanged.");
        } else {
            let _ = writeln!(out, "Test {metric}: {b} → {a}.");
        }
    }
    out.push('\n');

    // Inputs, by digest, and the setup.
    let mut inputs = vec![
        (
            "tool",
            before["inputs"]["tool"].clone(),
            after["inputs"]["tool"].clone(),
        ),
        (
            "spec (meaning)",
            before["inputs"]["spec"].clone(),
            after["inputs"]["spec"].clone(),
        ),
    ];
    let table_name = |r: &Value| r["data"]["table"].as_str().unwrap_or("?").to_string();
    let data_label = if table_name(before) == table_name(after) {
        format!("data {}", md(&table_name(after)))
    } else {
        format!(
            "data {} → {}",
            md(&table_name(before)),
            md(&table_name(after))
        )
    };
    let data = (
        before["data"]["digest"].clone(),
        after["data"]["digest"].clone(),
    );
    inputs.push((
        "test set and folds",
        before["inputs"]["folds"].clone(),
        after["inputs"]["folds"].clone(),
    ));
    inputs.push((
        "report templates",
        before["inputs"]["templates"].clone(),
        after["inputs"]["templates"].clone(),
    ));
    let _ = writeln!(out, "### Inputs\n");
    let _ = writeln!(out, "| input | | before | after |\n|---|---|---|---|");
    let mut row = |label: &str, b: &Value, a: &Value| {
        let status = if b == a { "same" } else { "**changed**" };
        let (bs, as_) = if label == "tool" {
            (
                b.as_str().map_or("—".into(), md),
                a.as_str().map_or("—".into(), md),
            )
        } else {
            (short(b), short(a))
        };
        let _ = writeln!(out, "| {label} | {status} | {bs} | {as_} |");
    };
    row(&data_label, &data.0, &data.1);
    for (label, b, a) in &inputs {
        row(label, b, a);
    }
    let mut setup = Vec::new();
    for key in ["metric", "rule"] {
        if before[key] != after[key] {
            setup.push(format!("{key}: {} → {}", before[key], after[key]));
        }
    }
    if let (Some(sb), Some(sa)) = (before["split"].as_object(), after["split"].as_object()) {
        for (key, b) in sb {
            let a = sa.get(key).unwrap_or(&Value::Null);
            if a != b {
                setup.push(format!("split {key}: {b} → {a}"));
            }
        }
    }
    if !setup.is_empty() {
        let _ = writeln!(out, "\nThe setup changed: {}.", md(&setup.join("; ")));
    }
    out.push('\n');

    // Candidates added and removed.
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
    let common = ids_before.len() - removed.len();
    let _ = writeln!(out, "### Candidates\n");
    let list = |v: &[String]| {
        v.iter()
            .map(|i| format!("`{i}`"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    if added.is_empty() && removed.is_empty() {
        let _ = writeln!(out, "The same {common} settings in both.");
    } else {
        let _ = writeln!(out, "{common} settings in both.");
        if !added.is_empty() {
            let _ = writeln!(out, "- Added ({}): {}", added.len(), list(&added));
        }
        if !removed.is_empty() {
            let _ = writeln!(out, "- Removed ({}): {}", removed.len(), list(&removed));
        }
    }
    out.push('\n');

    // Numbers.
    let (mut moved, folds) = moved_numbers(before, after);
    let _ = writeln!(out, "### Numbers that moved\n");
    if moved.is_empty() && folds.is_empty() {
        let _ = writeln!(
            out,
            "None: every number present in both is identical to the bit."
        );
        return out;
    }
    if moved.is_empty() {
        let _ = writeln!(out, "Only fold scores moved (below).");
    } else {
        // Largest relative change first; ties keep results order.
        moved.sort_by(|a, b| b.relative().total_cmp(&a.relative()));
        let _ = writeln!(
            out,
            "{} number{} moved, largest relative change first. Values carry just enough digits \
             to tell them apart.\n",
            moved.len(),
            if moved.len() == 1 { "" } else { "s" }
        );
        let _ = writeln!(
            out,
            "| where | number | before | after | change | relative |\n\
             |---|---|---:|---:|---:|---:|"
        );
        let shown = if all {
            moved.len()
        } else {
            SHOWN.min(moved.len())
        };
        for m in &moved[..shown] {
            let (b, a) = apart(m.before, m.after);
            let (delta, relative) = change(m);
            let _ = writeln!(
                out,
                "| {} | {} | {b} | {a} | {delta} | {relative} |",
                md(&m.place),
                md(&m.number)
            );
        }
        if shown < moved.len() {
            let _ = writeln!(
                out,
                "\n…and {} more; `heldout compare --all` lists them all.",
                moved.len() - shown
            );
        }
    }
    if !folds.is_empty() {
        let _ = writeln!(
            out,
            "\n#### Fold scores\n\n\
             Per setting: how many fold scores moved, and the fold that moved most.\n\n\
             | setting | folds moved | largest at | before | after | change | relative |\n\
             |---|---:|---:|---:|---:|---:|---:|"
        );
        for f in &folds {
            let (b, a) = apart(f.values.before, f.values.after);
            let (delta, relative) = change(&f.values);
            let _ = writeln!(
                out,
                "| {} | {} of {} | fold {} | {b} | {a} | {delta} | {relative} |",
                md(&f.values.place),
                f.moved,
                f.folds,
                f.largest + 1
            );
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn digits_grow_until_values_differ() {
        assert_eq!(
            apart(Some(1.23456), Some(1.23467)),
            ("1.2346".to_string(), "1.2347".to_string())
        );
        // Adjacent doubles need all 17 digits.
        let next = f64::from_bits(0.3f64.to_bits() + 1);
        assert_eq!(
            apart(Some(0.3), Some(next)),
            (
                "0.29999999999999999".to_string(),
                "0.30000000000000004".to_string()
            )
        );
        assert_eq!(
            apart(None, Some(2.0)),
            ("—".to_string(), "2.000".to_string())
        );
    }

    #[test]
    fn changes_are_signed_with_relative_percent() {
        let m = Moved {
            place: "x".into(),
            number: "cv_score".into(),
            before: Some(2.0),
            after: Some(2.5),
        };
        assert_eq!(change(&m), ("+0.500".to_string(), "+25%".to_string()));
        assert_eq!(m.relative(), 0.25);
    }

    #[test]
    fn significant_switches_to_scientific_for_extremes() {
        assert_eq!(significant(1234.5678, 4), "1235");
        assert_eq!(significant(0.00012345, 3), "0.000123");
        assert_eq!(significant(1.5e-9, 2), "1.5e-9");
    }
}
