//! The values every report template reads. One context serves the Markdown
//! and the HTML report, so both say the same things; each template only
//! decides how they look and escapes them for its format.

use minijinja::{context, Value};
use serde::Serialize;

use super::figures::{Figure, Section};
use crate::results::{CandidateResult, Results};

/// Everything a report needs besides the results and figures.
pub(crate) struct ReportInputs<'a> {
    /// Command that regenerates the outputs, run from the spec's folder.
    pub(crate) regenerate: &'a str,
    /// The spec as heldout read it (its meaning, written out as TOML).
    pub(crate) spec_text: &'a str,
    /// Why the numbers cannot be vouched for, when `heldout report
    /// --unverified` rendered results that do not match their receipt; the
    /// report then says so on its first line.
    pub(crate) unverified: Option<&'a str>,
}

/// A figure as the templates see it.
#[derive(Serialize)]
struct FigureView<'a> {
    number: usize,
    file: &'a str,
    title: &'a str,
    caption: &'a str,
    alt: &'a str,
    /// The SVG markup, whose texts plotters has already XML-escaped.
    svg: &'a str,
    /// Shown in the simulation section rather than with the other figures.
    simulation: bool,
}

/// A family and how many settings of it were compared.
#[derive(Serialize)]
struct FamilyView<'a> {
    name: &'a str,
    settings: usize,
}

/// One line of the provenance list.
#[derive(Serialize)]
struct Provenance {
    what: String,
    value: String,
}

/// A run of backticks longer than any in `text`, at least three, to fence it
/// as a Markdown code block.
fn code_fence(text: &str) -> String {
    let mut longest = 0;
    let mut run = 0;
    for c in text.chars() {
        run = if c == '`' { run + 1 } else { 0 };
        longest = longest.max(run);
    }
    "`".repeat((longest + 1).max(3))
}

/// The template context.
pub(crate) fn build(results: &Results, inputs: &ReportInputs<'_>, figures: &[Figure]) -> Value {
    let find =
        |id: &str| -> Option<&CandidateResult> { results.candidates.iter().find(|c| c.id == id) };
    let chosen = find(&results.chosen);
    let best = find(&results.choice.best);
    let mut families: Vec<FamilyView<'_>> = Vec::new();
    for c in &results.candidates {
        match families.iter_mut().find(|f| f.name == c.family) {
            Some(f) => f.settings += 1,
            None => families.push(FamilyView {
                name: &c.family,
                settings: 1,
            }),
        }
    }
    // Numbered in reading order: the evidence figures, then the simulation's.
    let mut figure_views: Vec<FigureView<'_>> = Vec::new();
    for section in [Section::Evidence, Section::Simulation] {
        for f in figures.iter().filter(|f| f.section == section) {
            figure_views.push(FigureView {
                number: figure_views.len() + 1,
                file: &f.file,
                title: &f.title,
                caption: &f.caption,
                alt: &f.alt,
                svg: &f.svg,
                simulation: section == Section::Simulation,
            });
        }
    }
    let (simulation_figures, figure_views): (Vec<FigureView<'_>>, Vec<FigureView<'_>>) =
        figure_views.into_iter().partition(|f| f.simulation);
    // The tables list each candidate's settings by effective df; settings
    // that could not be fitted somewhere (NaN sorts last) after the others.
    let candidates: Vec<&CandidateResult> = super::table_order(
        &results.candidates,
        |c| &c.id,
        |c| {
            if c.infeasible.is_empty() {
                c.effective_df
            } else {
                f64::NAN
            }
        },
    )
    .into_iter()
    .map(|i| &results.candidates[i])
    .collect();
    let (simulation_rows, choice_rows) = match &results.simulation {
        Some(sim) => {
            let order = super::table_order(&sim.simulation, |s| &s.id, |s| s.effective_df);
            let rows: Vec<_> = order.iter().map(|&i| &sim.simulation[i]).collect();
            // The choice table follows the same order.
            let choices = &sim.simulation_summary.cv.choices;
            let chosen: Vec<_> = rows
                .iter()
                .filter_map(|s| choices.iter().find(|c| c.id == s.id))
                .collect();
            (Value::from_serialize(&rows), Value::from_serialize(&chosen))
        }
        None => (Value::from(()), Value::from(())),
    };
    let provenance = vec![
        Provenance {
            what: "tool".into(),
            value: results.inputs.tool.clone(),
        },
        Provenance {
            what: "spec (meaning)".into(),
            value: results.inputs.spec.clone(),
        },
        Provenance {
            what: format!("data {}", results.data.table),
            value: results.data.digest.clone(),
        },
        Provenance {
            what: "test set and folds".into(),
            value: results.inputs.folds.clone(),
        },
        Provenance {
            what: "report templates".into(),
            value: results.inputs.templates.clone(),
        },
    ];
    let title = results
        .title
        .clone()
        .unwrap_or_else(|| results.experiment.clone());
    context! {
        r => Value::from_serialize(results),
        title,
        chosen => Value::from_serialize(chosen),
        best => Value::from_serialize(best),
        families => families.iter().map(|f| f.name).collect::<Vec<_>>(),
        family_counts => Value::from_serialize(&families),
        split_phrase => super::split_phrase(results),
        test_share => super::test_share(results),
        metric_label => super::metric_label(results.metric),
        rule_words => super::rule_words(results.rule),
        higher_is_better => results.metric.higher_is_better(),
        regenerate => inputs.regenerate,
        regenerate_fence => code_fence(inputs.regenerate),
        unverified => inputs.unverified,
        spec_text => inputs.spec_text,
        spec_fence => code_fence(inputs.spec_text),
        provenance => Value::from_serialize(&provenance),
        figures => Value::from_serialize(&figure_views),
        simulation_figures => Value::from_serialize(&simulation_figures),
        candidates => Value::from_serialize(&candidates),
        simulation_rows,
        choice_rows,
        cautions => {
            let mut cautions = super::CAUTIONS.to_vec();
            if results.classification.is_some() {
                cautions.extend(super::CLASS_CAUTIONS);
            }
            cautions
        },
    }
}

#[cfg(test)]
mod tests {
    use super::code_fence;

    #[test]
    fn fences_outrun_backticks_in_the_text() {
        assert_eq!(code_fence("title = \"plain\""), "```");
        assert_eq!(code_fence("title = \"````x\""), "`````");
    }
}
