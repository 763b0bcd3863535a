//! The Markdown report, rendered from `templates/report.md.j2`.

use minijinja::{context, Environment, Value};

use crate::results::Results;

/// The template text; it is compiled in, and digested with the outputs.
pub const TEMPLATE: &str = include_str!("../../templates/report.md.j2");

/// Everything a report needs besides the results themselves.
pub struct ReportInputs<'a> {
    /// Command that regenerates the outputs, run from the spec's folder.
    pub regenerate: &'a str,
}

/// Renders the Markdown report.
pub fn render(results: &Results, inputs: &ReportInputs<'_>) -> Result<String, minijinja::Error> {
    let mut env = Environment::new();
    env.set_trim_blocks(true);
    env.add_filter("num", |v: f64| super::format_number(v));
    env.add_filter("exact", |v: f64| super::format_exact(v));
    env.add_filter("md", |v: String| super::escape_markdown(&v));
    env.add_template("report.md", TEMPLATE)?;

    let chosen = results
        .candidates
        .iter()
        .find(|c| c.id == results.chosen)
        .expect("the chosen id is one of the candidates");
    let mut families: Vec<&str> = Vec::new();
    for c in &results.candidates {
        if !families.contains(&c.family.as_str()) {
            families.push(&c.family);
        }
    }
    let title = results
        .title
        .clone()
        .unwrap_or_else(|| results.experiment.clone());
    env.get_template("report.md")?.render(context! {
        r => Value::from_serialize(results),
        title,
        chosen => Value::from_serialize(chosen),
        families,
        split_phrase => super::split_phrase(results),
        metric_label => super::metric_label(results.metric),
        higher_is_better => results.metric.higher_is_better(),
        regenerate => inputs.regenerate,
        cautions => super::CAUTIONS.to_vec(),
    })
}
