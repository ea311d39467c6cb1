//! The page frame shared by every report page: the document head with its
//! Content-Security-Policy and style sheet, escaping, the few elements the
//! pages use (header, headings, paragraphs, lists, facts, tables, figures,
//! the answer box, the "read with care" box) and the footer.

use crate::render::figure::PageFigure;
use crate::result::AtValue;
use crate::support::format as fmt;
use std::fmt::Write as _;

/// Where a result came from, for the reproducibility block.
#[derive(Debug, Clone, Default)]
pub struct Provenance {
    /// The command line, quoted for a POSIX shell.
    pub command: String,
    /// The tool's version.
    pub version: String,
    /// SHA-256 of the input bytes, lowercase hex (None when there was no input file).
    pub input_sha256: Option<String>,
    /// The random seed, where one was used.
    pub seed: Option<u64>,
}

/// Escapes text for HTML element content and double-quoted attributes;
/// characters XML does not allow (control characters) are replaced.
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in crate::support::text::xml(s).chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// The page's style sheet: this project's own look (warm paper, mulberry
/// accents, framed figures), a print style, and tabular figures in tables.
const STYLE: &str = r#"
:root{--ink:#1f2633;--muted:#5c6370;--accent:#7a3b69;--accent-soft:#f4edf2;--rule:#d9d3ca;--paper:#fbfaf7;--head:#efebe4;--frame:#9c8f80;--warn:#8a4b08;--warn-soft:#fbf1e2}
html{background:var(--paper)}
body{font-family:"DejaVu Sans",system-ui,sans-serif;color:var(--ink);background:var(--paper);max-width:62rem;margin:0 auto;padding:1.5rem 1.25rem 3rem;line-height:1.5;font-size:15px}
header{border-top:6px solid var(--accent);padding-top:.75rem;margin-bottom:1.5rem}
h1{font-size:1.55rem;margin:.2rem 0 .3rem;line-height:1.25}
h2{font-size:1.15rem;margin:2.2rem 0 .6rem;padding-bottom:.2rem;border-bottom:1px solid var(--rule);color:var(--accent)}
h3{font-size:1rem;margin:1.4rem 0 .4rem}
p.sub{color:var(--muted);margin:0}
nav ol{columns:2;margin:.5rem 0;padding-left:1.4rem;color:var(--muted)}
nav a{color:var(--accent)}
.answer{background:var(--accent-soft);border-left:6px solid var(--accent);padding:.8rem 1rem;margin:1rem 0;font-size:1.05rem}
.care{background:var(--warn-soft);border-left:6px solid var(--warn);padding:.6rem 1rem;margin:1rem 0}
.care h2{border:none;color:var(--warn);margin:.2rem 0 .3rem;font-size:1.05rem}
.care ul{margin:.2rem 0;padding-left:1.2rem}
table{border-collapse:collapse;margin:.5rem 0 1rem;font-variant-numeric:tabular-nums;background:#fff}
caption{caption-side:top;text-align:left;color:var(--muted);font-size:.9rem;padding:.2rem 0}
th,td{border:1px solid var(--rule);padding:.25rem .55rem;vertical-align:top}
thead th{background:var(--head);text-align:left;font-weight:600}
tbody th{text-align:left;font-weight:normal}
td.n{text-align:right;white-space:nowrap}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:.15rem 1rem;margin:.5rem 0}
dl.facts dt{color:var(--muted)}
dl.facts dd{margin:0}
figure.plot{border:3px solid var(--frame);background:#fff;padding:.6rem;margin:1rem 0}
figure.plot svg{display:block;max-width:100%;height:auto}
figcaption{color:var(--muted);font-size:.9rem;margin-top:.4rem}
code,pre{font-family:"DejaVu Sans Mono",ui-monospace,monospace;font-size:.88rem}
pre{background:#fff;border:1px solid var(--rule);padding:.6rem;white-space:pre-wrap;overflow-wrap:break-word}
footer{margin-top:2.5rem;color:var(--muted);font-size:.85rem;border-top:1px solid var(--rule);padding-top:.5rem}
@media print{
 html,body{background:#fff}
 body{max-width:none;padding:0;font-size:10pt}
 nav{display:none}
 h2{break-after:avoid}
 figure.plot{break-inside:avoid;border-width:1px}
 tr{break-inside:avoid}
 .answer,.care{break-inside:avoid}
}
"#;

/// Page builder: a string with helpers for the few elements the report uses.
pub(super) struct Page {
    /// The HTML written so far.
    pub(super) out: String,
}

impl Page {
    pub(super) fn new(title: &str) -> Page {
        let mut out = String::with_capacity(64 * 1024);
        out.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
        out.push_str(
            "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; \
             style-src 'unsafe-inline'; font-src data:; img-src data:\">\n",
        );
        out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
        let _ = writeln!(out, "<title>{}</title>", esc(title));
        out.push_str("<style>");
        out.push_str(FONT_SLOT);
        out.push_str(STYLE);
        out.push_str("</style>\n</head>\n<body>\n");
        Page { out }
    }

    pub(super) fn raw(&mut self, html: &str) {
        self.out.push_str(html);
    }

    pub(super) fn h2(&mut self, id: &str, text: &str) {
        let _ = writeln!(self.out, "<h2 id=\"{id}\">{}</h2>", esc(text));
    }

    pub(super) fn h3(&mut self, text: &str) {
        let _ = writeln!(self.out, "<h3>{}</h3>", esc(text));
    }

    pub(super) fn p(&mut self, text: &str) {
        let _ = writeln!(self.out, "<p>{}</p>", esc(text));
    }

    pub(super) fn list(&mut self, items: &[String]) {
        self.out.push_str("<ul>\n");
        for i in items {
            let _ = writeln!(self.out, "<li>{}</li>", esc(i));
        }
        self.out.push_str("</ul>\n");
    }

    pub(super) fn facts(&mut self, rows: &[(&str, String)]) {
        self.out.push_str("<dl class=\"facts\">\n");
        for (k, v) in rows {
            let _ = writeln!(
                self.out,
                "<dt>{}</dt><dd>{}</dd>",
                esc(k),
                esc(&fmt::true_minus(v))
            );
        }
        self.out.push_str("</dl>\n");
    }

    /// A table: the first cell of each row is a row header; cells that
    /// look like numbers are right-aligned; negative numbers in the other
    /// cells get a true minus sign (U+2212), as in the plots.
    pub(super) fn table(&mut self, caption: &str, head: &[&str], rows: &[Vec<String>]) {
        self.out.push_str("<table>\n");
        if !caption.is_empty() {
            let _ = writeln!(self.out, "<caption>{}</caption>", esc(caption));
        }
        self.out.push_str("<thead><tr>");
        for h in head {
            let _ = write!(self.out, "<th scope=\"col\">{}</th>", esc(h));
        }
        self.out.push_str("</tr></thead>\n<tbody>\n");
        for r in rows {
            self.out.push_str("<tr>");
            for (j, c) in r.iter().enumerate() {
                if j == 0 {
                    let _ = write!(self.out, "<th scope=\"row\">{}</th>", esc(c));
                } else if numeric_looking(c) {
                    let _ = write!(
                        self.out,
                        "<td class=\"n\">{}</td>",
                        esc(&fmt::true_minus(c))
                    );
                } else {
                    let _ = write!(self.out, "<td>{}</td>", esc(&fmt::true_minus(c)));
                }
            }
            self.out.push_str("</tr>\n");
        }
        self.out.push_str("</tbody>\n</table>\n");
    }

    pub(super) fn figure(&mut self, id: &str, f: &PageFigure) {
        let _ = writeln!(
            self.out,
            "<figure class=\"plot\" id=\"{id}\" data-plot=\"{}\">",
            f.kind
        );
        self.out.push_str(&labelled_svg(f, id));
        let _ = writeln!(
            self.out,
            "\n<figcaption>{}</figcaption>\n</figure>",
            esc(&f.description)
        );
    }

    /// The page header: the title and a subtitle (`sub` is markup, its
    /// data already escaped).
    pub(super) fn header(&mut self, title: &str, sub: &str) {
        self.out.push_str("<header>\n");
        let _ = writeln!(self.out, "<h1>{}</h1>", esc(title));
        let _ = writeln!(self.out, "<p class=\"sub\">{sub}</p>");
        self.out.push_str("</header>\n");
    }

    /// The answer box.
    pub(super) fn answer(&mut self, text: &str) {
        let _ = writeln!(
            self.out,
            "<div class=\"answer\" role=\"note\">{}</div>",
            esc(text)
        );
    }

    /// The "read with care" box listing `items`.
    pub(super) fn care(&mut self, items: &[String]) {
        self.out
            .push_str("<section class=\"care\" aria-labelledby=\"care\">\n");
        let _ = writeln!(self.out, "<h2 id=\"care\">Read with care</h2>");
        self.list(items);
        self.out.push_str("</section>\n");
    }

    pub(super) fn finish(mut self, prov: &Provenance) -> String {
        let _ = writeln!(
            self.out,
            "<footer>Made by pondus {}. This page is self-contained: it loads nothing from the \
             network and runs no scripts.</footer>\n</body>\n</html>",
            esc(&prov.version)
        );
        // The page's text and its pictures share the bundled font: embed
        // the subset holding every character the page uses.
        let chars = self.out.chars().collect();
        let rule = crate::render::figure::font::font_face_rule(&chars).unwrap_or_default();
        self.out.replacen(FONT_SLOT, &rule, 1)
    }
}

/// Where the page's `@font-face` rule goes once the page is complete.
const FONT_SLOT: &str = "/*pondus:font*/";

fn numeric_looking(c: &str) -> bool {
    let t = c.trim_start_matches(['<', '=', ' ', '[', '−', '-']);
    !t.is_empty()
        && t.chars().next().is_some_and(|ch| ch.is_ascii_digit())
        && c.chars()
            .all(|ch| ch.is_ascii_digit() || " .,-+−e%[]<=".contains(ch) || ch == '—' || ch == '×')
}

/// The SVG with an accessible name and description: `role="img"`, and
/// `<title>`/`<desc>` children referenced by `aria-labelledby`.
fn labelled_svg(f: &PageFigure, id: &str) -> String {
    let svg = f.svg.trim_start();
    let svg = match svg.find("<svg") {
        Some(i) => &svg[i..],
        None => svg,
    };
    match svg.find('>') {
        Some(end) if svg.starts_with("<svg") => {
            let (open, rest) = svg.split_at(end);
            format!(
                "{open} role=\"img\" aria-labelledby=\"{id}-title {id}-desc\"><title id=\"{id}-title\">{}</title><desc id=\"{id}-desc\">{}</desc>{}",
                esc(&f.title),
                esc(&f.description),
                &rest[1..]
            )
        }
        _ => esc(svg),
    }
}

/// `a`, `a and b`, `a, b, and c`.
pub(super) fn words_and(items: &[String]) -> String {
    match items.len() {
        0 => String::new(),
        1 => items[0].clone(),
        2 => format!("{} and {}", items[0], items[1]),
        n => format!("{}, and {}", items[..n - 1].join(", "), items[n - 1]),
    }
}

/// A moderator value as a table cell.
pub(super) fn at_text(v: &AtValue) -> String {
    match v {
        AtValue::Number(x) => fmt::value(*x),
        AtValue::Level(l) => l.clone(),
    }
}
#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_matches_the_fips_180_example() {
        // FIPS 180-2, appendix B.1: SHA-256("abc").
        assert_eq!(
            crate::support::hash::sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn escaping_covers_markup_and_quotes() {
        assert_eq!(
            esc("<script>alert(\"x\")</script> & 'y'"),
            "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; &#39;y&#39;"
        );
        assert_eq!(esc("Ødegård"), "Ødegård");
    }

    #[test]
    fn numbers_are_right_aligned_and_words_are_not() {
        assert!(numeric_looking("0.2311"));
        assert!(numeric_looking("-1.5000"));
        assert!(numeric_looking("[0.1, 0.2]"));
        assert!(numeric_looking("< 0.0001"));
        assert!(numeric_looking("59.3%"));
        assert!(!numeric_looking("mode=online"));
        assert!(!numeric_looking("Lab 12"));
        assert!(!numeric_looking(""));
    }

    #[test]
    fn svg_gets_role_title_and_description() {
        let f = PageFigure {
            kind: "forest",
            title: "A <b>".into(),
            description: "d & e".into(),
            svg: "<svg width=\"10\" height=\"10\"><rect/></svg>".into(),
        };
        let s = labelled_svg(&f, "fig");
        assert!(s.starts_with(
            "<svg width=\"10\" height=\"10\" role=\"img\" aria-labelledby=\"fig-title fig-desc\"><title id=\"fig-title\">A &lt;b&gt;</title><desc id=\"fig-desc\">d &amp; e</desc><rect/>"
        ));
    }
}
