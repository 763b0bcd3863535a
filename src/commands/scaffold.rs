//! `heldout new`: a first spec for a table, from its header and a look at
//! its cells.
//!
//! The scaffold is a starting point people edit, so it is written as
//! commented TOML and chosen to run as it stands: numeric columns become
//! features (except those named like a time, which are offered as the order
//! of a time split instead), a text column with a distinct value on every row becomes the
//! row key, the one feature most correlated with the target gets the
//! one-feature candidates (polynomial, smoothing spline), and grids stay
//! inside what the row count allows. Before anything is written the text is
//! parsed and validated like any spec, so a scaffold that would not load is
//! an internal error, never a file.

use std::collections::BTreeSet;
use std::fmt::Write as _;
use std::path::{Component, Path, PathBuf};

use anyhow::Context;

use crate::cli::NewArgs;
use crate::error::{DataError, UsageError};

/// What one column's cells look like.
#[derive(Debug)]
struct ColumnProfile {
    name: String,
    /// Every non-empty cell is a finite number.
    numeric: bool,
    /// Empty or whitespace-only cells.
    empty: usize,
    /// Distinct non-empty cell texts.
    distinct: usize,
    /// The values, for numeric columns (NaN where empty).
    values: Vec<f64>,
}

/// Writes a spec for `--table` predicting `--target`.
pub(crate) fn scaffold(args: &NewArgs) -> anyhow::Result<()> {
    let profiles = profile(&args.table)?;
    let rows = profiles.first().map_or(0, |p| p.values.len());
    let target = find_target(&profiles, &args.target, &args.table)?;
    let spec_dir = match &args.output {
        Some(output) => output.parent().map(Path::to_path_buf).unwrap_or_default(),
        None => PathBuf::from("."),
    };
    let table_in_spec = relative_path(&spec_dir, &args.table)?;
    let text = render(&Scaffold {
        name: args.name.clone().unwrap_or_else(|| name_from(&args.table)),
        table: table_in_spec,
        target,
        profiles: &profiles,
        rows,
    })?;

    // The scaffold must load like any spec; if it does not, that is our bug.
    let shown = args
        .output
        .clone()
        .unwrap_or_else(|| PathBuf::from("<stdout>.toml"));
    crate::spec::parse(&shown, &text)
        .and_then(|spec| crate::spec::validate(&shown, &spec))
        .map_err(|e| anyhow::anyhow!("internal error: the scaffold does not load: {e}"))?;

    match &args.output {
        None => print!("{text}"),
        Some(output) => {
            if output.exists() && !args.force {
                return Err(UsageError(format!(
                    "{} exists; pass --force to overwrite it",
                    output.display()
                ))
                .into());
            }
            if let Some(parent) = output.parent().filter(|p| !p.as_os_str().is_empty()) {
                std::fs::create_dir_all(parent)
                    .with_context(|| format!("cannot create {}", parent.display()))?;
            }
            std::fs::write(output, &text)
                .with_context(|| format!("cannot write {}", output.display()))?;
            eprintln!(
                "wrote {}; run it with: heldout run {}",
                output.display(),
                output.display()
            );
        }
    }
    Ok(())
}

/// Reads the table and profiles every column.
fn profile(table: &Path) -> Result<Vec<ColumnProfile>, DataError> {
    let bytes = std::fs::read(table).map_err(|error| DataError::Read {
        path: table.to_path_buf(),
        error,
    })?;
    let table_error = |message: String| DataError::Table {
        path: table.to_path_buf(),
        message,
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_reader(bytes.as_slice());
    let header = reader
        .headers()
        .map_err(|e| table_error(format!("cannot read the header: {e}")))?
        .clone();
    if header.iter().all(|h| h.trim().is_empty()) {
        return Err(table_error("the file is empty: no header row".into()));
    }
    let mut profiles: Vec<ColumnProfile> = header
        .iter()
        .map(|name| ColumnProfile {
            name: name.trim().to_string(),
            numeric: true,
            empty: 0,
            distinct: 0,
            values: Vec::new(),
        })
        .collect();
    let mut seen: Vec<BTreeSet<String>> = vec![BTreeSet::new(); profiles.len()];
    for record in reader.records() {
        let record = record.map_err(|e| table_error(format!("cannot read a row: {e}")))?;
        for ((cell, column), seen) in record.iter().zip(&mut profiles).zip(&mut seen) {
            let cell = cell.trim();
            if cell.is_empty() {
                column.empty += 1;
                column.values.push(f64::NAN);
                continue;
            }
            match cell.parse::<f64>() {
                Ok(value) if value.is_finite() => column.values.push(value),
                _ => {
                    column.numeric = false;
                    column.values.push(f64::NAN);
                }
            }
            seen.insert(cell.to_string());
        }
    }
    for (column, seen) in profiles.iter_mut().zip(seen) {
        column.distinct = seen.len();
    }
    if profiles[0].values.is_empty() {
        return Err(table_error("the table has a header but no rows".into()));
    }
    Ok(profiles)
}

/// The target's index: a column of the header holding numbers.
fn find_target(profiles: &[ColumnProfile], target: &str, table: &Path) -> anyhow::Result<usize> {
    let names: Vec<&str> = profiles.iter().map(|p| p.name.as_str()).collect();
    let Some(index) = names.iter().position(|n| *n == target) else {
        let hint = crate::spec::closest(target, &names)
            .map(|w| format!(" (did you mean \"{w}\"?)"))
            .unwrap_or_default();
        return Err(DataError::Table {
            path: table.to_path_buf(),
            message: format!(
                "no column named \"{target}\"{hint}; the header has: {}",
                names.join(", ")
            ),
        }
        .into());
    };
    if !profiles[index].numeric {
        return Err(DataError::Table {
            path: table.to_path_buf(),
            message: format!(
                "the target \"{target}\" holds text that is not a number; heldout predicts \
                 numeric targets"
            ),
        }
        .into());
    }
    Ok(index)
}

/// An experiment name from the table's file name: lower case, a-z, 0-9, '-'.
fn name_from(table: &Path) -> String {
    let stem = table
        .file_stem()
        .map(|s| s.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    let mut name = String::new();
    for c in stem.chars() {
        if c.is_ascii_lowercase() || c.is_ascii_digit() {
            name.push(c);
        } else if !name.ends_with('-') {
            name.push('-');
        }
    }
    let name = name.trim_matches('-').to_string();
    if name.is_empty() {
        "experiment".to_string()
    } else {
        name
    }
}

/// `table` as seen from the folder `from` (both taken relative to the
/// current folder when not absolute), with `/` separators. A table given as
/// an absolute path stays absolute.
fn relative_path(from: &Path, table: &Path) -> anyhow::Result<String> {
    if table.is_absolute() {
        return Ok(table.to_string_lossy().into_owned());
    }
    let cwd = std::env::current_dir().context("cannot read the current folder")?;
    let absolute = |p: &Path| -> Vec<String> {
        let joined = if p.is_absolute() {
            p.to_path_buf()
        } else {
            cwd.join(p)
        };
        let mut parts: Vec<String> = Vec::new();
        for component in joined.components() {
            match component {
                Component::ParentDir => {
                    parts.pop();
                }
                Component::Normal(part) => parts.push(part.to_string_lossy().into_owned()),
                _ => {}
            }
        }
        parts
    };
    let (from, to) = (absolute(from), absolute(table));
    let shared = from.iter().zip(&to).take_while(|(a, b)| a == b).count();
    let mut parts: Vec<String> = vec!["..".to_string(); from.len() - shared];
    parts.extend(to[shared..].iter().cloned());
    Ok(parts.join("/"))
}

/// A TOML string literal (quoted and escaped).
fn quoted(text: &str) -> String {
    toml::Value::String(text.to_string()).to_string()
}

fn quoted_list(items: &[&str]) -> String {
    let inner: Vec<String> = items.iter().map(|s| quoted(s)).collect();
    format!("[{}]", inner.join(", "))
}

/// Pearson correlation over the rows where both values are present.
fn correlation(a: &[f64], b: &[f64]) -> f64 {
    let pairs: Vec<(f64, f64)> = a
        .iter()
        .zip(b)
        .filter(|(x, y)| !x.is_nan() && !y.is_nan())
        .map(|(x, y)| (*x, *y))
        .collect();
    let n = pairs.len() as f64;
    if n < 2.0 {
        return 0.0;
    }
    let (mx, my) = pairs
        .iter()
        .fold((0.0, 0.0), |(sx, sy), (x, y)| (sx + x / n, sy + y / n));
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (x, y) in &pairs {
        sxy += (x - mx) * (y - my);
        sxx += (x - mx) * (x - mx);
        syy += (y - my) * (y - my);
    }
    if sxx == 0.0 || syy == 0.0 {
        0.0
    } else {
        sxy / (sxx * syy).sqrt()
    }
}

/// Column names that suggest a time order.
fn looks_like_time(name: &str) -> bool {
    let name = name.to_lowercase();
    [
        "date", "time", "day", "week", "month", "year", "period", "hour",
    ]
    .iter()
    .any(|word| name.contains(word))
}

struct Scaffold<'a> {
    name: String,
    table: String,
    target: usize,
    profiles: &'a [ColumnProfile],
    rows: usize,
}

fn render(s: &Scaffold) -> anyhow::Result<String> {
    let target = &s.profiles[s.target];
    let key = s
        .profiles
        .iter()
        .enumerate()
        .find(|(i, p)| *i != s.target && !p.numeric && p.empty == 0 && p.distinct == s.rows)
        .map(|(i, _)| i);
    let mut features = Vec::new();
    let mut left_out = Vec::new();
    for (i, p) in s.profiles.iter().enumerate() {
        if i == s.target || Some(i) == key {
            continue;
        }
        if !p.numeric {
            left_out.push(format!("{} (text)", p.name));
        } else if looks_like_time(&p.name) {
            left_out.push(format!("{} (looks like time; add it for a trend)", p.name));
        } else if p.distinct < 2 {
            left_out.push(format!("{} (constant)", p.name));
        } else {
            features.push(i);
        }
    }
    if features.is_empty() {
        return Err(UsageError(format!(
            "no numeric column besides the target \"{}\" varies; a spec needs at least one \
             feature",
            target.name
        ))
        .into());
    }
    // The one-feature candidates use the feature most correlated with the
    // target (ties: the first in the header).
    let strength = |i: usize| correlation(&s.profiles[i].values, &target.values).abs();
    let main = features
        .iter()
        .map(|&i| (strength(i), i))
        .max_by(|a, b| a.0.total_cmp(&b.0).then(b.1.cmp(&a.1)))
        .map_or(features[0], |(_, i)| i);
    let main_profile = &s.profiles[main];
    let feature_names: Vec<&str> = features
        .iter()
        .map(|&i| s.profiles[i].name.as_str())
        .collect();
    let empty_rows: usize = features
        .iter()
        .chain(std::iter::once(&s.target))
        .map(|&i| s.profiles[i].empty)
        .sum();

    let holdout = if s.rows >= 50 { 0.2 } else { 0.0 };
    let fit_rows = s.rows - (holdout * s.rows as f64).round() as usize;
    let folds = if fit_rows >= 100 { 10 } else { 5 }.min(fit_rows.max(2));
    let fold_train_rows = fit_rows - fit_rows.div_ceil(folds);

    let mut out = String::new();
    let w = &mut out;
    writeln!(
        w,
        "# A first spec for {}, written by `heldout new`.",
        s.table
    )?;
    writeln!(
        w,
        "# Edit it freely: every choice below is a starting point. Keys are described"
    )?;
    writeln!(
        w,
        "# in docs/spec.md; `heldout plan` shows what a run would do."
    )?;
    writeln!(w)?;
    writeln!(w, "[experiment]")?;
    writeln!(w, "name = {}", quoted(&s.name))?;
    writeln!(
        w,
        "title = {}",
        quoted(&format!(
            "How flexible should the model of {} be?",
            target.name
        ))
    )?;
    writeln!(
        w,
        "# Any integer; it fixes the locked test set and the folds. This one comes from"
    )?;
    writeln!(w, "# the header, so two scaffolds of one table agree.")?;
    let header: Vec<&str> = s.profiles.iter().map(|p| p.name.as_str()).collect();
    let digest = blake3::hash(header.join(",").as_bytes());
    let seed = u32::from_le_bytes(digest.as_bytes()[..4].try_into()?);
    writeln!(w, "seed = {seed}")?;
    writeln!(w)?;
    writeln!(w, "[data]")?;
    writeln!(
        w,
        "table = {}  # relative to this spec file",
        quoted(&s.table)
    )?;
    writeln!(w, "target = {}", quoted(&target.name))?;
    writeln!(w, "features = {}", quoted_list(&feature_names))?;
    if let Some(key) = key {
        writeln!(
            w,
            "# Every row has its own value here, so it identifies rows: folds then do not"
        )?;
        writeln!(w, "# depend on the order of the rows in the file.")?;
        writeln!(w, "key = {}", quoted(&s.profiles[key].name))?;
    }
    if !left_out.is_empty() {
        writeln!(w, "# Not used as features: {}.", left_out.join(", "))?;
    }
    if let Some(p) = s.profiles.iter().find(|p| looks_like_time(&p.name)) {
        writeln!(
            w,
            "# If rows follow each other in time, validate on later rows only: uncomment"
        )?;
        writeln!(
            w,
            "# the next line and set method = \"ordered\" below (see docs/splits.md)."
        )?;
        writeln!(w, "# order = {}", quoted(&p.name))?;
    }
    if empty_rows > 0 {
        writeln!(
            w,
            "# {empty_rows} empty cell(s) in the target and features: those rows are dropped"
        )?;
        writeln!(
            w,
            "# and counted. Use \"error\" to stop at the first one instead."
        )?;
        writeln!(w, "missing = \"drop-rows\"")?;
    }
    writeln!(w)?;
    writeln!(w, "[split]")?;
    if holdout > 0.0 {
        writeln!(
            w,
            "# A fifth of the rows is locked away and scored once, after the choice."
        )?;
    } else {
        writeln!(
            w,
            "# Fewer than 50 rows: no locked test set, every row goes to cross-validation."
        )?;
    }
    writeln!(w, "holdout = {holdout}")?;
    writeln!(w, "method = \"kfold\"")?;
    writeln!(w, "folds = {folds}")?;
    writeln!(w, "repeats = 1")?;
    writeln!(w)?;

    writeln!(w, "# The straight-line baseline on every feature.")?;
    writeln!(w, "[[candidate]]")?;
    writeln!(w, "family = \"linear\"")?;
    writeln!(w)?;
    let degrees: Vec<usize> = (1..=6)
        .filter(|&d| d < main_profile.distinct && d + 1 < fold_train_rows)
        .collect();
    if degrees.len() >= 2 {
        writeln!(
            w,
            "# Polynomials in {} (the feature most correlated with the target).",
            main_profile.name
        )?;
        writeln!(w, "[[candidate]]")?;
        writeln!(w, "family = \"polynomial\"")?;
        writeln!(w, "features = {}", quoted_list(&[&main_profile.name]))?;
        writeln!(w, "degree = {degrees:?}")?;
        writeln!(w)?;
    }
    let dfs: Vec<f64> = [2.5, 3.0, 4.0, 6.0, 9.0, 14.0]
        .into_iter()
        .filter(|&df| df < main_profile.distinct as f64 && df < fold_train_rows as f64)
        .collect();
    if dfs.len() >= 3 {
        writeln!(
            w,
            "# A smoothing spline in {}, from nearly straight (df 2.5) to wiggly.",
            main_profile.name
        )?;
        writeln!(w, "[[candidate]]")?;
        writeln!(w, "family = \"smoothing-spline\"")?;
        writeln!(w, "features = {}", quoted_list(&[&main_profile.name]))?;
        let shown: Vec<String> = dfs.iter().map(|df| df.to_string()).collect();
        writeln!(w, "df = [{}]", shown.join(", "))?;
        writeln!(w)?;
    }
    let ks: Vec<usize> = [1, 2, 5, 10, 20, 50, 100]
        .into_iter()
        .filter(|&k| k <= fold_train_rows / 2)
        .collect();
    if !ks.is_empty() {
        writeln!(
            w,
            "# Nearest neighbours on every feature: small k follows the data closely."
        )?;
        writeln!(w, "[[candidate]]")?;
        writeln!(w, "family = \"nearest-neighbors\"")?;
        writeln!(w, "k = {ks:?}")?;
        writeln!(w)?;
    }
    if features.len() >= 2 {
        writeln!(
            w,
            "# Ridge on every feature (standardised): a larger penalty shrinks harder."
        )?;
        writeln!(w, "[[candidate]]")?;
        writeln!(w, "family = \"ridge\"")?;
        writeln!(w, "penalty = [0.01, 0.1, 1.0, 10.0, 100.0, 1000.0]")?;
        writeln!(w)?;
    }
    writeln!(w, "[choose]")?;
    writeln!(w, "metric = \"mse\"")?;
    writeln!(
        w,
        "# The least flexible setting within one standard error of the best."
    )?;
    writeln!(w, "rule = \"one-se\"")?;
    writeln!(w)?;
    writeln!(w, "[report]")?;
    writeln!(w, "formats = [\"markdown\", \"html\"]")?;
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_come_from_the_file_stem() {
        assert_eq!(
            name_from(Path::new("data/Heat Demand_2026.csv")),
            "heat-demand-2026"
        );
        assert_eq!(name_from(Path::new("__.csv")), "experiment");
    }

    #[test]
    fn correlation_matches_a_hand_computed_value() {
        // x = 1..4, y = (1, 3, 2, 4): r = 0.8 (hand computation: sxy = 4,
        // sxx = syy = 5).
        let r = correlation(&[1.0, 2.0, 3.0, 4.0], &[1.0, 3.0, 2.0, 4.0]);
        assert!((r - 0.8).abs() < 1e-15, "{r}");
        assert_eq!(correlation(&[1.0, 1.0], &[2.0, 3.0]), 0.0);
    }

    #[test]
    fn time_like_names_are_recognised() {
        assert!(looks_like_time("reading_date"));
        assert!(looks_like_time("Day"));
        assert!(!looks_like_time("outdoor_c"));
    }
}
