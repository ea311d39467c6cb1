//! The bubble plot beside a categorical moderator and of a 0/1 moderator,
//! through the binary: the SVG's markers are counted by shape (a disc is a
//! `circle`, the other shapes are polygons with their own number of
//! corners), the legend's text is read, and the fitted lines per level in
//! the JSON are checked against the model's coefficients.
//!
//! The 0/1 and three-level data are made in the test from the bundled
//! consortium example (mode coded 0/1; a site type assigned by row): they
//! exist to exercise the drawing, not as findings.

use crate::plots::{count, example, has_text, k, parse_svg, plot, Element, FIT, STUDY};
use serde_json::Value;
use std::path::Path;

/// The level colours of `src/render/figure/marks.rs`, in level order.
const LEVEL: [&str; 3] = ["#1D3461", "#A3303A", "#2A8C82"];

/// Markers outlined in `color`: discs (`circle`) or polygons with `corners` corners.
fn marks(svg: &[Element], color: &str, corners: Option<usize>) -> usize {
    svg.iter()
        .filter(|e| e.attr("stroke") == Some(color))
        .filter(|e| match corners {
            None => e.tag == "circle",
            Some(n) => e.tag == "polygon" && e.points().len() == n,
        })
        .count()
}

/// The studies per level of moderator `m` in the JSON result.
fn counts(json: &Value, m: usize) -> Vec<usize> {
    json["model"]["moderators"][m]["kind"]["counts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_u64().unwrap() as usize)
        .collect()
}

fn coefficient(json: &Value, term: &str) -> f64 {
    json["coefficients"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["term"] == term)
        .unwrap_or_else(|| panic!("no coefficient {term}"))["estimate"]
        .as_f64()
        .unwrap()
}

/// The estimates of the fitted line at `level`.
fn line(json: &Value, level: &str) -> Vec<(f64, f64)> {
    json["level_curves"]
        .as_array()
        .expect("level_curves")
        .iter()
        .find(|c| c["level"] == level)
        .unwrap()["points"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| (p["x"].as_f64().unwrap(), p["estimate"].as_f64().unwrap()))
        .collect()
}

#[test]
fn levels_beside_a_numeric_moderator_are_marked_by_shape_with_a_legend_and_a_line_each() {
    let (json, bytes) = plot(
        &example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --moderator mode --bubble OUT",
        "b.svg",
    );
    let svg = parse_svg(&bytes);
    let n = counts(&json, 1);
    // One marker per study in its level's shape, and one in the legend.
    assert_eq!(marks(&svg, LEVEL[0], None), n[0] + 1, "discs: in_person");
    assert_eq!(
        marks(&svg, LEVEL[1], Some(3)),
        n[1] + 1,
        "triangles: online"
    );
    assert_eq!(count(&svg, "circle", "fill", STUDY), 0, "no plain bubbles");
    assert!(has_text(&svg, "mode:"));
    assert!(has_text(&svg, &format!("in_person (k = {})", n[0])));
    assert!(has_text(&svg, &format!("online (k = {})", n[1])));
    // The reference level's line is solid with one vertex per point.
    let points = json["level_curves"][0]["points"].as_array().unwrap().len();
    assert!(svg.iter().any(|e| e.tag == "polyline"
        && e.attr("stroke") == Some(LEVEL[0])
        && e.points().len() == points));
    // Each level's confidence band is shaded in its colour.
    assert_eq!(count(&svg, "polygon", "fill", LEVEL[0]), 1);
    // The lines in the JSON: at the reference level the same as the main
    // line; the other level shifted by its coefficient (no interaction).
    let main: Vec<f64> = json["curves"][0]["points"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["estimate"].as_f64().unwrap())
        .collect();
    let (reference, online) = (line(&json, "in_person"), line(&json, "online"));
    let shift = coefficient(&json, "mode=online");
    for ((a, b), m) in reference.iter().zip(&online).zip(&main) {
        assert!((a.1 - m).abs() < 1e-12);
        assert!(
            (b.1 - a.1 - shift).abs() < 1e-10,
            "{} vs {shift}",
            b.1 - a.1
        );
    }
}

#[test]
fn with_an_interaction_each_level_has_its_own_slope() {
    let (json, bytes) = plot(
        &example("programme-sites.csv"),
        "--measure smd --moderator dosage_hours --moderator delivery \
         --interaction dosage_hours,delivery --bubble OUT",
        "b.svg",
    );
    let slope = |l: &[(f64, f64)]| {
        let (a, b) = (l[0], l[l.len() - 1]);
        (b.1 - a.1) / (b.0 - a.0)
    };
    let (staff, volunteer) = (line(&json, "staff"), line(&json, "volunteer"));
    let b1 = coefficient(&json, "dosage_hours");
    let b3 = coefficient(&json, "dosage_hours×delivery=volunteer");
    assert!((slope(&staff) - b1).abs() < 1e-10);
    assert!((slope(&volunteer) - (b1 + b3)).abs() < 1e-10);
    let svg = parse_svg(&bytes);
    let n = counts(&json, 1);
    assert_eq!(marks(&svg, LEVEL[1], Some(3)), n[1] + 1);
}

/// The consortium example with `remote` (1 for online, 0 in person) and a
/// three-level `site_type` by row, written into `dir`.
fn coded_copy(dir: &Path) -> std::path::PathBuf {
    let text = std::fs::read_to_string(example("consortium-correlations.csv")).unwrap();
    let mut out = String::new();
    for (i, row) in text.lines().enumerate() {
        if i == 0 {
            out.push_str(&format!("{row},remote,site_type\n"));
        } else {
            let remote = u8::from(row.ends_with(",online"));
            let site = ["campus", "clinic", "field"][(i - 1) % 3];
            out.push_str(&format!("{row},{remote},{site}\n"));
        }
    }
    let path = dir.join("coded.csv");
    std::fs::write(&path, out).unwrap();
    path
}

/// Centred texts that read as a number: x-axis tick labels.
fn numeric_x_ticks(svg: &[Element]) -> Vec<String> {
    svg.iter()
        .filter(|e| e.tag == "text" && e.attr("text-anchor") == Some("middle"))
        .map(|e| e.text.replace('\u{2212}', "-"))
        .filter(|t| t.parse::<f64>().is_ok())
        .collect()
}

#[test]
fn a_zero_one_moderator_is_drawn_as_two_groups_not_a_continuous_axis() {
    let dir = tempfile::tempdir().unwrap();
    let data = coded_copy(dir.path());
    let (json, bytes) = plot(
        &data,
        "--measure r --moderator remote --bubble OUT",
        "b.svg",
    );
    let svg = parse_svg(&bytes);
    assert_eq!(
        numeric_x_ticks(&svg),
        Vec::<String>::new(),
        "no ticks at −0.1, 0.5, …"
    );
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    let n1 = json["studies"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| s["moderators"][0] == 1.0)
        .count();
    assert!(n1 > 0, "the JSON holds the studies' values");
    assert!(has_text(
        &svg,
        &format!("remote = 0 (k = {})", k(&json) - n1)
    ));
    assert!(has_text(&svg, &format!("remote = 1 (k = {n1})")));
    assert_eq!(
        count(&svg, "polygon", "fill", FIT),
        2,
        "a fitted value at 0 and at 1"
    );
    assert!(has_text(&svg, "from remote = 0 to remote = 1"));

    // The same beside a three-level moderator: each level's fitted value at
    // 0 and at 1, filled, in its own shape.
    let (json, bytes) = plot(
        &data,
        "--measure r --moderator remote --moderator site_type --bubble OUT",
        "c.svg",
    );
    let svg = parse_svg(&bytes);
    assert!(numeric_x_ticks(&svg).is_empty());
    let n = counts(&json, 1);
    let filled = |color: &str, corners: usize| {
        svg.iter()
            .filter(|e| e.tag == "polygon" && e.attr("fill") == Some(color))
            .filter(|e| e.attr("fill-opacity").is_none() && e.points().len() == corners)
            .count()
    };
    assert_eq!(marks(&svg, LEVEL[0], None), n[0] + 1);
    assert_eq!(marks(&svg, LEVEL[1], Some(3)), n[1] + 1);
    assert_eq!(marks(&svg, LEVEL[2], Some(4)), n[2] + 1);
    assert_eq!(filled(LEVEL[1], 3), 2);
    assert_eq!(filled(LEVEL[2], 4), 2);
    assert!(has_text(&svg, "site_type:") && has_text(&svg, &format!("field (k = {})", n[2])));
}
