//! The simulation section of the reports: the bias–variance figure is pinned
//! by a snapshot and read back as a person would read it (each marker against
//! the axis ticks), and both reports show it in their simulation section.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::reports::{inline_svgs, read, without_svgs};
use crate::simulation::{demo_spec, heldout_ok, number};
use crate::svg::{edge_labels, elements, pixel_row, reads_as, value_axis_rows, Element};

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

/// Markers of one series: filled circles of radius 5 (expected error, ink)
/// or filled polygons (squared bias, variance).
fn markers<'a>(all: &'a [Element], colour: &str) -> Vec<&'a Element> {
    let shape = if colour == INK { "circle" } else { "polygon" };
    all.iter()
        .filter(|e| e.tag == shape && e.get("fill") == Some(colour))
        .filter(|e| shape == "polygon" || e.get("r") == Some("5"))
        .collect()
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
    let mut beyond = 0;
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
        // A value beyond the axis sits on its top edge.
        let (edge, _) = value_axis_rows(all.iter().filter(inside), MUTED);
        let row = |value: f64| pixel_row(&ticks, value).max(edge);
        let labels = edge_labels(all.iter().filter(inside), INK);

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
            let expected_mse = number(s, "expected_mse");
            assert!(
                (expected[i].1 - row(expected_mse)).abs() <= 1.5,
                "{id}: expected error marker"
            );
            if pixel_row(&ticks, expected_mse) < edge - 1.5 {
                // On the edge, its value written just below it.
                assert!(
                    labels.iter().any(|&(v, x, y)| reads_as(v, expected_mse)
                        && (x - expected[i].0).abs() < 60.0
                        && y > edge
                        && y < edge + 40.0),
                    "{id}: {expected_mse} beyond the axis, labelled"
                );
                beyond += 1;
            }
            // Expected error = bias² + variance + σ², up to the identity gap
            // results.json reports (and pixel rounding).
            let sum = number(s, "bias_sq") + number(s, "variance") + sigma_sq;
            let allowed = 1.5 + (slope * number(s, "identity_gap")).abs();
            assert!(
                (expected[i].1 - row(sum)).abs() <= allowed,
                "{id}: expected error {} px from bias² + variance + σ²",
                (expected[i].1 - row(sum)).abs()
            );
            assert!(
                (bias[i].1 - row(number(s, "bias_sq"))).abs() <= 1.5,
                "{id}: squared bias marker"
            );
            // A variance triangle points up: its middle sits 1 px below the
            // value's row for marker size 5 (apex 6 above, base 4 below).
            assert!(
                (variance[i].1 + 1.0 - row(number(s, "variance"))).abs() <= 1.5,
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
    // The demo's largest k (k = 45, expected error about ten times the
    // oracle's) lies beyond its panel's axis.
    assert!(beyond >= 1, "no expected error beyond its axis");
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

#[test]
fn simulation_tables_fit_a_1200_pixel_window() {
    use crate::reports::{chromium, CHROMIUM};
    if !Path::new(CHROMIUM).exists() {
        crate::util::skip_reference(
            "simulation_tables_fit_a_1200_pixel_window",
            &format!("{CHROMIUM} is absent; install it (apt-get install -y chromium)"),
        );
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let out = run_simulation(dir.path(), 4);
    // A copy of the page that measures itself: the page's own policy allows
    // no script, so the copy drops it and adds one that writes every table
    // box wider than its room into an attribute of the body.
    let html = read(&out.join("report.html"));
    let policy_at = html
        .find("<meta http-equiv=\"Content-Security-Policy\"")
        .unwrap();
    let policy_end = policy_at + html[policy_at..].find('>').unwrap() + 1;
    let measured = format!(
        "{}{}",
        &html[..policy_at],
        &html[policy_end..].replace(
            "</body>",
            "<script>document.body.setAttribute('data-wide', \
             Array.from(document.querySelectorAll('.table-wrap, table'))\
             .filter(e => e.scrollWidth > e.clientWidth + 1)\
             .map(e => e.scrollWidth + '>' + e.clientWidth).join(' ') || 'none');</script></body>",
        )
    );
    let page = dir.path().join("measured.html");
    std::fs::write(&page, measured).unwrap();
    let (dom, _) = chromium(
        &page,
        &dir.path().join("profile"),
        &["--window-size=1200,900", "--dump-dom"],
    );
    assert!(
        dom.contains("class=\"numbers wide\""),
        "the decomposition tables"
    );
    assert!(
        dom.contains("data-wide=\"none\""),
        "tables wider than their room: {}",
        dom.split("data-wide=\"")
            .nth(1)
            .map_or("no measurement", |r| r.split('"').next().unwrap())
    );
}
