//! Loading the data table: a CSV file with a header, read into numeric
//! columns for the target and features plus text columns for row identity
//! (key), groups and fold labels. How cells are written (delimiter, decimal
//! mark, missing-value markers) is in [`format`](mod@format); filling missing cells
//! inside each training fold is in [`missing`].
//!
//! Every problem is reported with the file, the line (as a text editor counts
//! it, header = line 1), the column and the offending text.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::error::DataError;
use crate::spec::MissingPolicy;

pub(crate) mod encode;
pub(crate) mod format;
pub(crate) mod missing;
pub(crate) mod parquet;
mod rows;

pub(crate) use format::TableFormat;

/// Which columns to read and how.
#[derive(Debug, Clone)]
pub(crate) struct TableRequest {
    /// Columns that must hold finite numbers (target first, then features).
    pub(crate) numeric: Vec<String>,
    /// Columns read as text (key, group, fold labels).
    pub(crate) text: Vec<String>,
    /// Categorical feature columns: read as labels (missing-value markers
    /// recognised), kept as level codes in `Table::numeric` with their
    /// levels in `Table::levels` ([`encode`]).
    pub(crate) categorical: Vec<String>,
    pub(crate) missing: MissingPolicy,
    /// Under `missing = "impute"`: the numeric columns whose missing cells
    /// are kept (as NaN) to be filled per training fold. A missing cell in
    /// any other used column drops its row.
    pub(crate) imputed: Vec<String>,
    pub(crate) format: TableFormat,
}

/// A loaded table: only the requested columns, rows in file order.
#[derive(Debug, Clone)]
pub(crate) struct Table {
    /// The path as the user gave it (relative to the spec's folder when relative).
    pub(crate) path: PathBuf,
    /// blake3 digest of the file's bytes, hex.
    pub(crate) digest: String,
    pub(crate) numeric: BTreeMap<String, Vec<f64>>,
    pub(crate) text: BTreeMap<String, Vec<String>>,
    /// The levels of each categorical column, in byte order; its cells are
    /// their indices, in `numeric`.
    pub(crate) levels: BTreeMap<String, Vec<String>>,
    /// File line of each kept row (header = 1).
    pub(crate) lines: Vec<u64>,
    /// 1-based position of each kept row among the file's data rows, counted
    /// before any rows are dropped; the default row identity for splits.
    pub(crate) row_numbers: Vec<u64>,
    /// Rows dropped under `missing = "drop-rows"` (or, under `"impute"`, for
    /// a missing cell in a column that is not imputed).
    pub(crate) dropped: usize,
    /// Missing cells of each used column that had any, over every data row
    /// of the file (dropped rows included).
    pub(crate) missing_cells: BTreeMap<String, usize>,
    /// The file does not end with a line break: it may have been cut short
    /// inside its last value.
    pub(crate) unterminated: bool,
}

impl Table {
    pub(crate) fn len(&self) -> usize {
        self.lines.len()
    }

    /// A numeric column that was requested.
    pub(crate) fn column(&self, name: &str) -> &[f64] {
        &self.numeric[name]
    }

    /// A text column that was requested.
    pub(crate) fn text_column(&self, name: &str) -> &[String] {
        &self.text[name]
    }
}

/// The largest magnitude a numeric cell may hold: squares (and sums of
/// squares over millions of rows) stay finite in double precision.
pub(crate) const LARGEST_VALUE: f64 = 1e150;

/// At most this many characters of a cell or header name are shown in a
/// message.
const SHOWN_CHARS: usize = 40;

/// `text` as a message shows it: at most [`SHOWN_CHARS`] characters, with
/// control characters replaced, so a message never carries a long stretch of
/// a file (or of something that is not a table at all).
fn shorten(text: &str) -> String {
    let mut shown: String = text
        .chars()
        .take(SHOWN_CHARS)
        .map(|c| if c.is_control() { '\u{fffd}' } else { c })
        .collect();
    if text.chars().count() > SHOWN_CHARS {
        shown.push('…');
    }
    shown
}

/// Reads `path` (already resolved against the spec folder); `shown` is the
/// path as messages should print it. `on_read(parsed, total)` is told the
/// bytes parsed so far: once with 0 when the file has been read, then about
/// every mebibyte, and with the total when every row is in. It lets a caller
/// show progress for a large table; this module draws nothing itself.
pub(crate) fn load(
    path: &Path,
    shown: &Path,
    request: &TableRequest,
    on_read: &dyn Fn(u64, u64),
) -> Result<Table, DataError> {
    let read_error = |error| DataError::Read {
        path: shown.to_path_buf(),
        error,
    };
    let table_error = |message: String| DataError::Table {
        path: shown.to_path_buf(),
        message,
    };
    // A FIFO would block forever and a device read until memory runs out.
    if !std::fs::metadata(path).map_err(read_error)?.is_file() {
        return Err(table_error(
            "not a regular file (a folder, pipe or device); give the path of a CSV file".into(),
        ));
    }
    let bytes = std::fs::read(path).map_err(read_error)?;
    // The digest is always of the file's bytes, whatever its format.
    let digest = crate::digests::file_digest(&bytes);
    // A Parquet file is read as the CSV text of its rows, in the default
    // delimiter and decimal mark (its numbers are typed, not written), with
    // the spec's missing-value markers (data/parquet.rs).
    let parquet_request;
    let (request, bytes, unterminated) = if parquet::is_parquet(path, &bytes) {
        parquet_request = TableRequest {
            format: TableFormat {
                delimiter: b',',
                decimal_comma: false,
                markers: request.format.markers.clone(),
            },
            ..request.clone()
        };
        let used: Vec<String> = request
            .numeric
            .iter()
            .chain(&request.text)
            .chain(&request.categorical)
            .cloned()
            .collect();
        let rows = parquet::to_csv(bytes, Some(&used)).map_err(table_error)?;
        (&parquet_request, rows, false)
    } else {
        let unterminated = !bytes.is_empty() && !bytes.ends_with(b"\n");
        (request, bytes, unterminated)
    };
    let total = bytes.len() as u64;
    on_read(0, total);

    let header = csv::ReaderBuilder::new()
        .has_headers(true)
        .delimiter(request.format.delimiter)
        .from_reader(bytes.as_slice())
        .headers()
        .map_err(|e| table_error(format!("cannot read the header: {e}")))?
        .clone();
    let header: Vec<String> = header.iter().map(|h| h.trim().to_string()).collect();
    if header.iter().all(|h| h.is_empty()) {
        return Err(table_error("the file is empty: no header row".into()));
    }
    for (i, name) in header.iter().enumerate() {
        if let Some(first) = header[..i].iter().position(|h| !h.is_empty() && h == name) {
            return Err(table_error(format!(
                "line 1: the header names \"{name}\" twice (columns {} and {}); \
                 rename one so every column is meant once",
                first + 1,
                i + 1
            )));
        }
    }

    let used = request.format.delimiter;
    let guessed = format::guess_delimiter(&bytes, used);
    let position = |name: &str| -> Result<usize, DataError> {
        header.iter().position(|h| h == name).ok_or_else(|| {
            // The header split by another delimiter gives more columns: the
            // spec's delimiter is most likely wrong, and that is the message.
            if let Some((delimiter, count)) = guessed {
                return table_error(format!(
                    "no column named \"{name}\": read with {} the header has {} column{}, \
                     but it seems to be separated by {} ({count} columns); set \
                     `delimiter = \"{}\"` in [data]",
                    format::delimiter_words(used),
                    header.len(),
                    if header.len() == 1 { "" } else { "s" },
                    format::delimiter_words(delimiter),
                    format::delimiter_in_spec(delimiter),
                ));
            }
            let allowed: Vec<&str> = header.iter().map(String::as_str).collect();
            let hint = crate::spec::closest(name, &allowed)
                .map(|w| format!(" (did you mean \"{w}\"?)"))
                .unwrap_or_default();
            // A one-column header cannot hold a target and a feature: the
            // file is not comma-separated (or not a table at all), and its
            // first line is not echoed, since messages show no more of a
            // file than the offending cell.
            if header.len() < 2 {
                return table_error(format!(
                    "no column named \"{name}\": the header has a single column of {} \
                     characters; is the file comma-separated?",
                    header.first().map_or(0, |h| h.chars().count())
                ));
            }
            let shown: Vec<String> = header.iter().map(|h| shorten(h)).collect();
            table_error(format!(
                "no column named \"{name}\"{hint}; the header has: {}",
                shown.join(", ")
            ))
        })
    };
    let numeric_at: Vec<(String, usize)> = request
        .numeric
        .iter()
        .map(|name| Ok((name.clone(), position(name)?)))
        .collect::<Result<_, DataError>>()?;
    let text_at: Vec<(String, usize)> = request
        .text
        .iter()
        .map(|name| Ok((name.clone(), position(name)?)))
        .collect::<Result<_, DataError>>()?;

    let categorical_at: Vec<(String, usize)> = request
        .categorical
        .iter()
        .map(|name| Ok((name.clone(), position(name)?)))
        .collect::<Result<_, DataError>>()?;
    let impute = request.missing == MissingPolicy::Impute;
    let columns = rows::Columns {
        imputed: numeric_at
            .iter()
            .map(|(name, _)| impute && request.imputed.contains(name))
            .collect(),
        numeric: numeric_at,
        text: text_at,
        categorical: categorical_at,
        header_len: header.len(),
        request,
        shown,
    };
    let mut progress = |parsed: u64| on_read(parsed, total);
    let part = match rows::pieces(&bytes, rows::PIECE_BYTES) {
        Some(ranges) => rows::read_in_pieces(&bytes, &ranges, &columns, &mut progress)?,
        None => rows::read_rows(&bytes, true, 1, &columns, &mut progress)?,
    };
    drop(bytes);
    let rows::Part {
        numeric: numeric_columns,
        text: text_columns,
        labels,
        missing_numeric,
        missing_text,
        missing_categorical,
        mut lines,
        records: mut row_numbers,
        data_rows,
        dropped,
    } = part;
    let rows::Columns {
        numeric: numeric_at,
        text: text_at,
        categorical: categorical_at,
        ..
    } = columns;
    let mut numeric: BTreeMap<String, Vec<f64>> = numeric_at
        .iter()
        .map(|(name, _)| name.clone())
        .zip(numeric_columns)
        .collect();
    let mut text: BTreeMap<String, Vec<String>> = text_at
        .iter()
        .map(|(name, _)| name.clone())
        .zip(text_columns)
        .collect();

    on_read(total, total);
    // Growing by doubling leaves up to half of each column's capacity unused
    // for the whole run (a third of the table's memory at 5 million rows).
    for column in numeric.values_mut() {
        column.shrink_to_fit();
    }
    for column in text.values_mut() {
        column.shrink_to_fit();
    }
    lines.shrink_to_fit();
    row_numbers.shrink_to_fit();
    if data_rows == 0 {
        return Err(table_error("the table has a header but no rows".into()));
    }
    if lines.is_empty() {
        return Err(table_error(format!(
            "all {dropped} rows have an empty cell in a used column; none are left"
        )));
    }
    let mut levels = BTreeMap::new();
    for ((name, _), column) in categorical_at.iter().zip(labels) {
        let (names, codes) = encode::codes(&column);
        numeric.insert(name.clone(), codes);
        levels.insert(name.clone(), names);
    }
    let missing_cells = numeric_at
        .iter()
        .zip(&missing_numeric)
        .chain(text_at.iter().zip(&missing_text))
        .chain(categorical_at.iter().zip(&missing_categorical))
        .filter(|(_, &count)| count > 0)
        .map(|((name, _), &count)| (name.clone(), count))
        .collect();
    Ok(Table {
        path: shown.to_path_buf(),
        digest,
        numeric,
        text,
        levels,
        lines,
        row_numbers,
        dropped,
        missing_cells,
        unterminated,
    })
}

/// The text of one cell, which must be UTF-8.
fn cell_text(record: &csv::ByteRecord, at: usize) -> Result<&str, String> {
    std::str::from_utf8(record.get(at).unwrap_or_default())
        .map_err(|_| "the cell is not valid UTF-8 text".to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn request() -> TableRequest {
        TableRequest {
            numeric: vec!["y".into(), "x".into()],
            text: vec![],
            categorical: vec![],
            missing: MissingPolicy::Error,
            imputed: vec![],
            format: TableFormat::default(),
        }
    }

    fn load_text(text: &str, request: &TableRequest) -> Result<Table, DataError> {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.csv");
        std::fs::write(&path, text).unwrap();
        load(&path, Path::new("t.csv"), request, &|_, _| {})
    }

    #[test]
    fn only_the_requested_columns_are_kept_without_spare_capacity() {
        // Memory per row is what the spec uses: unused columns (a long text
        // note here) are parsed past, and no column keeps the slack that
        // growing by doubling leaves.
        let mut text = String::from("x,note,y\n");
        for row in 0..1000 {
            text.push_str(&format!("{row},\"{}\",{}\n", "a".repeat(200), row * 2));
        }
        let table = load_text(&text, &request()).unwrap();
        assert_eq!(table.numeric.keys().collect::<Vec<_>>(), ["x", "y"]);
        assert!(table.text.is_empty());
        for column in table.numeric.values() {
            assert_eq!(column.capacity(), 1000);
        }
        assert_eq!(table.lines.capacity(), 1000);
        assert_eq!(table.row_numbers.capacity(), 1000);
    }

    #[test]
    fn a_one_column_file_is_described_not_echoed() {
        // Messages show no more of a file than the offending cell.
        let secret = "root:x:0:0:root:/root:/bin/bash";
        let err = load_text(&format!("{secret}\nnobody:x\n"), &request()).unwrap_err();
        let message = err.to_string();
        assert!(
            message.contains("a single column of 31 characters"),
            "{message}"
        );
        assert!(!message.contains("root"), "{message}");
        // A long offending cell is cut to 40 characters.
        let long = "9".repeat(30) + &"z".repeat(100);
        let err = load_text(&format!("x,y\n1,{long}\n"), &request()).unwrap_err();
        let message = err.to_string();
        assert!(
            message.contains(&format!("\"{}…\"", &long[..40])),
            "{message}"
        );
        assert!(!message.contains(&long[..41]), "{message}");
    }

    #[test]
    fn reads_requested_columns_in_file_order() {
        let table = load_text("x,y,z\n1,2,a\n3,4,b\n", &request()).unwrap();
        assert_eq!(table.column("x"), &[1.0, 3.0]);
        assert_eq!(table.column("y"), &[2.0, 4.0]);
        assert_eq!(table.lines, vec![2, 3]);
    }

    #[test]
    fn non_numeric_cell_names_line_column_and_text() {
        let err = load_text("x,y\n1,2\n3,abc\n", &request())
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "t.csv: line 3, column \"y\": cannot read \"abc\" as a number"
        );
    }

    #[test]
    fn drop_rows_counts_what_it_drops() {
        let mut req = request();
        req.missing = MissingPolicy::DropRows;
        let table = load_text("x,y\n1,2\n ,4\n5,6\n", &req).unwrap();
        assert_eq!(table.dropped, 1);
        assert_eq!(table.column("x"), &[1.0, 5.0]);
        assert_eq!(table.row_numbers, vec![1, 3]);
    }

    #[test]
    fn nan_and_infinity_are_rejected() {
        // "NaN" is a missing-value marker by default; without the markers
        // it is read as a number and refused as not finite.
        let mut req = request();
        req.format.markers = vec![];
        for bad in ["NaN", "inf", "-Infinity"] {
            let err = load_text(&format!("x,y\n1,{bad}\n"), &req)
                .unwrap_err()
                .to_string();
            assert!(err.contains("not a finite number"), "{err}");
        }
        for bad in ["inf", "-Infinity"] {
            let err = load_text(&format!("x,y\n1,{bad}\n"), &request())
                .unwrap_err()
                .to_string();
            assert!(err.contains("not a finite number"), "{err}");
        }
    }

    #[test]
    fn markers_are_missing_cells_counted_per_column() {
        let text = "x,y,g\n1,2,a\nNA,4,b\n5,null,\n7,N/A,NA\n9,10,c\n";
        let mut req = request();
        req.text = vec!["g".into()];
        // Under "error", a marker names itself and both ways out.
        let err = load_text(text, &req).unwrap_err().to_string();
        assert_eq!(
            err,
            "t.csv: line 3, column \"x\": the cell holds \"NA\", a missing-value marker; \
             fill it, or set `missing = \"drop-rows\"` or `missing = \"impute\"` in [data]"
        );
        // Under "drop-rows", every row with a missing cell goes; the text
        // column's "NA" is a label, only its empty cell is missing.
        req.missing = MissingPolicy::DropRows;
        let table = load_text(text, &req).unwrap();
        assert_eq!(table.column("x"), &[1.0, 9.0]);
        assert_eq!(table.text_column("g"), &["a", "c"]);
        assert_eq!(table.dropped, 3);
        let counts: Vec<(&str, usize)> = table
            .missing_cells
            .iter()
            .map(|(k, v)| (k.as_str(), *v))
            .collect();
        assert_eq!(counts, [("g", 1), ("x", 1), ("y", 2)]);
        // Under "impute", cells of imputed columns stay as NaN; a missing
        // cell elsewhere (the target y, the text column) drops the row.
        req.missing = MissingPolicy::Impute;
        req.imputed = vec!["x".into()];
        let table = load_text(text, &req).unwrap();
        assert_eq!(table.len(), 3);
        assert_eq!(table.column("x")[0], 1.0);
        assert!(table.column("x")[1].is_nan());
        assert_eq!(table.column("y"), &[2.0, 4.0, 10.0]);
        assert_eq!(table.dropped, 2);
    }

    #[test]
    fn a_wrong_delimiter_is_named_without_echoing_the_header() {
        let err = load_text("x;y\n1;2\n", &request()).unwrap_err().to_string();
        assert_eq!(
            err,
            "t.csv: no column named \"y\": read with commas the header has 1 column, but it \
             seems to be separated by semicolons (2 columns); set `delimiter = \";\"` in [data]"
        );
        let mut req = request();
        req.format.delimiter = b'\t';
        let table = load_text(
            "x\ty\n1,5\t2\n",
            &TableRequest {
                format: TableFormat {
                    decimal_comma: true,
                    ..req.format.clone()
                },
                ..req.clone()
            },
        )
        .unwrap();
        assert_eq!(table.column("x"), &[1.5]);
        let err = load_text("x,y\n1,2\n", &req).unwrap_err().to_string();
        assert!(
            err.contains("separated by commas (2 columns); set `delimiter = \",\"`"),
            "{err}"
        );
    }

    #[test]
    fn progress_is_reported_in_bytes_up_to_the_whole_file() {
        // Rows enough for reports between the start and the end.
        let mut text = String::from("x,y\n");
        for row in 0..200_000 {
            text.push_str(&format!("{row}.25,{}.5\n", row % 97));
        }
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.csv");
        std::fs::write(&path, &text).unwrap();
        let seen = std::cell::RefCell::new(Vec::new());
        let table = load(&path, Path::new("t.csv"), &request(), &|done, total| {
            seen.borrow_mut().push((done, total));
        })
        .unwrap();
        assert_eq!(table.len(), 200_000);
        let seen = seen.into_inner();
        let total = text.len() as u64;
        assert!(seen.iter().all(|&(_, t)| t == total), "{seen:?}");
        assert_eq!(seen.first(), Some(&(0, total)));
        assert_eq!(seen.last(), Some(&(total, total)));
        // 2.9 MB: reports at the start, past 1 MiB, past 2 MiB and at the end,
        // each at least a mebibyte after the one before but the last.
        assert_eq!(seen.len(), 4, "{seen:?}");
        assert!(
            seen[..3]
                .windows(2)
                .all(|w| w[1].0 - w[0].0 >= rows::REPORT_EVERY),
            "{seen:?}"
        );
        assert!(seen[2].0 < seen[3].0, "{seen:?}");
    }
}
