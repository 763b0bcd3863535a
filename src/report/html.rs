//! The HTML report, rendered from `templates/report.html.j2` with
//! `templates/report.css` inlined: one self-contained file (inline CSS and
//! SVG, no scripts, no fonts or links to fetch; a content security policy
//! says so to the browser). minijinja escapes every value for HTML; only the
//! figures' SVG, whose texts plotters has already escaped, is inserted as is.

use minijinja::{AutoEscape, Environment};

use super::context::{self, ReportInputs};
use super::figures::Figure;
use crate::results::Results;

/// The page template; compiled in, and digested with the outputs.
pub(crate) const TEMPLATE: &str = include_str!("../../templates/report.html.j2");
/// The page's style sheet, inlined into the page.
pub(crate) const STYLE: &str = include_str!("../../templates/report.css");

/// Renders the HTML report.
pub(crate) fn render(
    results: &Results,
    inputs: &ReportInputs<'_>,
    figures: &[Figure],
) -> Result<String, minijinja::Error> {
    let mut env = Environment::new();
    env.set_trim_blocks(true);
    env.set_lstrip_blocks(true);
    env.set_auto_escape_callback(|name| {
        if name.ends_with(".html") {
            AutoEscape::Html
        } else {
            AutoEscape::None
        }
    });
    env.add_filter("num", |v: f64| super::format_number(v));
    env.add_filter("coef", |v: f64| super::format_coefficient(v));
    env.add_filter("df", |v: f64| super::format_df(v));
    env.add_template("report.html", TEMPLATE)?;
    env.add_template("report.css", STYLE)?;
    env.get_template("report.html")?
        .render(context::build(results, inputs, figures))
}
