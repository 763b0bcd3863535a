//! Figure: the ROC curve of the kept setting on the locked test set, from
//! `classification.test.roc` (binary targets): the true-positive rate
//! against the false-positive rate as the threshold on the positive class's
//! probability falls, with the chance diagonal and the AUC.

use plotters::prelude::*;

use super::axis::Axis;
use super::palette::MUTED;
use super::{
    draw_svg, family_styles, legend_and_mesh, polyline, style_of, Figure, FigureError, Section,
    Swatch,
};
use crate::report::format_number;
use crate::results::Results;
use plotters::coord::CoordTranslate;

pub(crate) const FILE: &str = "roc.svg";
const SIZE: (u32, u32) = (620, 560);

/// The figure, when the results have a binary class target and a test set.
pub(crate) fn render(results: &Results) -> Result<Option<Figure>, FigureError> {
    let Some(classification) = &results.classification else {
        return Ok(None);
    };
    let (Some(test), Some(positive)) = (&classification.test, &classification.positive) else {
        return Ok(None);
    };
    let Some(roc) = &test.roc else {
        return Ok(None);
    };
    let colour = style_of(&family_styles(&results.candidates), &results.chosen).colour;
    let axis = Axis::linear(0.0, 1.0, 0.02, 6);
    let auc = format_number(test.auc);
    let entries = vec![
        (
            Swatch::Line {
                colour,
                dashed: false,
                width: 3,
            },
            format!("{} (AUC {auc})", results.chosen),
        ),
        (
            Swatch::Line {
                colour: MUTED,
                dashed: true,
                width: 1,
            },
            "chance".to_string(),
        ),
    ];
    let svg = draw_svg("ROC curve", SIZE, |root| {
        let coords = legend_and_mesh(
            root,
            &entries,
            (&axis, &axis),
            6,
            ("false-positive rate", "true-positive rate"),
        )?;
        let at = |p: &(f64, f64)| coords.translate(p);
        polyline(
            root,
            &[at(&(0.0, 0.0)), at(&(1.0, 1.0))],
            MUTED.stroke_width(1),
            true,
        )?;
        let pixels: Vec<(i32, i32)> = roc.iter().map(|p| at(&(p[0], p[1]))).collect();
        polyline(root, &pixels, colour.stroke_width(3), false)
    })?;
    Ok(Some(Figure {
        file: FILE.to_string(),
        title: "ROC curve on the locked test set".into(),
        caption: format!(
            "The kept setting, {}, on the {} locked test rows: each point is one threshold on \
             the probability of \"{positive}\"; rows at or above it are called \"{positive}\". \
             Up is more of the actual \"{positive}\" rows caught, right is more false alarms. \
             The area under the curve is {auc} (0.5 is chance, 1 a perfect ranking). Which \
             threshold to act on is a policy decision this curve informs but does not make.",
            results.chosen, test.rows
        ),
        alt: format!(
            "ROC curve of {} on the locked test set, area under the curve {auc}.",
            results.chosen
        ),
        svg,
        section: Section::Evidence,
    }))
}
