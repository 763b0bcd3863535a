//! Figure: calibration of the kept setting on the locked test set, from
//! `classification.test.calibration`: in bins of predicted probability, the
//! observed share of events against the mean predicted probability, each
//! bin labelled with its number of rows, beside the diagonal of perfect
//! calibration.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use super::axis::Axis;
use super::palette::{INK, MUTED};
use super::{
    draw_svg, family_styles, label, legend_and_mesh, polyline, style_of, text, Figure, FigureError,
    Marker, Section, Swatch, TEXT_SMALL,
};
use crate::results::Results;
use plotters::coord::CoordTranslate;

pub(crate) const FILE: &str = "calibration.svg";
const SIZE: (u32, u32) = (620, 560);

/// The figure, when the results have a class target and a test set.
pub(crate) fn render(results: &Results) -> Result<Option<Figure>, FigureError> {
    let Some(test) = results
        .classification
        .as_ref()
        .and_then(|c| c.test.as_ref())
    else {
        return Ok(None);
    };
    let colour = style_of(&family_styles(&results.candidates), &results.chosen).colour;
    let axis = Axis::linear(0.0, 1.0, 0.02, 6);
    let what = &test.calibration_of;
    let entries = vec![
        (
            Swatch::Marker {
                marker: Marker::Circle,
                colour,
                filled: true,
            },
            "bin: mean predicted, observed share (rows)".to_string(),
        ),
        (
            Swatch::Line {
                colour: MUTED,
                dashed: true,
                width: 1,
            },
            "perfect calibration".to_string(),
        ),
    ];
    let svg = draw_svg("calibration", SIZE, |root| {
        let x_words = format!("predicted {what}");
        let coords = legend_and_mesh(
            root,
            &entries,
            (&axis, &axis),
            6,
            (&x_words, "observed share"),
        )?;
        let at = |p: &(f64, f64)| coords.translate(p);
        polyline(
            root,
            &[at(&(0.0, 0.0)), at(&(1.0, 1.0))],
            MUTED.stroke_width(1),
            true,
        )?;
        let points: Vec<(i32, i32)> = test
            .calibration
            .iter()
            .map(|b| at(&(b.mean_predicted, b.observed)))
            .collect();
        polyline(root, &points, colour.stroke_width(2), false)?;
        let style = text(TEXT_SMALL, INK);
        for (bin, &point) in test.calibration.iter().zip(&points) {
            root.draw(&Circle::new(point, 5, colour.filled()))?;
            label(
                root,
                &bin.rows.to_string(),
                (point.0 + 8, point.1 - 6),
                &style,
                HPos::Left,
                VPos::Bottom,
            )?;
        }
        Ok(())
    })?;
    Ok(Some(Figure {
        file: FILE.to_string(),
        title: "Calibration on the locked test set".into(),
        caption: format!(
            "The kept setting, {}, on the {} locked test rows, in {} equal bins of the predicted \
             {what}: each point is one non-empty bin at its rows' mean predicted probability \
             and the share of them where it came true, labelled with the bin's rows. Points on \
             the dashed diagonal are perfectly calibrated; bins of few rows scatter by chance.",
            results.chosen,
            test.rows,
            crate::results::CALIBRATION_BINS
        ),
        alt: format!(
            "Calibration plot of {} on the locked test set: observed share against mean \
             predicted probability in bins.",
            results.chosen
        ),
        svg,
        section: Section::Evidence,
    }))
}
