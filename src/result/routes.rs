//! How each study's effect was obtained: the count of studies per route
//! (`computed_from`), with the names of the studies behind each.

use crate::effect::route::{Derivation, Route};
use crate::support::texts::Texts;
use serde::Serialize;

/// The studies whose effects came from one route.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct RouteCount {
    /// The route, as in `studies[].computed_from`.
    pub computed_from: Route,
    /// "direct" (as reported), "approximated" (medians with quartiles or
    /// ranges) or "converted" (from another family, `--convert`).
    pub derivation: Derivation,
    /// How many included studies took this route.
    pub studies: usize,
    /// Their labels, in input order.
    pub labels: Texts,
}

/// Counts the routes of the included studies, in the order of [`Route::ALL`]
/// (`labels` gives the studies' labels in the order of `routes`).
pub fn count_routes<'a>(
    routes: &[Route],
    labels: impl Iterator<Item = &'a str> + Clone,
) -> Vec<RouteCount> {
    Route::ALL
        .iter()
        .filter_map(|&r| {
            let labels: Texts = routes
                .iter()
                .zip(labels.clone())
                .filter(|(x, _)| **x == r)
                .map(|(_, l)| l)
                .collect();
            (!labels.is_empty()).then(|| RouteCount {
                computed_from: r,
                derivation: r.derivation(),
                studies: labels.len(),
                labels,
            })
        })
        .collect()
}
