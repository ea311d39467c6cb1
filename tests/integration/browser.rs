//! The HTML report in a real browser: headless Chromium (Debian's
//! `chromium` package; `.ci/run` installs it) loads the report of every data
//! example, of a planning run and of a two-stage `pondus sites` run, takes a screenshot, and the test checks
//! that the page logged nothing to the console (the page has no scripts, so
//! any console line is an error: a blocked resource, a policy violation, a
//! parse failure) and that every plot is visible: each figure's frame is
//! found in the screenshot and the picture inside it is not blank.
//!
//! Without Chromium on the machine these tests say so on stderr and pass,
//! so that `cargo test` works on a fresh machine as the README promises;
//! with `PONDUS_REQUIRE_BROWSER=1` (set by `.ci/run`) a missing browser is
//! a failure.

use crate::report::{fit_report, plan_report, sites_report, EXAMPLES, PLAN_ARGS};
use crate::util::repo;
use std::path::{Path, PathBuf};
use std::process::Command;

/// The figure frame colour of the report's style sheet (`--frame: #9c8f80`
/// in `src/report/html.rs`).
const FRAME: [u8; 3] = [0x9c, 0x8f, 0x80];
/// The page background (`--paper`) and the figure background (white).
const PAPER: [u8; 3] = [0xfb, 0xfa, 0xf7];
const WHITE: [u8; 3] = [0xff, 0xff, 0xff];
/// Screenshot size in CSS pixels at device scale 1: the width of a laptop
/// window, and tall enough for the whole page of every data example.
const WINDOW: (u32, u32) = (1100, 12_000);

fn chromium() -> Option<PathBuf> {
    if let Some(p) = std::env::var_os("PONDUS_CHROMIUM") {
        return Some(PathBuf::from(p));
    }
    for name in ["chromium", "chromium-browser", "google-chrome"] {
        if let Some(path) = std::env::var_os("PATH") {
            for dir in std::env::split_paths(&path) {
                let p = dir.join(name);
                if p.is_file() {
                    return Some(p);
                }
            }
        }
    }
    None
}

fn browser_or_skip(test: &str) -> Option<PathBuf> {
    match chromium() {
        Some(p) => Some(p),
        None if std::env::var_os("PONDUS_REQUIRE_BROWSER").is_some() => {
            panic!("{test}: PONDUS_REQUIRE_BROWSER is set but no chromium was found (install Debian's chromium package, or set PONDUS_CHROMIUM)")
        }
        None => {
            eprintln!("{test}: SKIPPED, no chromium on this machine (CI installs it and sets PONDUS_REQUIRE_BROWSER=1)");
            None
        }
    }
}

/// A decoded RGB screenshot.
struct Shot {
    w: usize,
    h: usize,
    rgb: Vec<u8>,
}

impl Shot {
    fn px(&self, x: usize, y: usize) -> [u8; 3] {
        let i = 3 * (y * self.w + x);
        [self.rgb[i], self.rgb[i + 1], self.rgb[i + 2]]
    }
}

/// Loads `page` in headless Chromium, returns the screenshot and every
/// console line the page produced.
fn render(browser: &Path, page: &Path, work: &Path) -> (Shot, Vec<String>) {
    let shot = work.join(format!(
        "{}.png",
        page.file_stem().unwrap().to_string_lossy()
    ));
    let profile = tempfile::tempdir_in(work).unwrap();
    let out = Command::new(browser)
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
            "--force-device-scale-factor=1",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg(format!("--window-size={},{}", WINDOW.0, WINDOW.1))
        .arg(format!("--screenshot={}", shot.display()))
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("chromium starts");
    let log = String::from_utf8_lossy(&out.stderr);
    let console: Vec<String> = log
        .lines()
        .filter(|l| l.contains(":CONSOLE"))
        .map(str::to_string)
        .collect();
    let bytes = std::fs::read(&shot).unwrap_or_else(|_| {
        panic!(
            "chromium wrote no screenshot of {} (exit {:?}): {log}",
            page.display(),
            out.status.code()
        )
    });
    let decoder = png::Decoder::new(std::io::Cursor::new(bytes));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    let channels = info.color_type.samples();
    let rgb: Vec<u8> = buf[..info.buffer_size()]
        .chunks(channels)
        .flat_map(|c| [c[0], c[1], c[2]])
        .collect();
    (
        Shot {
            w: info.width as usize,
            h: info.height as usize,
            rgb,
        },
        console,
    )
}

/// A figure frame found in the screenshot: its outer box.
#[derive(Debug, Clone, Copy)]
struct Frame {
    x0: usize,
    y0: usize,
    x1: usize,
    y1: usize,
}

/// Finds the figure frames: rectangles whose edges are runs of the frame
/// colour. The figures span the page's centre column, so a top edge is a
/// row where the colour at the centre extends for at least 300 pixels; the
/// frame's left edge runs down from that run's start to the bottom edge,
/// which is frame-coloured across the same span.
fn frames(s: &Shot) -> Vec<Frame> {
    let is = |x: usize, y: usize| s.px(x, y) == FRAME;
    let xc = s.w / 2;
    let mut found: Vec<Frame> = Vec::new();
    let mut y = 0;
    while y < s.h {
        if is(xc, y) {
            let (mut x0, mut x1) = (xc, xc);
            while x0 > 0 && is(x0 - 1, y) {
                x0 -= 1;
            }
            while x1 + 1 < s.w && is(x1 + 1, y) {
                x1 += 1;
            }
            if x1 - x0 >= 300 {
                let mut y1 = y;
                while y1 + 1 < s.h && is(x0, y1 + 1) {
                    y1 += 1;
                }
                if y1 > y + 50 && is(xc, y1) && is(x1, y1) {
                    found.push(Frame { x0, y0: y, x1, y1 });
                    y = y1 + 1;
                    continue;
                }
            }
        }
        y += 1;
    }
    found
}

/// Share of the frame's inside that is neither background, and the number
/// of distinct colours there.
fn ink(s: &Shot, f: &Frame) -> (f64, usize) {
    let mut inked = 0usize;
    let mut total = 0usize;
    let mut colours = std::collections::HashSet::new();
    for y in (f.y0 + 4)..f.y1.saturating_sub(4) {
        for x in (f.x0 + 4)..f.x1.saturating_sub(4) {
            let p = s.px(x, y);
            total += 1;
            if p != WHITE && p != PAPER {
                inked += 1;
            }
            if colours.len() < 1000 {
                colours.insert(p);
            }
        }
    }
    (inked as f64 / total.max(1) as f64, colours.len())
}

fn check_page(browser: &Path, what: &str, page: &Path, html: &str, work: &Path) {
    let (shot, console) = render(browser, page, work);
    assert!(
        console.is_empty(),
        "{what}: the page logged to the console:\n{}",
        console.join("\n")
    );
    assert_eq!((shot.w, shot.h), (WINDOW.0 as usize, WINDOW.1 as usize));
    let expected = html.matches("<figure class=\"plot\"").count();
    let found = frames(&shot);
    assert_eq!(
        found.len(),
        expected,
        "{what}: {expected} figures in the HTML but {} frames visible in the screenshot ({found:?})",
        found.len()
    );
    for f in &found {
        assert!(f.x1 - f.x0 > 500, "{what}: figure too narrow {f:?}");
        let (share, colours) = ink(&shot, f);
        // A drawn plot has axes, text and markers: several percent of its
        // area is ink and it has many colours (anti-aliased text alone
        // gives dozens). A blank or broken picture has neither.
        assert!(
            share > 0.03 && colours > 20,
            "{what}: figure {f:?} looks blank (ink {share:.3}, {colours} colours)"
        );
    }
    // The page's own text is drawn too: the heading band at the top is not blank.
    let top = Frame {
        x0: 0,
        y0: 0,
        x1: shot.w - 1,
        y1: 120,
    };
    assert!(ink(&shot, &top).0 > 0.01, "{what}: the page top is blank");
}

#[test]
fn every_example_report_renders_in_chromium_without_console_errors() {
    let Some(browser) = browser_or_skip("browser report test") else {
        return;
    };
    let work = tempfile::tempdir().unwrap();
    for (name, args) in EXAMPLES {
        let dir = work.path().join(name.trim_end_matches(".csv"));
        std::fs::create_dir_all(&dir).unwrap();
        let (page, html) = fit_report(&repo(&format!("data-examples/{name}")), args, &dir);
        check_page(&browser, name, &page, &html, &dir);
    }
    let (page, html) = plan_report(PLAN_ARGS, work.path());
    check_page(&browser, "plan", &page, &html, work.path());
    let (page, html) = sites_report(work.path());
    check_page(&browser, "sites", &page, &html, work.path());
}

#[test]
fn hostile_labels_run_nothing_in_chromium() {
    let Some(browser) = browser_or_skip("browser escaping test") else {
        return;
    };
    let work = tempfile::tempdir().unwrap();
    let csv = work.path().join("hostile.csv");
    // Were any of these labels written as markup, the script would log to the
    // console (or be blocked by the page's policy, which also logs).
    std::fs::write(
        &csv,
        "study,effect,variance,dose\n\
         \"<script>console.error('ran')</script>\",0.1,0.01,1\n\
         \"<img src=x onerror=console.error(1)>\",0.3,0.02,2\n\
         \"<style>body{display:none}</style>\",0.2,0.015,3\n\
         plain,0.25,0.01,4\n",
    )
    .unwrap();
    let (page, html) = fit_report(&csv, "--moderator dose --inference z", work.path());
    check_page(&browser, "hostile labels", &page, &html, work.path());
}

#[test]
fn the_frame_finder_sees_a_frame_and_not_a_blank_page() {
    // The detector itself, on constructed pictures: it must find a drawn
    // frame and must report a blank inside as blank.
    let (w, h) = (800usize, 400usize);
    let mut rgb = vec![0xffu8; w * h * 3];
    let mut set = |x: usize, y: usize, c: [u8; 3]| {
        let i = 3 * (y * w + x);
        rgb[i..i + 3].copy_from_slice(&c);
    };
    for x in 50..=700 {
        for t in 0..3 {
            set(x, 20 + t, FRAME);
            set(x, 380 - t, FRAME);
        }
    }
    for y in 20..=380 {
        for t in 0..3 {
            set(50 + t, y, FRAME);
            set(700 - t, y, FRAME);
        }
    }
    let blank = Shot {
        w,
        h,
        rgb: rgb.clone(),
    };
    let f = frames(&blank);
    assert_eq!(f.len(), 1, "{f:?}");
    let (share, _) = ink(&blank, &f[0]);
    assert!(share < 0.001);
    // Draw something inside.
    let mut rgb2 = rgb;
    for y in 100..200 {
        for x in 100..400 {
            let i = 3 * (y * w + x);
            rgb2[i..i + 3].copy_from_slice(&[(x % 200) as u8, (y % 250) as u8, 30]);
        }
    }
    let drawn = Shot { w, h, rgb: rgb2 };
    let (share, colours) = ink(&drawn, &frames(&drawn)[0]);
    assert!(share > 0.03 && colours > 20);
}
