//! Everything heldout renders for people: the Markdown and HTML reports
//! through minijinja templates, SVG figures and a short table for the
//! terminal (all from `&Results`), and the texts of `heldout compare`
//! (`compare.rs`) and `heldout new` (`scaffold.rs`). Renderers are pure
//! (data → text); `output` and the commands own the writing.
//!
//! Both reports read one context (`context.rs`), so they say the same things.
//! Only the report templates shape a run's outputs, so only they are in the
//! receipt's template digest.

pub(crate) mod compare;
mod context;
pub(crate) mod figures;
pub(crate) mod html;
pub(crate) mod markdown;
#[cfg(test)]
pub(crate) mod sample;
pub(crate) mod scaffold;
pub(crate) mod terminal;

use std::cmp::Ordering;

use crate::results::{self, Results};
use crate::spec::{Metric, ReportFormat};

pub(crate) use context::ReportInputs;

/// Every template that shapes an output, by name, in a fixed order.
pub(crate) const TEMPLATES: [(&str, &str); 3] = [
    ("report.md", markdown::TEMPLATE),
    ("report.html", html::TEMPLATE),
    ("report.css", html::STYLE),
];

/// Why a report could not be rendered.
#[derive(Debug, thiserror::Error)]
pub(crate) enum ReportError {
    #[error("cannot render a report template: {0:#}")]
    Template(#[from] minijinja::Error),
    #[error(transparent)]
    Figure(#[from] figures::FigureError),
}

/// Every output file of a run, as (name inside the output folder, bytes), in
/// a fixed order: `results.json`, then (when any report is asked for) the
/// figures as `figures/*.svg`, then the reports asked for.
pub(crate) fn render_outputs(
    results: &Results,
    formats: &[ReportFormat],
    inputs: &ReportInputs<'_>,
) -> Result<Vec<(String, Vec<u8>)>, ReportError> {
    let mut outputs = vec![(
        "results.json".to_string(),
        results::to_json(results).into_bytes(),
    )];
    outputs.extend(render_reports(results, formats, inputs)?);
    Ok(outputs)
}

/// The report files alone, in the order of [`render_outputs`]: the figures as
/// `figures/*.svg`, then the reports asked for; nothing when none is asked
/// for. `heldout report` writes these from stored results.
pub(crate) fn render_reports(
    results: &Results,
    formats: &[ReportFormat],
    inputs: &ReportInputs<'_>,
) -> Result<Vec<(String, Vec<u8>)>, ReportError> {
    let mut outputs = Vec::new();
    if formats.is_empty() {
        return Ok(outputs);
    }
    let figures = figures::render_all(results)?;
    for figure in &figures {
        outputs.push((
            format!("figures/{}", figure.file),
            figure.svg.clone().into_bytes(),
        ));
    }
    if formats.contains(&ReportFormat::Markdown) {
        let text = markdown::render(results, inputs, &figures)?;
        outputs.push(("report.md".to_string(), text.into_bytes()));
    }
    if formats.contains(&ReportFormat::Html) {
        let text = html::render(results, inputs, &figures)?;
        outputs.push(("report.html".to_string(), text.into_bytes()));
    }
    Ok(outputs)
}

/// The cautions every report carries (docs/architecture.md, "Cautions every report carries").
pub(crate) const CAUTIONS: [&str; 3] = [
    "Cross-validated error assumes the rows are exchangeable, unless groups or a time order are \
     declared in the spec; if rows are related in ways the spec does not declare, these scores \
     are optimistic.",
    "Predictions beyond the range of the data used here are extrapolation, which this evidence \
     does not support.",
    "A model chosen here still needs independent validation under its owner's model-risk policy \
     and local regulations before it informs decisions about people, money or safety; defer to \
     local rules and licensed practice.",
];

/// The cautions a classifier's report adds to [`CAUTIONS`]
/// (docs/reports.md, "Classification").
pub(crate) const CLASS_CAUTIONS: [&str; 2] = [
    "The predicted class here is the most probable one. Where to put a probability threshold \
     for acting on a prediction is a policy decision that weighs the costs of false alarms \
     against missed cases; it is not settled by this evidence.",
    "Probabilities reflect the class balance of these rows. If the classes will be more or less \
     common where the model is used, its probabilities, error rate and calibration there will \
     differ from the ones reported here.",
];

/// Human words for a metric.
pub(crate) fn metric_label(metric: Metric) -> &'static str {
    match metric {
        Metric::Mse => "mean squared error (mse)",
        Metric::Rmse => "root mean squared error (rmse)",
        Metric::Mae => "mean absolute error (mae)",
        Metric::R2 => "coefficient of determination (r2)",
        Metric::ErrorRate => "error rate (error-rate)",
        Metric::LogLoss => "logarithmic loss (log-loss)",
        Metric::Brier => "Brier score (brier)",
        Metric::Auc => "area under the ROC curve (auc)",
    }
}

/// The spec as heldout read it, for the report: its meaning (the parsed spec
/// with defaults spelled out, as digested in the receipt) written as TOML.
/// Comments and layout are not kept, so a spec and its YAML twin give the
/// same report, and editing a comment does not change any output.
pub(crate) fn spec_as_read(spec: &crate::spec::SpecFile) -> String {
    let canonical = crate::spec::canonical(spec);
    toml::to_string(&canonical).unwrap_or_else(|_| {
        serde_json::to_string_pretty(&canonical).expect("specs always serialise") + "\n"
    })
}

/// The rule in words.
pub(crate) fn rule_words(rule: crate::spec::Rule) -> &'static str {
    match rule {
        crate::spec::Rule::OneSe => "one-standard-error rule",
        crate::spec::Rule::Lowest => "lowest cross-validated score",
    }
}

/// How the split reads in a sentence.
pub(crate) fn split_phrase(results: &Results) -> String {
    use crate::spec::SplitMethod;
    let s = &results.split;
    match s.method {
        SplitMethod::Kfold if s.repeats > 1 => format!(
            "{}-fold cross-validation repeated {} times",
            s.folds, s.repeats
        ),
        SplitMethod::Kfold => format!("{}-fold cross-validation", s.folds),
        SplitMethod::LeaveOneOut => "leave-one-out cross-validation".to_string(),
        SplitMethod::Column => format!(
            "cross-validation over the {} folds given in the data",
            s.folds
        ),
        SplitMethod::Ordered => format!(
            "forward-chaining cross-validation in order of \"{}\": {} folds, each fitted only on \
             rows earlier than the ones it is scored on, and the latest rows locked as the test set",
            results.data.order.as_deref().unwrap_or("?"),
            s.folds
        ),
    }
}

/// How the locked test set's size reads after "N rows": the fraction of the
/// table it actually holds and, when that differs from `[split] holdout`,
/// the fraction asked for and why they differ (whole groups or time points
/// go to one side, and a count of rows is a whole number).
pub(crate) fn test_share(results: &Results) -> String {
    let share = |v: f64| {
        let text = format_significant(v, 3);
        if text.contains('.') && !text.contains('e') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        }
    };
    let rows = &results.rows;
    let actual = share(rows.test as f64 / rows.total.max(1) as f64);
    let asked = share(results.split.holdout);
    if actual == asked {
        return format!("{actual} of the table");
    }
    let why = if results.data.group.is_some() {
        "whole groups go to one side"
    } else if results.split.method == crate::spec::SplitMethod::Ordered {
        "whole time points go to one side"
    } else {
        "a test set holds whole rows"
    };
    format!("{actual} of the table; holdout asked for {asked}, but {why}")
}

/// Positions of `items` in order of effective degrees of freedom, least
/// flexible first. The sort is stable, so ties keep the given (spec) order;
/// a NaN df sorts last.
pub(crate) fn by_effective_df<T>(items: &[T], df: impl Fn(&T) -> f64) -> Vec<usize> {
    let mut order: Vec<usize> = (0..items.len()).collect();
    order.sort_by(|&a, &b| {
        let (x, y) = (df(&items[a]), df(&items[b]));
        match (x.is_nan(), y.is_nan()) {
            (true, true) => Ordering::Equal,
            (true, false) => Ordering::Greater,
            (false, true) => Ordering::Less,
            (false, false) => x.partial_cmp(&y).unwrap_or(Ordering::Equal),
        }
    });
    order
}

/// Positions of `items` as the reports' tables list them: grouped by
/// candidate (family name or label: the stem of the id), candidates in order
/// of first appearance, and within each by [`by_effective_df`].
pub(crate) fn table_order<T>(
    items: &[T],
    id: impl Fn(&T) -> &str,
    df: impl Fn(&T) -> f64,
) -> Vec<usize> {
    let mut stems: Vec<&str> = Vec::new();
    for item in items {
        let stem = figures::stem(id(item));
        if !stems.contains(&stem) {
            stems.push(stem);
        }
    }
    let mut order = Vec::with_capacity(items.len());
    for stem in stems {
        let members: Vec<usize> = (0..items.len())
            .filter(|&i| figures::stem(id(&items[i])) == stem)
            .collect();
        let within = by_effective_df(&members, |&i| df(&items[i]));
        order.extend(within.into_iter().map(|k| members[k]));
    }
    order
}

/// A number for people: four significant digits, scientific when very large
/// or small. Deterministic: uses only Rust's own float formatting.
pub(crate) fn format_number(value: f64) -> String {
    format_significant(value, 4)
}

/// `value` to `digits` significant digits (trailing zeros kept, so a column
/// reads to one precision), scientific when its decimal exponent is below −3
/// or reaches `digits + 2`; "n/a" for NaN. Only Rust's own float formatting
/// is used, so the text is the same on every machine.
pub(crate) fn format_significant(value: f64, digits: usize) -> String {
    if value.is_nan() {
        return "n/a".to_string();
    }
    if value == 0.0 {
        return "0".to_string();
    }
    if value.is_infinite() {
        return if value > 0.0 { "∞" } else { "-∞" }.to_string();
    }
    let last = digits.max(1) - 1;
    let scientific = format!("{value:.last$e}");
    let exponent: i32 = scientific
        .rsplit('e')
        .next()
        .and_then(|e| e.parse().ok())
        .unwrap_or(0);
    if (-3..digits as i32 + 2).contains(&exponent) {
        let decimals = (last as i32 - exponent).max(0) as usize;
        format!("{value:.decimals$}")
    } else {
        scientific
    }
}

/// Effective degrees of freedom, to three significant digits in every table
/// and caption (2.00, 14.0, 240), so a column reads to one precision;
/// values of 100 and more keep their whole digits.
pub(crate) fn format_df(value: f64) -> String {
    if value.abs() >= 100.0 && value.abs() < 1e15 {
        format!("{value:.0}")
    } else {
        format_significant(value, 3)
    }
}

/// A coefficient of the final fit in the reports: six significant digits
/// (`results.json` keeps every bit).
pub(crate) fn format_coefficient(value: f64) -> String {
    format_significant(value, 6)
}

/// Escapes text from data or the spec for Markdown (including table cells).
pub(crate) fn escape_markdown(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '\\' | '`' | '*' | '_' | '[' | ']' | '|' | '#' | '{' | '}' | '!' => {
                out.push('\\');
                out.push(c);
            }
            '\n' | '\r' => out.push(' '),
            _ => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_read_well() {
        assert_eq!(format_number(0.262_345), "0.2623");
        assert_eq!(format_number(12.3456), "12.35");
        assert_eq!(format_number(123456.0), "123456");
        assert_eq!(format_number(1.5e-7), "1.500e-7");
        assert_eq!(format_number(0.0), "0");
        // Effective df: three significant digits, whatever the family.
        assert_eq!(format_df(4.0), "4.00");
        assert_eq!(format_df(14.0), "14.0");
        assert_eq!(format_df(2.999_4), "3.00");
        assert_eq!(format_df(1.386_7), "1.39");
        assert_eq!(format_df(240.0), "240");
        assert_eq!(format_df(1234.4), "1234");
        assert_eq!(format_df(0.012_34), "0.0123");
        assert_eq!(format_df(f64::NAN), "n/a");
        // Coefficients: six significant digits.
        assert_eq!(format_coefficient(12.345_678_9), "12.3457");
        assert_eq!(format_coefficient(-0.001_234_567_89), "-0.00123457");
        assert_eq!(format_coefficient(-0.000_123_456_789), "-1.23457e-4");
        assert_eq!(format_coefficient(2.0), "2.00000");
        assert_eq!(format_coefficient(1_234_567.0), "1234567");
        assert_eq!(format_coefficient(123_456_789.0), "1.23457e8");
        assert_eq!(format_coefficient(3.2e-9), "3.20000e-9");
    }

    #[test]
    fn the_test_set_states_the_share_it_holds() {
        let mut results = sample::results(&[("linear", 2.0, 1.0, 1.1, 0.1)]);
        // 20 of 100 rows, as asked.
        assert_eq!(test_share(&results), "0.2 of the table");
        // Whole groups: 29 of 100 rows where 0.2 was asked for.
        results.rows.test = 29;
        results.data.group = Some("site".to_string());
        assert_eq!(
            test_share(&results),
            "0.29 of the table; holdout asked for 0.2, but whole groups go to one side"
        );
        // Rounding to whole rows: 0.199 of 301.
        results.data.group = None;
        results.rows = crate::results::RowCounts {
            total: 301,
            train: 241,
            test: 60,
            dropped: 0,
        };
        assert_eq!(
            test_share(&results),
            "0.199 of the table; holdout asked for 0.2, but a test set holds whole rows"
        );
    }

    #[test]
    fn tables_order_settings_by_effective_df_within_each_candidate() {
        // (id, effective df): a family listed by k runs from most to least
        // flexible; a tie keeps spec order; NaN goes last; candidates keep
        // the order they first appear in.
        let rows = [
            ("nearest-neighbors/k=1", 60.0),
            ("polynomial/degree=2", 3.0),
            ("nearest-neighbors/k=5", 12.0),
            ("nearest-neighbors/k=9", f64::NAN),
            ("nearest-neighbors/k=10", 6.0),
            ("polynomial/degree=1", 2.0),
            ("nearest-neighbors/k=11", 6.0),
            ("linear", 3.0),
        ];
        let order = table_order(&rows, |r| r.0, |r| r.1);
        let ids: Vec<&str> = order.iter().map(|&i| rows[i].0).collect();
        assert_eq!(
            ids,
            [
                "nearest-neighbors/k=10",
                "nearest-neighbors/k=11",
                "nearest-neighbors/k=5",
                "nearest-neighbors/k=1",
                "nearest-neighbors/k=9",
                "polynomial/degree=1",
                "polynomial/degree=2",
                "linear",
            ]
        );
        // Every position once.
        let mut sorted = order.clone();
        sorted.sort_unstable();
        assert_eq!(sorted, (0..rows.len()).collect::<Vec<_>>());
    }

    #[test]
    fn markdown_escaping_neutralises_markup() {
        assert_eq!(
            escape_markdown("<script>alert(1)</script> & \"q\" |x|"),
            "&lt;script&gt;alert(1)&lt;/script&gt; &amp; \"q\" \\|x\\|"
        );
    }
}
