//! The simulation section of the reports: the bias–variance figure is pinned
//! by a snapshot and read back as a person would read it (each marker against
//! the axis ticks), and both reports show it in their simulation section.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::reports::{inline_svgs, read, without_svgs};
use crate::simulation::{demo_spec, heldout_ok, number};

const FIGURE: &str = "bias-variance.svg";
/// Colours of the figure (src/report/figures/palette.rs): expected error is
/// ink, squared bias ember orange, variance lichen teal, the noise floor muted.
const INK: &str = "#1D232B";
const BIAS: &str = "#D0711C";
const VARIANCE: &str = "#3C9A8A";
const MUTED: &str = "#555E6A";

/// Runs the demo simulation with `replicates` replicates in `dir`; returns
/// the output folder.
fn run_simulation(dir: &Path, replicates: usize) -> PathBuf {
    demo_spec(dir, "heat-demand-simulation.toml", replicates);
    heldout_ok(
        dir,
        &["run", "--quiet", "specs/heat-demand-simulation.toml"],
    );
    dir.join("out/heat-demand-simulation")
}

/// One SVG element: its tag, attributes and (for `<text>`) its words.
#[derive(Debug)]
struct Element {
    tag: String,
    attributes: Vec<(String, String)>,
    words: String,
}

impl Element {
    fn get(&self, name: &str) -> Option<&str> {
        self.attributes
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, v)| v.as_str())
    }

    fn number(&self, name: &str) -> f64 {
        self.get(name)
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("{name} of {self:?}"))
    }

    /// The pixel points of a `<polygon>` or `<polyline>`.
    fn points(&self) -> Vec<(f64, f64)> {
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
    fn at(&self) -> (f64, f64) {
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
fn elements(svg: &str) -> Vec<Element> {
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

/// Markers of one series: filled circles of radius 5 (expected error, ink)
/// or filled polygons (squared bias, variance).
fn markers<'a>(all: &'a [Element], colour: &str) -> Vec<&'a Element> {
    let shape = if colour == INK { "circle" } else { "polygon" };
    all.iter()
        .filter(|e| e.tag == shape && e.get("fill") == Some(colour))
        .filter(|e| shape == "polygon" || e.get("r") == Some("5"))
        .collect()
}

/// Pixel row of `value` on a panel's value axis, interpolated between its
/// first and last labelled tick.
fn pixel_row(ticks: &[(f64, f64)], value: f64) -> f64 {
    let (v0, y0) = ticks[0];
    let (v1, y1) = ticks[ticks.len() - 1];
    y0 + (value - v0) * (y1 - y0) / (v1 - v0)
}

#[test]
fn bias_variance_figure_reads_back_from_its_axes() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_simulation(dir.path(), 20);
    let svg = read(&out.join("figures").join(FIGURE));

    let results = crate::util::read_json(&out.join("results.json"));
    let rows = results["simulation"].as_array().unwrap();
    let sigma_sq = number(&results["simulation_summary"], "noise");
    let oracle = results["simulation_summary"]["oracle"].as_str().unwrap();
    let all = elements(&svg);

    // One marker per setting per series, plus one in the legend.
    for colour in [INK, BIAS, VARIANCE] {
        let count = markers(&all, colour).len();
        assert_eq!(count, rows.len() + 1, "markers of colour {colour}");
    }

    // Panels, in results order, each headed by its family.
    let families = ["polynomial", "nearest-neighbors"];
    let titles: Vec<&Element> = all
        .iter()
        .filter(|e| e.tag == "text" && e.get("font-size") == Some("14"))
        .collect();
    assert_eq!(
        titles.iter().map(|t| t.words.as_str()).collect::<Vec<_>>(),
        families
    );
    let tops: Vec<f64> = titles.iter().map(|t| t.at().1).collect();
    let panel_of = |y: f64| tops.iter().rposition(|&top| y >= top);

    let mut ringed = 0;
    for (p, family) in families.iter().enumerate() {
        let inside = |e: &&Element| panel_of(e.at().1) == Some(p);
        // The value axis: labelled ticks at the left, right-aligned.
        let ticks: Vec<(f64, f64)> = all
            .iter()
            .filter(inside)
            .filter(|e| e.tag == "text" && e.get("text-anchor") == Some("end"))
            .filter_map(|e| Some((e.words.parse::<f64>().ok()?, e.at().1)))
            .collect();
        assert!(ticks.len() >= 3, "{family}: value ticks {ticks:?}");
        let slope =
            (ticks[ticks.len() - 1].1 - ticks[0].1) / (ticks[ticks.len() - 1].0 - ticks[0].0);

        // The noise floor: a dashed muted line, every dash at σ².
        let floor = pixel_row(&ticks, sigma_sq);
        let dashes: Vec<&Element> = all
            .iter()
            .filter(inside)
            .filter(|e| {
                e.tag == "polyline"
                    && e.get("stroke") == Some(MUTED)
                    && e.get("stroke-width") == Some("2")
            })
            .collect();
        assert!(dashes.len() > 20, "{family}: {} dashes", dashes.len());
        for dash in &dashes {
            for (_, y) in dash.points() {
                assert!(
                    (y - floor).abs() <= 1.0,
                    "{family}: dash at {y}, σ² at {floor}"
                );
            }
        }

        // Settings by effective df, left to right; each series' markers at
        // the same x, in that order, and at its value.
        let mut settings: Vec<&Value> = rows.iter().filter(|s| s["family"] == *family).collect();
        settings.sort_by(|a, b| number(a, "effective_df").total_cmp(&number(b, "effective_df")));
        let in_panel = |colour: &str| -> Vec<(f64, f64)> {
            let mut at: Vec<(f64, f64)> = markers(&all, colour)
                .into_iter()
                .filter(|e| panel_of(e.at().1) == Some(p))
                .map(Element::at)
                .collect();
            at.sort_by(|a, b| a.0.total_cmp(&b.0));
            at
        };
        let expected = in_panel(INK);
        let bias = in_panel(BIAS);
        let variance = in_panel(VARIANCE);
        assert_eq!(expected.len(), settings.len(), "{family}");
        for (i, s) in settings.iter().enumerate() {
            let id = s["id"].as_str().unwrap();
            assert!(
                (bias[i].0 - expected[i].0).abs() <= 1.0
                    && (variance[i].0 - expected[i].0).abs() <= 1.0,
                "{id}: markers of one setting share an x"
            );
            assert!(
                i == 0 || expected[i].0 > expected[i - 1].0,
                "{id}: x rises with df"
            );
            assert!(
                (expected[i].1 - pixel_row(&ticks, number(s, "expected_mse"))).abs() <= 1.5,
                "{id}: expected error marker"
            );
            // Expected error = bias² + variance + σ², up to the identity gap
            // results.json reports (and pixel rounding).
            let sum = number(s, "bias_sq") + number(s, "variance") + sigma_sq;
            let allowed = 1.5 + (slope * number(s, "identity_gap")).abs();
            assert!(
                (expected[i].1 - pixel_row(&ticks, sum)).abs() <= allowed,
                "{id}: expected error {} px from bias² + variance + σ²",
                (expected[i].1 - pixel_row(&ticks, sum)).abs()
            );
            assert!(
                (bias[i].1 - pixel_row(&ticks, number(s, "bias_sq"))).abs() <= 1.5,
                "{id}: squared bias marker"
            );
            // A variance triangle points up: its middle sits 1 px below the
            // value's row for marker size 5 (apex 6 above, base 4 below).
            assert!(
                (variance[i].1 + 1.0 - pixel_row(&ticks, number(s, "variance"))).abs() <= 1.5,
                "{id}: variance marker"
            );
            if id == oracle {
                // The oracle is ringed: an ink circle of radius 11 around it.
                let ring = all.iter().find(|e| {
                    e.tag == "circle"
                        && e.get("r") == Some("11")
                        && e.get("fill") == Some("none")
                        && panel_of(e.at().1) == Some(p)
                });
                let ring = ring.expect("the oracle is ringed").at();
                assert_eq!(ring, expected[i], "{id}: ring around the oracle");
                ringed += 1;
            }
        }
    }
    assert_eq!(ringed, 1, "exactly one oracle");
    assert!(svg.contains(&format!("oracle: {oracle}")));
    insta::assert_snapshot!("simulation_figure_bias_variance", svg);
}

#[test]
fn reports_show_the_figure_in_their_simulation_section() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_simulation(dir.path(), 8);
    let markdown = read(&out.join("report.md"));
    insta::assert_snapshot!("simulation_report_md", markdown);
    let section = markdown
        .find("## Simulation: bias, variance and noise")
        .unwrap();
    let link = markdown.find(&format!("](figures/{FIGURE})")).unwrap();
    let next = markdown.find("## Data").unwrap();
    assert!(
        section < link && link < next,
        "the figure is in the simulation section"
    );
    // Numbered after the three evidence figures.
    assert!(markdown.contains("### Figure 4. Squared bias, variance and noise against flexibility"));

    let html = read(&out.join("report.html"));
    let svgs = inline_svgs(&html);
    assert_eq!(svgs.len(), 4);
    let stored = read(&out.join("figures").join(FIGURE));
    let at = html.find(svgs[3]).unwrap();
    assert!(
        *svgs[3] == *stored.trim_end(),
        "inline copy equals the file"
    );
    let section = html.find("<section id=\"simulation\">").unwrap();
    let data = html.find("<section id=\"data\">").unwrap();
    assert!(section < at && at < data);
    insta::assert_snapshot!("simulation_report_html", without_svgs(&html));
}
