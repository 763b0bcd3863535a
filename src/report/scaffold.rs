//! How the spec that `heldout new` writes reads: commented TOML rendered
//! from `templates/scaffold.toml.j2`. This module owns the scaffold's data
//! type (filled in by `commands::scaffold`, which decides what to propose)
//! and the template, whose comments explain each choice to the person who
//! edits the file. Rendering is pure: a [`Scaffold`] in, text out.
//!
//! The template is compiled in but not part of `templates_digest`: a
//! scaffold is a spec, an input of runs, not one of their outputs.

use minijinja::Environment;
use serde::Serialize;

/// The scaffold's template text; compiled in.
const TEMPLATE: &str = include_str!("../../templates/scaffold.toml.j2");

/// Why a column of the table is not proposed as a feature.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum LeftOutBecause {
    /// It holds text that is not a number.
    Text,
    /// Its name suggests a time, which is better offered as a split order.
    Time,
    /// It has one value on every row.
    Constant,
    /// Every row has its own whole number or text: it names rows.
    RowNames,
    /// The target is (almost) a function of it: |r| > 0.99 or the same
    /// ordering; most likely computed from the target.
    GivesAwayTarget,
}

/// A column that is not proposed as a feature, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub(crate) struct LeftOut {
    pub(crate) name: String,
    pub(crate) because: LeftOutBecause,
}

/// What `heldout new` proposes for one table, as data.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Scaffold {
    pub(crate) name: String,
    /// The table's path as seen from the spec's folder.
    pub(crate) table: String,
    pub(crate) target: String,
    pub(crate) seed: u32,
    pub(crate) features: Vec<String>,
    /// The features that hold text of few levels (categorical features).
    pub(crate) categorical: Vec<String>,
    /// A text column with a distinct value on every row.
    pub(crate) key: Option<String>,
    pub(crate) left_out: Vec<LeftOut>,
    /// A column of ISO dates, else one named like a time, offered as the
    /// order of a time split.
    pub(crate) order: Option<String>,
    /// Missing cells (empty or a marker) in the target and the features.
    pub(crate) empty_cells: usize,
    /// Features with missing cells: the scaffold imputes them.
    pub(crate) missing_features: Vec<String>,
    /// The delimiter as a spec writes it, when not a comma.
    pub(crate) delimiter: Option<String>,
    /// The table writes decimal commas.
    pub(crate) decimal_comma: bool,
    /// The share of rows locked away as the test set (0: none).
    pub(crate) holdout: f64,
    pub(crate) folds: usize,
    /// The feature most correlated with the target, which the one-feature
    /// candidates use.
    pub(crate) main_feature: String,
    /// Empty when the grids would be too short to be worth comparing.
    pub(crate) polynomial_degrees: Vec<usize>,
    pub(crate) spline_dfs: Vec<f64>,
    pub(crate) neighbours_k: Vec<usize>,
    /// Ridge on every feature is proposed.
    pub(crate) ridge: bool,
    /// The target holds class labels: class families and metric instead.
    pub(crate) classification: bool,
}

/// The scaffold as commented TOML.
pub(crate) fn render(scaffold: &Scaffold) -> Result<String, minijinja::Error> {
    let mut env = Environment::new();
    env.set_trim_blocks(true);
    env.set_keep_trailing_newline(true);
    env.add_filter("toml", |text: String| toml_string(&text));
    env.add_template("scaffold.toml", TEMPLATE)?;
    env.get_template("scaffold.toml")?
        .render(View::new(scaffold))
}

/// A TOML string literal (quoted and escaped).
fn toml_string(text: &str) -> String {
    toml::Value::String(text.to_string()).to_string()
}

/// The template context: the scaffold with its decimals written out the way
/// Rust prints them (`0`, `2.5`), which minijinja would print as `0.0`.
#[derive(Serialize)]
struct View<'a> {
    name: &'a str,
    table: &'a str,
    target: &'a str,
    seed: u32,
    features: &'a [String],
    categorical: &'a [String],
    key: Option<&'a str>,
    left_out: &'a [LeftOut],
    order: Option<&'a str>,
    empty_cells: usize,
    missing_features: &'a [String],
    delimiter: Option<&'a str>,
    decimal_comma: bool,
    locked_test_set: bool,
    holdout: String,
    folds: usize,
    main_feature: &'a str,
    polynomial_degrees: &'a [usize],
    spline_dfs: Vec<String>,
    neighbours_k: &'a [usize],
    ridge: bool,
    classification: bool,
}

impl<'a> View<'a> {
    fn new(s: &'a Scaffold) -> Self {
        View {
            name: &s.name,
            table: &s.table,
            target: &s.target,
            seed: s.seed,
            features: &s.features,
            categorical: &s.categorical,
            key: s.key.as_deref(),
            left_out: &s.left_out,
            order: s.order.as_deref(),
            empty_cells: s.empty_cells,
            missing_features: &s.missing_features,
            delimiter: s.delimiter.as_deref(),
            decimal_comma: s.decimal_comma,
            locked_test_set: s.holdout > 0.0,
            holdout: s.holdout.to_string(),
            folds: s.folds,
            main_feature: &s.main_feature,
            polynomial_degrees: &s.polynomial_degrees,
            spline_dfs: s.spline_dfs.iter().map(f64::to_string).collect(),
            neighbours_k: &s.neighbours_k,
            ridge: s.ridge,
            classification: s.classification,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The smallest scaffold: one feature, no optional candidates.
    fn minimal() -> Scaffold {
        Scaffold {
            name: "t".into(),
            table: "t.csv".into(),
            target: "y \"q\"".into(),
            seed: 7,
            features: vec!["x".into()],
            categorical: Vec::new(),
            key: None,
            left_out: Vec::new(),
            order: None,
            empty_cells: 0,
            missing_features: Vec::new(),
            delimiter: None,
            decimal_comma: false,
            holdout: 0.0,
            folds: 2,
            main_feature: "x".into(),
            polynomial_degrees: Vec::new(),
            spline_dfs: Vec::new(),
            neighbours_k: Vec::new(),
            ridge: false,
            classification: false,
        }
    }

    #[test]
    fn names_are_toml_strings_and_decimals_read_as_rust_prints_them() {
        let text = render(&minimal()).unwrap();
        assert!(text.contains("\ntarget = 'y \"q\"'\n"), "{text}");
        assert!(text.contains("\nholdout = 0\n"), "{text}");
        assert!(!text.contains("[[candidate]]\nfamily = \"polynomial\""));
        assert!(
            text.ends_with("formats = [\"markdown\", \"html\"]\n"),
            "{text}"
        );

        let mut scaffold = minimal();
        scaffold.holdout = 0.2;
        scaffold.spline_dfs = vec![2.5, 3.0];
        scaffold.left_out = vec![LeftOut {
            name: "day".into(),
            because: LeftOutBecause::Time,
        }];
        let text = render(&scaffold).unwrap();
        assert!(text.contains("\nholdout = 0.2\n"), "{text}");
        assert!(text.contains("\ndf = [2.5, 3]\n"), "{text}");
        assert!(
            text.contains("# Not used as features: day (looks like time; add it for a trend).\n"),
            "{text}"
        );
    }
}
