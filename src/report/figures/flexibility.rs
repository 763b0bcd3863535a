//! Figure: error against flexibility. Effective degrees of freedom on x (log
//! scale beyond [`super::axis::LOG_SPAN_DECADES`]), the training curve (dashed,
//! hollow markers) and the cross-validated curve (solid, filled markers,
//! ±1 SE whiskers) of every family, the kept setting ringed, the best
//! cross-validated setting flagged and, under the one-SE rule, the threshold.

use plotters::prelude::*;

use super::axis::Axis;
use super::palette::{INK, MUTED};
use super::{
    df_axis_words, draw_numeric_mesh, draw_svg, family_styles, legend, metric_axis_words, polyline,
    stem, Figure, FigureError, Marker, Section, Swatch,
};
use crate::report::format_number;
use crate::results::{CandidateResult, Results};
use crate::spec::Rule;

pub(crate) const FILE: &str = "error-by-flexibility.svg";
const SIZE: (u32, u32) = (880, 580);

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

    let x_words = df_axis_words(&x_axis);
    let y_words = metric_axis_words(results);
    let svg = draw_svg("error by flexibility", SIZE, |root| {
        let legend_bottom = legend(root, &entries, (80, 22), SIZE.0 as i32 - 24)?;
        let (_, body) = root.split_vertically(legend_bottom + 20);
        let mut chart = ChartBuilder::on(&body)
            .margin_right(28)
            .margin_top(6)
            .x_label_area_size(54)
            .y_label_area_size(74)
            .build_cartesian_2d(x_axis.clone(), y_axis.clone())?;
        draw_numeric_mesh(&mut chart, (&x_axis, &y_axis), 10, (x_words, &y_words))?;
        let at = |df: f64, score: f64| chart.backend_coord(&(df, score));

        if let Some(threshold) = results.choice.threshold {
            let range = x_axis.range();
            let line = [at(range.start, threshold), at(range.end, threshold)];
            for dash in super::dashes(&line, 3.0, 4.0) {
                root.draw(&PathElement::new(dash, MUTED.stroke_width(1)))?;
            }
        }

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
                    let top = at(c.effective_df, c.cv_score + c.cv_se);
                    let bottom = at(c.effective_df, c.cv_score - c.cv_se);
                    root.draw(&PathElement::new(vec![top, bottom], whisker))?;
                    for end in [top, bottom] {
                        root.draw(&PathElement::new(
                            vec![(end.0 - 4, end.1), (end.0 + 4, end.1)],
                            whisker,
                        ))?;
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
            polyline(root, &train, style.colour.stroke_width(2), true)?;
            polyline(root, &cv, style.colour.stroke_width(2), false)?;
            for &point in &train {
                style.marker.draw(root, point, 4, style.colour, false)?;
            }
            for &point in &cv {
                style.marker.draw(root, point, 5, style.colour, true)?;
            }
        }

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
        caption: caption(results, x_axis.is_log()),
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

/// The score axis: every training score, every cross-validated score ± SE,
/// and the threshold.
fn score_axis(results: &Results) -> Axis {
    let mut low = f64::INFINITY;
    let mut high = f64::NEG_INFINITY;
    let mut include = |v: f64| {
        if v.is_finite() {
            low = low.min(v);
            high = high.max(v);
        }
    };
    for c in &results.candidates {
        include(c.train_score);
        include(c.cv_score);
        if c.cv_se.is_finite() {
            include(c.cv_score - c.cv_se);
            include(c.cv_score + c.cv_se);
        }
    }
    if let Some(t) = results.choice.threshold {
        include(t);
    }
    if !low.is_finite() {
        (low, high) = (0.0, 1.0);
    }
    Axis::linear(low, high, 0.04, 7)
}

fn caption(results: &Results, log: bool) -> String {
    let metric = results.metric.name();
    let scale = if log { ", on a log scale" } else { "" };
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
         degrees of freedom{scale}. The ringed point is the kept setting, {}. {rule} Training \
         error keeps falling as flexibility grows; only the cross-validated curve can say when \
         to stop.",
        results.chosen
    )
}
