//! The report's figures, drawn as SVG with plotters' SVG backend and
//! deterministic to the byte: coordinates are whole pixels, ticks and labels
//! come from [`axis`], text widths from plotters' built-in estimate (no system
//! fonts are read), and every text is XML-escaped by the backend.
//!
//! Figures are pure: `&Results` → [`Figure`]. The report's one output writer
//! stores them as `figures/<file>`; the HTML report inlines the same bytes.

pub(crate) mod axis;
pub(crate) mod calibration;
pub(crate) mod decomposition;
mod fit;
mod flexibility;
mod folds;
pub(crate) mod palette;
pub(crate) mod roc;

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::results::{CandidateResult, Results};
use palette::{INK, MUTED, PAPER};

/// One figure of the report.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Figure {
    /// File name inside `figures/`.
    pub(crate) file: String,
    /// A short heading.
    pub(crate) title: String,
    /// What the figure shows and how to read it (plain text).
    pub(crate) caption: String,
    /// Text alternative for readers who cannot see it.
    pub(crate) alt: String,
    /// The SVG document.
    pub(crate) svg: String,
    /// Where the reports show it.
    pub(crate) section: Section,
}

/// The part of a report a figure belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Section {
    /// The figures every report has, in its Figures section.
    Evidence,
    /// A simulation spec's figures, in its Simulation section.
    Simulation,
}

/// A figure could not be drawn.
#[derive(Debug, thiserror::Error)]
#[error("cannot draw the figure {figure}: {message}")]
pub(crate) struct FigureError {
    pub(crate) figure: &'static str,
    pub(crate) message: String,
}

/// Every figure of a report, in reading order.
pub(crate) fn render_all(results: &Results) -> Result<Vec<Figure>, FigureError> {
    let mut figures = vec![flexibility::render(results)?, folds::render(results)?];
    if results.classification.is_some() {
        // A class target: the kept setting's ROC curve and calibration on
        // the locked test set instead of the fit beside the data.
        figures.extend(roc::render(results)?);
        figures.extend(calibration::render(results)?);
    } else {
        figures.push(fit::render(results)?);
    }
    // Simulation specs add squared bias, variance and noise against
    // flexibility, shown in the reports' simulation section.
    figures.extend(decomposition::render(results)?);
    Ok(figures)
}

/// Font stack of every text in a figure. Widths are estimated by plotters
/// from the character count, never measured from an installed font.
pub(crate) const FONT: &str = "Cantarell, Ubuntu, Segoe UI, Noto Sans, DejaVu Sans, sans-serif";

/// Text sizes as plotters takes them: the SVG gets size ÷ 1.24 px, and these
/// give whole or half pixels (12, 12.5, 14) without rounding noise.
pub(crate) const TEXT_SMALL: f64 = 14.88;
pub(crate) const TEXT_BODY: f64 = 15.5;
pub(crate) const TEXT_STRONG: f64 = 17.36;

/// The drawing area of a whole figure.
pub(crate) type Root<'a> = DrawingArea<SVGBackend<'a>, Shift>;
/// What a drawing step returns.
pub(crate) type Drawn = Result<(), DrawingAreaErrorKind<std::io::Error>>;

/// Draws a `width` × `height` figure with `draw` and returns the SVG text.
pub(crate) fn draw_svg(
    figure: &'static str,
    size: (u32, u32),
    draw: impl FnOnce(&Root<'_>) -> Drawn,
) -> Result<String, FigureError> {
    let fail = |error: &dyn std::fmt::Display| FigureError {
        figure,
        message: error.to_string(),
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        root.fill(&PAPER).map_err(|e| fail(&e))?;
        draw(&root).map_err(|e| fail(&e))?;
        root.present().map_err(|e| fail(&e))?;
    }
    Ok(svg)
}

/// A text style of the figures.
pub(crate) fn text<'a>(size: f64, colour: RGBColor) -> TextStyle<'a> {
    TextStyle {
        font: (FONT, size).into_font(),
        color: colour.to_backend_color(),
        pos: Pos::new(HPos::Left, VPos::Top),
    }
}

/// Draws `label` at pixel `at`, anchored as given.
pub(crate) fn label(
    root: &Root<'_>,
    label: &str,
    at: (i32, i32),
    style: &TextStyle<'static>,
    h: HPos,
    v: VPos,
) -> Drawn {
    root.draw(&Text::new(
        label.to_string(),
        at,
        style.clone().pos(Pos::new(h, v)),
    ))
}

/// Estimated width in pixels of `text` at plotters size `size`, matching
/// plotters' own estimate for SVG (0.7 em per character).
pub(crate) fn text_width(text: &str, size: f64) -> i32 {
    let em = size / 1.24 / 1.24;
    libm::round(em * 0.7 * text.chars().count() as f64) as i32
}

/// Marker shapes; each of ten families gets its own, so colour is never the
/// only cue.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Marker {
    Circle,
    Square,
    Diamond,
    TriangleUp,
    TriangleDown,
    Plus,
    Cross,
    Star,
    Hourglass,
    TriangleRight,
}

const MARKERS: [Marker; 10] = [
    Marker::Circle,
    Marker::Square,
    Marker::Diamond,
    Marker::TriangleUp,
    Marker::TriangleDown,
    Marker::Plus,
    Marker::Cross,
    Marker::Star,
    Marker::Hourglass,
    Marker::TriangleRight,
];

impl Marker {
    /// The corners of the shape around `(x, y)` for size `r` (whole pixels).
    fn outline(self, (x, y): (i32, i32), r: i32) -> Vec<(i32, i32)> {
        match self {
            Marker::Circle => Vec::new(),
            Marker::Square => {
                let s = (r * 7 + 4) / 8;
                vec![
                    (x - s, y - s),
                    (x + s, y - s),
                    (x + s, y + s),
                    (x - s, y + s),
                ]
            }
            Marker::Diamond => {
                let d = (r * 5 + 2) / 4;
                vec![(x, y - d), (x + d, y), (x, y + d), (x - d, y)]
            }
            Marker::TriangleUp => {
                let d = r + 1;
                vec![
                    (x, y - d),
                    (x + d, y + (d * 3) / 4),
                    (x - d, y + (d * 3) / 4),
                ]
            }
            Marker::TriangleDown => {
                let d = r + 1;
                vec![
                    (x, y + d),
                    (x + d, y - (d * 3) / 4),
                    (x - d, y - (d * 3) / 4),
                ]
            }
            Marker::TriangleRight => {
                let d = r + 1;
                vec![
                    (x + d, y),
                    (x - (d * 3) / 4, y + d),
                    (x - (d * 3) / 4, y - d),
                ]
            }
            Marker::Plus => {
                let (a, w) = (r + 1, (r + 1) / 3);
                vec![
                    (x - w, y - a),
                    (x + w, y - a),
                    (x + w, y - w),
                    (x + a, y - w),
                    (x + a, y + w),
                    (x + w, y + w),
                    (x + w, y + a),
                    (x - w, y + a),
                    (x - w, y + w),
                    (x - a, y + w),
                    (x - a, y - w),
                    (x - w, y - w),
                ]
            }
            Marker::Cross => {
                // Diagonal arms, `t` pixels from the centre line each way.
                let (a, t) = (r, (r + 1) / 3);
                vec![
                    (x - a, y - a + t),
                    (x - a + t, y - a),
                    (x, y - t),
                    (x + a - t, y - a),
                    (x + a, y - a + t),
                    (x + t, y),
                    (x + a, y + a - t),
                    (x + a - t, y + a),
                    (x, y + t),
                    (x - a + t, y + a),
                    (x - a, y + a - t),
                    (x - t, y),
                ]
            }
            Marker::Star => {
                // Five points, one straight up; the inner corners at 0.45 of
                // the outer radius. Angles come from libm, not the platform.
                let outer = f64::from(r + 2);
                (0..10)
                    .map(|k| {
                        let radius = if k % 2 == 0 { outer } else { outer * 0.45 };
                        let angle = std::f64::consts::PI * f64::from(k) / 5.0;
                        (
                            x + libm::round(radius * libm::sin(angle)) as i32,
                            y - libm::round(radius * libm::cos(angle)) as i32,
                        )
                    })
                    .collect()
            }
            Marker::Hourglass => {
                // Two triangles meeting at a narrow waist.
                let d = r;
                vec![
                    (x - d, y - d),
                    (x + d, y - d),
                    (x + 1, y),
                    (x + d, y + d),
                    (x - d, y + d),
                    (x - 1, y),
                ]
            }
        }
    }

    /// Draws the marker at pixel `at`: filled with `colour`, or hollow (paper
    /// inside, a `colour` outline).
    pub(crate) fn draw(
        self,
        root: &Root<'_>,
        at: (i32, i32),
        r: i32,
        colour: RGBColor,
        filled: bool,
    ) -> Drawn {
        let inside = if filled { colour } else { PAPER };
        if self == Marker::Circle {
            root.draw(&Circle::new(at, r, inside.filled()))?;
            return root.draw(&Circle::new(
                at,
                r,
                colour.stroke_width(if filled { 1 } else { 2 }),
            ));
        }
        let corners = self.outline(at, r);
        root.draw(&Polygon::new(corners.clone(), inside.filled()))?;
        let mut closed = corners;
        closed.push(closed[0]);
        root.draw(&PathElement::new(
            closed,
            colour.stroke_width(if filled { 1 } else { 2 }),
        ))
    }
}

/// Splits a polyline into dashes of `on` pixels separated by `off` pixels.
pub(crate) fn dashes(points: &[(i32, i32)], on: f64, off: f64) -> Vec<Vec<(i32, i32)>> {
    let mut out = Vec::new();
    let mut current: Vec<(i32, i32)> = Vec::new();
    // Distance left in the current dash (drawing) or gap (not drawing).
    let mut drawing = true;
    let mut left = on;
    let round = |v: f64| libm::round(v) as i32;
    for pair in points.windows(2) {
        let (x0, y0) = (f64::from(pair[0].0), f64::from(pair[0].1));
        let (x1, y1) = (f64::from(pair[1].0), f64::from(pair[1].1));
        let length = ((x1 - x0) * (x1 - x0) + (y1 - y0) * (y1 - y0)).sqrt();
        let mut at = 0.0;
        if drawing && current.is_empty() {
            current.push(pair[0]);
        }
        while length - at > left {
            at += left;
            let point = (
                round(x0 + (x1 - x0) * at / length),
                round(y0 + (y1 - y0) * at / length),
            );
            if drawing {
                current.push(point);
                out.push(std::mem::take(&mut current));
                left = off;
            } else {
                current.push(point);
                left = on;
            }
            drawing = !drawing;
        }
        left -= length - at;
        if drawing {
            current.push(pair[1]);
        }
    }
    if current.len() > 1 {
        out.push(current);
    }
    out
}

/// Draws a polyline, dashed or solid.
pub(crate) fn polyline(
    root: &Root<'_>,
    points: &[(i32, i32)],
    style: ShapeStyle,
    dashed: bool,
) -> Drawn {
    if points.len() < 2 {
        return Ok(());
    }
    if dashed {
        for dash in dashes(points, 7.0, 5.0) {
            root.draw(&PathElement::new(dash, style))?;
        }
        Ok(())
    } else {
        root.draw(&PathElement::new(points.to_vec(), style))
    }
}

/// Splits a polyline (pixels) into the runs that lie between the rows `top`
/// and `bottom` (inclusive), cutting each segment where it crosses them, so a
/// curve stops at the edge of a value axis that does not reach all its points.
pub(crate) fn clip_rows(points: &[(i32, i32)], top: i32, bottom: i32) -> Vec<Vec<(i32, i32)>> {
    let mut runs: Vec<Vec<(i32, i32)>> = Vec::new();
    let mut current: Vec<(i32, i32)> = Vec::new();
    let mut end_run = |current: &mut Vec<(i32, i32)>| {
        if current.len() > 1 {
            runs.push(std::mem::take(current));
        } else {
            current.clear();
        }
    };
    for pair in points.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let (x0, y0) = (f64::from(a.0), f64::from(a.1));
        let (x1, y1) = (f64::from(b.0), f64::from(b.1));
        // The part of the segment inside, as parameters t0 ≤ t1 along a → b.
        let (t0, t1) = if y1 == y0 {
            if a.1 < top || a.1 > bottom {
                end_run(&mut current);
                continue;
            }
            (0.0, 1.0)
        } else {
            let (at_top, at_bottom) = (
                (f64::from(top) - y0) / (y1 - y0),
                (f64::from(bottom) - y0) / (y1 - y0),
            );
            (
                at_top.min(at_bottom).max(0.0),
                at_top.max(at_bottom).min(1.0),
            )
        };
        if t0 > t1 {
            end_run(&mut current);
            continue;
        }
        let point = |t: f64| {
            if t <= 0.0 {
                a
            } else if t >= 1.0 {
                b
            } else {
                (
                    libm::round(x0 + t * (x1 - x0)) as i32,
                    libm::round(y0 + t * (y1 - y0)) as i32,
                )
            }
        };
        let (from, to) = (point(t0), point(t1));
        if current.last() != Some(&from) {
            end_run(&mut current);
            current.push(from);
        }
        current.push(to);
        if t1 < 1.0 {
            end_run(&mut current);
        }
    }
    end_run(&mut current);
    runs
}

/// Room added to a value axis on a side where points lie beyond it, as a
/// share of the span it reaches, so the labels written inside that edge
/// have a band free of the points the axis does reach.
pub(crate) const EDGE_ROOM: f64 = 0.12;

/// The edge of a value axis that a value lies beyond.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Edge {
    Top,
    Bottom,
}

/// Which edge of `axis` (a value axis, drawn upwards) `value` lies beyond;
/// `None` when the axis reaches it (or it is not a number).
pub(crate) fn beyond(axis: &axis::Axis, value: f64) -> Option<Edge> {
    let range = axis.range();
    if value > range.end {
        Some(Edge::Top)
    } else if value < range.start {
        Some(Edge::Bottom)
    } else {
        None
    }
}

/// The words beside a point drawn on the edge of its value axis.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct EdgeLabel {
    /// The point's pixel column.
    pub(crate) x: i32,
    pub(crate) edge: Edge,
    pub(crate) text: String,
}

/// Where each edge label goes, in the order given: its first pixel column and
/// its row counted inwards from the edge. A label is centred on its point
/// and kept within `columns` (the plot's first and last pixel column); one
/// that would run into the label before it on its edge moves right while it
/// still spans its point, and otherwise one row further in.
pub(crate) fn edge_label_places(labels: &[EdgeLabel], columns: (i32, i32)) -> Vec<(i32, usize)> {
    let mut places = vec![(0, 0); labels.len()];
    for edge in [Edge::Top, Edge::Bottom] {
        let mut on_edge: Vec<usize> = (0..labels.len())
            .filter(|&i| labels[i].edge == edge)
            .collect();
        on_edge.sort_by_key(|&i| labels[i].x);
        // Where each row's last label ends.
        let mut row_ends: Vec<i32> = Vec::new();
        for i in on_edge {
            let item = &labels[i];
            let width = text_width(&item.text, TEXT_SMALL);
            let centred = (item.x - width / 2).min(columns.1 - width).max(columns.0);
            let (row, start) = row_ends
                .iter()
                .enumerate()
                .find_map(|(row, &end)| {
                    let start = centred.max(end + 8);
                    (start <= item.x && start + width <= columns.1).then_some((row, start))
                })
                .unwrap_or((row_ends.len(), centred));
            if row == row_ends.len() {
                row_ends.push(start + width);
            } else {
                row_ends[row] = start + width;
            }
            places[i] = (start, row);
        }
    }
    places
}

/// Writes the edge labels where [`edge_label_places`] puts them, just inside
/// the plot (`rows`: its first and last pixel row), each on a patch of paper
/// so the curves running to the edge do not cross the words.
pub(crate) fn draw_edge_labels(
    root: &Root<'_>,
    labels: &[EdgeLabel],
    columns: (i32, i32),
    rows: (i32, i32),
) -> Drawn {
    let style = text(TEXT_SMALL, INK);
    for (item, (start, row)) in labels.iter().zip(edge_label_places(labels, columns)) {
        let width = text_width(&item.text, TEXT_SMALL);
        let inward = 16 + 16 * row as i32;
        let y = match item.edge {
            Edge::Top => rows.0 + inward,
            Edge::Bottom => rows.1 - inward,
        };
        root.draw(&Rectangle::new(
            [(start - 3, y - 8), (start + width + 3, y + 8)],
            PAPER.filled(),
        ))?;
        label(
            root,
            &item.text,
            (start, y),
            &style,
            HPos::Left,
            VPos::Center,
        )?;
    }
    Ok(())
}

/// How one family is drawn in every figure.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct FamilyStyle {
    /// The first part of the family's ids (family name or label).
    pub(crate) stem: String,
    pub(crate) colour: RGBColor,
    pub(crate) marker: Marker,
}

/// The stem of a candidate id: `polynomial` of `polynomial/degree=3`.
pub(crate) fn stem(id: &str) -> &str {
    id.split('/').next().unwrap_or(id)
}

/// Styles of the families, in the order they first appear in the results.
pub(crate) fn family_styles(candidates: &[CandidateResult]) -> Vec<FamilyStyle> {
    let mut styles: Vec<FamilyStyle> = Vec::new();
    for c in candidates {
        let name = stem(&c.id);
        if !styles.iter().any(|s| s.stem == name) {
            let index = styles.len();
            styles.push(FamilyStyle {
                stem: name.to_string(),
                colour: palette::series(index),
                marker: MARKERS[index % MARKERS.len()],
            });
        }
    }
    styles
}

/// The style of the family `id` belongs to.
pub(crate) fn style_of<'s>(styles: &'s [FamilyStyle], id: &str) -> &'s FamilyStyle {
    let name = stem(id);
    styles.iter().find(|s| s.stem == name).unwrap_or(&styles[0])
}

/// What a legend entry shows before its words.
#[derive(Debug, Clone)]
pub(crate) enum Swatch {
    Marker {
        marker: Marker,
        colour: RGBColor,
        filled: bool,
    },
    Line {
        colour: RGBColor,
        dashed: bool,
        width: u32,
    },
    /// A horizontal bar with end caps (an interval).
    Interval { colour: RGBColor },
    /// A ring (the kept setting).
    Ring,
    /// Words alone, on a row of their own.
    Note,
}

/// Lays out legend entries left to right from `(x, y)`, wrapping before
/// `right`; returns the y of the last row.
pub(crate) fn legend(
    root: &Root<'_>,
    entries: &[(Swatch, String)],
    (x0, y0): (i32, i32),
    right: i32,
) -> Result<i32, DrawingAreaErrorKind<std::io::Error>> {
    let style = text(TEXT_SMALL, INK);
    let (mut x, mut y) = (x0, y0);
    for (swatch, words) in entries {
        let indent = if matches!(swatch, Swatch::Note) {
            0
        } else {
            30
        };
        let width = indent + text_width(words, TEXT_SMALL) + 22;
        let own_row = matches!(swatch, Swatch::Note);
        if x > x0 && (own_row || x + width > right) {
            x = x0;
            y += 22;
        }
        match *swatch {
            Swatch::Marker {
                marker,
                colour,
                filled,
            } => marker.draw(root, (x + 11, y), 5, colour, filled)?,
            Swatch::Line {
                colour,
                dashed,
                width,
            } => polyline(
                root,
                &[(x, y), (x + 24, y)],
                colour.stroke_width(width),
                dashed,
            )?,
            Swatch::Interval { colour } => {
                let stroke = colour.stroke_width(2);
                root.draw(&PathElement::new(vec![(x + 2, y), (x + 22, y)], stroke))?;
                root.draw(&PathElement::new(
                    vec![(x + 2, y - 4), (x + 2, y + 4)],
                    stroke,
                ))?;
                root.draw(&PathElement::new(
                    vec![(x + 22, y - 4), (x + 22, y + 4)],
                    stroke,
                ))?;
            }
            Swatch::Ring => {
                root.draw(&Circle::new((x + 11, y), 8, INK.stroke_width(2)))?;
            }
            Swatch::Note => {}
        }
        label(
            root,
            words,
            (x + indent, y),
            &style,
            HPos::Left,
            VPos::Center,
        )?;
        x += width;
    }
    Ok(y)
}

/// The words of a metric on an axis.
pub(crate) fn metric_axis_words(results: &Results) -> String {
    let words = crate::report::metric_label(results.metric);
    if results.metric.higher_is_better() {
        format!("{words}, higher is better")
    } else {
        format!("{words}, lower is better")
    }
}

/// The words under an effective-df axis.
pub(crate) fn df_axis_words(x_axis: &axis::Axis) -> &'static str {
    if x_axis.is_log() {
        "effective degrees of freedom (log scale)"
    } else {
        "effective degrees of freedom"
    }
}

/// Draws the mesh of a chart whose two axes are numbers: house style, 12
/// x ticks and `y_ticks` y ticks labelled by the axes' own formatting, and
/// the words of each axis.
/// Draws `entries` as the legend along the top of `root` and, below it, the
/// numeric mesh of `axes` (`y_ticks` labels on the value axis, `words` as
/// the axis titles). Returns the mapping from data to pixels that a figure
/// then draws its marks with, on `root`.
pub(crate) fn legend_and_mesh(
    root: &Root<'_>,
    entries: &[(Swatch, String)],
    (x_axis, y_axis): (&axis::Axis, &axis::Axis),
    y_ticks: usize,
    words: (&str, &str),
) -> Result<Cartesian2d<axis::Axis, axis::Axis>, DrawingAreaErrorKind<std::io::Error>> {
    let width = root.dim_in_pixel().0 as i32;
    let legend_bottom = legend(root, entries, (80, 22), width - 24)?;
    let (_, body) = root.split_vertically(legend_bottom + 20);
    let mut chart = ChartBuilder::on(&body)
        .margin_right(28)
        .margin_top(6)
        .x_label_area_size(54)
        .y_label_area_size(74)
        .build_cartesian_2d(x_axis.clone(), y_axis.clone())?;
    draw_numeric_mesh(&mut chart, (x_axis, y_axis), y_ticks, words)?;
    Ok(chart.as_coord_spec().clone())
}

pub(crate) fn draw_numeric_mesh(
    chart: &mut ChartContext<'_, SVGBackend<'_>, Cartesian2d<axis::Axis, axis::Axis>>,
    (x_axis, y_axis): (&axis::Axis, &axis::Axis),
    y_ticks: usize,
    (x_words, y_words): (&str, &str),
) -> Drawn {
    let x_label = |v: &f64| x_axis.label(*v);
    let y_label = |v: &f64| y_axis.label(*v);
    let mut mesh = chart.configure_mesh();
    style_mesh(&mut mesh);
    mesh.x_labels(12)
        .y_labels(y_ticks)
        .x_label_formatter(&x_label)
        .y_label_formatter(&y_label)
        .x_desc(x_words)
        .y_desc(y_words)
        .draw()
}

/// A mesh (grid, axes, tick labels, axis words) in the house style.
pub(crate) fn style_mesh<DB: DrawingBackend>(
    mesh: &mut plotters::chart::MeshStyle<'_, '_, axis::Axis, axis::Axis, DB>,
) {
    mesh.bold_line_style(palette::GRID.stroke_width(1))
        .light_line_style(TRANSPARENT)
        .axis_style(MUTED.stroke_width(1))
        .label_style(text(TEXT_SMALL, MUTED))
        .axis_desc_style(text(TEXT_BODY, INK))
        .set_all_tick_mark_size(4);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dashes_alternate_along_a_straight_line() {
        // 0..30 px with 7 on, 5 off: dashes at 0-7, 12-19, 24-30.
        let got = dashes(&[(0, 0), (30, 0)], 7.0, 5.0);
        assert_eq!(
            got,
            vec![
                vec![(0, 0), (7, 0)],
                vec![(12, 0), (19, 0)],
                vec![(24, 0), (30, 0)],
            ]
        );
    }

    #[test]
    fn dashes_turn_corners() {
        // 10 px right then 10 px down, 14 on, 2 off: the first dash bends.
        let got = dashes(&[(0, 0), (10, 0), (10, 10)], 14.0, 2.0);
        assert_eq!(got[0], vec![(0, 0), (10, 0), (10, 4)]);
        assert_eq!(got[1], vec![(10, 6), (10, 10)]);
    }

    #[test]
    fn clipped_curves_stop_at_the_edges() {
        // Rows 10..=50: a segment leaving through the top is cut there, one
        // coming back starts a new run, one wholly outside is dropped.
        let runs = clip_rows(&[(0, 30), (10, 0), (20, -20), (30, 30), (40, 40)], 10, 50);
        assert_eq!(
            runs,
            vec![vec![(0, 30), (7, 10)], vec![(26, 10), (30, 30), (40, 40)]]
        );
        // Inside throughout: unchanged.
        let inside = [(0, 20), (5, 30), (9, 10)];
        assert_eq!(clip_rows(&inside, 10, 50), vec![inside.to_vec()]);
        // Beyond the bottom only: nothing.
        assert!(clip_rows(&[(0, 60), (9, 70)], 10, 50).is_empty());
    }

    #[test]
    fn edge_labels_never_overlap_and_stay_in_the_plot() {
        let at = |x: i32, edge: Edge, text: &str| EdgeLabel {
            x,
            edge,
            text: text.to_string(),
        };
        let labels = [
            at(100, Edge::Top, "15.37"),
            at(140, Edge::Top, "4.240"),
            at(150, Edge::Top, "4.591"),
            at(790, Edge::Top, "3.965"),
            at(110, Edge::Bottom, "(0.9752)"),
        ];
        let places = edge_label_places(&labels, (80, 800));
        for (i, a) in labels.iter().enumerate() {
            let (start, row) = places[i];
            let width = text_width(&a.text, TEXT_SMALL);
            assert!(start >= 80 && start + width <= 800, "{}", a.text);
            for (j, b) in labels.iter().enumerate().skip(i + 1) {
                let (other, other_row) = places[j];
                if a.edge == b.edge && row == other_row {
                    let other_width = text_width(&b.text, TEXT_SMALL);
                    assert!(
                        start + width < other || other + other_width < start,
                        "{} and {} overlap",
                        a.text,
                        b.text
                    );
                }
            }
        }
        // Close points share a row while a label can still span its point;
        // the bottom edge is laid out on its own.
        assert_eq!(places[0].1, 0);
        assert_eq!(places[1].1, 0);
        assert_eq!(places[2].1, 1);
        assert_eq!(places[4], (110 - text_width("(0.9752)", TEXT_SMALL) / 2, 0));
    }

    #[test]
    fn families_get_distinct_styles_in_order_of_appearance() {
        let candidate = |id: &str| CandidateResult {
            id: id.to_string(),
            family: stem(id).to_string(),
            features: vec![],
            setting: serde_json::Map::new(),
            effective_df: 1.0,
            train_score: 0.0,
            cv_score: 0.0,
            cv_se: 0.0,
            fold_scores: vec![],
            test_score: None,
            infeasible: Vec::new(),
        };
        let styles = family_styles(&[
            candidate("polynomial/degree=1"),
            candidate("polynomial/degree=2"),
            candidate("linear"),
            candidate("nearest-neighbors/k=3"),
        ]);
        let stems: Vec<&str> = styles.iter().map(|s| s.stem.as_str()).collect();
        assert_eq!(stems, ["polynomial", "linear", "nearest-neighbors"]);
        assert_eq!(styles[1].colour, palette::SERIES[1]);
        assert_eq!(styles[2].marker, Marker::Diamond);
        assert_eq!(style_of(&styles, "linear").stem, "linear");

        // Ten families: ten colours and ten marker shapes, no two alike.
        let ten: Vec<CandidateResult> = (0..10).map(|i| candidate(&format!("f{i}"))).collect();
        let styles = family_styles(&ten);
        for (i, a) in styles.iter().enumerate() {
            for b in &styles[i + 1..] {
                assert_ne!(a.colour, b.colour, "{} and {}", a.stem, b.stem);
                assert_ne!(a.marker, b.marker, "{} and {}", a.stem, b.stem);
            }
        }
    }

    #[test]
    fn marker_outlines_stay_within_their_size() {
        // Every corner lies within r + 2 pixels of the centre, and no shape
        // repeats another's outline.
        let mut outlines = Vec::new();
        for marker in MARKERS {
            let corners = marker.outline((100, 100), 5);
            for &(x, y) in &corners {
                assert!((x - 100).abs() <= 7 && (y - 100).abs() <= 7, "{marker:?}");
            }
            assert!(!outlines.contains(&corners), "{marker:?}");
            outlines.push(corners);
        }
    }
}
