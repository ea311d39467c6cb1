//! A forest plot the author shapes: columns of the data beside the labels
//! (`--columns`), rows grouped by any column (`--group-by`), rows sorted by
//! any column (`--sort`), the text size (`--font-size`) and long labels
//! wrapped onto two lines. Each through the binary, checked in the SVG.

use crate::plots::{
    count, has_text, k, parse_svg, pdf_text, plot, pondus, texts, Element, GROUP, STUDY,
};
use std::path::PathBuf;

/// Invented data for these tests: sizes written with trailing zeros and a
/// leading zero (shown as given), years, countries and a categorical arm.
const DATA: &str = "study,effect,variance,n,year,country,arm\n\
Abel 2009,0.30,0.020,120.50,2009,Norway,a\n\
Borg 2015,0.10,0.050,080,2015,Chile,b\n\
Cruz 2011,0.45,0.030,64,2011,Norway,a\n\
Dahl 2009,0.22,0.015,300,2009,Japan,b\n\
Egan 2020,0.05,0.040,45,2020,Chile,a\n\
Falk 2013,0.38,0.025,9,2013,Japan,b\n";

/// The data written to a scratch folder (kept alive by the returned guard).
fn data() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("shape.csv");
    std::fs::write(&path, DATA).unwrap();
    (dir, path)
}

/// The studies' labels in the order their rows are drawn.
fn row_order<'a>(svg: &'a [Element], json: &serde_json::Value) -> Vec<&'a str> {
    let labels: Vec<String> = json["studies"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["study"].as_str().unwrap().to_string())
        .collect();
    texts(svg)
        .into_iter()
        .filter(|t| labels.iter().any(|l| l == t))
        .collect()
}

/// The text elements reading exactly `t`.
fn text_at<'a>(svg: &'a [Element], t: &str) -> Vec<&'a Element> {
    svg.iter()
        .filter(|e| e.tag == "text" && e.text == t)
        .collect()
}

#[test]
fn columns_of_the_data_are_drawn_beside_the_labels_as_written() {
    let (_dir, file) = data();
    let (json, bytes) = plot(&file, "--forest OUT --columns n,year,country", "c.svg");
    let svg = parse_svg(&bytes);
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    // Headers are the column names; cells appear as written in the file.
    for head in ["n", "year", "country"] {
        assert_eq!(text_at(&svg, head).len(), 1, "header {head}");
    }
    for cell in [
        "120.50", "080", "64", "300", "45", "9", "Norway", "Chile", "Japan",
    ] {
        assert!(!text_at(&svg, cell).is_empty(), "cell {cell} is shown");
    }
    // The result carries the cells, as written.
    let first = &json["studies"][0]["cells"];
    assert_eq!(first["n"], "120.50");
    assert_eq!(first["country"], "Norway");
    // The columns stand between the labels and the plot area.
    let label_x = text_at(&svg, "Abel 2009")[0].num("x");
    let ci_left = svg
        .iter()
        .filter(|e| e.tag == "polyline" && e.attr("stroke") == Some(STUDY))
        .flat_map(Element::points)
        .map(|p| p.0)
        .fold(f64::INFINITY, f64::min);
    for cell in ["120.50", "Norway", "2009"] {
        for e in text_at(&svg, cell) {
            let x = e.num("x");
            assert!(label_x < x && x < ci_left, "{cell} at {x}");
        }
    }
    // Without the flag, no cells in the result and no such column.
    let (json, bytes) = plot(&file, "--forest OUT", "p.svg");
    assert!(json["studies"][0].get("cells").is_none());
    assert!(text_at(&parse_svg(&bytes), "120.50").is_empty());
}

#[test]
fn unknown_columns_are_refused_naming_the_flag_and_the_columns_and_nothing_is_written() {
    let (dir, file) = data();
    for (flag, extra) in [
        ("--columns", "--columns n,nope"),
        ("--group-by", "--group-by nope"),
        ("--sort", "--sort nope"),
    ] {
        let out = dir.path().join("f.svg");
        let json = dir.path().join("r.json");
        let o = pondus(
            &file,
            &format!(
                "--forest {} --json {} {extra}",
                out.display(),
                json.display()
            ),
        )
        .output()
        .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{extra}: {err}");
        assert!(
            err.contains(flag)
                && err.contains("'nope'")
                && err.contains("study, effect, variance, n, year, country, arm"),
            "{err}"
        );
        assert!(!out.exists() && !json.exists(), "{extra}: nothing written");
    }
}

#[test]
fn rows_group_by_any_column_with_a_heading_per_group_or_not_at_all() {
    let (_dir, file) = data();
    let (json, bytes) = plot(&file, "--forest OUT --group-by country", "g.svg");
    let svg = parse_svg(&bytes);
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    // Alphabetical groups, each heading above its own studies.
    let t = texts(&svg);
    let head = |c: &str, n: usize| {
        t.iter()
            .position(|x| *x == format!("country = {c}  (k = {n})"))
            .unwrap_or_else(|| panic!("heading of {c}"))
    };
    let (chile, japan, norway) = (head("Chile", 2), head("Japan", 2), head("Norway", 2));
    assert!(chile < japan && japan < norway);
    let at = |l: &str| t.iter().position(|x| *x == l).unwrap();
    for (l, lo, hi) in [
        ("Borg 2015", chile, japan),
        ("Egan 2020", chile, japan),
        ("Dahl 2009", japan, norway),
        ("Falk 2013", japan, norway),
        ("Abel 2009", norway, usize::MAX),
        ("Cruz 2011", norway, usize::MAX),
    ] {
        assert!(lo < at(l) && at(l) < hi, "{l} in its group");
    }
    // A column that is not a moderator has no group averages.
    assert_eq!(count(&svg, "polygon", "fill", GROUP), 0);
    // A numeric column's groups ascend numerically.
    let (_, bytes) = plot(&file, "--forest OUT --group-by year", "y.svg");
    let t: Vec<String> = texts(&parse_svg(&bytes))
        .into_iter()
        .filter(|x| x.starts_with("year = "))
        .map(str::to_string)
        .collect();
    assert_eq!(
        t,
        ["2009", "2011", "2013", "2015", "2020"]
            .iter()
            .zip([2, 1, 1, 1, 1])
            .map(|(y, n)| format!("year = {y}  (k = {n})"))
            .collect::<Vec<_>>()
    );
    // A categorical moderator groups by default, with each level's average;
    // `none` turns that off.
    let (_, bytes) = plot(&file, "--forest OUT --moderator arm", "m.svg");
    let svg = parse_svg(&bytes);
    assert!(has_text(&svg, "arm = a  (k = 3)"));
    assert_eq!(count(&svg, "polygon", "fill", GROUP), 2);
    let (json, bytes) = plot(
        &file,
        "--forest OUT --moderator arm --group-by none",
        "n.svg",
    );
    let svg = parse_svg(&bytes);
    assert!(!has_text(&svg, "arm = "));
    assert_eq!(count(&svg, "polygon", "fill", GROUP), 0);
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    // Another column in place of the moderator: its groups, no averages.
    let (_, bytes) = plot(
        &file,
        "--forest OUT --moderator arm --group-by country",
        "o.svg",
    );
    let svg = parse_svg(&bytes);
    assert!(has_text(&svg, "country = Chile  (k = 2)") && !has_text(&svg, "arm = "));
}

#[test]
fn rows_sort_by_any_column_numbers_numerically_and_text_in_order() {
    let (_dir, file) = data();
    // "9" < "45" < "64" < "080" < "120.50" < "300" as numbers (as text,
    // "080" and "120.50" would come first).
    let (json, bytes) = plot(&file, "--forest OUT --sort n", "n.svg");
    let svg = parse_svg(&bytes);
    assert_eq!(
        row_order(&svg, &json),
        [
            "Falk 2013",
            "Egan 2020",
            "Cruz 2011",
            "Borg 2015",
            "Abel 2009",
            "Dahl 2009"
        ]
    );
    // The sort column is shown, headed by its name.
    assert_eq!(text_at(&svg, "n").len(), 1);
    assert_eq!(text_at(&svg, "120.50").len(), 1);
    // Text: alphabetical; ties keep the file's order.
    let (json, bytes) = plot(&file, "--forest OUT --sort country", "c.svg");
    assert_eq!(
        row_order(&parse_svg(&bytes), &json),
        [
            "Borg 2015",
            "Egan 2020",
            "Dahl 2009",
            "Falk 2013",
            "Abel 2009",
            "Cruz 2011"
        ]
    );
    // Sorting inside groups.
    let (json, bytes) = plot(
        &file,
        "--forest OUT --sort year --group-by country --columns year",
        "g.svg",
    );
    assert_eq!(
        row_order(&parse_svg(&bytes), &json),
        [
            "Borg 2015",
            "Egan 2020",
            "Dahl 2009",
            "Falk 2013",
            "Abel 2009",
            "Cruz 2011"
        ]
    );
    let (json, bytes) = plot(
        &file,
        "--forest OUT --sort year --group-by none --columns year",
        "h.svg",
    );
    assert_eq!(
        row_order(&parse_svg(&bytes), &json),
        [
            "Abel 2009",
            "Dahl 2009",
            "Cruz 2011",
            "Falk 2013",
            "Borg 2015",
            "Egan 2020"
        ]
    );
}

/// The `font-size` attribute of the first text element reading `t`.
fn size_of(svg: &[Element], t: &str) -> f64 {
    text_at(svg, t)[0].num("font-size")
}

#[test]
fn font_size_sets_the_row_text_in_points_and_scales_the_rest_with_room() {
    let (_dir, file) = data();
    let (json, small) = plot(&file, "--forest OUT --font-size 10 --columns n", "a.svg");
    let (_, large) = plot(&file, "--forest OUT --font-size 20 --columns n", "b.svg");
    let (a, b) = (parse_svg(&small), parse_svg(&large));
    assert_eq!(count(&b, "circle", "fill", STUDY), k(&json));
    // The size is the em: 10 points are 13.33 pixels at 96 per inch, the
    // SVG's font-size attribute (and the size a PDF reader reports).
    let em = |pt: f64| pt * 96.0 / 72.0;
    for (svg, pt) in [(&a, 10.0), (&b, 20.0)] {
        for label in ["Abel 2009", "120.50"] {
            assert!(
                (size_of(svg, label) - em(pt)).abs() < 0.01,
                "{label} at {pt} pt"
            );
        }
    }
    // The title, the column header and the axis title double with the rows' text.
    for t in ["Study effects and their average", "n", "Study"] {
        let ratio = size_of(&b, t) / size_of(&a, t);
        assert!((ratio - 2.0).abs() < 0.01, "{t}: {ratio}");
    }
    // Rows make room: the distance between two rows' labels doubles, and
    // the page grows taller.
    let pitch = |svg: &[Element]| {
        text_at(svg, "Borg 2015")[0].num("y") - text_at(svg, "Abel 2009")[0].num("y")
    };
    assert!((pitch(&b) / pitch(&a) - 2.0).abs() < 0.01);
    assert!(pitch(&b) > 1.5 * size_of(&b, "Abel 2009"));
    let height = |svg: &[Element]| svg[0].num("height");
    assert!(height(&b) > 1.8 * height(&a));
}

#[test]
fn bad_font_sizes_are_refused_and_nothing_is_written() {
    let (dir, file) = data();
    let out = dir.path().join("f.png");
    for bad in ["0", "-2", "4.9", "31", "1000", "NaN", "inf"] {
        let o = pondus(
            &file,
            &format!("--forest {} --font-size {bad}", out.display()),
        )
        .output()
        .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{bad}: {err}");
        assert!(
            err.contains("--font-size") && err.contains("5 to 30"),
            "{bad}: {err}"
        );
        assert!(!out.exists(), "{bad}: nothing written");
    }
    // Text too large for the rows a fixed --height leaves.
    let o = pondus(
        &file,
        &format!("--forest {} --font-size 30 --height 900", out.display()),
    )
    .output()
    .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("--font-size") && err.contains("--height"),
        "{err}"
    );
    assert!(!out.exists());
}

#[test]
fn long_labels_wrap_onto_two_lines_in_a_taller_row() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("long.csv");
    let long = "Laboratory for Cognitive Science at the University of Dunmarrow 2019a";
    std::fs::write(
        &file,
        format!("study,effect,variance\nShort 2001,0.5,0.03\n{long},0.3,0.02\nShort 2002,0.1,0.05\nShort 2003,0.2,0.04\n"),
    )
    .unwrap();
    let (json, bytes) = plot(&file, "--forest OUT", "w.svg");
    let svg = parse_svg(&bytes);
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    let at = svg
        .iter()
        .position(|e| e.tag == "text" && e.text.starts_with("Laboratory"))
        .unwrap();
    let (one, two) = (&svg[at], &svg[at + 1]);
    // Every word is kept, split at a space, the lines one above the other.
    assert_eq!(format!("{} {}", one.text, two.text), long);
    assert_eq!(one.num("x"), two.num("x"));
    let gap = two.num("y") - one.num("y");
    assert!(
        gap > one.num("font-size"),
        "the lines do not overlap: {gap}"
    );
    // The row is taller by the distance between the lines: the distances
    // from the row above and to the row below grow by half of it each.
    let y = |t: &str| text_at(&svg, t)[0].num("y");
    let mid = (one.num("y") + two.num("y")) / 2.0;
    let plain = y("Short 2003") - y("Short 2002");
    assert!(((mid - y("Short 2001")) - (plain + gap / 2.0)).abs() < 0.01);
    assert!(((y("Short 2002") - mid) - (plain + gap / 2.0)).abs() < 0.01);
    // Its disc sits on the row's middle, between the two lines.
    let disc_y: Vec<f64> = svg
        .iter()
        .filter(|e| e.tag == "circle" && e.attr("fill") == Some(STUDY))
        .map(|e| e.num("cy"))
        .collect();
    assert!(
        disc_y.iter().any(|&c| (c - mid).abs() < 5.0),
        "{disc_y:?} vs {mid}"
    );
}

#[test]
fn the_pdf_and_png_hold_the_columns_and_groups_too() {
    let (_dir, file) = data();
    let args = "--forest OUT --columns n,country --group-by country --font-size 8";
    let (json, svg) = plot(&file, args, "f.svg");
    let (_, pdf) = plot(&file, args, "f.pdf");
    let (_, png) = plot(&file, args, "f.png");
    // The PNG decodes (its size follows the SVG's at 150 dpi).
    let svg = parse_svg(&svg);
    let (w, _) = crate::plots::png_size(&png);
    assert_eq!(f64::from(w), (svg[0].num("width") * 150.0 / 96.0).round());
    assert_eq!(count(&svg, "circle", "fill", STUDY), k(&json));
    if let Some(text) = pdf_text(&pdf) {
        for t in [
            "120.50",
            "080",
            "Norway",
            "country = Chile",
            "Abel 2009",
            "n",
        ] {
            assert!(text.contains(t), "{t} in the PDF's text layer");
        }
    }
}
