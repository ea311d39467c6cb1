//! The "How each effect was obtained" block of the terminal report and the
//! HTML page: the count of studies per route (`effects_obtained`), the
//! approximated and converted studies by name. Shown when the studies took
//! more than one route, or any was approximated or converted; a report
//! whose every effect came the same direct way has nothing to say here.

use crate::effect::route::{Derivation, Route};
use crate::result::FitReport;
use crate::support::listing::first_of;
use std::fmt::Write as _;

/// Whether the report has something to say about how its effects were obtained.
pub fn has_block(r: &FitReport) -> bool {
    r.effects_obtained.len() > 1
        || r.effects_obtained
            .iter()
            .any(|c| c.derivation != Derivation::Direct)
}

/// The route in words.
pub fn route_words(route: Route) -> &'static str {
    match route {
        Route::Means => "group means, SDs and sizes",
        Route::MeansSe => "group means, standard errors and sizes",
        Route::T => "a t statistic",
        Route::F => "an F statistic with its sign",
        Route::P => "a two-sided p-value with its sign",
        Route::MedianIqr => "medians and quartiles",
        Route::MedianRange => "medians and ranges",
        Route::R => "a correlation and n",
        Route::Counts => "event counts",
        Route::RatioCi => "a ratio with its confidence limits",
        Route::LogSe => "a log ratio with its SE",
        Route::Variance => "an effect with its variance",
        Route::Se => "an effect with its SE",
        Route::Ci => "an effect with its confidence limits",
        Route::RToD => "a correlation to d",
        Route::CountsToD => "event counts to d",
        Route::DToR => "a group comparison to r",
    }
}

/// The most study labels named per route; the per-study output (`--json`,
/// `--table`) gives every study's route.
const NAMED: usize = 20;

/// One line per route: "12 from group means, SDs and sizes (means)",
/// "2 approximated from medians and quartiles (median-iqr): A, B", and
/// the names of the studies for approximated and converted routes.
pub fn lines(r: &FitReport) -> Vec<String> {
    r.effects_obtained
        .iter()
        .map(|c| {
            let how = match c.derivation {
                Derivation::Direct => "from",
                Derivation::Approximated => "approximated from",
                Derivation::Converted => "converted from",
            };
            let mut line = format!(
                "{} {how} {} ({})",
                c.studies,
                route_words(c.computed_from),
                c.computed_from
            );
            if c.derivation != Derivation::Direct {
                let _ = write!(line, ": {}", first_of(c.labels.iter(), c.studies, NAMED));
                if c.studies > NAMED {
                    line.push_str(" (every study's route is in the per-study output)");
                }
            }
            line
        })
        .collect()
}

/// The terminal section.
pub fn text_section(r: &FitReport, o: &mut String) {
    if !has_block(r) {
        return;
    }
    let _ = writeln!(o, "How each effect was obtained");
    for l in lines(r) {
        let _ = writeln!(o, "  {l}");
    }
    let _ = writeln!(o);
}
