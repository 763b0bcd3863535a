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
//!
//! This module profiles the table and decides what to propose, as a
//! [`Scaffold`]; `report::scaffold` writes it out with its comments.

use std::collections::BTreeSet;
use std::path::{Component, Path, PathBuf};

use anyhow::Context;

use crate::cli::NewArgs;
use crate::error::{DataError, UsageError};
use crate::report::scaffold::{LeftOut, LeftOutBecause, Scaffold};

/// What one column's cells look like.
#[derive(Debug)]
struct ColumnProfile {
    name: String,
    /// Every cell that is not missing is a finite number.
    numeric: bool,
    /// Missing cells: empty, whitespace-only, or a default missing-value
    /// marker ("NA", "NaN", …) in a column that is otherwise numeric.
    empty: usize,
    /// Distinct non-empty cell texts.
    distinct: usize,
    /// Every cell that is not missing is an ISO 8601 date (`2026-01-31`,
    /// perhaps with a time after it), and there is at least one.
    iso_dates: bool,
    /// The values, for numeric columns (NaN where empty).
    values: Vec<f64>,
}

/// How the table writes its cells, as the scaffold saw them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Written {
    delimiter: u8,
    decimal_comma: bool,
}

/// Writes a spec for `--table` predicting `--target`.
pub(crate) fn scaffold(args: &NewArgs) -> anyhow::Result<()> {
    let (profiles, written) = profile(&args.table)?;
    let rows = profiles.first().map_or(0, |p| p.values.len());
    let target = find_target(&profiles, &args.target, &args.table)?;
    let spec_dir = match &args.output {
        Some(output) => output.parent().map(Path::to_path_buf).unwrap_or_default(),
        None => PathBuf::from("."),
    };
    let table_in_spec = relative_path(&spec_dir, &args.table)?;
    let name = args.name.clone().unwrap_or_else(|| name_from(&args.table));
    let mut scaffold = propose(&profiles, target, rows, name, table_in_spec)?;
    scaffold.delimiter = (written.delimiter != b',')
        .then(|| crate::data::format::delimiter_in_spec(written.delimiter).to_string());
    scaffold.decimal_comma = written.decimal_comma;
    let text = crate::report::scaffold::render(&scaffold)
        .context("internal error: cannot render the scaffold")?;

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

/// Reads the table and profiles every column. The delimiter is the one that
/// splits the header into the most columns; a table separated by other than
/// commas whose cells read as numbers only with a decimal comma is taken to
/// write decimal commas.
fn profile(table: &Path) -> Result<(Vec<ColumnProfile>, Written), DataError> {
    let bytes = std::fs::read(table).map_err(|error| DataError::Read {
        path: table.to_path_buf(),
        error,
    })?;
    let table_error = |message: String| DataError::Table {
        path: table.to_path_buf(),
        message,
    };
    // A Parquet table is profiled through the CSV text of its rows
    // (docs/spec.md, "Parquet tables").
    let bytes = if crate::data::parquet::is_parquet(table, &bytes) {
        crate::data::parquet::to_csv(bytes, None).map_err(table_error)?
    } else {
        bytes
    };
    let delimiter = crate::data::format::guess_delimiter(&bytes, b',').map_or(b',', |(d, _)| d);
    let first_rows: String = String::from_utf8_lossy(&bytes[..bytes.len().min(1 << 16)]).into();
    // A decimal comma: some cell like "3,5" between other delimiters and none
    // like "3.5".
    let decimal_comma = delimiter != b','
        && first_rows.split([delimiter as char, '\n']).any(|cell| {
            cell.trim().contains(',') && cell.trim().replacen(',', ".", 1).parse::<f64>().is_ok()
        })
        && !first_rows
            .split([delimiter as char, '\n'])
            .any(|cell| cell.trim().contains('.') && cell.trim().parse::<f64>().is_ok());
    let format = crate::data::TableFormat {
        delimiter,
        decimal_comma,
        ..crate::data::TableFormat::default()
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .delimiter(delimiter)
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
            iso_dates: true,
            values: Vec::new(),
        })
        .collect();
    let mut seen: Vec<BTreeSet<String>> = vec![BTreeSet::new(); profiles.len()];
    // Markers count as missing only in a column whose other cells are numbers.
    let mut markers = vec![0usize; profiles.len()];
    for record in reader.records() {
        let record = record.map_err(|e| table_error(format!("cannot read a row: {e}")))?;
        for (((cell, column), seen), markers) in record
            .iter()
            .zip(&mut profiles)
            .zip(&mut seen)
            .zip(&mut markers)
        {
            let cell = cell.trim();
            if cell.is_empty() {
                column.empty += 1;
                column.values.push(f64::NAN);
                continue;
            }
            if format.is_missing(cell) {
                *markers += 1;
                column.values.push(f64::NAN);
                continue;
            }
            column.iso_dates &= is_iso_date(cell);
            match format.parse_number(cell) {
                Some(value) if value.is_finite() => column.values.push(value),
                _ => {
                    column.numeric = false;
                    column.values.push(f64::NAN);
                }
            }
            seen.insert(cell.to_string());
        }
    }
    for (column, markers) in profiles.iter_mut().zip(markers) {
        if column.numeric {
            column.empty += markers;
        } else if markers > 0 {
            // "NA" is a label of a text column.
            column.distinct += 1;
        }
    }
    for (column, seen) in profiles.iter_mut().zip(seen) {
        column.distinct += seen.len();
        column.iso_dates &= !seen.is_empty();
    }
    if profiles[0].values.is_empty() {
        return Err(table_error("the table has a header but no rows".into()));
    }
    Ok((
        profiles,
        Written {
            delimiter,
            decimal_comma,
        },
    ))
}

/// The target's index: a column of numbers, or of class labels (text that
/// repeats).
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
    let column = &profiles[index];
    if !column.numeric && column.distinct == column.values.len() {
        return Err(DataError::Table {
            path: table.to_path_buf(),
            message: format!(
                "the target \"{target}\" holds a different text on every row: it names rows \
                 rather than classes, so there is nothing to learn to predict"
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

/// Whether a column whose every value is distinct names rows rather than
/// measuring them: text, or whole numbers rising (or falling) down the file
/// (a row number or a serial id). Such a column as a feature lets a fit
/// learn the order of the file instead of the data.
fn names_rows(p: &ColumnProfile) -> bool {
    !p.numeric
        || (p.values.iter().all(|v| v.fract() == 0.0)
            && (p.values.windows(2).all(|w| w[0] < w[1])
                || p.values.windows(2).all(|w| w[0] > w[1])))
}

/// Whether `feature` predicts `target` almost exactly: |correlation| above
/// 0.99, or the same ordering (the target a monotone function of it) over
/// at least three distinct values. Such a column is most often computed from
/// the target, or recorded after it: a leak, not a predictor.
fn gives_away(feature: &[f64], target: &[f64]) -> bool {
    if correlation(feature, target).abs() > 0.99 {
        return true;
    }
    let mut pairs: Vec<(f64, f64)> = feature
        .iter()
        .zip(target)
        .filter(|(x, y)| !x.is_nan() && !y.is_nan())
        .map(|(x, y)| (*x, *y))
        .collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
    let mut distinct: Vec<f64> = pairs.iter().map(|p| p.0).collect();
    distinct.dedup();
    if distinct.len() < 3 {
        return false;
    }
    // Each step to a larger feature value moves the target the same way, and
    // equal feature values share one target.
    let steps: Vec<std::cmp::Ordering> = pairs
        .windows(2)
        .filter_map(|w| {
            if w[0].0 == w[1].0 {
                (w[0].1 != w[1].1).then_some(std::cmp::Ordering::Equal)
            } else {
                Some(w[1].1.total_cmp(&w[0].1))
            }
        })
        .collect();
    use std::cmp::Ordering::{Greater, Less};
    steps.iter().all(|s| *s == Greater) || steps.iter().all(|s| *s == Less)
}

/// Whether `cell` is an ISO 8601 calendar date, `YYYY-MM-DD`, alone or
/// followed by a time (`T` or a space, then anything).
fn is_iso_date(cell: &str) -> bool {
    let bytes = cell.as_bytes();
    let digits = |range: std::ops::Range<usize>| bytes[range].iter().all(u8::is_ascii_digit);
    bytes.len() >= 10
        && digits(0..4)
        && bytes[4] == b'-'
        && digits(5..7)
        && bytes[7] == b'-'
        && digits(8..10)
        && (bytes.len() == 10 || matches!(bytes[10], b'T' | b' '))
}

/// The most levels a text column may have to be proposed as a categorical
/// feature (one indicator column per level but one).
const MAX_PROPOSED_LEVELS: usize = 20;

/// Column names that suggest a time order.
fn looks_like_time(name: &str) -> bool {
    let name = name.to_lowercase();
    [
        "date", "time", "day", "week", "month", "year", "period", "hour",
    ]
    .iter()
    .any(|word| name.contains(word))
}

/// A text column of ISO dates: offered as the order of a time split.
fn is_date(p: &ColumnProfile) -> bool {
    !p.numeric && p.iso_dates
}

/// What to propose for the table: the target and features, the split, and
/// grids for each candidate that fit inside what the row count allows.
fn propose(
    profiles: &[ColumnProfile],
    target: usize,
    rows: usize,
    name: String,
    table: String,
) -> anyhow::Result<Scaffold> {
    let target_profile = &profiles[target];
    // Text labels, or whole numbers with few distinct values: a class target
    // (the inference of docs/spec.md, "Task and classes").
    let classification = !target_profile.numeric
        || crate::classes::whole_number_levels(
            &target_profile
                .values
                .iter()
                .copied()
                .filter(|v| v.is_finite())
                .collect::<Vec<_>>(),
        )
        .is_some_and(|levels| levels <= crate::classes::INFER_MAX_CLASSES);
    let key = profiles
        .iter()
        .enumerate()
        .find(|(i, p)| {
            *i != target && p.empty == 0 && p.distinct == rows && names_rows(p) && !is_date(p)
        })
        .map(|(i, _)| i);
    let mut features = Vec::new();
    let mut left_out = Vec::new();
    for (i, p) in profiles.iter().enumerate() {
        if i == target || Some(i) == key {
            continue;
        }
        let because = if is_date(p) {
            LeftOutBecause::Time
        } else if p.empty == 0 && p.distinct == rows && names_rows(p) {
            LeftOutBecause::RowNames
        } else if !p.numeric && (2..=MAX_PROPOSED_LEVELS).contains(&p.distinct) {
            // Text of few levels: a categorical feature (docs/spec.md).
            features.push(i);
            continue;
        } else if !p.numeric {
            LeftOutBecause::Text
        } else if looks_like_time(&p.name) {
            LeftOutBecause::Time
        } else if p.distinct < 2 {
            LeftOutBecause::Constant
        } else if !classification && gives_away(&p.values, &target_profile.values) {
            LeftOutBecause::GivesAwayTarget
        } else {
            features.push(i);
            continue;
        };
        left_out.push(LeftOut {
            name: p.name.clone(),
            because,
        });
    }
    if features.is_empty() {
        return Err(UsageError(format!(
            "no numeric column besides the target \"{}\" varies; a spec needs at least one \
             feature",
            target_profile.name
        ))
        .into());
    }
    // The one-feature candidates use the numeric feature most correlated
    // with the target (ties: the first in the header); with none, there are
    // no one-feature candidates.
    let strength = |i: usize| correlation(&profiles[i].values, &target_profile.values).abs();
    let numeric_features: Vec<usize> = features
        .iter()
        .copied()
        .filter(|&i| profiles[i].numeric)
        .collect();
    let main = numeric_features
        .iter()
        .map(|&i| (strength(i), i))
        .max_by(|a, b| a.0.total_cmp(&b.0).then(b.1.cmp(&a.1)))
        .map_or(features[0], |(_, i)| i);
    let main_profile = &profiles[main];
    let empty_cells: usize = features
        .iter()
        .chain(std::iter::once(&target))
        .map(|&i| profiles[i].empty)
        .sum();
    let missing_features: Vec<String> = features
        .iter()
        .filter(|&&i| profiles[i].empty > 0)
        .map(|&i| profiles[i].name.clone())
        .collect();

    let holdout = if rows >= 50 { 0.2 } else { 0.0 };
    let fit_rows = rows - (holdout * rows as f64).round() as usize;
    let folds = if fit_rows >= 100 { 10 } else { 5 }.min(fit_rows.max(2));
    let fold_train_rows = fit_rows - fit_rows.div_ceil(folds);

    // The seed comes from the header, so two scaffolds of one table agree.
    let header: Vec<&str> = profiles.iter().map(|p| p.name.as_str()).collect();
    let digest = blake3::hash(header.join(",").as_bytes());
    let seed = u32::from_le_bytes(digest.as_bytes()[..4].try_into()?);

    // Each grid keeps the settings a fold's training rows can fit, and is
    // proposed only when enough of them are left to compare.
    let mut polynomial_degrees: Vec<usize> = (1..=6)
        .filter(|&d| d < main_profile.distinct && d + 1 < fold_train_rows)
        .collect();
    if polynomial_degrees.len() < 2 || numeric_features.is_empty() {
        polynomial_degrees.clear();
    }
    let mut spline_dfs: Vec<f64> = [2.5, 3.0, 4.0, 6.0, 9.0, 14.0]
        .into_iter()
        .filter(|&df| df < main_profile.distinct as f64 && df < fold_train_rows as f64)
        .collect();
    if spline_dfs.len() < 3 || numeric_features.is_empty() {
        spline_dfs.clear();
    }
    let neighbours_k: Vec<usize> = [1, 2, 5, 10, 20, 50, 100]
        .into_iter()
        .filter(|&k| k <= fold_train_rows / 2)
        .collect();

    Ok(Scaffold {
        name,
        table,
        target: target_profile.name.clone(),
        seed,
        features: features.iter().map(|&i| profiles[i].name.clone()).collect(),
        categorical: features
            .iter()
            .filter(|&&i| !profiles[i].numeric)
            .map(|&i| profiles[i].name.clone())
            .collect(),
        key: key.map(|i| profiles[i].name.clone()),
        left_out,
        order: profiles
            .iter()
            .find(|p| is_date(p))
            .or_else(|| profiles.iter().find(|p| looks_like_time(&p.name)))
            .map(|p| p.name.clone()),
        empty_cells,
        missing_features,
        delimiter: None,
        decimal_comma: false,
        holdout,
        folds,
        main_feature: main_profile.name.clone(),
        polynomial_degrees,
        spline_dfs,
        neighbours_k,
        ridge: features.len() >= 2,
        classification,
    })
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

    fn column(name: &str, values: &[f64]) -> ColumnProfile {
        let mut distinct: Vec<u64> = values.iter().map(|v| v.to_bits()).collect();
        distinct.sort_unstable();
        distinct.dedup();
        ColumnProfile {
            name: name.to_string(),
            numeric: true,
            empty: 0,
            distinct: distinct.len(),
            iso_dates: false,
            values: values.to_vec(),
        }
    }

    #[test]
    fn iso_dates_are_told_from_other_text() {
        for date in ["2026-01-31", "2026-12-03T18:00", "2026-12-03 18:00:00"] {
            assert!(is_iso_date(date), "{date}");
        }
        for other in [
            "2026-1-31",
            "31.01.2026",
            "2026-01-31x",
            "20260131",
            "harbour",
        ] {
            assert!(!is_iso_date(other), "{other}");
        }
    }

    #[test]
    fn proposals_follow_the_columns_and_the_row_count() {
        let rows = 12;
        // Distinct values in no order, and a target that is no function of
        // them (|r| = 0.968, numpy 2.4.6).
        let x: Vec<f64> = (0..rows).map(|i| f64::from((i * 5) % 12) + 0.5).collect();
        let y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(i, v)| v * v + [0.0, 3.0, -2.0][i % 3])
            .collect();
        let mut id = column("id", &x);
        id.numeric = false;
        let profiles = [
            id,
            column("week", &x),
            column("flat", &[1.0; 12]),
            column("x", &x),
            column("y", &y),
        ];
        let s = propose(&profiles, 4, 12, "n".into(), "t.csv".into()).unwrap();
        assert_eq!(s.features, ["x"]);
        assert_eq!(s.key.as_deref(), Some("id"));
        let left_out: Vec<(&str, LeftOutBecause)> = s
            .left_out
            .iter()
            .map(|c| (c.name.as_str(), c.because))
            .collect();
        assert_eq!(
            left_out,
            [
                ("week", LeftOutBecause::Time),
                ("flat", LeftOutBecause::Constant)
            ]
        );
        assert_eq!(s.order.as_deref(), Some("week"));
        // 12 rows: no test set and 5 folds, so the smallest fit sees 9 rows.
        assert_eq!((s.holdout, s.folds), (0.0, 5));
        assert_eq!(s.polynomial_degrees, [1, 2, 3, 4, 5, 6]);
        assert_eq!(s.spline_dfs, [2.5, 3.0, 4.0, 6.0]);
        assert_eq!(s.neighbours_k, [1, 2]);
        assert!(!s.ridge);

        let only_target = [column("flat", &[1.0; 12]), column("y", &y)];
        assert!(propose(&only_target, 1, 12, "n".into(), "t.csv".into()).is_err());
    }

    #[test]
    fn row_numbers_and_columns_that_give_the_target_away_are_left_out() {
        let rows = 12;
        let x: Vec<f64> = (0..rows).map(|i| f64::from((i * 5) % 12)).collect();
        // y rises with x but not exactly: |r| = 0.962 (numpy 2.4.6), orders differ.
        let y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(i, v)| 2.0 * v + [0.25, 3.0, -2.0][i % 3])
            .collect();
        let row_number: Vec<f64> = (0..rows).map(f64::from).collect();
        let thousands: Vec<f64> = y.iter().map(|v| v / 1000.0).collect();
        // exp(y) is a monotone function of y with |r| below 0.99.
        let growth: Vec<f64> = y.iter().map(|v| (v / 4.0).exp()).collect();
        assert!(correlation(&growth, &y).abs() < 0.99);
        let profiles = [
            column("row", &row_number),
            column("x", &x),
            column("y_thousands", &thousands),
            column("growth", &growth),
            column("y", &y),
        ];
        let s = propose(&profiles, 4, 12, "n".into(), "t.csv".into()).unwrap();
        assert_eq!(s.features, ["x"]);
        assert_eq!(s.key.as_deref(), Some("row"));
        let left_out: Vec<(&str, LeftOutBecause)> = s
            .left_out
            .iter()
            .map(|c| (c.name.as_str(), c.because))
            .collect();
        assert_eq!(
            left_out,
            [
                ("y_thousands", LeftOutBecause::GivesAwayTarget),
                ("growth", LeftOutBecause::GivesAwayTarget)
            ]
        );
        // Decimals on every row are measurements, not row names.
        let halves: Vec<f64> = row_number.iter().map(|v| v + 0.5).collect();
        assert!(!names_rows(&column("h", &halves)));
        let mut shuffled = row_number.clone();
        shuffled.swap(2, 7);
        assert!(!names_rows(&column("s", &shuffled)));
        assert!(!gives_away(&x, &y));
    }

    #[test]
    fn time_like_names_are_recognised() {
        assert!(looks_like_time("reading_date"));
        assert!(looks_like_time("Day"));
        assert!(!looks_like_time("outdoor_c"));
    }
}
