//! The largest inputs heldout accepts, each checked before anything is
//! allocated for it, so no spec, however hostile, can exhaust memory, the
//! stack or the clock. The values are documented in `docs/spec.md`
//! ("Limits"); a spec beyond one is refused with exit 2 naming the key and
//! the limit.

/// Largest spec file read, in bytes.
pub(crate) const SPEC_BYTES: u64 = 1 << 20;
/// Deepest nesting of `[`/`{` in the spec text (TOML or YAML flow style).
pub(crate) const SPEC_NESTING: usize = 32;
/// Most simulation replicates.
pub(crate) const REPLICATES: usize = 100_000;
/// Most training rows of a simulated replicate.
pub(crate) const TRAIN_SIZE: usize = 1_000_000;
/// Most simulated test points.
pub(crate) const TEST_POINTS: usize = 100_000;
/// Most simulated rows over all replicates (replicates × train size).
pub(crate) const SIMULATED_ROWS: usize = 1_000_000_000;
/// Most repeats of k-fold cross-validation.
pub(crate) const REPEATS: usize = 1_000;
/// Most folds per repeat.
pub(crate) const FOLDS: usize = 100_000;
// Most settings in one candidate's grid: `models::registry::GRID_LENGTH`,
// checked where grids are checked.
/// Longest `truth` expression, in characters.
pub(crate) const EXPRESSION_LENGTH: usize = 2_000;
/// Deepest nesting of parentheses, signs and powers in a `truth` expression.
pub(crate) const EXPRESSION_DEPTH: usize = 64;

/// The deepest nesting of brackets and braces in spec text, outside quoted
/// strings and comments; stops counting once past `SPEC_NESTING`.
pub(crate) fn nesting(text: &str) -> usize {
    let (mut depth, mut deepest) = (0usize, 0usize);
    let mut quote: Option<char> = None;
    let mut comment = false;
    let mut escaped = false;
    for c in text.chars() {
        if comment {
            comment = c != '\n';
            continue;
        }
        match quote {
            Some(q) => {
                if escaped {
                    escaped = false;
                } else if c == '\\' && q == '"' {
                    escaped = true;
                } else if c == q {
                    quote = None;
                }
            }
            None => match c {
                '"' | '\'' => quote = Some(c),
                '#' => comment = true,
                '[' | '{' => {
                    depth += 1;
                    deepest = deepest.max(depth);
                    if deepest > SPEC_NESTING {
                        return deepest;
                    }
                }
                ']' | '}' => depth = depth.saturating_sub(1),
                _ => {}
            },
        }
    }
    deepest
}

/// `value` within `limit`, or the message that says so for `what`.
pub(crate) fn at_most(value: usize, limit: usize, what: &str) -> Result<(), String> {
    if value > limit {
        Err(format!(
            "{value} {what} is above the limit of {limit} (see docs/spec.md, \"Limits\")"
        ))
    } else {
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nesting_counts_brackets_outside_strings_and_comments() {
        assert_eq!(nesting("a = [1, [2, {b = 3}]]"), 3);
        assert_eq!(nesting("a = \"[[[[\" # [[[[\nb = 'x[' "), 0);
        assert_eq!(nesting("x: [[[\"]]]\\\"]\"]]]"), 3);
        let deep = "[".repeat(100_000);
        assert_eq!(nesting(&deep), SPEC_NESTING + 1);
    }
}
