//! The reports a person reads: the demo's HTML page and figures are pinned by
//! insta snapshots; text from the data or the spec is escaped in every
//! format; a real browser renders the page; `compare` names what changed.

use std::path::{Path, PathBuf};
use std::process::Command;

use crate::{demo, util};

/// The figures every report has, in reading order.
const FIGURES: [&str; 3] = [
    "error-by-flexibility.svg",
    "fold-scores.svg",
    "kept-fit.svg",
];

/// Runs a copy of the demo in `dir`; returns the experiment's output folder.
fn run_demo(dir: &Path) -> PathBuf {
    demo::copy_demo(dir);
    let output = util::run_in(dir, &["run", "--quiet", "specs/heat-demand.toml"]);
    assert!(output.status.success(), "{}", util::stderr_of(&output));
    dir.join("out/heat-demand")
}

pub fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()))
}

/// The inline `<svg>…</svg>` blocks of a page, in order.
pub fn inline_svgs(html: &str) -> Vec<&str> {
    let mut found = Vec::new();
    let mut rest = html;
    while let Some(start) = rest.find("<svg ") {
        let end = rest[start..].find("</svg>").expect("every <svg> is closed") + start + 6;
        found.push(&rest[start..end]);
        rest = &rest[end..];
    }
    found
}

/// The page with each inline SVG replaced by its size and digest (the SVGs
/// are pinned by their own snapshots).
pub fn without_svgs(html: &str) -> String {
    let mut out = html.to_string();
    for svg in inline_svgs(html) {
        let digest = blake3::hash(svg.as_bytes()).to_hex();
        out = out.replacen(
            svg,
            &format!(
                "[inline SVG: {} bytes, blake3 {}]",
                svg.len(),
                &digest[..16]
            ),
            1,
        );
    }
    out
}

#[test]
fn demo_html_report_and_figures_are_pinned() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_demo(dir.path());
    let html = read(&out.join("report.html"));

    let mut files: Vec<String> = std::fs::read_dir(out.join("figures"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    files.sort();
    assert_eq!(files, FIGURES);
    // The page inlines exactly the figure files, byte for byte, in order.
    let inline = inline_svgs(&html);
    assert_eq!(inline.len(), FIGURES.len());
    for (svg, file) in inline.iter().zip(FIGURES) {
        let stored = read(&out.join("figures").join(file));
        assert!(
            *svg == stored.trim_end(),
            "{file} differs from its inline copy"
        );
    }

    insta::assert_snapshot!("demo_report_html", without_svgs(&html));
    for file in FIGURES {
        let name = format!(
            "demo_figure_{}",
            file.trim_end_matches(".svg").replace('-', "_")
        );
        insta::assert_snapshot!(name, read(&out.join("figures").join(file)));
    }
}

#[test]
fn demo_page_is_self_contained() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_demo(dir.path());
    let html = read(&out.join("report.html"));
    // No scripts, no external resources: the only URL is the SVG namespace.
    for forbidden in [
        "<script", "<link", "<img", "<iframe", "@import", "url(", "https://",
    ] {
        assert!(!html.contains(forbidden), "{forbidden} in report.html");
    }
    let urls = html.matches("http://").count();
    assert_eq!(urls, html.matches("http://www.w3.org/2000/svg").count());
    assert!(html.contains("Content-Security-Policy"));
    // The summary comes first: the kept setting and its numbers before any figure.
    let summary = html.find("In short").unwrap();
    let first_figure = html.find("<figure").unwrap();
    assert!(summary < first_figure);
    // (minijinja's HTML escaping writes / as &#x2f;.)
    assert!(html[summary..first_figure].contains("smoothing-spline&#x2f;df=4"));
    // No absolute paths of this machine reach the outputs.
    let root = dir.path().to_string_lossy().into_owned();
    for name in ["report.html", "report.md", "results.json"] {
        assert!(!read(&out.join(name)).contains(&root), "{name}");
    }
}

/// A column name and a title that would run as markup if left unescaped.
const HOSTILE: &str = "<script>alert(1)</script> & \"q\"";

/// Writes `table.csv` in `dir`: 60 rows of a feature (its header cell as
/// given) from 0 to 9.83 and a target `y` = `curve` plus a fixed wiggle as
/// noise.
fn wiggly_table(dir: &Path, feature: &str, curve: impl Fn(f64) -> f64) {
    let mut csv = format!("{feature},y\n");
    for i in 0..60 {
        let x = f64::from(i) / 6.0;
        let y = curve(x) + [0.3, -0.2, 0.1, -0.3, 0.2][i as usize % 5];
        csv.push_str(&format!("{x:.4},{y:.4}\n"));
    }
    std::fs::write(dir.join("table.csv"), csv).unwrap();
}

/// The spec of a table written by [`wiggly_table`]: the `experiment` table's
/// lines, its one feature as a TOML string, polynomials of degree 1 to 3 and
/// `more` candidates, a report in `formats` (TOML strings).
fn wiggly_spec(experiment: &str, feature: &str, more: &str, formats: &str) -> String {
    format!(
        r#"[experiment]
{experiment}

[data]
table = "table.csv"
target = "y"
features = [{feature}]

[split]
holdout = 0.2
folds = 5

[[candidate]]
family = "polynomial"
degree = [1, 2, 3]
{more}
[report]
formats = [{formats}]
"#
    )
}

/// A small table whose only feature is named [`HOSTILE`], and its spec.
fn hostile_tree(dir: &Path) {
    // An invented bent line.
    wiggly_table(dir, "\"<script>alert(1)</script> & \"\"q\"\"\"", |x| {
        1.0 + 0.5 * x - 0.04 * x * x
    });
    std::fs::write(
        dir.join("hostile.toml"),
        wiggly_spec(
            "name = \"hostile\"\ntitle = \"<b>bold</b> & <i>it</i>\"\nseed = 7",
            r#"'<script>alert(1)</script> & "q"'"#,
            "",
            r#""markdown", "html""#,
        ),
    )
    .unwrap();
}

#[test]
fn text_from_data_and_spec_is_escaped_everywhere() {
    let dir = tempfile::tempdir().unwrap();
    hostile_tree(dir.path());
    let output = util::run_in(dir.path(), &["run", "--quiet", "hostile.toml"]);
    assert!(output.status.success(), "{}", util::stderr_of(&output));
    let out = dir.path().join("out/hostile");

    let html = read(&out.join("report.html"));
    assert!(!html.contains("<script"), "raw <script> in report.html");
    assert!(!html.contains("<b>bold"), "raw title markup in report.html");
    // minijinja's HTML escaping (also escapes / and quotes) in the page text…
    let page_form = "&lt;script&gt;alert(1)&lt;&#x2f;script&gt; &amp; &quot;q&quot;";
    assert!(
        html.matches(page_form).count() >= 3,
        "{page_form} in the page"
    );
    assert!(html.contains("&lt;b&gt;bold&lt;&#x2f;b&gt;"));
    // …and plotters' XML escaping in the inline figure's axis words.
    let svg_form = "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;q&quot;";
    assert!(html.contains(svg_form), "{svg_form} in the inline SVG");

    let svg = read(&out.join("figures/kept-fit.svg"));
    assert!(!svg.contains("<script"));
    assert!(svg.contains(svg_form));

    let markdown = read(&out.join("report.md"));
    let md_form = "&lt;script&gt;alert(1)&lt;/script&gt; &amp; \"q\"";
    // Fenced code shows text literally (the spec as read), so only the text
    // outside fences must be escaped; inside, the name appears as written.
    let (prose, code) = split_fenced(&markdown);
    assert!(!prose.contains("<script"), "raw <script> in report.md");
    assert!(!prose.contains("<b>"), "raw title markup in report.md");
    assert!(code.contains(HOSTILE));
    assert!(
        markdown.matches(md_form).count() >= 2,
        "{md_form} in report.md"
    );
    assert!(markdown.contains("# &lt;b&gt;bold&lt;/b&gt; &amp; &lt;i&gt;it&lt;/i&gt;"));
}

/// (text outside fenced code blocks, text inside them) of a Markdown file.
fn split_fenced(markdown: &str) -> (String, String) {
    let (mut prose, mut code) = (String::new(), String::new());
    let mut inside = false;
    for line in markdown.lines() {
        if line.starts_with("```") {
            inside = !inside;
        } else if inside {
            code.push_str(line);
            code.push('\n');
        } else {
            prose.push_str(line);
            prose.push('\n');
        }
    }
    (prose, code)
}

#[test]
fn reports_without_a_test_set_and_with_several_features() {
    // holdout = 0, r2 (higher is better), the "lowest" rule, and a kept fit
    // on two features: the data figure plots observed against predicted.
    let dir = tempfile::tempdir().unwrap();
    demo::copy_demo(dir.path());
    let demo_spec = read(&dir.path().join("specs/heat-demand.toml"));
    // Keep only the demo's first three candidates, so that a two-feature
    // candidate (nearest neighbours) wins.
    let cut_from = demo_spec.find("# A cubic smoothing spline").unwrap();
    let cut_to = demo_spec.find("# Score by mean squared error").unwrap();
    let spec = format!("{}{}", &demo_spec[..cut_from], &demo_spec[cut_to..])
        .replace("holdout = 0.2", "holdout = 0")
        .replace("metric = \"mse\"", "metric = \"r2\"")
        .replace("rule = \"one-se\"", "rule = \"lowest\"")
        .replace("degree = [1, 2, 3, 4, 5, 6, 8, 10, 12]", "degree = [1]");
    std::fs::write(dir.path().join("specs/other.toml"), spec).unwrap();
    let output = util::run_in(dir.path(), &["run", "--quiet", "specs/other.toml"]);
    assert!(output.status.success(), "{}", util::stderr_of(&output));
    let out = dir.path().join("out/heat-demand");
    let results = util::read_json(&out.join("results.json"));
    let chosen = results["chosen"].as_str().unwrap();
    assert!(chosen.starts_with("nearest-neighbors/"), "{chosen}");
    assert!(results["final"]["predictions"]["test"].is_null());
    assert!(results["final"]["predictions"]["feature"].is_null());

    let fit = read(&out.join("figures/kept-fit.svg"));
    assert!(fit.contains("observed = predicted"));
    assert!(!fit.contains("locked test rows"));
    let flexibility = read(&out.join("figures/error-by-flexibility.svg"));
    assert!(flexibility.contains("higher is better"));
    assert!(!flexibility.contains("one-SE threshold"));
    let html = read(&out.join("report.html"));
    assert!(html.contains("holdout = 0"));
    let markdown = read(&out.join("report.md"));
    assert!(markdown.contains("no independent final score"));
}

#[test]
fn tables_list_settings_by_effective_df_while_results_keep_spec_order() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_demo(dir.path());
    let results = util::read_json(&out.join("results.json"));
    let candidates = results["candidates"].as_array().unwrap();
    // results.json keeps spec order: k = 1, 2, 3, … (most flexible first).
    let neighbours: Vec<&str> = candidates
        .iter()
        .filter(|c| c["family"] == "nearest-neighbors")
        .map(|c| c["id"].as_str().unwrap())
        .collect();
    assert_eq!(neighbours[0], "nearest-neighbors/k=1");
    assert_eq!(neighbours[neighbours.len() - 1], "nearest-neighbors/k=80");
    let df_of = |id: &str| {
        candidates
            .iter()
            .find(|c| c["id"] == id)
            .unwrap_or_else(|| panic!("{id} not in results"))["effective_df"]
            .as_f64()
            .unwrap()
    };

    // The Markdown table: every setting once, each candidate's settings by
    // effective df, candidates in spec order.
    let markdown = read(&out.join("report.md"));
    let table = &markdown[markdown.find("## Every candidate and setting").unwrap()..];
    let table = &table[..table.find("\n##").unwrap()];
    assert!(table.contains("its settings by effective degrees of freedom, least flexible first"));
    let rows: Vec<&str> = table
        .lines()
        .filter(|l| l.starts_with("| ") && !l.starts_with("| candidate"))
        .map(|l| l[2..].split(" |").next().unwrap())
        .collect();
    assert_eq!(rows.len(), candidates.len());
    let stem = |id: &str| id.split('/').next().unwrap().to_string();
    let mut stems: Vec<String> = rows.iter().map(|id| stem(id)).collect();
    stems.dedup();
    let spec_stems: Vec<String> = {
        let mut all: Vec<String> = candidates
            .iter()
            .map(|c| stem(c["id"].as_str().unwrap()))
            .collect();
        all.dedup();
        all
    };
    assert_eq!(
        stems, spec_stems,
        "candidates in spec order, each in one block"
    );
    for pair in rows.windows(2) {
        if stem(pair[0]) == stem(pair[1]) {
            assert!(
                df_of(pair[0]) <= df_of(pair[1]),
                "{} before {}",
                pair[0],
                pair[1]
            );
        }
    }
    let first = rows
        .iter()
        .position(|id| id.starts_with("nearest"))
        .unwrap();
    assert_eq!(rows[first], "nearest-neighbors/k=80");

    // The HTML table lists the same rows in the same order.
    let html = read(&out.join("report.html"));
    let section = &html[html.find("<section id=\"settings\">").unwrap()..];
    let section = &section[..section.find("</table>").unwrap()];
    let html_rows: Vec<String> = section
        .split("<th scope=\"row\"><code>")
        .skip(1)
        .map(|r| r[..r.find("</code>").unwrap()].replace("&#x2f;", "/"))
        .collect();
    assert_eq!(html_rows, rows);
}

// ---------------------------------------------------------------------------
// The score axis of the error-by-flexibility figure.

/// A straight line with a small fixed wiggle, fitted by polynomials and by
/// ridge with a penalty so large that it predicts little but the mean: one
/// setting far off the others.
fn far_off_tree(dir: &Path) {
    wiggly_table(dir, "x", |x| 2.0 + 3.0 * x);
    std::fs::write(
        dir.join("spec.toml"),
        wiggly_spec(
            "name = \"far-off\"\nseed = 11",
            r#""x""#,
            "\n[[candidate]]\nfamily = \"ridge\"\npenalty = [1000000]\n",
            r#""markdown""#,
        ),
    )
    .unwrap();
}

#[test]
fn a_far_off_setting_sits_on_the_edge_of_the_score_axis_with_its_value() {
    let dir = tempfile::tempdir().unwrap();
    far_off_tree(dir.path());
    let output = util::run_spec(dir.path(), "run");
    util::assert_success(&output);
    let out = dir.path().join("out/far-off");
    let results = util::read_json(&out.join("results.json"));
    let score = |c: &serde_json::Value, key: &str| c[key].as_f64().unwrap();
    let candidates = results["candidates"].as_array().unwrap();
    let ridge = candidates.iter().find(|c| c["family"] == "ridge").unwrap();
    let far = score(ridge, "cv_score");
    let best = score(&results["choice"], "best_cv_score");
    let se = score(&results["choice"], "best_cv_se");
    assert!(
        far > best + 8.0 * se,
        "ridge {far} is not far off {best} ± {se}"
    );

    let all = crate::svg::elements(&read(&out.join("figures/error-by-flexibility.svg")));
    // The value axis stops short of the far-off score but reaches every
    // polynomial's cross-validated score.
    let ticks: Vec<(f64, f64)> = all
        .iter()
        .filter(|e| e.tag == "text" && e.get("text-anchor") == Some("end"))
        .filter_map(|e| Some((e.words.parse::<f64>().ok()?, e.at().1)))
        .collect();
    let (edge, bottom) = crate::svg::value_axis_rows(&all, "#555E6A");
    assert!(ticks.len() >= 3, "value ticks {ticks:?}");
    assert!(
        crate::svg::pixel_row(&ticks, far) < edge - 50.0,
        "{far} is within the axis"
    );
    for c in candidates.iter().filter(|c| c["family"] == "polynomial") {
        let row = crate::svg::pixel_row(&ticks, score(c, "cv_score"));
        assert!(
            row >= edge && row <= bottom,
            "{}: outside the axis",
            c["id"]
        );
    }
    // The ridge setting (second family: ember squares) is drawn on the top
    // edge, filled, with its cross-validated score written just below it.
    let on_edge: Vec<(f64, f64)> = all
        .iter()
        .filter(|e| e.tag == "polygon" && e.get("fill") == Some("#D0711C"))
        .map(crate::svg::Element::at)
        .filter(|&(_, y)| (y - edge).abs() <= 1.0)
        .collect();
    assert_eq!(on_edge.len(), 1, "ridge markers on the edge: {on_edge:?}");
    let labels = crate::svg::edge_labels(&all, "#1D232B");
    assert!(
        labels.iter().any(|&(v, x, y)| crate::svg::reads_as(v, far)
            && (x - on_edge[0].0).abs() < 60.0
            && y > edge
            && y < edge + 40.0),
        "no label reading {far} below the marker: {labels:?}"
    );
    // The caption states the rule.
    let markdown = read(&out.join("report.md"));
    assert!(markdown.contains("axis reaches the scores within 8 standard errors of the best"));
    assert!(markdown.contains("Scores beyond it sit on its edge with their value beside them"));
}

// ---------------------------------------------------------------------------
// A real browser.

pub const CHROMIUM: &str = "/usr/bin/chromium";

/// Runs headless Chromium on `page` with `extra` arguments; returns stderr.
pub fn chromium(page: &Path, profile: &Path, extra: &[&str]) -> (String, String) {
    let output = Command::new(CHROMIUM)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--hide-scrollbars",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(extra)
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("chromium could not be started");
    assert!(
        output.status.success(),
        "chromium failed: {}",
        util::stderr_of(&output)
    );
    (util::stdout_of(&output), util::stderr_of(&output))
}

/// Messages the page wrote to the browser console (Chromium logs them as
/// `INFO:CONSOLE…` lines with `--enable-logging=stderr`).
fn console_lines(stderr: &str) -> Vec<&str> {
    stderr.lines().filter(|l| l.contains(":CONSOLE")).collect()
}

/// A screenshot: (width, height, RGB pixels).
fn decode_png(path: &Path) -> (u32, u32, Vec<[u8; 3]>) {
    let decoder = png::Decoder::new(std::fs::File::open(path).unwrap());
    let mut reader = decoder.read_info().unwrap();
    let mut buffer = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buffer).unwrap();
    let channels = info.color_type.samples();
    assert!(
        channels >= 3,
        "unexpected PNG colour type {:?}",
        info.color_type
    );
    let pixels = buffer[..info.buffer_size()]
        .chunks(channels)
        .map(|p| [p[0], p[1], p[2]])
        .collect();
    (info.width, info.height, pixels)
}

#[test]
fn a_browser_renders_the_page_cleanly() {
    if !Path::new(CHROMIUM).exists() {
        util::skip_reference(
            "a_browser_renders_the_page_cleanly",
            &format!("{CHROMIUM} is absent; install it (apt-get install -y chromium)"),
        );
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let out = run_demo(dir.path());
    let page = out.join("report.html");
    let profile = dir.path().join("profile");

    // The console check itself: a page that breaks its own policy is heard.
    let control = dir.path().join("control.html");
    std::fs::write(
        &control,
        "<!DOCTYPE html><html><head><meta http-equiv=\"Content-Security-Policy\" \
         content=\"default-src 'none'\"></head><body><img src=\"missing.png\"></body></html>",
    )
    .unwrap();
    let (_, stderr) = chromium(
        &control,
        &profile,
        &["--enable-logging=stderr", "--v=0", "--dump-dom"],
    );
    assert!(
        !console_lines(&stderr).is_empty(),
        "the control page should log:\n{stderr}"
    );

    // What a reviewer sees first: a 1200 × 2000 screenshot, no console output.
    let shot = dir.path().join("report.png");
    let (_, stderr) = chromium(
        &page,
        &profile,
        &[
            "--enable-logging=stderr",
            "--v=0",
            &format!("--screenshot={}", shot.display()),
            "--window-size=1200,2000",
        ],
    );
    assert_eq!(console_lines(&stderr), Vec::<&str>::new());
    let (width, height, pixels) = decode_png(&shot);
    assert_eq!((width, height), (1200, 2000));
    // Not blank: luminance varies, and ink-dark text is present.
    let luminance: Vec<f64> = pixels
        .iter()
        .map(|p| 0.2126 * f64::from(p[0]) + 0.7152 * f64::from(p[1]) + 0.0722 * f64::from(p[2]))
        .collect();
    let mean = luminance.iter().sum::<f64>() / luminance.len() as f64;
    let variance = luminance
        .iter()
        .map(|l| (l - mean) * (l - mean))
        .sum::<f64>()
        / luminance.len() as f64;
    assert!(
        variance > 100.0,
        "screenshot looks blank (variance {variance:.1})"
    );
    let dark = luminance.iter().filter(|&&l| l < 80.0).count();
    assert!(
        dark > 5_000,
        "little text on the screenshot ({dark} dark pixels)"
    );
    // The first figure was laid out with a real size: its two leading series
    // colours (harbour blue, ember orange; see palette.rs) are on screen.
    let near = |p: &[u8; 3], c: [u8; 3]| p.iter().zip(c).all(|(a, b)| a.abs_diff(b) <= 10);
    let blue = pixels
        .iter()
        .filter(|p| near(p, [0x1f, 0x4e, 0x99]))
        .count();
    let orange = pixels
        .iter()
        .filter(|p| near(p, [0xd0, 0x71, 0x1c]))
        .count();
    assert!(
        blue > 1_000 && orange > 300,
        "figure colours: {blue} blue, {orange} orange pixels"
    );

    // After parsing, every figure is an SVG element with a positive size.
    let (dom, _) = chromium(&page, &profile, &["--dump-dom"]);
    let svgs = inline_svgs(&dom);
    assert_eq!(svgs.len(), FIGURES.len(), "SVG elements in the DOM");
    for svg in svgs {
        let attribute = |name: &str| -> u32 {
            let at = svg.find(&format!(" {name}=\"")).expect(name) + name.len() + 3;
            svg[at..].split('"').next().unwrap().parse().unwrap()
        };
        assert!(attribute("width") > 0 && attribute("height") > 0);
    }

    // It prints: a PDF of a few A4 pages.
    let pdf = dir.path().join("report.pdf");
    chromium(
        &page,
        &profile,
        &[
            "--no-pdf-header-footer",
            &format!("--print-to-pdf={}", pdf.display()),
        ],
    );
    let bytes = std::fs::read(&pdf).unwrap();
    assert!(bytes.starts_with(b"%PDF"));
    let pages = String::from_utf8_lossy(&bytes)
        .matches("/Type /Page\n")
        .count()
        + String::from_utf8_lossy(&bytes)
            .matches("/Type /Page/")
            .count()
        + String::from_utf8_lossy(&bytes)
            .matches("/Type /Page>")
            .count();
    assert!((2..=12).contains(&pages), "{pages} pages");
}

// ---------------------------------------------------------------------------
// compare

#[test]
fn compare_names_the_changed_data_and_the_moved_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("a"), dir.path().join("b"));
    run_demo(&a);
    // Change one value of the target in the demo table, nothing else: row 4
    // (meter M0004), which `heldout folds` puts in fold 8, not the test set.
    demo::copy_demo(&b);
    let table = b.join("demo-data/heat-demand.csv");
    let text = read(&table);
    let edited = text.replacen(
        "4,1,M0004,Stormyra,-3.9,3.3,10.007\n",
        "4,1,M0004,Stormyra,-3.9,3.3,10.307\n",
        1,
    );
    assert_ne!(text, edited, "the demo table changed: pick another value");
    std::fs::write(&table, edited).unwrap();
    let output = util::run_in(&b, &["run", "--quiet", "specs/heat-demand.toml"]);
    assert!(output.status.success(), "{}", util::stderr_of(&output));

    let output = util::run_in(
        dir.path(),
        &[
            "compare",
            "a/out/heat-demand/results.json",
            "b/out/heat-demand/results.json",
        ],
    );
    assert_eq!(
        output.status.code(),
        Some(0),
        "{}",
        util::stderr_of(&output)
    );
    let text = util::stdout_of(&output);
    assert!(
        text.contains("| data ../demo-data/heat-demand.csv | **changed** |"),
        "{text}"
    );
    assert!(text.contains("| spec (meaning) | same |"), "{text}");
    assert!(text.contains("| test set and folds | same |"), "{text}");
    assert!(text.contains("The same 30 settings in both."), "{text}");
    assert!(text.contains("| cv\\_score |"), "{text}");
    assert!(text.contains("| train\\_score |"), "{text}");
    insta::assert_snapshot!("compare_one_data_value", text);

    // A result set against itself: nothing moved.
    let output = util::run_in(
        dir.path(),
        &[
            "compare",
            "a/out/heat-demand/results.json",
            "a/out/heat-demand/results.json",
        ],
    );
    let text = util::stdout_of(&output);
    assert!(text.contains("**The choice is unchanged:** `smoothing-spline/df=4`."));
    assert!(text.contains("None: every number present in both is identical to the bit."));
}

#[test]
fn compare_rejects_files_that_are_not_results() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("x.json"),
        "{\"schema\": \"something-else\"}",
    )
    .unwrap();
    let output = util::run_in(dir.path(), &["compare", "x.json", "x.json"]);
    assert_eq!(output.status.code(), Some(2));
    assert!(util::stderr_of(&output).contains("x.json: not a heldout results.json"));
    let output = util::run_in(dir.path(), &["compare", "missing.json", "x.json"]);
    assert_eq!(output.status.code(), Some(2));
    assert!(util::stderr_of(&output).contains("missing.json: cannot read the results"));
}
