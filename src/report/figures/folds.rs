//! Figure: the fold-by-fold scores of the leading settings (the best
//! [`LEADERS`] by cross-validated score, and the kept setting if it is not
//! among them). One dot per validation fold, one row of dots per repeat, and
//! the mean ± 1 SE as an ink bar, so a reviewer sees how much the folds
//! disagree and how far apart the leaders really are.

use plotters::prelude::*;

use super::axis::Axis;
use super::palette::INK;
use super::{
    draw_svg, family_styles, legend, metric_axis_words, style_mesh, style_of, text, text_width,
    Figure, FigureError, Section, Swatch, TEXT_BODY,
};
use crate::results::{CandidateResult, Results};

pub(crate) const FILE: &str = "fold-scores.svg";
/// How many of the best settings the figure shows.
pub(crate) const LEADERS: usize = 5;
const WIDTH: u32 = 880;
const ROW: u32 = 58;

/// The settings shown, best first: the leaders, then the kept setting if it
/// is not one of them.
pub(crate) fn leaders(results: &Results) -> Vec<&CandidateResult> {
    let metric = results.metric;
    let mut order: Vec<&CandidateResult> = results.candidates.iter().collect();
    // Stable: ties keep spec order.
    order.sort_by(|a, b| {
        if metric.better(a.cv_score, b.cv_score) {
            std::cmp::Ordering::Less
        } else if metric.better(b.cv_score, a.cv_score) {
            std::cmp::Ordering::Greater
        } else {
            std::cmp::Ordering::Equal
        }
    });
    let mut shown: Vec<&CandidateResult> = order.into_iter().take(LEADERS).collect();
    if !shown.iter().any(|c| c.id == results.chosen) {
        if let Some(kept) = results.candidates.iter().find(|c| c.id == results.chosen) {
            shown.push(kept);
        }
    }
    shown
}

/// The figure, with its caption.
pub(crate) fn render(results: &Results) -> Result<Figure, FigureError> {
    let styles = family_styles(&results.candidates);
    let shown = leaders(results);
    let rows = shown.len();
    let repeats = results.split.repeats.max(1);
    let names: Vec<String> = shown
        .iter()
        .map(|c| {
            if c.id == results.chosen {
                format!("{} (kept)", c.id)
            } else {
                c.id.clone()
            }
        })
        .collect();

    let mut low = f64::INFINITY;
    let mut high = f64::NEG_INFINITY;
    for c in &shown {
        for &v in c
            .fold_scores
            .iter()
            .chain([c.cv_score - c.cv_se, c.cv_score + c.cv_se].iter())
        {
            if v.is_finite() {
                low = low.min(v);
                high = high.max(v);
            }
        }
    }
    if !low.is_finite() {
        (low, high) = (0.0, 1.0);
    }
    let x_axis = Axis::linear(low, high, 0.03, 8);
    let y_axis = Axis::categories(rows);
    let name_width = names
        .iter()
        .map(|n| text_width(n, TEXT_BODY))
        .max()
        .unwrap_or(0)
        .clamp(60, 320);

    let mut entries: Vec<(Swatch, String)> = Vec::new();
    let mut seen: Vec<&str> = Vec::new();
    for c in &shown {
        let style = style_of(&styles, &c.id);
        if !seen.contains(&style.stem.as_str()) {
            seen.push(&style.stem);
            entries.push((
                Swatch::Marker {
                    marker: super::Marker::Circle,
                    colour: style.colour,
                    filled: true,
                },
                format!("one fold, {}", style.stem),
            ));
        }
    }
    entries.push((Swatch::Interval { colour: INK }, "mean ±1 SE".into()));
    if repeats > 1 {
        entries.push((
            Swatch::Note,
            format!("rows of dots in a band: repeats 1 to {repeats}, top to bottom"),
        ));
    }

    let height = 150 + ROW * rows as u32;
    let x_words = metric_axis_words(results);
    let svg = draw_svg("fold scores", (WIDTH, height), |root| {
        let legend_bottom = legend(root, &entries, (24, 22), WIDTH as i32 - 24)?;
        let (_, body) = root.split_vertically(legend_bottom + 20);
        let mut chart = ChartBuilder::on(&body)
            .margin_right(28)
            .margin_top(4)
            .x_label_area_size(54)
            .y_label_area_size(name_width + 22)
            .build_cartesian_2d(x_axis.clone(), y_axis.clone())?;
        let x_label = |v: &f64| x_axis.label(*v);
        // Row 0 (the best) is drawn at the top.
        let y_label = |v: &f64| {
            let row = rows as i64 - 1 - libm::round(*v) as i64;
            usize::try_from(row)
                .ok()
                .and_then(|r| names.get(r).cloned())
                .unwrap_or_default()
        };
        let mut mesh = chart.configure_mesh();
        style_mesh(&mut mesh);
        mesh.x_labels(12)
            .y_labels(rows.max(1))
            .x_label_formatter(&x_label)
            .y_label_formatter(&y_label)
            .y_label_style(text(TEXT_BODY, INK))
            .x_desc(x_words.as_str())
            .disable_y_mesh()
            .draw()?;

        for (row, c) in shown.iter().enumerate() {
            let centre = (rows - 1 - row) as f64;
            let colour = style_of(&styles, &c.id).colour;
            let per_repeat = results.split.folds.max(1);
            for (f, &score) in c.fold_scores.iter().enumerate() {
                if !score.is_finite() {
                    continue;
                }
                let repeat = f / per_repeat;
                // Repeats on sub-rows, spread over 0.5 of the row's height.
                let offset = if repeats > 1 {
                    0.25 - 0.5 * repeat as f64 / (repeats - 1) as f64
                } else {
                    0.0
                };
                let p = chart.backend_coord(&(score, centre + offset));
                root.draw(&Circle::new(p, 4, colour.mix(0.3).filled()))?;
                root.draw(&Circle::new(p, 4, colour.stroke_width(1)))?;
            }
            if c.cv_score.is_finite() {
                let half = if c.cv_se.is_finite() { c.cv_se } else { 0.0 };
                let left = chart.backend_coord(&(c.cv_score - half, centre));
                let right = chart.backend_coord(&(c.cv_score + half, centre));
                let mean = chart.backend_coord(&(c.cv_score, centre));
                let bar = INK.stroke_width(3);
                root.draw(&PathElement::new(vec![left, right], bar))?;
                for end in [left, right] {
                    root.draw(&PathElement::new(
                        vec![(end.0, end.1 - 6), (end.0, end.1 + 6)],
                        INK.stroke_width(2),
                    ))?;
                }
                root.draw(&Rectangle::new(
                    [(mean.0 - 2, mean.1 - 11), (mean.0 + 2, mean.1 + 11)],
                    INK.filled(),
                ))?;
            }
        }
        Ok(())
    })?;

    let kept_note = if shown.len() > LEADERS {
        " (best at the top), and at the bottom the kept setting, which is not among them"
    } else {
        ", best at the top"
    };
    let repeats_note = if repeats > 1 {
        format!(" The {repeats} rows of dots in each band are the {repeats} repeats.")
    } else {
        String::new()
    };
    Ok(Figure {
        file: FILE.to_string(),
        title: "Fold by fold: the leading settings".into(),
        caption: format!(
            "Cross-validated {metric} on each validation fold for the {n} settings with the best \
             mean score{kept_note}. Each dot is one fold.{repeats_note} The ink \
             bar spans the mean ± 1 standard error; the tick marks the mean. Settings whose bars \
             overlap are hard to tell apart on this evidence. All settings were scored on the \
             same folds.",
            metric = results.metric.name(),
            n = shown.len().min(LEADERS),
        ),
        alt: format!(
            "Dot plot of fold-by-fold cross-validated {} for {}.",
            results.metric.name(),
            shown
                .iter()
                .map(|c| c.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
        svg,
        section: Section::Evidence,
    })
}
