//! `--font-size` in every figure (issue 19): the em of each figure's
//! ordinary text in points, titles and axis titles in fixed proportion, and
//! layouts that make room, so that at the smallest and the largest allowed
//! size no text leaves the canvas or overlaps other text. Bad values are
//! refused before anything is written.

use crate::plots::{example, parse_svg, Element};
use assert_cmd::Command;
use pondus::render::figure::font::text_width;
use std::path::Path;

/// One figure: how to draw it (`fit` or `plan` arguments, `OUT` the output
/// file) and how its ordinary text ends (a forest row's weight, a rung
/// label of the sensitivity plot; empty: the most common text size).
struct Figure {
    name: &'static str,
    args: String,
    ordinary: &'static str,
}

fn figures() -> Vec<Figure> {
    let consortium = example("consortium-correlations.csv");
    let trials = example("trial-events.csv");
    let c = consortium.display();
    let t = trials.display();
    vec![
        Figure {
            name: "forest",
            args: format!("fit {c} --measure r --moderator mode --forest OUT"),
            ordinary: "%",
        },
        Figure {
            name: "bubble with a legend",
            args: format!(
                "fit {c} --measure r --moderator session_minutes --moderator mode --bubble OUT"
            ),
            ordinary: "",
        },
        Figure {
            name: "bubble by level",
            args: format!(
                "fit {c} --measure r --moderator session_minutes --moderator mode --bubble OUT \
                 --bubble-x mode"
            ),
            ordinary: "",
        },
        Figure {
            name: "funnel with contours",
            args: format!("fit {t} --measure log-or --funnel OUT --contours"),
            ordinary: "",
        },
        Figure {
            name: "influence",
            args: format!(
                "fit {c} --measure r --moderator session_minutes --influence -q \
                 --influence-plot OUT"
            ),
            ordinary: "",
        },
        Figure {
            name: "sensitivity",
            args: format!("fit {t} --measure log-or --small-study -q --sensitivity-plot OUT"),
            ordinary: "PET",
        },
        Figure {
            name: "power curve",
            args: "plan --measure smd --n 60 --tau2 0.02 --share 0.5 --moderator-effect 0.3 \
                   --target-power 0.8 -q --curve OUT"
                .into(),
            ordinary: "",
        },
        // The solved k (33) near the largest k shown (42): its label must
        // not run off the right edge at a large size.
        Figure {
            name: "power curve, k needed near the right edge",
            args: "plan --measure r --k 20 --n 50 --tau2 0.02 --share 0.5 \
                   --moderator-effect 0.2 --test z --target-power 0.8 -q --curve OUT"
                .into(),
            ordinary: "",
        },
    ]
}

/// Runs pondus with `args` and `extra`, `OUT` standing for `dir/name`;
/// the output's bytes, or the exit code and standard error.
fn draw(dir: &Path, args: &str, extra: &str, name: &str) -> Result<Vec<u8>, (i32, String)> {
    let out = dir.join(name);
    let args = format!("{args} {extra}").replace("OUT", &out.display().to_string());
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .args(args.split_whitespace())
        .output()
        .unwrap();
    if o.status.success() {
        Ok(std::fs::read(&out).expect("the figure is written"))
    } else {
        assert!(!out.exists(), "{args}: nothing is written on failure");
        Err((
            o.status.code().unwrap_or(-1),
            String::from_utf8_lossy(&o.stderr).into_owned(),
        ))
    }
}

/// A text element's box in pixels (left, top, right, bottom): its width
/// from the bundled font's advances at its em (`font-size`), from the cap
/// height above the baseline to the descender below it (DejaVu Sans: 0.73
/// and 0.24 em; 0.76 above to include accents and round glyphs).
struct TextBox {
    text: String,
    em: f64,
    b: (f64, f64, f64, f64),
}

fn boxes(svg: &[Element]) -> Vec<TextBox> {
    svg.iter()
        .filter(|e| e.tag == "text" && !e.text.is_empty())
        .map(|e| {
            let em = e.num("font-size");
            let w = text_width(&e.text, em * 1.24);
            let x = e.num("x");
            let left = match e.attr("text-anchor") {
                Some("middle") => x - w / 2.0,
                Some("end") => x - w,
                _ => x,
            };
            let y = e.num("y");
            TextBox {
                text: e.text.clone(),
                em,
                b: (left, y - 0.76 * em, left + w, y + 0.24 * em),
            }
        })
        .collect()
}

/// Checks that every text lies inside the canvas and no two texts overlap
/// (by more than 0.5 pixel, for antialiasing-free touching edges).
fn check_layout(what: &str, svg: &[Element]) {
    let (w, h) = (svg[0].num("width"), svg[0].num("height"));
    let bs = boxes(svg);
    assert!(!bs.is_empty(), "{what}: has text");
    for t in &bs {
        let (l, top, r, b) = t.b;
        assert!(
            l >= -0.01 && r <= w + 0.01 && top >= -0.01 && b <= h + 0.01,
            "{what}: '{}' at {:?} leaves the {w} × {h} canvas",
            t.text,
            t.b
        );
    }
    let tol = 0.5;
    for (i, a) in bs.iter().enumerate() {
        for c in &bs[i + 1..] {
            let apart = a.b.2 <= c.b.0 + tol
                || c.b.2 <= a.b.0 + tol
                || a.b.3 <= c.b.1 + tol
                || c.b.3 <= a.b.1 + tol;
            assert!(
                apart,
                "{what}: '{}' {:?} overlaps '{}' {:?}",
                a.text, a.b, c.text, c.b
            );
        }
    }
}

/// The em of the figure's ordinary text: the named text's, or (when none
/// is named) the most common text size (tick labels, legend and caption).
fn ordinary_em(fig: &Figure, svg: &[Element]) -> f64 {
    let bs = boxes(svg);
    if !fig.ordinary.is_empty() {
        return bs
            .iter()
            .find(|t| t.text.ends_with(fig.ordinary))
            .unwrap_or_else(|| panic!("{}: '{}' is drawn", fig.name, fig.ordinary))
            .em;
    }
    let mut counts: Vec<(f64, usize)> = Vec::new();
    for t in &bs {
        match counts.iter_mut().find(|c| (c.0 - t.em).abs() < 1e-9) {
            Some(c) => c.1 += 1,
            None => counts.push((t.em, 1)),
        }
    }
    counts.sort_by_key(|c| std::cmp::Reverse(c.1));
    counts[0].0
}

/// The em of the largest text (the title).
fn largest_em(svg: &[Element]) -> f64 {
    boxes(svg).iter().map(|t| t.em).fold(0.0, f64::max)
}

#[test]
fn font_size_sets_every_figures_ordinary_text_in_points_and_the_layout_makes_room() {
    let dir = tempfile::tempdir().unwrap();
    for fig in figures() {
        let plain = parse_svg(&draw(dir.path(), &fig.args, "", "a.svg").unwrap());
        check_layout(&format!("{} at the default size", fig.name), &plain);
        let title_ratio = largest_em(&plain) / ordinary_em(&fig, &plain);
        for pt in [5.0, 9.0, 14.0, 30.0] {
            let what = format!("{} at {pt} pt", fig.name);
            let bytes = draw(dir.path(), &fig.args, &format!("--font-size {pt}"), "b.svg")
                .unwrap_or_else(|e| panic!("{what}: {e:?}"));
            let svg = parse_svg(&bytes);
            check_layout(&what, &svg);
            // The em of the ordinary text is the size asked for: pt/72 inch
            // at 96 pixels per inch (the SVG rounds to 0.01 pixel).
            let em = ordinary_em(&fig, &svg);
            assert!((em - pt * 96.0 / 72.0).abs() < 0.011, "{what}: em {em}");
            // The title keeps its proportion to it.
            let ratio = largest_em(&svg) / em;
            assert!(
                (ratio - title_ratio).abs() < 0.01,
                "{what}: title {ratio} against {title_ratio}"
            );
        }
    }
}

#[test]
fn the_pictures_follow_the_svg_at_a_large_font_size() {
    // The PNG and PDF are made from the same SVG, so they grow with it: a
    // taller page at 30 points than at the default.
    let dir = tempfile::tempdir().unwrap();
    let fig = &figures()[3];
    let plain = draw(dir.path(), &fig.args, "", "a.png").unwrap();
    let large = draw(dir.path(), &fig.args, "--font-size 30", "b.png").unwrap();
    let (_, h0) = crate::plots::png_size(&plain);
    let (_, h1) = crate::plots::png_size(&large);
    assert!(h1 > h0, "{h1} > {h0}");
    let pdf = draw(dir.path(), &fig.args, "--font-size 30", "c.pdf").unwrap();
    assert!(pdf.starts_with(b"%PDF"));
}

#[test]
fn bad_font_sizes_are_refused_for_every_figure_and_nothing_is_written() {
    let dir = tempfile::tempdir().unwrap();
    for fig in figures() {
        for bad in ["0", "-2", "4.9", "31", "NaN", "inf", "ten"] {
            let (code, err) = draw(
                dir.path(),
                &fig.args,
                &format!("--font-size {bad}"),
                "x.svg",
            )
            .expect_err("refused");
            assert_eq!(code, 2, "{} {bad}: {err}", fig.name);
            assert!(err.contains("--font-size"), "{} {bad}: {err}", fig.name);
            if bad != "ten" {
                assert!(err.contains("5 to 30"), "{} {bad}: {err}", fig.name);
            }
        }
    }
    // Without a figure to apply to.
    let c = example("consortium-correlations.csv");
    let (code, err) = draw(
        dir.path(),
        &format!("fit {} --measure r --json OUT", c.display()),
        "--font-size 10",
        "r.json",
    )
    .expect_err("refused");
    assert_eq!(code, 2);
    assert!(
        err.contains("--font-size") && err.contains("--bubble"),
        "{err}"
    );
    let (code, err) = draw(
        dir.path(),
        "plan --measure smd --n 60 --tau2 0.02 --share 0.5 --moderator-effect 0.3 \
         --target-power 0.8 --json OUT",
        "--font-size 10",
        "p.json",
    )
    .expect_err("refused");
    assert_eq!(code, 2);
    assert!(
        err.contains("--font-size") && err.contains("--curve"),
        "{err}"
    );
}

#[test]
fn a_fixed_size_too_small_for_the_text_is_refused_naming_both_flags() {
    let dir = tempfile::tempdir().unwrap();
    let fig = &figures()[1];
    let (code, err) = draw(
        dir.path(),
        &fig.args,
        "--font-size 30 --height 500",
        "h.svg",
    )
    .expect_err("refused");
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("--height") && err.contains("--font-size") && err.contains("at least"),
        "{err}"
    );
    // The same text fits when pondus chooses the height.
    assert!(draw(dir.path(), &fig.args, "--font-size 30", "h.svg").is_ok());
}
