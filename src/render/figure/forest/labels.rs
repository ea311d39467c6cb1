//! Study labels that are too long for their column: wrapped onto two lines
//! at the space that balances them best; a label too long even for two
//! lines keeps its beginning on the first line and its end on the second
//! ("Laboratory for Cognitive Science …" / "… Dunmarrow 2019"), since the
//! beginning (an author, a lab) and the end (a year, a site, a letter) are
//! what tell studies apart.

use crate::render::figure::scene::{fit_text, text_width};

/// A label's lines (one or two) within `max` pixels at text size `fs`.
pub(super) fn lines(label: &str, fs: f64, max: f64) -> Vec<String> {
    if text_width(label, fs) <= max {
        return vec![label.to_string()];
    }
    let chars: Vec<char> = label.chars().collect();
    // Break points: after each run of spaces (the space is dropped) and
    // after a hyphen or slash inside a word (kept on the first line).
    let mut breaks: Vec<(usize, usize)> = Vec::new(); // (end of line 1, start of line 2)
    for (i, &c) in chars.iter().enumerate() {
        if c == ' ' && i > 0 && chars[i - 1] != ' ' {
            let mut j = i;
            while j < chars.len() && chars[j] == ' ' {
                j += 1;
            }
            if j < chars.len() {
                breaks.push((i, j));
            }
        } else if (c == '-' || c == '/') && i > 0 && i + 1 < chars.len() && chars[i + 1] != ' ' {
            breaks.push((i + 1, i + 1));
        }
    }
    let part = |a: usize, b: usize| -> String { chars[a..b].iter().collect() };
    let best = breaks
        .iter()
        .map(|&(e, s)| {
            let (one, two) = (part(0, e), part(s, chars.len()));
            let w = text_width(&one, fs).max(text_width(&two, fs));
            (w, one, two)
        })
        .min_by(|a, b| a.0.total_cmp(&b.0));
    match best {
        Some((w, one, two)) if w <= max => vec![one, two],
        // Too long for two lines: the beginning, then the end.
        _ => {
            let one = fit_text(label, fs, max);
            let kept = one.trim_end_matches('…').chars().count();
            let rest: String = chars[kept.min(chars.len())..].iter().collect();
            vec![one, fit_end(rest.trim_start(), fs, max)]
        }
    }
}

/// `text` shortened from the front with an ellipsis to fit in `max` pixels
/// at `size`, keeping its end ("… Dunmarrow 2019").
pub(super) fn fit_end(text: &str, size: f64, max: f64) -> String {
    if text_width(text, size) <= max {
        return text.to_string();
    }
    let chars: Vec<char> = text.chars().collect();
    let build = |keep: usize| -> String {
        let t: String = chars[chars.len() - keep..].iter().collect();
        format!("… {}", t.trim_start())
    };
    let (mut lo, mut hi) = (0usize, chars.len());
    while lo < hi {
        let mid = (lo + hi).div_ceil(2);
        if text_width(&build(mid), size) <= max {
            lo = mid;
        } else {
            hi = mid - 1;
        }
    }
    build(lo)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_labels_stay_on_one_line() {
        assert_eq!(lines("Abel 2009", 13.0, 200.0), ["Abel 2009"]);
    }

    #[test]
    fn long_labels_wrap_at_the_most_balanced_space() {
        let label = "Laboratory for Cognitive Science Dunmarrow 2019";
        let max = text_width(label, 13.0) * 0.6;
        let l = lines(label, 13.0, max);
        assert_eq!(l.len(), 2);
        assert_eq!(format!("{} {}", l[0], l[1]), label, "nothing is lost");
        assert!(l.iter().all(|x| text_width(x, 13.0) <= max));
        // A hyphenated name can break after its hyphen.
        let l = lines("Kessler-Ota-Moravec-Lindqvist", 13.0, 120.0);
        assert_eq!(l.concat(), "Kessler-Ota-Moravec-Lindqvist");
        assert!(l[0].ends_with('-'));
    }

    #[test]
    fn labels_too_long_for_two_lines_keep_both_ends() {
        let label = "An extremely long study label that would run straight into the intervals if it were drawn in full 2019b";
        let l = lines(label, 13.0, 150.0);
        assert_eq!(l.len(), 2);
        assert!(
            l[0].starts_with("An extremely") && l[0].ends_with('…'),
            "{l:?}"
        );
        assert!(
            l[1].starts_with('…') && l[1].ends_with("in full 2019b"),
            "{l:?}"
        );
        assert!(l.iter().all(|x| text_width(x, 13.0) <= 150.0));
    }
}
