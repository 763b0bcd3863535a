//! Figure (simulation specs only): expected test error split into squared
//! bias, variance and the noise floor, against flexibility. One panel per
//! family (or labelled candidate), in results order, each with its own axes:
//! every setting's expected test error, squared bias and variance against its
//! effective degrees of freedom (log scale beyond
//! [`super::axis::LOG_SPAN_DECADES`]), the noise floor σ² as a dashed line,
//! the oracle (the setting with the lowest expected error) ringed and, with
//! several families, each other family's lowest expected error flagged.
//! Everything is read from the results' `simulation` section.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use super::axis::Axis;
use super::palette::{self, INK, MUTED};
use super::{
    beyond, clip_rows, df_axis_words, draw_edge_labels, draw_numeric_mesh, draw_svg, label, legend,
    polyline, stem, text, EdgeLabel, Figure, FigureError, Marker, Section, Swatch, EDGE_ROOM,
    TEXT_SMALL, TEXT_STRONG,
};
use crate::report::{format_df, format_number};
use crate::results::Results;
use crate::simulate::summary::SimulatedSetting;

pub(crate) const FILE: &str = "bias-variance.svg";
const WIDTH: u32 = 880;
/// Height of one family's panel (title, plot, axis labels).
const PANEL: u32 = 340;
/// Room above the panels for the legend.
const LEGEND: u32 = 96;
/// Marker size of every series.
const MARKER: i32 = 5;

/// A quantity drawn for every setting: its words, colour and marker.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Series {
    pub(crate) words: &'static str,
    pub(crate) colour: RGBColor,
    pub(crate) marker: Marker,
    pub(crate) value: fn(&SimulatedSetting) -> f64,
}

fn expected(s: &SimulatedSetting) -> f64 {
    s.expected_mse
}

fn bias_sq(s: &SimulatedSetting) -> f64 {
    s.bias_sq
}

fn variance(s: &SimulatedSetting) -> f64 {
    s.variance
}

/// The series, in drawing order (the expected error last, on top).
pub(crate) const SERIES: [Series; 3] = [
    Series {
        words: "squared bias",
        colour: palette::BIAS,
        marker: Marker::Square,
        value: bias_sq,
    },
    Series {
        words: "variance",
        colour: palette::VARIANCE,
        marker: Marker::TriangleUp,
        value: variance,
    },
    Series {
        words: "expected test error",
        colour: INK,
        marker: Marker::Circle,
        value: expected,
    },
];

/// One family's settings, ordered by effective df (ties and NaN as
/// [`crate::report::by_effective_df`] orders them).
pub(crate) struct Panel<'a> {
    /// The family name, or the candidate's label.
    pub(crate) stem: &'a str,
    pub(crate) settings: Vec<&'a SimulatedSetting>,
}

/// The panels of the figure: one per stem, in order of first appearance.
pub(crate) fn panels(settings: &[SimulatedSetting]) -> Vec<Panel<'_>> {
    let mut panels: Vec<Panel<'_>> = Vec::new();
    for s in settings {
        let name = stem(&s.id);
        match panels.iter_mut().find(|p| p.stem == name) {
            Some(panel) => panel.settings.push(s),
            None => panels.push(Panel {
                stem: name,
                settings: vec![s],
            }),
        }
    }
    for panel in &mut panels {
        let order = crate::report::by_effective_df(&panel.settings, |s| s.effective_df);
        panel.settings = order.into_iter().map(|i| panel.settings[i]).collect();
    }
    panels
}

/// The lowest expected error of a panel (the first of equals, in df order).
fn family_best<'a>(panel: &Panel<'a>) -> Option<&'a SimulatedSetting> {
    let mut best: Option<&SimulatedSetting> = None;
    for &s in &panel.settings {
        if best.is_none_or(|b| s.expected_mse < b.expected_mse) {
            best = Some(s);
        }
    }
    best
}

/// How far a panel's value axis reaches: this many times the panel's lowest
/// expected error (docs/reports.md, "Figures").
pub(crate) const REACH_TIMES_BEST: f64 = 3.0;

/// A panel's value axis: zero, the noise floor and every series value up to
/// [`REACH_TIMES_BEST`] times the panel's lowest expected error (every value
/// when that is not a positive number), so one far-off setting does not
/// flatten the rest of the panel; values beyond sit on the top edge.
fn value_axis(panel: &Panel<'_>, noise: f64) -> Axis {
    let reach = family_best(panel)
        .map(|b| REACH_TIMES_BEST * b.expected_mse)
        .filter(|r| r.is_finite() && *r > 0.0)
        .unwrap_or(f64::INFINITY);
    let mut low: f64 = 0.0;
    let mut high = if noise.is_finite() { noise } else { 0.0 };
    let mut beyond_reach = false;
    for s in &panel.settings {
        for series in &SERIES {
            let v = (series.value)(s);
            if v.is_finite() && v <= reach {
                low = low.min(v);
                high = high.max(v);
            }
            beyond_reach |= v > reach;
        }
    }
    if beyond_reach {
        high += EDGE_ROOM * (high - low);
    }
    Axis::linear(low, high, 0.04, 6)
}

/// The figure, with its caption; `None` unless the results hold a simulation.
pub(crate) fn render(results: &Results) -> Result<Option<Figure>, FigureError> {
    let Some(sim) = &results.simulation else {
        return Ok(None);
    };
    let summary = &sim.simulation_summary;
    let noise = summary.noise;
    let panels = panels(&sim.simulation);
    if panels.is_empty() {
        return Ok(None);
    }
    let several = panels.len() > 1;

    let axes: Vec<(Axis, Axis)> = panels
        .iter()
        .map(|p| {
            let dfs: Vec<f64> = p.settings.iter().map(|s| s.effective_df).collect();
            (Axis::for_flexibility(&dfs), value_axis(p, noise))
        })
        .collect();
    let clipped = panels.iter().zip(&axes).any(|(p, (_, y_axis))| {
        p.settings.iter().any(|s| {
            SERIES
                .iter()
                .any(|series| beyond(y_axis, (series.value)(s)).is_some())
        })
    });

    // The legend reads expected error first, then its parts.
    let mut entries: Vec<(Swatch, String)> = [&SERIES[2], &SERIES[0], &SERIES[1]]
        .into_iter()
        .map(|s| {
            (
                Swatch::Marker {
                    marker: s.marker,
                    colour: s.colour,
                    filled: true,
                },
                s.words.to_string(),
            )
        })
        .collect();
    entries.push((
        Swatch::Line {
            colour: MUTED,
            dashed: true,
            width: 2,
        },
        if summary.classes.is_some() {
            format!("floor, mean p(1 − p) = {}", format_number(noise))
        } else {
            format!("noise floor σ² = {}", format_number(noise))
        },
    ));
    entries.push((Swatch::Ring, format!("oracle: {}", summary.oracle)));
    if several {
        entries.push((
            Swatch::Marker {
                marker: Marker::TriangleDown,
                colour: INK,
                filled: true,
            },
            "lowest expected error in its family".into(),
        ));
    }
    if clipped {
        entries.push((
            Swatch::Note,
            "beyond the value axis: on its top edge, with the expected error".into(),
        ));
    }

    // The note on clipped points takes a legend row of its own.
    let height = LEGEND + if clipped { 22 } else { 0 } + PANEL * panels.len() as u32;
    let svg = draw_svg("bias and variance", (WIDTH, height), |root| {
        let legend_bottom = legend(root, &entries, (80, 22), WIDTH as i32 - 24)?;
        let (_, body) = root.split_vertically(legend_bottom + 16);
        let areas = body.split_evenly((panels.len(), 1));
        for ((panel, (x_axis, y_axis)), area) in panels.iter().zip(&axes).zip(&areas) {
            label(
                area,
                panel.stem,
                (80, 4),
                &text(TEXT_STRONG, INK),
                HPos::Left,
                VPos::Top,
            )?;
            let (_, plot) = area.split_vertically(28);
            let mut chart = ChartBuilder::on(&plot)
                .margin_right(28)
                .margin_top(4)
                .margin_bottom(6)
                .x_label_area_size(50)
                .y_label_area_size(74)
                .build_cartesian_2d(x_axis.clone(), y_axis.clone())?;
            draw_numeric_mesh(
                &mut chart,
                (x_axis, y_axis),
                8,
                (df_axis_words(x_axis), "mean squared error"),
            )?;
            let at = |df: f64, value: f64| chart.backend_coord(&(df, value));

            if noise.is_finite() {
                let range = x_axis.range();
                let line = [at(range.start, noise), at(range.end, noise)];
                polyline(root, &line, MUTED.stroke_width(2), true)?;
                // At the left end, where the least flexible settings' points
                // usually lie well above or below the floor.
                label(
                    root,
                    &format!("σ² = {}", format_number(noise)),
                    (line[0].0 + 6, line[0].1 - 4),
                    &text(TEXT_SMALL, MUTED),
                    HPos::Left,
                    VPos::Bottom,
                )?;
            }
            let plot_x = x_axis.range();
            let plot_y = y_axis.range();
            let (left, top) = at(plot_x.start, plot_y.end);
            let (right, bottom) = at(plot_x.end, plot_y.start);
            let mut edge_labels: Vec<EdgeLabel> = Vec::new();
            for series in &SERIES {
                let values: Vec<(f64, f64)> = panel
                    .settings
                    .iter()
                    .map(|s| (s.effective_df, (series.value)(s)))
                    .filter(|(df, v)| df.is_finite() && v.is_finite())
                    .collect();
                let points: Vec<(i32, i32)> = values.iter().map(|&(df, v)| at(df, v)).collect();
                for run in clip_rows(&points, top, bottom) {
                    polyline(root, &run, series.colour.stroke_width(2), false)?;
                }
                for &(df, v) in &values {
                    let p = at(df, v.clamp(plot_y.start, plot_y.end));
                    series.marker.draw(root, p, MARKER, series.colour, true)?;
                }
            }
            // A setting beyond the axis shows its expected error, which is
            // never below its squared bias or variance by more than the
            // Monte-Carlo error; a part beyond it alone shows its own words.
            for s in &panel.settings {
                if !s.effective_df.is_finite() {
                    continue;
                }
                let expected_edge = beyond(y_axis, s.expected_mse);
                for series in &SERIES {
                    let v = (series.value)(s);
                    let Some(edge) = beyond(y_axis, v) else {
                        continue;
                    };
                    let words = if std::ptr::eq(series, &SERIES[2]) {
                        format_number(v)
                    } else if expected_edge == Some(edge) {
                        continue;
                    } else {
                        format!("{} {}", series.words, format_number(v))
                    };
                    edge_labels.push(EdgeLabel {
                        x: at(s.effective_df, v).0,
                        edge,
                        text: words,
                    });
                }
            }
            draw_edge_labels(root, &edge_labels, (left, right), (top, bottom))?;
            for s in &panel.settings {
                if !(s.effective_df.is_finite() && s.expected_mse.is_finite()) {
                    continue;
                }
                let p = at(s.effective_df, s.expected_mse);
                if s.id == summary.oracle {
                    root.draw(&Circle::new(p, 11, INK.stroke_width(2)))?;
                }
            }
            if let Some(best) = family_best(panel) {
                if several && best.id != summary.oracle && best.expected_mse.is_finite() {
                    let p = at(best.effective_df, best.expected_mse);
                    Marker::TriangleDown.draw(root, (p.0, p.1 - 16), 4, INK, true)?;
                }
            }
        }
        Ok(())
    })?;

    let oracle = sim.simulation.iter().find(|s| s.id == summary.oracle);
    let any_log = axes.iter().any(|(x, _)| x.is_log());
    Ok(Some(Figure {
        file: FILE.to_string(),
        title: "Squared bias, variance and noise against flexibility".into(),
        caption: caption(results, oracle, several, any_log, clipped),
        alt: format!(
            "Line charts, one per family ({}), of expected {}, squared bias and variance \
             against effective degrees of freedom, with the {} {}; the oracle, {}, is \
             ringed.",
            panels.iter().map(|p| p.stem).collect::<Vec<_>>().join(", "),
            if summary.classes.is_some() {
                "Brier score"
            } else {
                "test error"
            },
            if summary.classes.is_some() {
                "floor, mean p(1 − p), at"
            } else {
                "noise floor at σ² ="
            },
            format_number(noise),
            summary.oracle
        ),
        svg,
        section: Section::Simulation,
    }))
}

fn caption(
    results: &Results,
    oracle: Option<&SimulatedSetting>,
    several: bool,
    log: bool,
    clipped: bool,
) -> String {
    let Some(sim) = &results.simulation else {
        return String::new();
    };
    let summary = &sim.simulation_summary;
    let largest_gap = sim
        .simulation
        .iter()
        .map(|s| s.identity_gap.abs())
        .fold(0.0, f64::max);
    let panels = if several {
        ", one panel per family, each with its own axes"
    } else {
        ""
    };
    let scale = if log {
        format!(
            "; an effective-df axis is logarithmic where the settings span more than {} decades",
            super::axis::LOG_SPAN_DECADES
        )
    } else {
        String::new()
    };
    let oracle_words = match oracle {
        Some(o) => format!(
            "{} (effective df {}, expected error {})",
            o.id,
            format_df(o.effective_df),
            format_number(o.expected_mse)
        ),
        None => summary.oracle.clone(),
    };
    let flagged = if several {
        if summary.classes.is_some() {
            " A small ink triangle flags the lowest expected Brier score within each other family."
        } else {
            " A small ink triangle flags the lowest expected error within each other family."
        }
    } else {
        ""
    };
    let reach = if clipped {
        format!(
            " Each value axis reaches {REACH_TIMES_BEST} times the lowest expected error in its \
             panel; points beyond it sit on its top edge, the expected error labelled with its \
             value."
        )
    } else {
        String::new()
    };
    if let Some(classes) = &summary.classes {
        let rate = oracle
            .and_then(|o| o.expected_error_rate)
            .map_or_else(String::new, |r| {
                format!(", expected error rate {}", format_number(r))
            });
        return format!(
            "The expected Brier score of the predicted probability of label 1 (ink circles) \
             and its parts, squared bias (orange squares) and variance (teal triangles), of \
             every setting against its effective degrees of freedom{panels}{scale}. Each value \
             averages {replicates} simulated training sets of {n} rows, evaluated at {m} test \
             points. The dashed line is the floor, the mean of p(1 − p) = {noise}: the \
             expected Brier score of the true probability itself. The ringed point is the \
             oracle, {id}{rate}: the setting with the lowest expected error rate of its \
             predicted classes, against the Bayes error rate {bayes}.{flagged}{reach}",
            replicates = summary.replicates,
            n = summary.train_size,
            m = summary.test.count,
            noise = format_number(summary.noise),
            id = summary.oracle,
            bayes = format_number(classes.bayes_error),
        );
    }
    format!(
        "Expected test error (ink circles) and its parts, squared bias (orange squares) and \
         variance (teal triangles), of every setting against its effective degrees of \
         freedom{panels}{scale}. Each value averages {replicates} simulated training sets of \
         {n} rows, evaluated at {m} test points. The dashed line is the noise floor σ² = \
         {noise}: the expected error of the truth itself, which no setting can beat. Expected \
         error equals squared bias + variance + σ² up to the Monte-Carlo error of the test \
         noise (here at most {gap} apart). More flexible fits usually trade squared bias for \
         variance. The ringed point is the oracle, {oracle_words}: the setting with the lowest \
         expected error, which only a simulation, knowing the truth, can find; the table of \
         cross-validation's choices below shows how often it was found.{flagged}{reach}",
        replicates = summary.replicates,
        n = summary.train_size,
        m = summary.test.count,
        noise = format_number(summary.noise),
        gap = format_number(largest_gap),
    )
}
