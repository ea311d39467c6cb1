//! Plots: the SVG output is parsed and its structure checked (markers,
//! diamonds, interval lines, axis titles, group summaries); PNG output is
//! decoded; plot requests the model cannot support are clear errors.
//!
//! The plots' colours identify their parts: study markers and their CI
//! lines are `#0072B2`, the overall diamond `#D55E00`, subgroup diamonds
//! `#E69F00`, fitted values and lines `#009E73`, prediction intervals
//! `#CC79A7` (see `src/plot/mod.rs`, `palette`).

use crate::util::repo;
use assert_cmd::Command;
use serde_json::Value;
use std::path::{Path, PathBuf};

pub(crate) const STUDY: &str = "#0072B2";
const POOLED: &str = "#D55E00";
pub(crate) const GROUP: &str = "#E69F00";
pub(crate) const FIT: &str = "#009E73";
const PREDICT: &str = "#CC79A7";

pub(crate) fn example(name: &str) -> PathBuf {
    repo(&format!("data-examples/{name}"))
}

pub(crate) fn pondus(file: &Path, args: &str) -> Command {
    let mut c = Command::cargo_bin("pondus").expect("the pondus binary is built");
    c.arg("fit").arg(file).args(args.split_whitespace());
    c
}

/// Runs pondus with `args` (where `OUT` stands for `dir/name`) and returns
/// the JSON result and the bytes of `dir/name`.
pub(crate) fn plot(file: &Path, args: &str, name: &str) -> (Value, Vec<u8>) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join(name);
    let args = args.replace("OUT", &out.display().to_string());
    let o = pondus(file, &format!("{args} --json -")).output().unwrap();
    assert!(
        o.status.success(),
        "pondus {args} failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let json = serde_json::from_slice(&o.stdout).unwrap();
    (json, std::fs::read(&out).expect("the plot file is written"))
}

/// Runs pondus expecting exit code 2; returns stderr.
pub(crate) fn usage_error(file: &Path, args: &str) -> String {
    let o = pondus(file, args).output().unwrap();
    assert_eq!(o.status.code(), Some(2), "pondus {args} should exit 2");
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// One SVG element: its tag, attributes and the text inside it.
#[derive(Debug)]
pub(crate) struct Element {
    pub(crate) tag: String,
    attrs: Vec<(String, String)>,
    pub(crate) text: String,
}

impl Element {
    pub(crate) fn attr(&self, name: &str) -> Option<&str> {
        self.attrs
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, v)| v.as_str())
    }
    pub(crate) fn num(&self, name: &str) -> f64 {
        self.attr(name)
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("{} has no numeric {name}", self.tag))
    }
    pub(crate) fn points(&self) -> Vec<(f64, f64)> {
        self.attr("points")
            .unwrap_or("")
            .split_whitespace()
            .map(|p| {
                let (x, y) = p.split_once(',').unwrap();
                (x.parse().unwrap(), y.parse().unwrap())
            })
            .collect()
    }
}

/// A small parser for the flat SVG that plotters writes (no nesting beyond
/// the root, attributes in double quotes).
pub(crate) fn parse_svg(bytes: &[u8]) -> Vec<Element> {
    let s = std::str::from_utf8(bytes).expect("SVG is UTF-8");
    assert!(s.starts_with("<svg"), "not an SVG document");
    assert!(s.trim_end().ends_with("</svg>"), "SVG is not closed");
    let mut out = Vec::new();
    for piece in s.split('<').skip(1) {
        if piece.starts_with('/') {
            continue;
        }
        let (head, rest) = piece.split_once('>').expect("tag is closed");
        let head = head.trim_end_matches('/');
        let (tag, mut attrs_text) = head.split_once(' ').unwrap_or((head, ""));
        let mut attrs = Vec::new();
        while let Some(eq) = attrs_text.find("=\"") {
            let name = attrs_text[..eq].trim().to_string();
            let after = &attrs_text[eq + 2..];
            let end = after.find('"').expect("attribute is closed");
            attrs.push((name, after[..end].to_string()));
            attrs_text = &after[end + 1..];
        }
        out.push(Element {
            tag: tag.to_string(),
            attrs,
            text: unescape(rest.trim()),
        });
    }
    out
}

fn unescape(text: &str) -> String {
    text.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&apos;", "'")
        .replace("&quot;", "\"")
        .replace("&amp;", "&")
}

pub(crate) fn count(svg: &[Element], tag: &str, attr: &str, value: &str) -> usize {
    svg.iter()
        .filter(|e| e.tag == tag && e.attr(attr) == Some(value))
        .count()
}

pub(crate) fn texts(svg: &[Element]) -> Vec<&str> {
    svg.iter()
        .filter(|e| e.tag == "text")
        .map(|e| e.text.as_str())
        .collect()
}

pub(crate) fn has_text(svg: &[Element], needle: &str) -> bool {
    texts(svg).iter().any(|t| t.contains(needle))
}

pub(crate) fn k(json: &Value) -> usize {
    json["k"].as_u64().unwrap() as usize
}

// ---------------------------------------------------------------- forest

#[test]
fn forest_has_a_marker_and_a_ci_line_per_study_the_diamond_and_the_prediction_interval() {
    let (json, bytes) = plot(
        &example("consortium-correlations.csv"),
        "--measure r --forest OUT",
        "f.svg",
    );
    let svg = parse_svg(&bytes);
    let k = k(&json);
    assert_eq!(k, 24);
    assert_eq!(
        count(&svg, "circle", "fill", STUDY),
        k,
        "one disc per study"
    );
    assert_eq!(
        count(&svg, "polyline", "stroke", STUDY),
        k,
        "one CI line per study"
    );
    assert_eq!(
        count(&svg, "polygon", "fill", POOLED),
        1,
        "one overall diamond"
    );
    assert_eq!(count(&svg, "polygon", "fill", GROUP), 0, "no subgroups");
    // The prediction interval is dashed (many pieces) plus two end bars.
    assert!(count(&svg, "polyline", "stroke", PREDICT) > 4);
    assert!(has_text(&svg, "Correlation (r)"), "axis title in words");
    assert!(has_text(&svg, "Prediction interval (95%)"));
    assert!(has_text(&svg, "Random-effects average (k = 24)"));
    for s in json["studies"].as_array().unwrap() {
        let label = s["study"].as_str().unwrap();
        assert!(has_text(&svg, label), "label {label} is shown");
    }
    // Marker areas follow the weights: the heaviest study has the largest disc.
    let discs: Vec<f64> = svg
        .iter()
        .filter(|e| e.tag == "circle" && e.attr("fill") == Some(STUDY))
        .map(|e| e.num("r"))
        .collect();
    let weights: Vec<f64> = json["studies"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["weight"].as_f64().unwrap())
        .collect();
    let heaviest = weights
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))
        .unwrap()
        .0;
    let lightest = weights
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))
        .unwrap()
        .0;
    assert!(discs[heaviest] > discs[lightest]);
    // The diamond spans the CI of the average: read in r.
    let avg = &json["average"]["reading"];
    let (lo, hi) = (
        avg["ci_low"].as_f64().unwrap(),
        avg["ci_high"].as_f64().unwrap(),
    );
    let text = format!(
        "{:.2} [{:.2}, {:.2}]",
        avg["estimate"].as_f64().unwrap(),
        lo,
        hi
    );
    assert!(has_text(&svg, &text), "{text}");
    // Pixel position of an r value, from the ticks labelled 0.0 and 0.4.
    let tick = |label: &str| {
        svg.iter()
            .find(|e| e.tag == "text" && e.text == label)
            .unwrap_or_else(|| panic!("tick {label}"))
            .num("x")
    };
    let (x0, x4) = (tick("0.0"), tick("0.4"));
    let px = |r: f64| x0 + r / 0.4 * (x4 - x0);
    let diamond = svg
        .iter()
        .find(|e| e.tag == "polygon" && e.attr("fill") == Some(POOLED))
        .unwrap()
        .points();
    let left = diamond.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    let right = diamond
        .iter()
        .map(|p| p.0)
        .fold(f64::NEG_INFINITY, f64::max);
    assert!(
        (left - px(lo)).abs() <= 1.5,
        "diamond starts at the CI's lower end"
    );
    assert!(
        (right - px(hi)).abs() <= 1.5,
        "diamond ends at the CI's upper end"
    );
}

#[test]
fn forest_groups_studies_by_a_categorical_moderator_with_their_own_averages() {
    let (json, bytes) = plot(
        &example("consortium-correlations.csv"),
        "--measure r --moderator mode --forest OUT",
        "g.svg",
    );
    let svg = parse_svg(&bytes);
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    assert_eq!(
        count(&svg, "polygon", "fill", GROUP),
        2,
        "one diamond per level"
    );
    assert_eq!(count(&svg, "polygon", "fill", POOLED), 1);
    let groups = &json["subgroups"][0];
    assert_eq!(groups["moderator"], "mode");
    let mut total = 0;
    for level in groups["levels"].as_array().unwrap() {
        let (name, n) = (
            level["level"].as_str().unwrap(),
            level["k"].as_u64().unwrap(),
        );
        total += n;
        assert!(
            has_text(&svg, &format!("mode = {name}  (k = {n})")),
            "{name}"
        );
        assert!(has_text(&svg, &format!("Average of {name} ({n} studies)")));
    }
    assert_eq!(total as usize, k(&json));
    // Each group's studies come between its header and its average.
    let t = texts(&svg);
    let head = t
        .iter()
        .position(|x| x.starts_with("mode = online"))
        .unwrap();
    let avg = t
        .iter()
        .position(|x| x.starts_with("Average of online"))
        .unwrap();
    let online: Vec<&str> = json["studies"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| s["moderators"][0] == "online")
        .map(|s| s["study"].as_str().unwrap())
        .collect();
    for label in online {
        let at = t.iter().position(|x| *x == label).unwrap();
        assert!(head < at && at < avg, "{label} is in the online group");
    }
}

#[test]
fn subgroup_averages_are_separate_fits_of_each_level() {
    // The per-level average in the result equals a fit of that level's rows alone.
    let file = example("consortium-correlations.csv");
    let (json, _) = plot(&file, "--measure r --moderator mode --forest OUT", "g.svg");
    let text = std::fs::read_to_string(&file).unwrap();
    let mut lines = text.lines();
    let mut online = format!("{}\n", lines.next().unwrap());
    for l in lines.filter(|l| l.ends_with(",online")) {
        online.push_str(l);
        online.push('\n');
    }
    let dir = tempfile::tempdir().unwrap();
    let sub = dir.path().join("online.csv");
    std::fs::write(&sub, online).unwrap();
    let o = pondus(&sub, "--measure r --json -").output().unwrap();
    assert!(o.status.success());
    let alone: Value = serde_json::from_slice(&o.stdout).unwrap();
    let level = json["subgroups"][0]["levels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|l| l["level"] == "online")
        .unwrap()
        .clone();
    for field in ["estimate", "ci_low", "ci_high", "pi_low", "pi_high"] {
        let a = level["pooled"][field].as_f64().unwrap();
        let b = alone["average"][field].as_f64().unwrap();
        assert!((a - b).abs() < 1e-10, "{field}: {a} vs {b}");
    }
    assert_eq!(level["k"], alone["k"]);
}

#[test]
fn forest_rows_follow_the_sort_key_and_can_show_fitted_values() {
    let file = example("published-slopes.csv");
    let (json, bytes) = plot(
        &file,
        "--measure slope --moderator mean_age --forest OUT --sort effect --show-fitted",
        "s.svg",
    );
    let svg = parse_svg(&bytes);
    let mut studies: Vec<(f64, String)> = json["studies"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            (
                s["effect"].as_f64().unwrap(),
                s["study"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    studies.sort_by(|a, b| a.0.total_cmp(&b.0));
    let t = texts(&svg);
    let shown: Vec<&str> = t
        .iter()
        .copied()
        .filter(|x| studies.iter().any(|s| s.1 == *x))
        .collect();
    let expected: Vec<&str> = studies.iter().map(|s| s.1.as_str()).collect();
    assert_eq!(shown, expected, "rows sorted by effect");
    // One open triangle per study for its fitted value.
    assert_eq!(count(&svg, "polygon", "stroke", FIT), k(&json));

    // Sorting by a moderator orders the rows by its values.
    let (json, bytes) = plot(
        &file,
        "--measure slope --moderator mean_age --forest OUT --sort mean_age",
        "m.svg",
    );
    let svg = parse_svg(&bytes);
    let mut by_age: Vec<(f64, String)> = json["studies"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            (
                s["moderators"][0].as_f64().unwrap(),
                s["study"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    by_age.sort_by(|a, b| a.0.total_cmp(&b.0));
    let t = texts(&svg);
    let shown: Vec<&str> = t
        .iter()
        .copied()
        .filter(|x| by_age.iter().any(|s| s.1 == *x))
        .collect();
    assert_eq!(
        shown,
        by_age.iter().map(|s| s.1.as_str()).collect::<Vec<_>>()
    );
    // ... and shows the moderator's values in a column headed by its name.
    assert!(has_text(&svg, "mean_age"));
    for (age, _) in &by_age {
        let shown = format!("{age}");
        assert!(has_text(&svg, &shown), "value {shown} is shown");
    }
}

#[test]
fn ratio_forest_uses_a_log_axis_with_the_no_effect_line_at_one() {
    let (json, bytes) = plot(
        &example("trial-events.csv"),
        "--measure log-or --forest OUT",
        "r.svg",
    );
    let svg = parse_svg(&bytes);
    assert!(has_text(&svg, "Odds ratio (log scale)"));
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    let one = svg
        .iter()
        .find(|e| e.tag == "text" && e.text == "1")
        .expect("a tick labelled 1");
    let x1 = one.num("x");
    let half = svg
        .iter()
        .find(|e| e.tag == "text" && e.text == "0.5")
        .expect("a tick labelled 0.5");
    let x_half = half.num("x");
    // A vertical grey line (the null) at the tick labelled 1.
    let null = svg.iter().any(|e| {
        e.tag == "polyline" && e.attr("stroke") == Some("#B4B9C2") && {
            let p = e.points();
            p.len() == 2 && p[0].0 == p[1].0 && (p[0].0 - x1).abs() <= 1.0
        }
    });
    assert!(null, "no-effect line at ratio 1");
    // Log axis: 0.5 and 1 are as far apart as 1 and 2 would be; check 0.5 < 1 in position.
    assert!(x_half < x1);
    if let Some(two) = svg.iter().find(|e| e.tag == "text" && e.text == "2") {
        assert!(((two.num("x") - x1) - (x1 - x_half)).abs() <= 1.5);
    }
}

#[test]
fn long_labels_are_shortened_and_never_reach_the_plot_area() {
    // Too long even for two lines (see forest_shape.rs for labels that wrap whole).
    let long = "An extremely long study label that would run straight into the intervals if it were drawn in full and then some more words so that two lines cannot hold it ending in full";
    let csv = format!("study,effect,variance\n{long},0.3,0.02\nB,0.1,0.05\nC,0.5,0.03\n");
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in.csv");
    std::fs::write(&input, csv).unwrap();
    let (_, bytes) = plot(&input, "--forest OUT", "l.svg");
    let svg = parse_svg(&bytes);
    let at = svg
        .iter()
        .position(|e| e.tag == "text" && e.text.starts_with("An extremely"))
        .unwrap();
    let (label, rest) = (&svg[at], &svg[at + 1]);
    // Both ends are kept on two lines, the middle gives way.
    assert!(label.text.ends_with('…'), "{}", label.text);
    assert!(
        rest.text.starts_with("… ") && rest.text.ends_with("ending in full"),
        "{}",
        rest.text
    );
    assert_eq!(label.num("x"), rest.num("x"));
    assert!(rest.num("y") > label.num("y"));
    assert!(label.text.chars().count() + rest.text.chars().count() < long.chars().count());
    // Every CI line starts right of the label column's text start plus its width budget.
    let x_label = label.num("x");
    let min_ci_x = svg
        .iter()
        .filter(|e| e.tag == "polyline" && e.attr("stroke") == Some(STUDY))
        .flat_map(|e| e.points())
        .map(|p| p.0)
        .fold(f64::INFINITY, f64::min);
    assert!(
        min_ci_x > x_label + 200.0,
        "the plot area is right of the labels"
    );
}

#[test]
fn forest_height_grows_with_the_number_of_studies() {
    let mut heights = Vec::new();
    for n in [3usize, 30, 300] {
        let mut csv = String::from("study,effect,variance\n");
        for i in 0..n {
            csv.push_str(&format!(
                "S{i},{},{}\n",
                (i % 7) as f64 * 0.05,
                0.01 + (i % 5) as f64 * 0.01
            ));
        }
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("in.csv");
        std::fs::write(&input, csv).unwrap();
        let (_, bytes) = plot(&input, "--forest OUT", "h.svg");
        let svg = parse_svg(&bytes);
        assert_eq!(count(&svg, "circle", "fill", STUDY), n);
        heights.push(svg[0].num("height"));
    }
    assert!(
        heights[0] < heights[1] && heights[1] < heights[2],
        "{heights:?}"
    );
}

// ---------------------------------------------------------------- PNG

/// Width, height and resolution (dots per inch, from the `pHYs` chunk) of a PNG.
fn png_info(bytes: &[u8]) -> (u32, u32, f64) {
    let decoder = png::Decoder::new(std::io::Cursor::new(bytes));
    let mut reader = decoder.read_info().expect("a PNG header");
    let dims = reader.info().pixel_dims.expect("a pHYs chunk");
    assert_eq!(dims.unit, png::Unit::Meter);
    assert_eq!(dims.xppu, dims.yppu);
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).expect("the image decodes");
    // Not blank: some pixels are not white.
    assert!(buf.iter().any(|&b| b < 200), "the image has ink");
    (info.width, info.height, f64::from(dims.xppu) * 0.0254)
}

pub(crate) fn png_size(bytes: &[u8]) -> (u32, u32) {
    let (w, h, _) = png_info(bytes);
    (w, h)
}

#[test]
fn png_plots_decode_and_have_the_requested_size_at_the_requested_dpi() {
    let file = example("consortium-correlations.csv");
    for (flag, name) in [
        ("--forest", "f.png"),
        ("--bubble", "b.png"),
        ("--funnel", "u.png"),
    ] {
        // --width and --height are CSS pixels (96 per inch); the default 150 dpi
        // scales them by 150/96.
        let (_, bytes) = plot(
            &file,
            &format!("--measure r --moderator session_minutes {flag} OUT --width 840 --height 700"),
            name,
        );
        let (w, h, dpi) = png_info(&bytes);
        assert_eq!((w, h), (1313, 1094), "{flag}");
        assert!((dpi - 150.0).abs() < 0.1, "{flag}: {dpi} dpi");
    }
    // 300 dpi doubles the pixels of 150 dpi: the same figure, twice as sharp.
    let (_, bytes) = plot(
        &file,
        "--measure r --forest OUT --width 960 --height 600 --dpi 300",
        "print.png",
    );
    let (w, h, dpi) = png_info(&bytes);
    assert_eq!((w, h), (3000, 1875));
    assert!((dpi - 300.0).abs() < 0.1, "{dpi} dpi");
    // Automatic size: the forest plot is taller for more studies than for fewer.
    let (_, bytes) = plot(&file, "--measure r --forest OUT", "auto.png");
    let (w, h) = png_size(&bytes);
    assert_eq!(w, 1563, "1000 CSS pixels at 150 dpi");
    assert!(h > 900, "{h}");
}

/// The text layer of a PDF (Poppler's `pdftotext`), or None without it
/// (then `PONDUS_REQUIRE_PDFTOPPM` turns the absence into a failure).
pub(crate) fn pdf_text(bytes: &[u8]) -> Option<String> {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.pdf");
    std::fs::write(&path, bytes).unwrap();
    match std::process::Command::new("pdftotext")
        .arg(&path)
        .arg("-")
        .output()
    {
        Ok(o) => {
            assert!(o.status.success(), "pdftotext reads the PDF");
            Some(String::from_utf8(o.stdout).unwrap())
        }
        Err(_) if std::env::var_os("PONDUS_REQUIRE_PDFTOPPM").is_some() => {
            panic!("PONDUS_REQUIRE_PDFTOPPM is set but pdftotext was not found (install poppler-utils)")
        }
        Err(_) => {
            eprintln!(
                "pdf text check: SKIPPED, no pdftotext on this machine (CI installs poppler-utils)"
            );
            None
        }
    }
}

/// The page size of a one-page PDF in points, from its `/MediaBox`.
fn media_box(bytes: &[u8]) -> (f64, f64) {
    let text = String::from_utf8_lossy(bytes);
    let at = text.find("/MediaBox [").expect("a MediaBox") + "/MediaBox [".len();
    let nums: Vec<f64> = text[at..]
        .split(']')
        .next()
        .unwrap()
        .split_whitespace()
        .map(|n| n.parse().unwrap())
        .collect();
    (nums[2] - nums[0], nums[3] - nums[1])
}

#[test]
fn pdf_plots_are_vector_pages_of_the_figure_size_with_selectable_text() {
    let file = example("consortium-correlations.csv");
    let (json, pdf) = plot(
        &file,
        "--measure r --forest OUT --width 960 --height 720",
        "f.pdf",
    );
    assert!(pdf.starts_with(b"%PDF-"), "a PDF file");
    // 960 × 720 CSS pixels = 10 × 7.5 inches = 720 × 540 points.
    let (w, h) = media_box(&pdf);
    assert!(
        (w - 720.0).abs() < 0.01 && (h - 540.0).abs() < 0.01,
        "{w} × {h} pt"
    );
    // The same figure as the SVG: one marker per study there; every study's
    // label in the PDF's text layer.
    let (_, svg) = plot(
        &file,
        "--measure r --forest OUT --width 960 --height 720",
        "f.svg",
    );
    assert_eq!(count(&parse_svg(&svg), "circle", "fill", STUDY), k(&json));
    assert!(
        pdf.len() < 150_000,
        "the PDF embeds a font subset: {} bytes",
        pdf.len()
    );
    if let Some(text) = pdf_text(&pdf) {
        for s in json["studies"].as_array().unwrap() {
            let label = s["study"].as_str().unwrap();
            assert!(text.contains(label), "label {label} is selectable text");
        }
        assert!(text.contains("Correlation (r)") && text.contains("Knapp–Hartung"));
    }
}

#[test]
fn forest_title_and_axis_label_can_be_given() {
    let (_, bytes) = plot(
        &example("consortium-correlations.csv"),
        "--measure r --forest OUT --title Replications<&> --x-label Pearson's-r",
        "t.svg",
    );
    let svg = parse_svg(&bytes);
    assert!(
        has_text(&svg, "Replications<&>"),
        "the title as given (escaped)"
    );
    assert!(has_text(&svg, "Pearson's-r"));
    assert!(
        !has_text(&svg, "Correlation (r)"),
        "the default axis title is replaced"
    );
}

// ---------------------------------------------------------------- bubble

#[test]
fn bubble_plot_draws_studies_the_fitted_line_and_both_bands() {
    let (json, bytes) = plot(
        &example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --bubble OUT",
        "b.svg",
    );
    let svg = parse_svg(&bytes);
    assert_eq!(
        count(&svg, "circle", "fill", STUDY),
        k(&json),
        "one bubble per study"
    );
    let curve = &json["curves"][0];
    assert_eq!(curve["moderator"], "session_minutes");
    let n_points = curve["points"].as_array().unwrap().len();
    let line = svg
        .iter()
        .find(|e| e.tag == "polyline" && e.attr("stroke") == Some(FIT))
        .expect("the fitted line");
    assert_eq!(line.points().len(), n_points);
    assert_eq!(
        count(&svg, "polygon", "fill", FIT),
        1,
        "the confidence band"
    );
    assert!(
        count(&svg, "polyline", "stroke", PREDICT) > 10,
        "dashed prediction band"
    );
    assert!(has_text(&svg, "session_minutes"), "x axis title");
    assert!(has_text(&svg, "Correlation (r)"), "y axis title");
    // The line rises with session length here (positive slope).
    let p = line.points();
    assert!(
        p.last().unwrap().1 < p[0].1,
        "higher effect is drawn higher"
    );
}

#[test]
fn fitted_line_matches_predictions_at_the_same_values() {
    let file = example("consortium-correlations.csv");
    let (json, _) = plot(
        &file,
        "--measure r --moderator session_minutes --moderator mode --bubble OUT --at session_minutes=10,mode=in_person",
        "b.svg",
    );
    let first = &json["curves"][0]["points"][0];
    assert_eq!(
        first["x"].as_f64().unwrap(),
        10.0,
        "the line starts at the smallest value"
    );
    let pred = &json["predictions"][0];
    for f in ["estimate", "ci_low", "ci_high", "pi_low", "pi_high"] {
        let (a, b) = (first[f].as_f64().unwrap(), pred[f].as_f64().unwrap());
        assert!((a - b).abs() < 1e-12, "{f}: {a} vs {b}");
    }
}

#[test]
fn bubble_plot_of_a_categorical_moderator_shows_each_levels_prediction() {
    let (json, bytes) = plot(
        &example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --moderator mode --bubble OUT --bubble-x mode",
        "c.svg",
    );
    let svg = parse_svg(&bytes);
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    assert_eq!(
        count(&svg, "polygon", "fill", FIT),
        2,
        "one predicted-effect diamond per level"
    );
    assert!(has_text(&svg, "online (k = 13)") && has_text(&svg, "in_person (k = 11)"));
    assert!(has_text(&svg, "held at the mean of session_minutes"));
}

#[test]
fn plots_the_model_cannot_support_are_clear_errors() {
    let file = example("consortium-correlations.csv");
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("a.svg");
    let b = dir.path().join("b.svg");
    let e = usage_error(
        &file,
        &format!(
            "--measure r --forest {} --bubble {}",
            a.display(),
            b.display()
        ),
    );
    assert!(e.contains("--bubble") && e.contains("--moderator"), "{e}");
    assert!(
        !a.exists() && !b.exists(),
        "nothing is written when a plot fails"
    );
    let e = usage_error(
        &file,
        &format!(
            "--measure r --moderator mode --bubble-x dose --bubble {}",
            b.display()
        ),
    );
    assert!(e.contains("--bubble-x"), "{e}");
    let e = usage_error(
        &file,
        &format!("--measure r --forest {} --show-fitted", a.display()),
    );
    assert!(e.contains("--show-fitted"), "{e}");
    let e = usage_error(
        &file,
        &format!("--measure r --forest {} --sort nothing", a.display()),
    );
    assert!(e.contains("--sort") && e.contains("nothing"), "{e}");
}

#[test]
fn plot_flags_are_checked() {
    let file = example("consortium-correlations.csv");
    let e = usage_error(&file, "--measure r --forest out.jpg");
    assert!(
        e.contains("--forest") && e.contains(".svg, .png or .pdf"),
        "{e}"
    );
    let e = usage_error(&file, "--measure r --funnel -");
    assert!(e.contains("--funnel"), "{e}");
    let e = usage_error(&file, "--measure r --sort effect");
    assert!(e.contains("--sort") && e.contains("--forest"), "{e}");
    let e = usage_error(&file, "--measure r --contours");
    assert!(e.contains("--contours"), "{e}");
    let e = usage_error(&file, "--measure r --forest a.svg --width 10");
    assert!(e.contains("--width"), "{e}");
    let e = usage_error(&file, "--measure r --forest a.svg --bubble a.svg");
    assert!(e.contains("--bubble"), "{e}");
    // A PNG too large to draw is refused before any memory is taken.
    let dir = tempfile::tempdir().unwrap();
    let big = dir.path().join("big.png");
    let e = usage_error(
        &file,
        &format!(
            "--measure r --forest {} --width 30000 --height 30000",
            big.display()
        ),
    );
    assert!(e.contains("--forest") && e.contains(".svg"), "{e}");
    assert!(!big.exists());
    let e = usage_error(
        &file,
        &format!("--measure r --funnel {} --height 200", big.display()),
    );
    assert!(e.contains("--height"), "{e}");
    // An output path equal to the input is refused.
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("data.svg");
    std::fs::copy(&file, &input).unwrap();
    let before = std::fs::read(&input).unwrap();
    let e = usage_error(&input, &format!("--measure r --forest {}", input.display()));
    assert!(e.contains("--forest") && e.contains("input"), "{e}");
    assert_eq!(std::fs::read(&input).unwrap(), before);
}

// ---------------------------------------------------------------- funnel

#[test]
fn funnel_plot_has_one_point_per_study_an_inverted_se_axis_and_contours() {
    let (json, bytes) = plot(
        &example("trial-events.csv"),
        "--measure log-or --funnel OUT --contours",
        "u.svg",
    );
    let svg = parse_svg(&bytes);
    let studies = json["studies"].as_array().unwrap();
    assert_eq!(count(&svg, "circle", "fill", STUDY), studies.len());
    for label in ["p < 0.01", "0.01 ≤ p < 0.05", "0.05 ≤ p < 0.10"] {
        assert!(has_text(&svg, label), "legend {label}");
    }
    assert!(has_text(&svg, "standard error") && has_text(&svg, "odds ratio (log scale)"));
    // Larger standard errors are drawn lower (the axis points down).
    let points: Vec<f64> = svg
        .iter()
        .filter(|e| e.tag == "circle" && e.attr("fill") == Some(STUDY))
        .map(|e| e.num("cy"))
        .collect();
    let ses: Vec<f64> = studies
        .iter()
        .map(|s| s["variance"].as_f64().unwrap().sqrt())
        .collect();
    let (imax, _) = ses
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))
        .unwrap();
    let (imin, _) = ses
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))
        .unwrap();
    assert!(points[imax] > points[imin]);
    // Without --contours there is no legend.
    let (_, bytes) = plot(
        &example("trial-events.csv"),
        "--measure log-or --funnel OUT",
        "n.svg",
    );
    assert!(!has_text(&parse_svg(&bytes), "p < 0.01"));
}

#[test]
fn funnel_plot_with_moderators_shows_residuals() {
    let (json, bytes) = plot(
        &example("published-slopes.csv"),
        "--measure slope --moderator mean_age --funnel OUT",
        "r.svg",
    );
    let svg = parse_svg(&bytes);
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    assert!(has_text(&svg, "Residuals against their standard error"));
    assert!(has_text(&svg, "residual (slope"));
}

#[test]
fn svg_carries_a_subset_of_the_bundled_font_so_it_renders_like_the_png() {
    let (_, svg) = plot(
        &example("published-slopes.csv"),
        "--measure slope --moderator mean_age --funnel OUT",
        "funnel.svg",
    );
    let text = String::from_utf8(svg).unwrap();
    assert!(text.contains("@font-face{font-family:\"DejaVu Sans\";src:url(data:font/ttf;base64,"));
    let start = text.find("base64,").unwrap() + "base64,".len();
    let len = text[start..].find(')').unwrap();
    let font = decode_base64(&text[start..start + len]);
    // The subset holds every character the figure's text uses, with the
    // bundled font's advance widths; the whole figure stays under 100 KB.
    let full = std::fs::read(repo("assets/fonts/DejaVuSans.ttf")).unwrap();
    let full = ttf_parser::Face::parse(&full, 0).unwrap();
    let cut = ttf_parser::Face::parse(&font, 0).expect("the embedded font parses");
    let svg = parse_svg(text.as_bytes());
    for t in texts(&svg) {
        for c in t.chars() {
            let g = cut
                .glyph_index(c)
                .unwrap_or_else(|| panic!("'{c}' is in the subset"));
            let g0 = full.glyph_index(c).unwrap();
            assert_eq!(
                cut.glyph_hor_advance(g),
                full.glyph_hor_advance(g0),
                "'{c}'"
            );
        }
    }
    assert!(
        cut.number_of_glyphs() < 200,
        "{} glyphs",
        cut.number_of_glyphs()
    );
    assert!(text.len() < 100_000, "{} bytes", text.len());
}

/// Standard base64 decoding (RFC 4648).
fn decode_base64(text: &str) -> Vec<u8> {
    let value = |c: u8| match c {
        b'A'..=b'Z' => c - b'A',
        b'a'..=b'z' => c - b'a' + 26,
        b'0'..=b'9' => c - b'0' + 52,
        b'+' => 62,
        b'/' => 63,
        _ => panic!("not base64: {c}"),
    };
    let bytes: Vec<u8> = text.bytes().filter(|&c| c != b'=').collect();
    let mut out = Vec::new();
    for chunk in bytes.chunks(4) {
        let mut n = 0u32;
        for (i, &c) in chunk.iter().enumerate() {
            n |= u32::from(value(c)) << (18 - 6 * i);
        }
        for i in 0..chunk.len() - 1 {
            out.push((n >> (16 - 8 * i)) as u8);
        }
    }
    out
}

#[test]
fn power_curve_marks_the_k_needed_and_every_simulated_power() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("power.svg");
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .args(
            "plan --measure smd --n 60 --tau2 0.02 --share 0.5 --moderator-effect 0.3 --test kh \
             --target-power 0.8 --simulate 200 --seed 3 --json - --curve"
                .split_whitespace(),
        )
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let json: Value = serde_json::from_slice(&o.stdout).unwrap();
    let svg = parse_svg(&std::fs::read(&out).unwrap());
    let k_needed = json["k_needed"].as_u64().expect("k is solved");
    assert!(has_text(&svg, &format!("k needed = {k_needed}")));
    // One open circle per simulated power: at the planned k and at each k
    // the solver simulated (those inside the curve's range of k).
    let kmax = json["table"].as_array().unwrap().last().unwrap()["k"]
        .as_u64()
        .unwrap();
    let mut simulated = usize::from(!json["simulation"].is_null());
    if let Some(ev) = json["k_needed_simulated"]["evaluated"].as_array() {
        simulated += ev
            .iter()
            .filter(|e| e["k"].as_u64().unwrap() <= kmax)
            .count();
    }
    assert!(simulated > 0, "the run simulated");
    let open = svg
        .iter()
        .filter(|e| e.tag == "circle" && e.attr("stroke") == Some(FIT))
        .count();
    assert_eq!(open, simulated);
    assert!(has_text(&svg, "simulated power"));
}
