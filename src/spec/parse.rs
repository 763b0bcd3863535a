//! Reading spec text: TOML or YAML by extension, into [`SpecFile`], with
//! errors located at file:line:column and a "did you mean" hint.

use std::path::Path;

use super::SpecFile;
use crate::error::SpecError;

/// Parses spec text; the format follows the file extension.
pub(crate) fn parse(path: &Path, text: &str) -> Result<SpecFile, SpecError> {
    match path.extension().and_then(|e| e.to_str()) {
        Some("toml") => parse_toml(path, text),
        Some("yaml") | Some("yml") => parse_yaml(path, text),
        _ => Err(SpecError::UnknownFormat {
            path: path.to_path_buf(),
        }),
    }
}

pub(super) fn parse_toml(path: &Path, text: &str) -> Result<SpecFile, SpecError> {
    toml::from_str(text).map_err(|err| {
        let (line, column) = match err.span() {
            Some(span) => line_and_column(text, span.start),
            None => (1, 1),
        };
        let message = err.message().trim().to_string();
        SpecError::Parse {
            location: format!("{}:{line}:{column}", path.display()),
            hint: did_you_mean(&message),
            message,
        }
    })
}

fn parse_yaml(path: &Path, text: &str) -> Result<SpecFile, SpecError> {
    serde_yaml_ng::from_str(text).map_err(|err| {
        let (line, column) = err
            .location()
            .map(|l| (l.line(), l.column()))
            .unwrap_or((1, 1));
        let mut message = err.to_string();
        // The YAML library appends its own position; ours is in front already.
        if let Some(cut) = message.find(" at line ") {
            message.truncate(cut);
        }
        SpecError::Parse {
            location: format!("{}:{line}:{column}", path.display()),
            hint: did_you_mean(&message),
            message,
        }
    })
}

/// 1-based line and column (in characters) of a byte offset.
fn line_and_column(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let column = before[line_start..].chars().count() + 1;
    (line, column)
}

/// Turns serde's "unknown field `x`, expected one of `a`, `b`" (or "unknown
/// variant") into a hint naming the closest allowed word, when one is close.
fn did_you_mean(message: &str) -> String {
    let unknown = ["unknown field `", "unknown variant `"]
        .iter()
        .find_map(|prefix| message.find(prefix).map(|at| at + prefix.len()));
    let Some(start) = unknown else {
        return String::new();
    };
    let Some(len) = message[start..].find('`') else {
        return String::new();
    };
    let typed = &message[start..start + len];
    let rest = &message[start + len + 1..];
    let allowed: Vec<&str> = rest.split('`').skip(1).step_by(2).collect();
    closest(typed, &allowed)
        .map(|word| format!(" (did you mean `{word}`?)"))
        .unwrap_or_default()
}

/// The allowed word nearest to `typed`, if it is near enough to be a typo.
pub(crate) fn closest<'a>(typed: &str, allowed: &[&'a str]) -> Option<&'a str> {
    allowed
        .iter()
        .map(|word| (strsim::damerau_levenshtein(typed, word), *word))
        .filter(|(distance, word)| *distance <= 1.max(typed.len().max(word.len()) / 4))
        .min_by_key(|(distance, _)| *distance)
        .map(|(_, word)| word)
}
