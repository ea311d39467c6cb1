//! `pondus columns`: the recognised routes of a measure, their columns and
//! the sources of their formulas, in words (from [`route::catalogue`], the
//! table the computation itself follows).

use super::layout::{width, wrap, TEXT_WIDTH};
use crate::effect::route::{self, Derivation};
use crate::effect::Measure;
use crate::support::flag::Flag;
use std::fmt::Write as _;

/// The listing of one measure's routes, in the order they are tried.
pub fn text(measure: Measure) -> String {
    let mut out = format!(
        "{} {}: {}\n",
        Flag::Measure,
        measure.id(),
        measure.describe()
    );
    let routes = route::catalogue(measure);
    if routes.len() > 1 {
        out.push_str(&wrap(
            "Each row uses the first route whose columns are all filled in; the other complete \
             routes are computed too, as a check.",
            "",
            TEXT_WIDTH,
        ));
    }
    for (i, info) in routes.iter().enumerate() {
        let when = match (info.needs_convert, info.route.derivation()) {
            (true, _) => format!(" (only with {})", Flag::Convert),
            (false, Derivation::Approximated) => " (approximated)".to_string(),
            _ => String::new(),
        };
        let _ = writeln!(out, "\n{}. {}{when}", i + 1, info.route);
        for (what, text) in [
            ("columns:", info.columns.join(", ")),
            ("computes:", info.formula.to_string()),
            ("source:", info.source.to_string()),
        ] {
            // Each item's further lines hang under its text.
            let hang = " ".repeat(4 + width(what));
            let body = wrap(&text, &hang, TEXT_WIDTH - hang.len());
            let _ = write!(out, "   {what} {}", body.trim_start());
        }
    }
    out.push('\n');
    out.push_str(&wrap(
        &format!(
            "Column names are the defaults; map others with {} ROLE=HEADER. The route taken is \
             'computed_from' in the JSON and the per-study table.",
            Flag::Col
        ),
        "",
        TEXT_WIDTH,
    ));
    out.push_str(&spreadsheets());
    out
}

/// How a spreadsheet FILE is read, in words (the same for every measure).
fn spreadsheets() -> String {
    let text = format!(
        "Spreadsheets: a FILE ending in .xlsx, .xlsm, .xls or .ods is read directly, the first \
         sheet or the one named with {}. Its first non-empty row is the header, wherever the \
         table starts. Every cell is read as a CSV export would hold it, so numbers stored as \
         text, empty cells and the missing marks (NA, N/A, ., -) behave as in CSV; a formula \
         cell gives the value last saved with it. Messages name the sheet and the cell \
         (cell extraction!D14) instead of the line and column.",
        Flag::Sheet
    );
    format!("\n{}", wrap(&text, "", TEXT_WIDTH))
}

/// The listing of every measure, one after another.
pub fn all() -> String {
    Measure::ALL
        .iter()
        .map(|&m| {
            let t = text(m);
            // The spreadsheet note once, at the end.
            t.strip_suffix(&spreadsheets()).unwrap_or(&t).to_string()
        })
        .collect::<Vec<_>>()
        .join("\n")
        + &spreadsheets()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lists_every_smd_route_in_order() {
        let t = text(Measure::Smd);
        let mut at = 0;
        for name in [
            "means",
            "means-se",
            "t",
            "f",
            "p",
            "median-iqr",
            "median-range",
            "r-to-d",
        ] {
            let needle = format!(". {name}");
            let pos = t[at..]
                .find(&needle)
                .unwrap_or_else(|| panic!("{name} in\n{t}"));
            at += pos + needle.len();
        }
        assert!(t.contains("Wan et al. (2014)") && t.contains("only with --convert"));
        assert!(t.contains(".xlsm, .xls or .ods") && t.contains("cell extraction!D14"));
        assert_eq!(all().matches("Spreadsheets:").count(), 1);
    }
}
