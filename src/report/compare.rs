//! How `heldout compare` reads: the Markdown of a comparison, rendered from
//! `templates/compare.md.j2`. This module owns the comparison's data types
//! (filled in by `commands::compare`, which decides what moved), the way its
//! numbers are written (just enough digits to tell two values apart), and
//! the template. Rendering is pure: a [`Comparison`] in, text out.
//!
//! The template is compiled in but not part of `templates_digest`: a
//! comparison is printed, never written into a run's outputs, so it has no
//! place in a receipt.

use minijinja::Environment;
use serde::Serialize;

/// The comparison's template text; compiled in.
const TEMPLATE: &str = include_str!("../../templates/compare.md.j2");

/// How many moved numbers are listed unless every one is asked for.
const SHOWN: usize = 40;

/// One thing as it was in the first result set and in the second.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub(crate) struct BeforeAfter<T> {
    pub(crate) before: T,
    pub(crate) after: T,
}

/// An input of a run, as the comparison lists them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Input {
    /// The data table, by digest; named by its path.
    Data,
    /// The tool and its version, as text.
    Tool,
    /// The spec's meaning, by digest.
    Spec,
    /// The locked test set and the folds, by digest.
    Folds,
    /// The report templates, by digest.
    Templates,
}

/// One input of both runs and whether it differs.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct InputRow {
    pub(crate) input: Input,
    /// `None` where a result set does not record this input as text.
    pub(crate) values: BeforeAfter<Option<String>>,
    pub(crate) changed: bool,
}

impl Input {
    /// The input's name in `--json` output (docs/json.md).
    pub(crate) fn key(self) -> &'static str {
        match self {
            Input::Data => "data",
            Input::Tool => "tool",
            Input::Spec => "spec",
            Input::Folds => "folds",
            Input::Templates => "templates",
        }
    }
}

/// A setting of the run that differs: the metric, the rule, a `[split]`
/// value or a `[data]` column.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct SetupChange {
    /// Which setting, by its path in results.json: `metric`, `split.folds`,
    /// `data.features`.
    pub(crate) what: String,
    /// The values as stored (`null` where a result set lacks the setting).
    pub(crate) before: serde_json::Value,
    pub(crate) after: serde_json::Value,
}

/// A candidate (one `[[candidate]]` table, known by the stem of its ids)
/// that only one of the result sets has.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub(crate) struct CandidateOnly {
    pub(crate) candidate: String,
    pub(crate) family: String,
    pub(crate) features: Vec<String>,
    /// How many settings its grid has.
    pub(crate) settings: usize,
}

/// A candidate both result sets have, whose family, features or grid differ.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub(crate) struct CandidateChange {
    pub(crate) candidate: String,
    /// Only when the family differs (a label kept over a new family).
    pub(crate) family: Option<BeforeAfter<String>>,
    /// Only when the features differ.
    pub(crate) features: Option<BeforeAfter<Vec<String>>>,
    /// Grid points by their label (`degree=14`), in results order.
    pub(crate) settings_added: Vec<String>,
    pub(crate) settings_removed: Vec<String>,
}

/// A number that differs between the two result sets.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Moved {
    /// Where: a candidate id, or the part of the results.
    pub(crate) place: String,
    /// Which number, in the results' own words.
    pub(crate) number: String,
    pub(crate) before: Option<f64>,
    pub(crate) after: Option<f64>,
}

impl Moved {
    /// |after − before| / |before|, for ordering; infinite when there is no
    /// finite before value to compare against.
    pub(crate) fn relative(&self) -> f64 {
        match (self.before, self.after) {
            (Some(b), Some(a)) if b != 0.0 => ((a - b) / b).abs(),
            (Some(b), Some(a)) if a == b => 0.0,
            _ => f64::INFINITY,
        }
    }
}

/// How one candidate's fold scores moved.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct FoldsMoved {
    pub(crate) moved: usize,
    pub(crate) folds: usize,
    /// The fold whose score moved most (relative): its 0-based position in
    /// `fold_scores`, its name as `verify` gives it, and its values.
    pub(crate) largest: usize,
    pub(crate) largest_fold: String,
    pub(crate) values: Moved,
}

/// Everything a comparison says, as data.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Comparison {
    /// Experiment names.
    pub(crate) experiment: BeforeAfter<String>,
    /// The results files as given on the command line.
    pub(crate) files: BeforeAfter<String>,
    /// Ids of the settings kept.
    pub(crate) chosen: BeforeAfter<String>,
    /// The metric the second result set is scored by.
    pub(crate) metric: String,
    pub(crate) test_score: BeforeAfter<Option<f64>>,
    /// The data tables' paths, which name the data row of `inputs`.
    pub(crate) tables: BeforeAfter<String>,
    pub(crate) inputs: Vec<InputRow>,
    pub(crate) setup: Vec<SetupChange>,
    /// Family names only one result set uses.
    pub(crate) families_added: Vec<String>,
    pub(crate) families_removed: Vec<String>,
    pub(crate) candidates_added: Vec<CandidateOnly>,
    pub(crate) candidates_removed: Vec<CandidateOnly>,
    pub(crate) candidates_changed: Vec<CandidateChange>,
    /// How many setting ids the two result sets share.
    pub(crate) settings_in_both: usize,
    /// Setting ids only one result set has.
    pub(crate) added: Vec<String>,
    pub(crate) removed: Vec<String>,
    /// The numbers that moved, largest relative change first.
    pub(crate) moved: Vec<Moved>,
    pub(crate) folds_moved: Vec<FoldsMoved>,
    /// Whether fold scores were compared: only when both result sets divide
    /// the rows the same way (method, folds, repeats), so positions pair up.
    pub(crate) folds_compared: bool,
    /// The folds come from a fold column, whose labels results.json does not
    /// keep, so folds are named by position (`fold #2`).
    pub(crate) folds_by_position: bool,
    /// List every moved number, not just the first [`SHOWN`].
    pub(crate) list_all: bool,
}

/// The comparison as Markdown.
pub(crate) fn render(comparison: &Comparison) -> Result<String, minijinja::Error> {
    let mut env = Environment::new();
    env.set_trim_blocks(true);
    env.set_keep_trailing_newline(true);
    env.add_filter("md", |text: String| super::escape_markdown(&text));
    env.add_template("compare.md", TEMPLATE)?;
    env.get_template("compare.md")?
        .render(View::new(comparison))
}

/// The test score line.
#[derive(Serialize)]
struct TestScoreView<'a> {
    metric: &'a str,
    before: String,
    after: String,
    unchanged: bool,
}

/// One row of the inputs table.
#[derive(Serialize)]
struct InputView {
    label: &'static str,
    /// The label goes on with the data tables' paths.
    names_tables: bool,
    /// The values are digests, shown short in a code span; otherwise text.
    digest: bool,
    changed: bool,
    before: Option<String>,
    after: Option<String>,
}

/// A row of the moved-numbers table or of the fold-scores table.
#[derive(Serialize)]
struct MovedView<'a> {
    place: &'a str,
    number: &'a str,
    before: String,
    after: String,
    change: String,
    relative: String,
}

/// A row of the fold-scores table.
#[derive(Serialize)]
struct FoldsView<'a> {
    /// How many fold scores moved, of how many.
    moved: usize,
    folds: usize,
    /// The fold that moved most, named as `verify` names it.
    fold: &'a str,
    values: MovedView<'a>,
}

/// A row of the setup table, its values written out.
#[derive(Serialize)]
struct SetupView<'a> {
    what: &'a str,
    before: String,
    after: String,
}

/// The template context: the comparison with its numbers written out.
#[derive(Serialize)]
struct View<'a> {
    experiment: &'a BeforeAfter<String>,
    files: BeforeAfter<String>,
    chosen: &'a BeforeAfter<String>,
    test_score: Option<TestScoreView<'a>>,
    tables: &'a BeforeAfter<String>,
    inputs: Vec<InputView>,
    setup: Vec<SetupView<'a>>,
    families_added: &'a [String],
    families_removed: &'a [String],
    candidates_added: &'a [CandidateOnly],
    candidates_removed: &'a [CandidateOnly],
    candidates_changed: &'a [CandidateChange],
    settings_in_both: usize,
    added: &'a [String],
    removed: &'a [String],
    moved_count: usize,
    moved: Vec<MovedView<'a>>,
    not_shown: usize,
    folds_moved: Vec<FoldsView<'a>>,
    folds_compared: bool,
    folds_by_position: bool,
}

impl<'a> View<'a> {
    fn new(c: &'a Comparison) -> Self {
        let test_score =
            (c.test_score.before.is_some() || c.test_score.after.is_some()).then(|| {
                let (before, after) = apart(c.test_score.before, c.test_score.after);
                TestScoreView {
                    metric: &c.metric,
                    before,
                    after,
                    unchanged: same_bits(c.test_score.before, c.test_score.after),
                }
            });
        let shown = if c.list_all {
            c.moved.len()
        } else {
            SHOWN.min(c.moved.len())
        };
        View {
            experiment: &c.experiment,
            // A backtick would end the code span the file names are shown in.
            files: BeforeAfter {
                before: c.files.before.replace('`', "'"),
                after: c.files.after.replace('`', "'"),
            },
            chosen: &c.chosen,
            test_score,
            tables: &c.tables,
            inputs: c.inputs.iter().map(input_view).collect(),
            setup: c
                .setup
                .iter()
                .map(|change| SetupView {
                    what: &change.what,
                    before: setting_text(&change.before),
                    after: setting_text(&change.after),
                })
                .collect(),
            families_added: &c.families_added,
            families_removed: &c.families_removed,
            candidates_added: &c.candidates_added,
            candidates_removed: &c.candidates_removed,
            candidates_changed: &c.candidates_changed,
            settings_in_both: c.settings_in_both,
            added: &c.added,
            removed: &c.removed,
            moved_count: c.moved.len(),
            moved: c.moved[..shown].iter().map(moved_view).collect(),
            not_shown: c.moved.len() - shown,
            folds_moved: c
                .folds_moved
                .iter()
                .map(|f| FoldsView {
                    moved: f.moved,
                    folds: f.folds,
                    fold: &f.largest_fold,
                    values: moved_view(&f.values),
                })
                .collect(),
            folds_compared: c.folds_compared,
            folds_by_position: c.folds_by_position,
        }
    }
}

/// A stored setting as a person reads it: text without quotes, lists joined
/// by commas, `none` for a setting a result set lacks.
fn setting_text(value: &serde_json::Value) -> String {
    use serde_json::Value;
    match value {
        Value::Null => "none".to_string(),
        Value::String(text) => text.clone(),
        Value::Array(items) => items
            .iter()
            .map(setting_text)
            .collect::<Vec<_>>()
            .join(", "),
        other => other.to_string(),
    }
}

fn input_view(row: &InputRow) -> InputView {
    let (label, digest) = match row.input {
        Input::Data => ("data", true),
        Input::Tool => ("tool", false),
        Input::Spec => ("spec (meaning)", true),
        Input::Folds => ("test set and folds", true),
        Input::Templates => ("report templates", true),
    };
    // Digests are shown by their first 16 characters, enough to tell apart.
    let shown = |value: &Option<String>| {
        value.as_ref().map(|v| {
            if digest {
                v.chars().take(16).collect()
            } else {
                v.clone()
            }
        })
    };
    InputView {
        label,
        names_tables: row.input == Input::Data,
        digest,
        changed: row.changed,
        before: shown(&row.values.before),
        after: shown(&row.values.after),
    }
}

fn moved_view(m: &Moved) -> MovedView<'_> {
    let (before, after) = apart(m.before, m.after);
    let (change, relative) = change(m);
    MovedView {
        place: &m.place,
        number: &m.number,
        before,
        after,
        change,
        relative,
    }
}

/// Whether two numbers are the same to the bit (or both absent).
pub(crate) fn same_bits(a: Option<f64>, b: Option<f64>) -> bool {
    match (a, b) {
        (Some(x), Some(y)) => x.to_bits() == y.to_bits(),
        (None, None) => true,
        _ => false,
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

    fn pair<T: Clone>(value: T) -> BeforeAfter<T> {
        BeforeAfter {
            before: value.clone(),
            after: value,
        }
    }

    /// A comparison of a result set with itself, with hostile names.
    fn unchanged() -> Comparison {
        Comparison {
            experiment: pair("a_b".to_string()),
            files: pair("x`y.json".to_string()),
            chosen: pair("linear".to_string()),
            metric: "mse".into(),
            test_score: pair(Some(1.5)),
            tables: pair("t|1.csv".to_string()),
            inputs: vec![InputRow {
                input: Input::Data,
                values: pair(Some("0123456789abcdef0123".to_string())),
                changed: false,
            }],
            setup: Vec::new(),
            families_added: Vec::new(),
            families_removed: Vec::new(),
            candidates_added: Vec::new(),
            candidates_removed: Vec::new(),
            candidates_changed: Vec::new(),
            settings_in_both: 3,
            added: Vec::new(),
            removed: Vec::new(),
            moved: Vec::new(),
            folds_moved: Vec::new(),
            folds_compared: true,
            folds_by_position: false,
            list_all: false,
        }
    }

    #[test]
    fn nothing_moved_reads_as_such_and_names_are_escaped() {
        let text = render(&unchanged()).unwrap();
        assert_eq!(
            text,
            "## heldout compare: a\\_b\n\n\
             Before: `x'y.json`  \nAfter: `x'y.json`\n\n\
             **The choice is unchanged:** `linear`.\n\
             Test mse: 1.5, unchanged.\n\n\
             ### Inputs\n\n\
             | input | | before | after |\n|---|---|---|---|\n\
             | data t\\|1.csv | same | `0123456789abcdef` | `0123456789abcdef` |\n\n\
             ### Setup\n\n\
             The same metric, rule, split and data columns in both.\n\n\
             ### Candidates\n\n\
             The same 3 settings in both.\n\n\
             ### Numbers that moved\n\n\
             None: every number present in both is identical to the bit.\n"
        );
    }

    #[test]
    fn setup_and_candidate_changes_read_as_lines_with_names_escaped() {
        let mut comparison = unchanged();
        comparison.setup = vec![
            SetupChange {
                what: "split.folds".into(),
                before: serde_json::json!(10),
                after: serde_json::json!(5),
            },
            SetupChange {
                what: "data.features".into(),
                before: serde_json::json!(["a_1", "b|2"]),
                after: serde_json::json!(["a_1"]),
            },
            SetupChange {
                what: "data.key".into(),
                before: serde_json::Value::Null,
                after: serde_json::json!("id"),
            },
        ];
        comparison.families_added = vec!["ridge".into()];
        comparison.candidates_added = vec![CandidateOnly {
            candidate: "ridge".into(),
            family: "ridge".into(),
            features: vec!["a_1".into()],
            settings: 1,
        }];
        comparison.candidates_changed = vec![CandidateChange {
            candidate: "flex".into(),
            family: Some(BeforeAfter {
                before: "polynomial".into(),
                after: "smoothing-spline".into(),
            }),
            features: None,
            settings_added: vec!["df=4".into()],
            settings_removed: vec!["degree=4".into(), "degree=5".into()],
        }];
        let text = render(&comparison).unwrap();
        for line in [
            "| split.folds | 10 | 5 |\n",
            "| data.features | a\\_1, b\\|2 | a\\_1 |\n",
            "| data.key | none | id |\n",
            "- Families added: `ridge`.\n",
            "- New candidate `ridge` (ridge on a\\_1): 1 setting.\n",
            "- `flex`: family `polynomial` → `smoothing-spline`.\n",
            "- `flex` grid: added `df=4`; removed `degree=4`, `degree=5`.\n",
        ] {
            assert!(text.contains(line), "missing {line:?} in:\n{text}");
        }
        assert!(!text.contains("The same metric"), "{text}");
        assert!(!text.contains("Families removed"), "{text}");
    }

    #[test]
    fn long_lists_are_cut_unless_all_are_asked_for() {
        let mut comparison = unchanged();
        comparison.moved = (0..SHOWN + 2)
            .map(|i| Moved {
                place: "linear".into(),
                number: format!("n{i}"),
                before: Some(1.0),
                after: Some(2.0),
            })
            .collect();
        let text = render(&comparison).unwrap();
        assert!(text.contains("42 numbers moved"), "{text}");
        assert!(text.contains("\n…and 2 more; `heldout compare --all` lists them all.\n"));
        comparison.list_all = true;
        let text = render(&comparison).unwrap();
        assert!(text.contains("| linear | n41 |"), "{text}");
        assert!(!text.contains("more;"), "{text}");
    }
}
