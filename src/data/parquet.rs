//! Parquet tables (`[data] table = "x.parquet"`), read through the `parquet`
//! crate's row API (no arrow). Each row becomes a record of cell texts in
//! the CSV layout the table reader already checks, so a Parquet file and a
//! CSV file with the same values give the same columns, the same missing
//! cells and the same errors (docs/spec.md, "Parquet tables"):
//!
//! - integers (8 to 64 bits, signed or not) are written in full, and
//!   doubles in shortest round-trip form, so each reads back bit for bit;
//!   a 32-bit float is widened to the double it denotes exactly;
//! - UTF-8 strings are taken as written (markers such as "NA" apply to
//!   them as to CSV cells);
//! - a null is an empty cell, missing under the spec's `missing` policy;
//! - any other type (booleans, dates, decimals, bytes, nested columns) is
//!   shown as the `parquet` crate prints it, so a number column fails at its
//!   first such cell naming the row and column.
//!
//! Errors name rows as lines, counting the column names as line 1, so row
//! n of the file is "line n + 1", as in a CSV file.

use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::Field;

/// Whether `bytes` (of a file named `name`) are a Parquet file: the
/// extension says so, or the file starts with Parquet's magic bytes.
pub(crate) fn is_parquet(name: &std::path::Path, bytes: &[u8]) -> bool {
    let extension = name
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    matches!(extension.as_deref(), Some("parquet" | "parq")) || bytes.starts_with(b"PAR1")
}

/// The rows of the Parquet file `bytes` as comma-separated text with a
/// header of its top-level column names. Only the columns in `used` (all
/// when `None`) are written out; the others are left empty (their names
/// stay in the header, so a misspelt name still gets its "did you mean").
pub(crate) fn to_csv(bytes: Vec<u8>, used: Option<&[String]>) -> Result<Vec<u8>, String> {
    let reader = SerializedFileReader::new(bytes::Bytes::from(bytes))
        .map_err(|e| format!("cannot read the Parquet file: {e}"))?;
    let schema = reader.metadata().file_metadata().schema_descr();
    let names: Vec<String> = schema
        .root_schema()
        .get_fields()
        .iter()
        .map(|f| f.name().to_string())
        .collect();
    let wanted: Vec<bool> = names
        .iter()
        .map(|n| used.is_none_or(|used| used.contains(n)))
        .collect();
    let mut writer = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    let write_error = |e: csv::Error| format!("cannot convert the Parquet rows: {e}");
    writer.write_record(&names).map_err(write_error)?;
    let rows = reader
        .get_row_iter(None)
        .map_err(|e| format!("cannot read the Parquet rows: {e}"))?;
    let mut cells: Vec<String> = vec![String::new(); names.len()];
    for (n, row) in rows.enumerate() {
        let row = row.map_err(|e| format!("row {}: cannot read it: {e}", n + 1))?;
        for cell in cells.iter_mut() {
            cell.clear();
        }
        for (j, (_, field)) in row.get_column_iter().enumerate() {
            if j < cells.len() && wanted[j] {
                cells[j] = cell_text(field);
            }
        }
        writer.write_record(&cells).map_err(write_error)?;
    }
    writer
        .into_inner()
        .map_err(|e| format!("cannot convert the Parquet rows: {e}"))
}

/// A cell's text, as a CSV file would hold it.
fn cell_text(field: &Field) -> String {
    match field {
        Field::Null => String::new(),
        Field::Byte(v) => v.to_string(),
        Field::Short(v) => v.to_string(),
        Field::Int(v) => v.to_string(),
        Field::Long(v) => v.to_string(),
        Field::UByte(v) => v.to_string(),
        Field::UShort(v) => v.to_string(),
        Field::UInt(v) => v.to_string(),
        Field::ULong(v) => v.to_string(),
        // `{:?}` is the shortest text that reads back as the same double.
        Field::Float(v) => format!("{:?}", f64::from(*v)),
        Field::Double(v) => format!("{v:?}"),
        Field::Str(v) => v.clone(),
        other => other.to_string(),
    }
}
