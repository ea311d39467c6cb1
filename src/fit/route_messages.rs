//! Messages about how the effects were obtained (part of stage 10): the
//! cross-check warnings of rows with more than one complete route, limits
//! asymmetric about their effect, and the cautions that approximated
//! (median-based) and converted effects carry.

use super::messages::{list, Messages};

/// The most study labels a caution names; the per-study output (and the
/// report's section on how each effect was obtained) has every study's
/// route.
const NAMED: usize = 12;
use super::studies::Studies;
use crate::effect::route::{Derivation, Route};

/// Adds the route warnings and cautions of `studies` to `m`.
pub fn add(studies: &Studies, m: &mut Messages) {
    for (at, c) in &studies.checks {
        m.warnings
            .push(format!("Study '{}': {c}.", studies.labels.get(*at)));
    }
    let named = |d: Derivation| -> Vec<&str> {
        studies
            .routes
            .iter()
            .enumerate()
            .filter(|(_, r)| r.derivation() == d)
            .map(|(i, _)| studies.labels.get(i))
            .collect()
    };
    let approximated = named(Derivation::Approximated);
    if !approximated.is_empty() {
        m.cautions.push(format!(
            "{} approximated from medians with quartiles or ranges ({}): the approximations \
             assume roughly symmetric, near-normal data within each group; with skewed data \
             they can be far off.",
            count(approximated.len()),
            list(&approximated, NAMED)
        ));
    }
    let converted = named(Derivation::Converted);
    if !converted.is_empty() {
        let from_counts = studies.routes.contains(&Route::CountsToD);
        m.cautions.push(format!(
            "{} converted from another family of effect sizes ({}): conversions assume the \
             underlying continuous trait is roughly normal{}; they put different designs on \
             one scale, not make them the same.",
            count(converted.len()),
            list(&converted, NAMED),
            if from_counts {
                " (for event counts, that the outcome is a cut-off on a logistic trait)"
            } else {
                ""
            }
        ));
    }
}

fn count(n: usize) -> String {
    if n == 1 {
        "1 study's effect was".into()
    } else {
        format!("{n} studies' effects were")
    }
}
