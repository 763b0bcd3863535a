//! Reading back the SVG that plotters writes: its elements with their
//! attributes and words, and pixel rows from an axis's labelled ticks, so
//! figure tests can check what a reader would see.

/// One SVG element: its tag, attributes and (for `<text>`) its words.
#[derive(Debug)]
pub struct Element {
    pub tag: String,
    pub attributes: Vec<(String, String)>,
    pub words: String,
}

impl Element {
    pub fn get(&self, name: &str) -> Option<&str> {
        self.attributes
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, v)| v.as_str())
    }

    pub fn number(&self, name: &str) -> f64 {
        self.get(name)
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("{name} of {self:?}"))
    }

    /// The pixel points of a `<polygon>` or `<polyline>`.
    pub fn points(&self) -> Vec<(f64, f64)> {
        self.get("points")
            .unwrap_or_default()
            .split_whitespace()
            .map(|pair| {
                let (x, y) = pair.split_once(',').unwrap();
                (x.parse().unwrap(), y.parse().unwrap())
            })
            .collect()
    }

    /// (x, y) of the element: a circle's centre, the middle of a shape's
    /// extent, or a text's anchor.
    pub fn at(&self) -> (f64, f64) {
        match self.tag.as_str() {
            "circle" => (self.number("cx"), self.number("cy")),
            "text" => (self.number("x"), self.number("y")),
            _ => {
                let points = self.points();
                let (xs, ys): (Vec<f64>, Vec<f64>) = points.into_iter().unzip();
                let mid = |v: &[f64]| {
                    let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
                    let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                    (lo + hi) / 2.0
                };
                (mid(&xs), mid(&ys))
            }
        }
    }
}

/// Every element of an SVG document written by plotters, in order.
pub fn elements(svg: &str) -> Vec<Element> {
    let mut found = Vec::new();
    let mut rest = svg;
    while let Some(start) = rest.find('<') {
        rest = &rest[start + 1..];
        if rest.starts_with('/') {
            continue;
        }
        let end = rest.find('>').expect("every tag is closed");
        let inside = rest[..end].trim_end_matches('/');
        let tag: String = inside.chars().take_while(|c| c.is_alphanumeric()).collect();
        let mut attributes = Vec::new();
        let mut attrs = &inside[tag.len()..];
        while let Some(eq) = attrs.find("=\"") {
            let name = attrs[..eq].trim().to_string();
            let value_end = attrs[eq + 2..].find('"').unwrap() + eq + 2;
            attributes.push((name, attrs[eq + 2..value_end].to_string()));
            attrs = &attrs[value_end + 1..];
        }
        rest = &rest[end + 1..];
        let words = if tag == "text" {
            let close = rest.find("</text>").unwrap();
            rest[..close].trim().to_string()
        } else {
            String::new()
        };
        found.push(Element {
            tag,
            attributes,
            words,
        });
    }
    found
}

/// Pixel row of `value` on a linear value axis, interpolated between its
/// first and last labelled tick (value, pixel row).
pub fn pixel_row(ticks: &[(f64, f64)], value: f64) -> f64 {
    let (v0, y0) = ticks[0];
    let (v1, y1) = ticks[ticks.len() - 1];
    y0 + (value - v0) * (y1 - y0) / (v1 - v0)
}

/// The top and bottom pixel rows of a value axis: the ends of its axis line,
/// the longest vertical polyline drawn in `stroke` among `elements`. Values
/// beyond the axis are drawn on these rows.
pub fn value_axis_rows<'a>(
    elements: impl IntoIterator<Item = &'a Element>,
    stroke: &str,
) -> (f64, f64) {
    elements
        .into_iter()
        .filter(|e| e.tag == "polyline" && e.get("stroke") == Some(stroke))
        .filter_map(|e| match e.points()[..] {
            [(x0, y0), (x1, y1)] if x0 == x1 => Some((y0.min(y1), y0.max(y1))),
            _ => None,
        })
        .max_by(|a, b| (a.1 - a.0).total_cmp(&(b.1 - b.0)))
        .expect("a value axis line")
}

/// The labels written beside points on the edge of a value axis: small
/// ink texts that read as numbers (training scores in parentheses), as
/// (value, x, y).
pub fn edge_labels<'a>(
    elements: impl IntoIterator<Item = &'a Element>,
    ink: &str,
) -> Vec<(f64, f64, f64)> {
    elements
        .into_iter()
        .filter(|e| {
            e.tag == "text" && e.get("text-anchor") == Some("start") && e.get("fill") == Some(ink)
        })
        .filter_map(|e| {
            let words = e.words.trim_start_matches('(').trim_end_matches(')');
            let (x, y) = e.at();
            Some((words.parse::<f64>().ok()?, x, y))
        })
        .collect()
}

/// Whether `shown`, a number written to four significant digits, reads as
/// `value`.
pub fn reads_as(shown: f64, value: f64) -> bool {
    (shown - value).abs() <= 5e-4 * value.abs()
}
