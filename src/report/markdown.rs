//! The Markdown report, rendered from `templates/report.md.j2`. Every text
//! from the data or the spec goes through the `md` filter; figures are
//! linked as `figures/*.svg` beside the report.

use minijinja::Environment;

use super::context::{self, ReportInputs};
use super::figures::Figure;
use crate::results::Results;

/// The template text; it is compiled in, and digested with the outputs.
pub(crate) const TEMPLATE: &str = include_str!("../../templates/report.md.j2");

/// Renders the Markdown report.
pub(crate) fn render(
    results: &Results,
    inputs: &ReportInputs<'_>,
    figures: &[Figure],
) -> Result<String, minijinja::Error> {
    let mut env = Environment::new();
    env.set_trim_blocks(true);
    env.add_filter("num", |v: f64| super::format_number(v));
    env.add_filter("coef", |v: f64| super::format_coefficient(v));
    env.add_filter("df", |v: f64| super::format_df(v));
    env.add_filter("md", |v: String| super::escape_markdown(&v));
    env.add_template("report.md", TEMPLATE)?;
    env.get_template("report.md")?
        .render(context::build(results, inputs, figures))
}
