//! The look of the terminal report on a terminal: its width and optional
//! colour. The renderers write plain text; this module, in the binary,
//! decides the width they wrap at and adds colour to the text after its
//! unsafe characters were replaced ([`super::outputs::Outputs::print`]), so
//! files, pipes and the golden outputs stay plain.
//!
//! Colour follows the NO_COLOR convention (<https://no-color.org>): with
//! `--color auto` (the default) the report is coloured only when standard
//! output is a terminal and `NO_COLOR` is unset or empty; `--color always`
//! colours even into a pipe or with NO_COLOR set (a flag on the command line
//! overrides the environment, as the convention asks); `--color never` never.

use clap::ValueEnum;
use pondus::render::layout::{MIN_TEXT_WIDTH, TEXT_WIDTH};
use std::io::IsTerminal;
use std::sync::OnceLock;

/// When to colour the terminal report (`--color`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, ValueEnum)]
pub enum ColorChoice {
    /// Colour when standard output is a terminal and NO_COLOR is unset or empty.
    #[default]
    Auto,
    /// Always colour (even into a file or pipe, even with NO_COLOR set).
    Always,
    /// Never colour.
    Never,
}

/// The choice of this run, set once by [`set`].
static CHOICE: OnceLock<ColorChoice> = OnceLock::new();

/// Records the run's `--color` choice (the first call wins).
pub fn set(choice: ColorChoice) {
    let _ = CHOICE.set(choice);
}

/// Whether to colour, given the choice, whether standard output is a
/// terminal and the value of NO_COLOR.
pub fn colour_wanted(
    choice: ColorChoice,
    stdout_is_terminal: bool,
    no_color: Option<&str>,
) -> bool {
    match choice {
        ColorChoice::Always => true,
        ColorChoice::Never => false,
        ColorChoice::Auto => stdout_is_terminal && no_color.is_none_or(str::is_empty),
    }
}

/// Whether this run colours its terminal report.
pub fn colour() -> bool {
    let no_color = std::env::var_os("NO_COLOR").map(|v| v.to_string_lossy().into_owned());
    colour_wanted(
        CHOICE.get().copied().unwrap_or_default(),
        std::io::stdout().is_terminal(),
        no_color.as_deref(),
    )
}

/// The width the terminal report wraps at: the terminal's width when
/// standard output is a terminal narrower than [`TEXT_WIDTH`] (but at least
/// [`MIN_TEXT_WIDTH`]), otherwise [`TEXT_WIDTH`].
pub fn text_width() -> usize {
    if !std::io::stdout().is_terminal() {
        return TEXT_WIDTH;
    }
    console::Term::stdout()
        .size_checked()
        .map_or(TEXT_WIDTH, |(_, cols)| usize::from(cols))
        .clamp(MIN_TEXT_WIDTH, TEXT_WIDTH)
}

const BOLD: &str = "\x1b[1m";
const DIM: &str = "\x1b[2m";
const HEAD: &str = "\x1b[1;36m";
const WARN: &str = "\x1b[1;33m";
const LABEL: &str = "\x1b[36m";
const RESET: &str = "\x1b[0m";

/// `text` (a plain terminal report, already made safe) with colour added by
/// the layout rules of the reports (`pondus::render::layout`): the title
/// line bold, its rule dim, headings (unindented lines that are not fact
/// lines) bold cyan, the Warnings heading bold yellow, the labels of fact
/// lines (`Label       value`) cyan. Every escape is closed on its line.
pub fn paint(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 8);
    for line in text.lines() {
        let styled = if line.is_empty() || line.starts_with(' ') {
            line.to_string()
        } else if line.starts_with("pondus ") && line.contains(" · ") {
            format!("{BOLD}{line}{RESET}")
        } else if line.chars().all(|c| c == '─') {
            format!("{DIM}{line}{RESET}")
        } else if let Some((label, rest)) = fact_parts(line) {
            format!("{LABEL}{label}{RESET}{rest}")
        } else if line == "Warnings" {
            format!("{WARN}{line}{RESET}")
        } else {
            format!("{HEAD}{line}{RESET}")
        };
        out.push_str(&styled);
        out.push('\n');
    }
    out
}

/// A fact line split after its label: a label of at most 10 characters,
/// then at least two blanks, then the value at column 12.
fn fact_parts(line: &str) -> Option<(&str, &str)> {
    let idx = line.char_indices().nth(12).map(|(i, _)| i)?;
    let (head, rest) = line.split_at(idx);
    let label = head.trim_end();
    (head.ends_with("  ") && !label.contains("  ") && !rest.starts_with(' '))
        .then_some((label, &line[label.len()..]))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_color_is_honoured_only_in_auto() {
        assert!(colour_wanted(ColorChoice::Auto, true, None));
        assert!(colour_wanted(ColorChoice::Auto, true, Some("")));
        assert!(!colour_wanted(ColorChoice::Auto, true, Some("1")));
        assert!(!colour_wanted(ColorChoice::Auto, false, None));
        assert!(colour_wanted(ColorChoice::Always, false, Some("1")));
        assert!(!colour_wanted(ColorChoice::Never, true, None));
    }

    #[test]
    fn headings_titles_and_labels_are_coloured() {
        let text = "pondus 0.1.0 · x\n──\nData        file.csv\nCoefficients\n  a  1\n\n";
        let p = paint(text);
        assert!(p.contains("\x1b[1mpondus 0.1.0 · x\x1b[0m"));
        assert!(p.contains("\x1b[36mData\x1b[0m        file.csv"));
        assert!(p.contains("\x1b[1;36mCoefficients\x1b[0m"));
        assert!(p.contains("\n  a  1\n"));
        // Without the escapes the text is unchanged.
        let plain: String = p
            .replace(BOLD, "")
            .replace(DIM, "")
            .replace(HEAD, "")
            .replace(LABEL, "")
            .replace(RESET, "");
        assert_eq!(plain, text);
    }
}
