//! Figure: the kept fit beside the data, from `final.predictions`. With one
//! feature: the target against it, training rows as grey rings, locked test
//! rows as ink dots, and the kept setting refitted on all training rows as a
//! line through its predictions at the training rows, in feature order. With
//! several features: observed against predicted, with the diagonal of
//! perfect prediction.

use plotters::prelude::*;

use super::axis::Axis;
use super::palette::{CONTEXT, INK, MUTED};
use super::{
    draw_svg, family_styles, legend_and_mesh, polyline, style_of, Figure, FigureError, Marker,
    Section, Swatch,
};
use crate::report::format_number;
use crate::results::{PredictionSet, Results};
use plotters::coord::CoordTranslate;

pub(crate) const FILE: &str = "kept-fit.svg";
const SIZE: (u32, u32) = (880, 520);

/// Smallest and largest finite value of some columns.
fn extent<'a>(columns: impl IntoIterator<Item = &'a [f64]>) -> (f64, f64) {
    let mut low = f64::INFINITY;
    let mut high = f64::NEG_INFINITY;
    for column in columns {
        for &v in column {
            if v.is_finite() {
                low = low.min(v);
                high = high.max(v);
            }
        }
    }
    if low.is_finite() {
        (low, high)
    } else {
        (0.0, 1.0)
    }
}

/// "240 training rows", or "1000 of 3200 training rows" when thinned.
fn count(set: &PredictionSet, what: &str) -> String {
    if set.observed.len() < set.rows {
        format!("{} of {} {what}", set.observed.len(), set.rows)
    } else {
        format!("{} {what}", set.rows)
    }
}

/// The figure, with its caption.
pub(crate) fn render(results: &Results) -> Result<Figure, FigureError> {
    let predictions = &results.final_fit.predictions;
    let styles = family_styles(&results.candidates);
    let colour = style_of(&styles, &results.chosen).colour;
    let train = &predictions.train;
    let test = predictions.test.as_ref();
    let target = &results.data.target;
    let one_feature = predictions.feature.as_deref().zip(train.x.as_deref());

    // (x, y) of the rows, by set.
    let points = |set: &PredictionSet| -> Vec<(f64, f64)> {
        match (&set.x, one_feature) {
            (Some(x), Some(_)) => x
                .iter()
                .copied()
                .zip(set.observed.iter().copied())
                .collect(),
            _ => set
                .predicted
                .iter()
                .copied()
                .zip(set.observed.iter().copied())
                .collect(),
        }
    };
    // The prediction intervals at the test rows, as (x, lower, upper) in
    // feature order, when the spec asked for them and they are bounded.
    let band: Vec<(f64, f64, f64)> = match (&results.intervals, one_feature) {
        (Some(iv), Some(_)) if iv.bounded => iv
            .test
            .as_ref()
            .and_then(|t| t.x.as_ref().map(|x| (x, t)))
            .map(|(x, t)| {
                let mut band: Vec<(f64, f64, f64)> = x
                    .iter()
                    .zip(t.lower.iter().zip(&t.upper))
                    .map(|(&x, (&low, &high))| (x, low, high))
                    .filter(|p| p.0.is_finite() && p.1.is_finite() && p.2.is_finite())
                    .collect();
                band.sort_by(|a, b| a.0.total_cmp(&b.0));
                band
            })
            .unwrap_or_default(),
        _ => Vec::new(),
    };
    let band_low: Vec<f64> = band.iter().map(|p| p.1).collect();
    let band_high: Vec<f64> = band.iter().map(|p| p.2).collect();
    let train_points = points(train);
    let test_points = test.map(points).unwrap_or_default();

    let (x_axis, y_axis) = match one_feature {
        Some((_, x)) => {
            let mut xs: Vec<&[f64]> = vec![x];
            let mut ys: Vec<&[f64]> = vec![&train.observed, &train.predicted];
            if let Some(t) = test {
                xs.extend(t.x.as_deref());
                ys.push(&t.observed);
            }
            ys.push(&band_low);
            ys.push(&band_high);
            let (x_low, x_high) = extent(xs);
            let (y_low, y_high) = extent(ys);
            (
                Axis::linear(x_low, x_high, 0.03, 8),
                Axis::linear(y_low, y_high, 0.04, 7),
            )
        }
        None => {
            let mut all: Vec<&[f64]> = vec![&train.observed, &train.predicted];
            if let Some(t) = test {
                all.push(&t.observed);
                all.push(&t.predicted);
            }
            let (low, high) = extent(all);
            (
                Axis::linear(low, high, 0.03, 8),
                Axis::linear(low, high, 0.04, 7),
            )
        }
    };

    let mut entries = vec![(
        Swatch::Marker {
            marker: Marker::Circle,
            colour: CONTEXT,
            filled: false,
        },
        count(train, "training rows"),
    )];
    if let Some(t) = test {
        entries.push((
            Swatch::Marker {
                marker: Marker::Circle,
                colour: INK,
                filled: true,
            },
            count(t, "locked test rows"),
        ));
    }
    entries.push(match one_feature {
        Some(_) => (
            Swatch::Line {
                colour,
                dashed: false,
                width: 3,
            },
            format!("kept fit: {}", results.chosen),
        ),
        None => (
            Swatch::Line {
                colour: MUTED,
                dashed: true,
                width: 1,
            },
            "observed = predicted".into(),
        ),
    });

    if !band.is_empty() {
        if let Some(iv) = &results.intervals {
            entries.push((
                Swatch::Line {
                    colour,
                    dashed: true,
                    width: 1,
                },
                format!(
                    "{} interval at the test rows, level {}",
                    if iv.method == "cv+" {
                        "CV+"
                    } else {
                        &iv.method
                    },
                    iv.level
                ),
            ));
        }
    }

    let (x_words, y_words) = match one_feature {
        Some((feature, _)) => (feature.to_string(), target.clone()),
        None => (
            format!("{target} predicted by {}", results.chosen),
            format!("{target} observed"),
        ),
    };
    let svg = draw_svg("kept fit", SIZE, |root| {
        let coords = legend_and_mesh(root, &entries, (&x_axis, &y_axis), 10, (&x_words, &y_words))?;
        let at = |p: &(f64, f64)| coords.translate(p);

        if one_feature.is_none() {
            let range = x_axis.range();
            let diagonal = [at(&(range.start, range.start)), at(&(range.end, range.end))];
            polyline(root, &diagonal, MUTED.stroke_width(1), true)?;
        }
        for p in train_points
            .iter()
            .filter(|p| p.0.is_finite() && p.1.is_finite())
        {
            root.draw(&Circle::new(at(p), 3, CONTEXT.stroke_width(1)))?;
        }
        if let (Some(_), Some(x)) = (one_feature, &train.x) {
            let mut curve: Vec<(f64, f64)> = x
                .iter()
                .copied()
                .zip(train.predicted.iter().copied())
                .filter(|p| p.0.is_finite() && p.1.is_finite())
                .collect();
            curve.sort_by(|a, b| a.0.total_cmp(&b.0));
            let pixels: Vec<(i32, i32)> = curve.iter().map(at).collect();
            polyline(root, &pixels, colour.stroke_width(3), false)?;
        }
        for side in [&band_low, &band_high] {
            if side.len() > 1 {
                let pixels: Vec<(i32, i32)> = band
                    .iter()
                    .zip(side.iter())
                    .map(|(p, &y)| at(&(p.0, y)))
                    .collect();
                polyline(root, &pixels, colour.stroke_width(1), true)?;
            }
        }
        for p in test_points
            .iter()
            .filter(|p| p.0.is_finite() && p.1.is_finite())
        {
            root.draw(&Circle::new(at(p), 3, INK.filled()))?;
        }
        Ok(())
    })?;

    let test_words = match (test, results.test_score) {
        (Some(t), Some(score)) => format!(
            " The {} locked test rows played no part in choosing or fitting; the kept fit's \
             test {} on them is {}.",
            t.rows,
            results.metric.name(),
            format_number(score)
        ),
        _ => " There is no locked test set (holdout = 0).".to_string(),
    };
    let band_words =
        match &results.intervals {
            Some(iv) if !band.is_empty() => {
                format!(
            " The dashed lines join the ends of the {} prediction intervals (level {}) at the \
             locked test rows.",
            if iv.method == "cv+" { "CV+" } else { &iv.method },
            iv.level
        )
            }
            _ => String::new(),
        };
    let caption = match one_feature {
        Some((feature, _)) => format!(
            "{target} against {feature}: training rows (grey rings), locked test rows (ink \
             dots), and the kept setting, {}, refitted on all training rows (line).{test_words}\
             {band_words}",
            results.chosen
        ),
        None => format!(
            "Observed {target} against the prediction of the kept setting, {}, refitted on all \
             training rows: training rows (grey rings), locked test rows (ink dots). Points on \
             the dashed diagonal are predicted exactly.{test_words}",
            results.chosen
        ),
    };
    Ok(Figure {
        file: FILE.to_string(),
        title: "The kept fit and the data".into(),
        caption,
        alt: match one_feature {
            Some((feature, _)) => format!(
                "Scatter plot of {target} against {feature} with the fitted curve of {}.",
                results.chosen
            ),
            None => format!(
                "Scatter plot of observed against predicted {target} for {}.",
                results.chosen
            ),
        },
        svg,
        section: Section::Evidence,
    })
}
