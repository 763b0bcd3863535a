//! Figure: error against flexibility. Effective degrees of freedom on x (log
//! scale beyond [`super::axis::LOG_SPAN_DECADES`]), the training curve (dashed,
//! hollow markers) and the cross-validated curve (solid, filled markers,
//! ±1 SE whiskers) of every family, the kept setting ringed, the best
//! cross-validated setting flagged and, under the one-SE rule, the threshold.
//!
//! The score axis reaches [`REACH_SE`] standard errors either side of the
//! best cross-validated score, not every score: one far-off setting would
//! otherwise squeeze the choice, which is decided within a standard error or
//! two, into a few pixels. Scores beyond it sit on its edge with their value
//! written beside them.

use plotters::prelude::*;

use super::axis::{Axis, LOG_SPAN_DECADES};
use super::palette::{INK, MUTED};
use super::{
    beyond, clip_rows, df_axis_words, draw_edge_labels, draw_svg, family_styles, legend_and_mesh,
    metric_axis_words, polyline, stem, EdgeLabel, Figure, FigureError, Marker, Section, Swatch,
    EDGE_ROOM,
};
use crate::report::format_number;
use crate::results::{CandidateResult, Results};
use crate::spec::Rule;
use plotters::coord::CoordTranslate;

pub(crate) const FILE: &str = "error-by-flexibility.svg";
const SIZE: (u32, u32) = (880, 580);

/// How far the score axis reaches from the best cross-validated score, in
/// standard errors of that score (docs/reports.md, "Figures").
pub(crate) const REACH_SE: f64 = 8.0;

/// The figure, with its caption.
pub(crate) fn render(results: &Results) -> Result<Figure, FigureError> {
    let styles = family_styles(&results.candidates);
    let dfs: Vec<f64> = results.candidates.iter().map(|c| c.effective_df).collect();
    let x_axis = Axis::for_flexibility(&dfs);
    let y_axis = score_axis(results);
    let better = if results.metric.higher_is_better() {
        "highest"
    } else {
        "lowest"
    };

    let mut entries: Vec<(Swatch, String)> = styles
        .iter()
        .map(|s| {
            (
                Swatch::Marker {
                    marker: s.marker,
                    colour: s.colour,
                    filled: true,
                },
                s.stem.clone(),
            )
        })
        .collect();
    entries.push((
        Swatch::Line {
            colour: INK,
            dashed: false,
            width: 2,
        },
        "cross-validated ±1 SE".into(),
    ));
    entries.push((
        Swatch::Line {
            colour: INK,
            dashed: true,
            width: 2,
        },
        "training".into(),
    ));
    entries.push((Swatch::Ring, format!("kept: {}", results.chosen)));
    if results.choice.best != results.chosen {
        entries.push((
            Swatch::Marker {
                marker: Marker::TriangleDown,
                colour: INK,
                filled: true,
            },
            format!("{better} CV: {}", results.choice.best),
        ));
    }
    if results.choice.threshold.is_some() {
        entries.push((
            Swatch::Line {
                colour: MUTED,
                dashed: true,
                width: 1,
            },
            "one-SE threshold".into(),
        ));
    }
    let clipped = results
        .candidates
        .iter()
        .any(|c| beyond(&y_axis, c.cv_score).is_some() || beyond(&y_axis, c.train_score).is_some());
    if clipped {
        entries.push((
            Swatch::Note,
            "beyond the score axis: on its edge, with its value (training in parentheses)".into(),
        ));
    }

    let x_words = df_axis_words(&x_axis);
    let y_words = metric_axis_words(results);
    let svg = draw_svg("error by flexibility", SIZE, |root| {
        let coords = legend_and_mesh(root, &entries, (&x_axis, &y_axis), 10, (x_words, &y_words))?;
        let at = |df: f64, score: f64| coords.translate(&(df, score));

        if let Some(threshold) = results.choice.threshold {
            let range = x_axis.range();
            let line = [at(range.start, threshold), at(range.end, threshold)];
            for dash in super::dashes(&line, 3.0, 4.0) {
                root.draw(&PathElement::new(dash, MUTED.stroke_width(1)))?;
            }
        }

        let plot_x = x_axis.range();
        let plot_y = y_axis.range();
        let (left, top) = at(plot_x.start, plot_y.end);
        let (right, bottom) = at(plot_x.end, plot_y.start);
        // A value drawn on the axis: itself, or the edge it lies beyond.
        let on_axis = |v: f64| v.clamp(plot_y.start, plot_y.end);
        let mut edge_labels: Vec<EdgeLabel> = Vec::new();

        for style in &styles {
            let mut members: Vec<&CandidateResult> = results
                .candidates
                .iter()
                .filter(|c| stem(&c.id) == style.stem)
                .collect();
            members.sort_by(|a, b| a.effective_df.total_cmp(&b.effective_df));
            let whisker = style.colour.stroke_width(1);
            for c in &members {
                if c.cv_se.is_finite() && c.cv_se > 0.0 {
                    let (high, low) = (c.cv_score + c.cv_se, c.cv_score - c.cv_se);
                    let top_end = at(c.effective_df, on_axis(high));
                    let bottom_end = at(c.effective_df, on_axis(low));
                    if top_end != bottom_end {
                        root.draw(&PathElement::new(vec![top_end, bottom_end], whisker))?;
                    }
                    // Caps only where the whisker really ends.
                    for (end, value) in [(top_end, high), (bottom_end, low)] {
                        if beyond(&y_axis, value).is_none() {
                            root.draw(&PathElement::new(
                                vec![(end.0 - 4, end.1), (end.0 + 4, end.1)],
                                whisker,
                            ))?;
                        }
                    }
                }
            }
            let train: Vec<(i32, i32)> = members
                .iter()
                .map(|c| at(c.effective_df, c.train_score))
                .collect();
            let cv: Vec<(i32, i32)> = members
                .iter()
                .map(|c| at(c.effective_df, c.cv_score))
                .collect();
            for run in clip_rows(&train, top, bottom) {
                polyline(root, &run, style.colour.stroke_width(2), true)?;
            }
            for run in clip_rows(&cv, top, bottom) {
                polyline(root, &run, style.colour.stroke_width(2), false)?;
            }
            for c in &members {
                let (train_edge, cv_edge) =
                    (beyond(&y_axis, c.train_score), beyond(&y_axis, c.cv_score));
                let train_at = at(c.effective_df, on_axis(c.train_score));
                let cv_at = at(c.effective_df, on_axis(c.cv_score));
                style.marker.draw(root, train_at, 4, style.colour, false)?;
                style.marker.draw(root, cv_at, 5, style.colour, true)?;
                // The cross-validated score is labelled; the training score
                // too (in parentheses) unless it hides under the other.
                if let Some(edge) = cv_edge {
                    edge_labels.push(EdgeLabel {
                        x: cv_at.0,
                        edge,
                        text: format_number(c.cv_score),
                    });
                }
                if let Some(edge) = train_edge.filter(|&e| Some(e) != cv_edge) {
                    edge_labels.push(EdgeLabel {
                        x: train_at.0,
                        edge,
                        text: format!("({})", format_number(c.train_score)),
                    });
                }
            }
        }
        draw_edge_labels(root, &edge_labels, (left, right), (top, bottom))?;

        for c in &results.candidates {
            if c.id == results.chosen {
                let p = at(c.effective_df, c.cv_score);
                root.draw(&Circle::new(p, 11, INK.stroke_width(2)))?;
            }
            if c.id == results.choice.best && c.id != results.chosen {
                let p = at(c.effective_df, c.cv_score);
                Marker::TriangleDown.draw(root, (p.0, p.1 - 16), 4, INK, true)?;
            }
        }
        Ok(())
    })?;

    Ok(Figure {
        file: FILE.to_string(),
        title: "Error against flexibility".into(),
        caption: caption(results, x_axis.is_log(), &y_axis, clipped),
        alt: format!(
            "Line chart of training and cross-validated {} against effective degrees of \
             freedom for {} famil{}; the kept setting, {}, is ringed.",
            results.metric.name(),
            styles.len(),
            if styles.len() == 1 { "y" } else { "ies" },
            results.chosen
        ),
        svg,
        section: Section::Evidence,
    })
}

/// Every score the figure draws: training and cross-validated scores, the
/// ends of the ±1 SE whiskers, and the threshold.
fn drawn_scores(results: &Results) -> Vec<f64> {
    let mut values = Vec::new();
    for c in &results.candidates {
        values.extend([c.train_score, c.cv_score]);
        if c.cv_se.is_finite() {
            values.extend([c.cv_score - c.cv_se, c.cv_score + c.cv_se]);
        }
    }
    values.extend(results.choice.threshold);
    values.retain(|v| v.is_finite());
    values
}

/// The score axis. It reaches the scores within [`REACH_SE`] standard errors
/// (of the best setting) of the best cross-validated score, and always the
/// best score and the threshold; every score when that standard error is
/// not a positive number, with [`EDGE_ROOM`] more on a side that scores lie
/// beyond (for their labels). It is logarithmic when the scores it reaches
/// are all positive and span more than [`LOG_SPAN_DECADES`] decades, linear
/// otherwise.
pub(crate) fn score_axis(results: &Results) -> Axis {
    let (best, se) = (results.choice.best_cv_score, results.choice.best_cv_se);
    let reach = if best.is_finite() && se.is_finite() && se > 0.0 {
        (best - REACH_SE * se)..=(best + REACH_SE * se)
    } else {
        f64::NEG_INFINITY..=f64::INFINITY
    };
    let scores = drawn_scores(results);
    let mut low = f64::INFINITY;
    let mut high = f64::NEG_INFINITY;
    let reached = scores
        .iter()
        .copied()
        .filter(|v| reach.contains(v))
        .chain([best].into_iter().filter(|v| v.is_finite()))
        .chain(results.choice.threshold.filter(|t| t.is_finite()));
    for v in reached {
        low = low.min(v);
        high = high.max(v);
    }
    if !low.is_finite() {
        (low, high) = (0.0, 1.0);
    }
    let room = |side: bool| if side { EDGE_ROOM } else { 0.0 };
    let above = room(scores.iter().any(|&v| v > high));
    let below = room(scores.iter().any(|&v| v < low));
    if low > 0.0 && libm::log10(high / low) > LOG_SPAN_DECADES {
        let decades = libm::log10(high / low);
        Axis::log10(
            low / libm::pow(10.0, below * decades),
            high * libm::pow(10.0, above * decades),
            0.04,
        )
    } else {
        let span = high - low;
        Axis::linear(low - below * span, high + above * span, 0.04, 7)
    }
}

fn caption(results: &Results, log: bool, y_axis: &Axis, clipped: bool) -> String {
    let metric = results.metric.name();
    let scale = if log { ", on a log scale" } else { "" };
    let (best, se) = (results.choice.best_cv_score, results.choice.best_cv_se);
    let reach = if best.is_finite() && se.is_finite() && se > 0.0 {
        format!(
            " The {metric} axis reaches the scores within {REACH_SE} standard errors of the best \
             cross-validated score ({} ± {REACH_SE} × {}), so the choice stays legible",
            format_number(best),
            format_number(se)
        )
    } else {
        format!(" The {metric} axis reaches every score")
    };
    let y_log = if y_axis.is_log() {
        format!("; it is logarithmic, as those scores span more than {LOG_SPAN_DECADES} decades")
    } else {
        String::new()
    };
    let edge = if clipped {
        " Scores beyond it sit on its edge with their value beside them, training scores in \
         parentheses (a training score beyond the same edge as its cross-validated score hides \
         under it, unlabelled)."
    } else {
        ""
    };
    let rule = match results.rule {
        Rule::OneSe => format!(
            "The rule is one-SE: the least flexible setting whose cross-validated {metric} is \
             within one standard error of the best ({}, {} ± {}); the dotted line marks that \
             threshold, {}.",
            results.choice.best,
            format_number(results.choice.best_cv_score),
            format_number(results.choice.best_cv_se),
            results
                .choice
                .threshold
                .map(format_number)
                .unwrap_or_default()
        ),
        Rule::Lowest => format!(
            "The rule is {}: the setting with the best cross-validated {metric} is kept.",
            if results.metric.higher_is_better() {
                "highest"
            } else {
                "lowest"
            }
        ),
    };
    format!(
        "Training {metric} (dashed, hollow markers) and cross-validated {metric} (solid, \
         filled markers, whiskers ±1 standard error) of every setting against its effective \
         degrees of freedom{scale}.{reach}{y_log}.{edge} The ringed point is the kept setting, \
         {}. {rule} Training error keeps falling as flexibility grows; only the cross-validated \
         curve can say when to stop.",
        results.chosen
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::figures::Edge;
    use crate::report::sample;

    /// Polynomials near 1.0 (SE 0.05) and one ridge setting far off.
    fn with_far_off(far: f64) -> Results {
        sample::results(&[
            ("polynomial/degree=1", 2.0, 1.05, 1.10, 0.05),
            ("polynomial/degree=2", 3.0, 0.95, 1.00, 0.05),
            ("polynomial/degree=3", 4.0, 0.90, 1.02, 0.05),
            ("ridge/penalty=1000", 1.2, far - 0.5, far, 0.8),
        ])
    }

    #[test]
    fn the_score_axis_leaves_out_a_far_off_setting() {
        let results = with_far_off(15.0);
        let axis = score_axis(&results);
        let range = axis.range();
        assert!(!axis.is_log());
        // Every polynomial score and whisker, and the threshold, are reached;
        // the far-off setting is not, and there is room for its label.
        for v in [0.90, 1.05, 1.00 - 0.05, 1.10 + 0.05, 1.05] {
            assert!(range.contains(&v), "{v} outside {range:?}");
        }
        assert_eq!(beyond(&axis, 15.0), Some(Edge::Top));
        assert!(range.end < 1.0 + REACH_SE * 0.05 + 0.3, "{range:?}");
        // Without it the axis is the one every score makes.
        let near = sample::results(&[
            ("polynomial/degree=1", 2.0, 1.05, 1.10, 0.05),
            ("polynomial/degree=2", 3.0, 0.95, 1.00, 0.05),
        ]);
        let plain = score_axis(&near);
        assert!(plain.range().start < 0.95 && plain.range().end > 1.15);
        assert!(plain.range().end < 1.2, "no room without clipped points");
    }

    #[test]
    fn the_score_axis_reaches_every_score_without_a_standard_error() {
        let mut results = with_far_off(15.0);
        results.choice.best_cv_se = 0.0;
        assert!(score_axis(&results).range().contains(&15.0));
        results.choice.best_cv_se = f64::NAN;
        assert!(score_axis(&results).range().contains(&15.0));
    }

    #[test]
    fn the_score_axis_goes_log_when_the_scores_it_reaches_span_decades() {
        // SE 0.5 around 1.0 reaches −3..5, where a training score of 0.01
        // lies: 2.7 decades, so the axis is logarithmic.
        let results = sample::results(&[
            ("nearest-neighbors/k=1", 40.0, 0.01, 1.6, 0.5),
            ("nearest-neighbors/k=5", 8.0, 0.6, 1.0, 0.5),
        ]);
        let axis = score_axis(&results);
        assert!(axis.is_log());
        assert!(axis.range().contains(&0.01) && axis.range().contains(&2.1));
        let caption = caption(&results, false, &axis, false);
        assert!(caption.contains("it is logarithmic"), "{caption}");
        // A zero score (one neighbour, no ties) keeps it linear.
        let results = sample::results(&[
            ("nearest-neighbors/k=1", 40.0, 0.0, 1.6, 0.5),
            ("nearest-neighbors/k=5", 8.0, 0.6, 1.0, 0.5),
        ]);
        assert!(!score_axis(&results).is_log());
    }

    #[test]
    fn a_far_off_setting_is_drawn_on_the_edge_with_its_value() {
        let figure = render(&with_far_off(15.0)).unwrap();
        // The label reads the cross-validated score and, in parentheses, no
        // training score: it hides under the other on the same edge.
        assert!(figure.svg.contains(">\n15.00\n</text>"), "{}", figure.svg);
        assert!(!figure.svg.contains("(14.50)"));
        assert!(figure.svg.contains("beyond the score axis"));
        assert!(figure
            .caption
            .contains("Scores beyond it sit on its edge with their value beside them"));
        assert!(figure.caption.contains("within 8 standard errors"));
        // Byte for byte the same on a second drawing.
        assert_eq!(render(&with_far_off(15.0)).unwrap().svg, figure.svg);
    }
}
