//! Reading a table's data rows into columns, in one piece or, for a large
//! file without quotes, in pieces parsed side by side.
//!
//! A file with no quote character holds no line break inside a cell, so
//! every line break ends a record: the rows can be cut at line breaks into
//! pieces, each parsed on its own, with the file line of its first byte (one
//! plus the line breaks before it, as the CSV reader counts lines) and its
//! records numbered after those of the pieces before it. The pieces are
//! joined in file order and the first problem in file order is the one
//! reported, so the table and every message are the same as a reading in one
//! piece (a test compares them).

use std::path::Path;

use rayon::prelude::*;

use super::{cell_text, encode, shorten, TableRequest, LARGEST_VALUE};
use crate::error::DataError;
use crate::spec::MissingPolicy;

/// The used columns, found in the header, and how to read their cells.
pub(super) struct Columns<'a> {
    /// (name, position in the header) of each numeric, text and
    /// categorical column, in request order.
    pub(super) numeric: Vec<(String, usize)>,
    pub(super) text: Vec<(String, usize)>,
    pub(super) categorical: Vec<(String, usize)>,
    /// Per numeric column: a missing cell is kept (NaN) to be imputed.
    pub(super) imputed: Vec<bool>,
    pub(super) header_len: usize,
    pub(super) request: &'a TableRequest,
    pub(super) shown: &'a Path,
}

/// The rows of one piece of the file: kept rows' cells by column (in the
/// order of [`Columns`]), their lines, and the tallies.
#[derive(Debug)]
pub(super) struct Part {
    pub(super) numeric: Vec<Vec<f64>>,
    pub(super) text: Vec<Vec<String>>,
    pub(super) labels: Vec<Vec<String>>,
    pub(super) missing_numeric: Vec<usize>,
    pub(super) missing_text: Vec<usize>,
    pub(super) missing_categorical: Vec<usize>,
    /// File line of each kept row.
    pub(super) lines: Vec<u64>,
    /// 1-based position of each kept row among this piece's records.
    pub(super) records: Vec<u64>,
    /// Records read, kept or dropped.
    pub(super) data_rows: u64,
    pub(super) dropped: usize,
}

impl Part {
    fn new(columns: &Columns) -> Part {
        Part {
            numeric: vec![Vec::new(); columns.numeric.len()],
            text: vec![Vec::new(); columns.text.len()],
            labels: vec![Vec::new(); columns.categorical.len()],
            missing_numeric: vec![0; columns.numeric.len()],
            missing_text: vec![0; columns.text.len()],
            missing_categorical: vec![0; columns.categorical.len()],
            lines: Vec::new(),
            records: Vec::new(),
            data_rows: 0,
            dropped: 0,
        }
    }

    /// Joins pieces in file order into columns of exactly their length (no
    /// spare capacity: it would stay unused for the whole run).
    pub(super) fn join(parts: Vec<Part>, columns: &Columns) -> Part {
        let kept: usize = parts.iter().map(|p| p.lines.len()).sum();
        fn exact<T>(count: usize, kept: usize) -> Vec<Vec<T>> {
            (0..count).map(|_| Vec::with_capacity(kept)).collect()
        }
        let mut whole = Part {
            numeric: exact(columns.numeric.len(), kept),
            text: exact(columns.text.len(), kept),
            labels: exact(columns.categorical.len(), kept),
            lines: Vec::with_capacity(kept),
            records: Vec::with_capacity(kept),
            ..Part::new(columns)
        };
        for part in parts {
            let before = whole.data_rows;
            for (to, from) in whole.numeric.iter_mut().zip(part.numeric) {
                to.extend(from);
            }
            for (to, from) in whole.text.iter_mut().zip(part.text) {
                to.extend(from);
            }
            for (to, from) in whole.labels.iter_mut().zip(part.labels) {
                to.extend(from);
            }
            let tallies = [
                (&mut whole.missing_numeric, &part.missing_numeric),
                (&mut whole.missing_text, &part.missing_text),
                (&mut whole.missing_categorical, &part.missing_categorical),
            ];
            for (to, from) in tallies {
                to.iter_mut().zip(from).for_each(|(t, f)| *t += f);
            }
            whole.lines.extend(part.lines);
            whole
                .records
                .extend(part.records.iter().map(|r| r + before));
            whole.data_rows += part.data_rows;
            whole.dropped += part.dropped;
        }
        whole
    }
}

/// Bytes per piece of a parallel reading; a smaller file is read in one
/// piece (starting threads would cost more than they save).
pub(super) const PIECE_BYTES: usize = 4 << 20;

/// Where the data rows of `bytes` (a whole CSV file) can be cut into pieces
/// of about `piece_bytes`: the byte ranges of the pieces, each starting
/// after a line break, or `None` when the file must be read in one piece (it
/// holds a quote, a carriage return not followed by a line feed, or starts
/// with a line break, or is small).
pub(super) fn pieces(bytes: &[u8], piece_bytes: usize) -> Option<Vec<(usize, usize)>> {
    if bytes.len() < 2 * piece_bytes || matches!(bytes.first(), Some(b'\n' | b'\r')) {
        return None;
    }
    if memchr::memchr(b'"', bytes).is_some()
        || memchr::memchr_iter(b'\r', bytes).any(|at| bytes.get(at + 1) != Some(&b'\n'))
    {
        return None;
    }
    let body = memchr::memchr(b'\n', bytes)? + 1;
    let mut ranges = Vec::new();
    let mut start = body;
    while start < bytes.len() {
        let end = match memchr::memchr(b'\n', &bytes[(start + piece_bytes).min(bytes.len())..]) {
            Some(at) if start + piece_bytes < bytes.len() => start + piece_bytes + at + 1,
            _ => bytes.len(),
        };
        ranges.push((start, end));
        start = end;
    }
    Some(ranges)
}

/// Reads the data rows of `bytes` in pieces side by side (`ranges` from
/// [`pieces`]), telling `progress` the bytes parsed after each round of
/// pieces.
pub(super) fn read_in_pieces(
    bytes: &[u8],
    ranges: &[(usize, usize)],
    columns: &Columns,
    progress: &mut dyn FnMut(u64),
) -> Result<Part, DataError> {
    // File line of each piece's first byte.
    let mut first_lines = Vec::with_capacity(ranges.len());
    let mut line = 1 + memchr::memchr_iter(b'\n', &bytes[..ranges[0].0]).count() as u64;
    for &(start, end) in ranges {
        first_lines.push(line);
        line += memchr::memchr_iter(b'\n', &bytes[start..end]).count() as u64;
    }
    let round = rayon::current_num_threads().max(1);
    let mut parts = Vec::with_capacity(ranges.len());
    for (chunk, lines) in ranges.chunks(round).zip(first_lines.chunks(round)) {
        let read: Vec<Result<Part, DataError>> = chunk
            .par_iter()
            .zip(lines)
            .map(|(&(start, end), &first_line)| {
                read_rows(&bytes[start..end], false, first_line, columns, &mut |_| {})
            })
            .collect();
        for part in read {
            parts.push(part?);
        }
        progress(chunk.last().map_or(0, |&(_, end)| end) as u64);
    }
    Ok(Part::join(parts, columns))
}

/// How often, in bytes parsed, a reading in one piece reports its progress.
pub(super) const REPORT_EVERY: u64 = 1 << 20;

/// Reads the records of `bytes` (after a header row when `has_header`),
/// whose first byte is on file line `first_line`.
pub(super) fn read_rows(
    bytes: &[u8],
    has_header: bool,
    first_line: u64,
    columns: &Columns,
    progress: &mut dyn FnMut(u64),
) -> Result<Part, DataError> {
    let request = columns.request;
    let shown = columns.shown;
    let table_error = |message: String| DataError::Table {
        path: shown.to_path_buf(),
        message,
    };
    // Field counts are checked below, against the header, in every piece.
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(has_header)
        .delimiter(request.format.delimiter)
        .flexible(true)
        .from_reader(bytes);
    let mut part = Part::new(columns);
    let mut next_report = REPORT_EVERY;
    let format = &request.format;
    // Byte records: only the cells that are used are checked as UTF-8.
    let mut record = csv::ByteRecord::new();
    let mut values = Vec::with_capacity(columns.numeric.len());
    let mut texts = Vec::with_capacity(columns.text.len());
    let mut categories = Vec::with_capacity(columns.categorical.len());
    // Line breaks in `bytes[..counted_to]`.
    let (mut line_breaks, mut counted_to) = (0u64, 0usize);
    loop {
        let more = reader
            .read_byte_record(&mut record)
            .map_err(|e| table_error(format!("cannot read the table: {e}")))?;
        if !more {
            break;
        }
        let parsed = reader.position().byte();
        if parsed >= next_report {
            progress(parsed);
            next_report = parsed + REPORT_EVERY;
        }
        part.data_rows += 1;
        // The file line of the record's first byte, counted here: the
        // reader's own count lags by one after a CRLF line end.
        let mut start = record.position().map_or(0, |p| p.byte() as usize);
        while matches!(bytes.get(start), Some(b'\r' | b'\n')) {
            start += 1;
        }
        line_breaks += memchr::memchr_iter(b'\n', &bytes[counted_to..start]).count() as u64;
        counted_to = start;
        let line = first_line + line_breaks;
        if record.len() != columns.header_len {
            return Err(table_error(format!(
                "line {line}: the row has {} field{} but the header has {}",
                record.len(),
                if record.len() == 1 { "" } else { "s" },
                columns.header_len
            )));
        }
        let cell_error = |column: &str, message: String| DataError::Cell {
            path: shown.to_path_buf(),
            line,
            column: column.to_string(),
            message,
        };

        values.clear();
        texts.clear();
        categories.clear();
        let mut has_missing = false;
        for (j, (name, at)) in columns.numeric.iter().enumerate() {
            let raw = cell_text(&record, *at).map_err(|m| cell_error(name, m))?;
            let trimmed = raw.trim();
            if format.is_missing(trimmed) {
                part.missing_numeric[j] += 1;
                match request.missing {
                    MissingPolicy::Impute if columns.imputed[j] => values.push(f64::NAN),
                    MissingPolicy::DropRows | MissingPolicy::Impute => has_missing = true,
                    MissingPolicy::Error => {
                        let what = if trimmed.is_empty() {
                            "the cell is empty".to_string()
                        } else {
                            format!(
                                "the cell holds \"{}\", a missing-value marker",
                                shorten(raw)
                            )
                        };
                        return Err(cell_error(
                            name,
                            format!(
                                "{what}; fill it, or set `missing = \"drop-rows\"` or \
                                 `missing = \"impute\"` in [data]"
                            ),
                        ));
                    }
                }
                continue;
            }
            let value: f64 = format.parse_number(trimmed).ok_or_else(|| {
                cell_error(
                    name,
                    format!(
                        "cannot read \"{}\" as a number{}",
                        shorten(raw),
                        format.decimal_hint(trimmed)
                    ),
                )
            })?;
            if !value.is_finite() {
                return Err(cell_error(
                    name,
                    format!("\"{}\" is not a finite number", shorten(raw)),
                ));
            }
            if value.abs() > LARGEST_VALUE {
                return Err(cell_error(
                    name,
                    format!(
                        "\"{}\" is beyond ±{LARGEST_VALUE:e}: squares and sums of squares \
                         of it overflow; rescale the column",
                        shorten(raw)
                    ),
                ));
            }
            values.push(value);
        }
        for (j, (name, at)) in columns.text.iter().enumerate() {
            let raw = cell_text(&record, *at)
                .map_err(|m| cell_error(name, m))?
                .trim();
            // Text columns (labels, keys, groups, folds, times) take their
            // cells as written: only an empty cell is missing ("NA" may be
            // a region's name).
            if raw.is_empty() {
                part.missing_text[j] += 1;
                if request.missing != MissingPolicy::Error {
                    has_missing = true;
                    continue;
                }
                return Err(cell_error(name, "the cell is empty".into()));
            }
            texts.push(raw.to_string());
        }
        for (j, (name, at)) in columns.categorical.iter().enumerate() {
            let raw = cell_text(&record, *at)
                .map_err(|m| cell_error(name, m))?
                .trim();
            if !format.is_missing(raw) {
                categories.push(raw.to_string());
                continue;
            }
            part.missing_categorical[j] += 1;
            match request.missing {
                // A level of its own, the same in every fit.
                MissingPolicy::Impute => categories.push(encode::MISSING_LEVEL.to_string()),
                MissingPolicy::DropRows => has_missing = true,
                MissingPolicy::Error => {
                    return Err(cell_error(
                        name,
                        format!(
                            "the cell {} a missing-value marker; fill it, or set \
                             `missing = \"drop-rows\"` or `missing = \"impute\"` (a level \
                             named \"missing\") in [data]",
                            if raw.is_empty() {
                                "is empty,".to_string()
                            } else {
                                format!("holds \"{}\",", shorten(raw))
                            }
                        ),
                    ))
                }
            }
        }
        if has_missing {
            part.dropped += 1;
            continue;
        }
        for (column, value) in part.numeric.iter_mut().zip(values.drain(..)) {
            column.push(value);
        }
        for (column, value) in part.text.iter_mut().zip(texts.drain(..)) {
            column.push(value);
        }
        for (column, label) in part.labels.iter_mut().zip(categories.drain(..)) {
            column.push(label);
        }
        part.lines.push(line);
        part.records.push(part.data_rows);
    }
    Ok(part)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::TableFormat;

    fn request(missing: MissingPolicy) -> TableRequest {
        TableRequest {
            numeric: vec!["y".into(), "x".into()],
            text: vec!["id".into()],
            categorical: vec!["g".into()],
            missing,
            imputed: vec!["x".into()],
            format: TableFormat::default(),
        }
    }

    fn columns(request: &TableRequest) -> Columns<'_> {
        // Header: id,x,note,g,y
        Columns {
            numeric: vec![("y".into(), 4), ("x".into(), 1)],
            text: vec![("id".into(), 0)],
            categorical: vec![("g".into(), 3)],
            imputed: vec![false, request.missing == MissingPolicy::Impute],
            header_len: 5,
            request,
            shown: Path::new("t.csv"),
        }
    }

    /// A table whose rows hold every kind of cell: missing markers, blank
    /// lines (skipped, but counted as lines), CRLF endings.
    fn table(rows: usize, crlf: bool) -> String {
        let end = if crlf { "\r\n" } else { "\n" };
        let mut text = format!("id,x,note,g,y{end}");
        for r in 0..rows {
            let x = if r % 7 == 3 {
                "NA".to_string()
            } else {
                format!("{}.5", r % 13)
            };
            let g = if r % 11 == 5 {
                ""
            } else {
                ["a", "b", "c"][r % 3]
            };
            text.push_str(&format!("r{r},{x},n{},{g},{}{end}", r * 3, r % 5));
            if r % 17 == 9 {
                text.push_str(end);
            }
        }
        text
    }

    fn in_one_piece(bytes: &[u8], columns: &Columns) -> Result<Part, DataError> {
        read_rows(bytes, true, 1, columns, &mut |_| {})
    }

    fn in_pieces(bytes: &[u8], columns: &Columns, piece: usize) -> Result<Part, DataError> {
        let ranges = pieces(bytes, piece).expect("a file that can be cut");
        assert!(ranges.len() > 3, "{} pieces", ranges.len());
        // The pieces tile the rows after the header, each ending a line.
        assert_eq!(ranges.last().unwrap().1, bytes.len());
        for pair in ranges.windows(2) {
            assert_eq!(pair[0].1, pair[1].0);
            assert_eq!(bytes[pair[0].1 - 1], b'\n');
        }
        read_in_pieces(bytes, &ranges, columns, &mut |_| {})
    }

    #[test]
    fn pieces_read_the_same_table_as_one_piece() {
        for crlf in [false, true] {
            for missing in [MissingPolicy::DropRows, MissingPolicy::Impute] {
                let text = table(400, crlf);
                let request = request(missing);
                let columns = columns(&request);
                let one = in_one_piece(text.as_bytes(), &columns).unwrap();
                let many = in_pieces(text.as_bytes(), &columns, 500).unwrap();
                // Debug text compares NaN cells too.
                assert_eq!(format!("{one:?}"), format!("{many:?}"), "crlf {crlf}");
                let dropping = missing == MissingPolicy::DropRows;
                assert_eq!(one.dropped > 0, dropping);
                assert!(one.lines.len() > 300);
                // Row r sits on line 2 + r + the blank lines written before
                // it (one after each row r' ≡ 9 mod 17), CRLF or not.
                for (id, &line) in one.text[0].iter().zip(&one.lines) {
                    let r: u64 = id[1..].parse().unwrap();
                    let blanks = (0..r).filter(|b| b % 17 == 9).count() as u64;
                    assert_eq!(line, 2 + r + blanks, "row {id}, crlf {crlf}");
                }
            }
        }
    }

    #[test]
    fn pieces_report_the_first_problem_in_file_order() {
        let request = request(MissingPolicy::DropRows);
        let columns = columns(&request);
        let mut text = table(400, false);
        // A bad number late in the file, and a short row after it.
        text = text.replacen("r300,", "r300,x", 1);
        text.push_str("r9,1\n");
        let one = in_one_piece(text.as_bytes(), &columns).unwrap_err();
        let many = in_pieces(text.as_bytes(), &columns, 500).unwrap_err();
        assert_eq!(one.to_string(), many.to_string());
        assert!(one.to_string().contains("cannot read \"x"), "{one}");
        // Only the short row: the field count, with its line.
        let mut text = table(400, false);
        text.push_str("r9,1\n");
        let one = in_one_piece(text.as_bytes(), &columns).unwrap_err();
        let many = in_pieces(text.as_bytes(), &columns, 500).unwrap_err();
        assert_eq!(one.to_string(), many.to_string());
        assert!(one
            .to_string()
            .contains("the row has 2 fields but the header has 5"));
    }

    #[test]
    fn quotes_and_lone_carriage_returns_keep_one_piece() {
        let text = table(400, false);
        assert!(pieces(text.as_bytes(), 500).is_some());
        assert!(pieces(text.replacen("n3", "\"n,3\"", 1).as_bytes(), 500).is_none());
        assert!(pieces(text.replacen("n3", "n\r3", 1).as_bytes(), 500).is_none());
        assert!(pieces(format!("\n{text}").as_bytes(), 500).is_none());
        assert!(pieces(text.as_bytes(), text.len()).is_none());
    }
}
