//! How a table writes its cells: the delimiter between them, the decimal
//! mark of numbers, and the texts that mean "no value" (docs/spec.md, `[data]`).

use crate::spec::DataSpec;

/// The delimiters a table may use: as written in a spec, the byte, and the
/// words a message uses for it.
pub(crate) const DELIMITERS: [(&str, u8, &str); 4] = [
    (",", b',', "commas"),
    (";", b';', "semicolons"),
    ("\t", b'\t', "tabs"),
    ("|", b'|', "vertical bars"),
];

/// The cell texts that mean "no value" unless `[data] missing_markers` says
/// otherwise (common practice of spreadsheet and statistics exports).
pub(crate) const DEFAULT_MARKERS: [&str; 6] = ["", "NA", "N/A", "NaN", "nan", "null"];

/// How one table is written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct TableFormat {
    pub(crate) delimiter: u8,
    /// Numbers are written with a decimal comma (`3,25`).
    pub(crate) decimal_comma: bool,
    /// Trimmed cell texts that mean "no value", compared exactly (case as
    /// listed). An empty cell always means "no value".
    pub(crate) markers: Vec<String>,
}

impl Default for TableFormat {
    fn default() -> Self {
        TableFormat {
            delimiter: b',',
            decimal_comma: false,
            markers: DEFAULT_MARKERS.iter().map(|m| m.to_string()).collect(),
        }
    }
}

impl TableFormat {
    /// The format a checked `[data]` table declares.
    pub(crate) fn of(data: &DataSpec) -> Self {
        let mut format = TableFormat::default();
        if let Some(written) = &data.delimiter {
            if let Some((_, byte, _)) = DELIMITERS.iter().find(|(w, _, _)| w == written) {
                format.delimiter = *byte;
            }
        }
        format.decimal_comma = data.decimal.as_deref() == Some(",");
        if let Some(markers) = &data.missing_markers {
            format.markers = markers.iter().map(|m| m.trim().to_string()).collect();
        }
        format
    }

    /// Whether a trimmed numeric cell means "no value".
    pub(crate) fn is_missing(&self, trimmed: &str) -> bool {
        trimmed.is_empty() || self.markers.iter().any(|m| m == trimmed)
    }

    /// A trimmed numeric cell as a number, reading the declared decimal mark;
    /// `None` when it is not one.
    pub(crate) fn parse_number(&self, trimmed: &str) -> Option<f64> {
        if self.decimal_comma {
            // A point in a decimal-comma table is a thousands separator or a
            // mistake; neither is read silently.
            if trimmed.contains('.') {
                return None;
            }
            trimmed.replacen(',', ".", 1).parse().ok()
        } else {
            trimmed.parse().ok()
        }
    }

    /// A hint for a cell that is not a number in this format but would be
    /// one in the other decimal convention.
    pub(crate) fn decimal_hint(&self, trimmed: &str) -> &'static str {
        let other = TableFormat {
            decimal_comma: !self.decimal_comma,
            ..self.clone()
        };
        match (other.parse_number(trimmed).is_some(), self.decimal_comma) {
            (true, false) => {
                "; if the table writes decimal commas, set `decimal = \",\"` in [data]"
            }
            (true, true) => "; the table seems to write decimal points: remove `decimal = \",\"`",
            (false, _) => "",
        }
    }
}

/// The words a message uses for a delimiter byte.
pub(crate) fn delimiter_words(delimiter: u8) -> &'static str {
    DELIMITERS
        .iter()
        .find(|(_, byte, _)| *byte == delimiter)
        .map_or("another delimiter", |(_, _, words)| words)
}

/// The delimiter, other than `used`, that splits the file's first line into
/// the most cells, with that count, when it gives more cells than `used`
/// does. Quotes are ignored: this only guesses, for an error message.
pub(crate) fn guess_delimiter(bytes: &[u8], used: u8) -> Option<(u8, usize)> {
    let first = bytes.split(|&b| b == b'\n').next().unwrap_or_default();
    let cells = |delimiter: u8| first.iter().filter(|&&b| b == delimiter).count() + 1;
    let current = cells(used);
    DELIMITERS
        .iter()
        .filter(|(_, byte, _)| *byte != used)
        .map(|(_, byte, _)| (*byte, cells(*byte)))
        .filter(|(_, count)| *count > current)
        // The first of equal counts, in the order of DELIMITERS.
        .fold(
            None,
            |best: Option<(u8, usize)>, (byte, count)| match best {
                Some((_, most)) if most >= count => best,
                _ => Some((byte, count)),
            },
        )
}

/// A delimiter byte as a spec writes it (escaped for TOML: `\\t`).
pub(crate) fn delimiter_in_spec(delimiter: u8) -> &'static str {
    match delimiter {
        b'\t' => "\\t",
        b';' => ";",
        b'|' => "|",
        _ => ",",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn guesses_the_delimiter_a_header_uses() {
        assert_eq!(guess_delimiter(b"a;b;c\n1;2;3\n", b','), Some((b';', 3)));
        assert_eq!(guess_delimiter(b"a\tb\n", b','), Some((b'\t', 2)));
        assert_eq!(guess_delimiter(b"a,b,c\n", b';'), Some((b',', 3)));
        // The declared delimiter already splits the header best.
        assert_eq!(guess_delimiter(b"a,b,c\n", b','), None);
        assert_eq!(guess_delimiter(b"abc\n", b','), None);
    }

    #[test]
    fn decimal_commas_are_read_only_when_declared() {
        let point = TableFormat::default();
        let comma = TableFormat {
            decimal_comma: true,
            ..TableFormat::default()
        };
        assert_eq!(point.parse_number("3.25"), Some(3.25));
        assert_eq!(point.parse_number("3,25"), None);
        assert_eq!(comma.parse_number("3,25"), Some(3.25));
        assert_eq!(comma.parse_number("-1,5e3"), Some(-1500.0));
        assert_eq!(comma.parse_number("1.234,5"), None);
        assert_eq!(comma.parse_number("3.25"), None);
        assert!(point.decimal_hint("3,25").contains("decimal = \",\""));
        assert!(comma.decimal_hint("3.25").contains("remove"));
        assert_eq!(point.decimal_hint("abc"), "");
    }

    #[test]
    fn markers_match_exactly_and_empty_is_always_missing() {
        let format = TableFormat::default();
        for marker in ["", "NA", "N/A", "NaN", "nan", "null"] {
            assert!(format.is_missing(marker), "{marker}");
        }
        assert!(!format.is_missing("na"));
        assert!(!format.is_missing("NULL"));
        let custom = TableFormat {
            markers: vec!["-".into()],
            ..TableFormat::default()
        };
        assert!(custom.is_missing("-"));
        assert!(custom.is_missing(""));
        assert!(!custom.is_missing("NA"));
    }
}
