//! How each study's effect was obtained: the count of studies per route
//! (`computed_from`), with the names of the studies behind each.

use crate::effect::route::{Derivation, Route};
use crate::support::texts::Texts;
use serde::Serialize;
use std::borrow::Cow;

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
/// (`labels[i]` is the label of the study with `routes[i]`). When every
/// study took one route (the usual case, found with one comparison per
/// study) its labels are the list given, moved when given owned, else
/// copied whole; otherwise the routes are counted in one pass and each
/// route's labels gathered in a pass of their own.
pub fn count_routes(routes: &[Route], labels: Cow<'_, Texts>) -> Vec<RouteCount> {
    let count = |r: Route, n: usize, labels: Texts| RouteCount {
        computed_from: r,
        derivation: r.derivation(),
        studies: n,
        labels,
    };
    if let Some(&first) = routes.first() {
        if routes.iter().filter(|&&r| r == first).count() == routes.len() {
            return vec![count(first, routes.len(), labels.into_owned())];
        }
    }
    let mut counts = [0usize; Route::ALL.len()];
    for r in routes {
        if let Some(j) = Route::ALL.iter().position(|x| x == r) {
            counts[j] += 1;
        }
    }
    Route::ALL
        .iter()
        .zip(counts)
        .filter(|&(_, n)| n > 0)
        .map(|(&r, n)| {
            let picked = routes
                .iter()
                .zip(labels.iter())
                .filter(|(x, _)| **x == r)
                .map(|(_, l)| l)
                .collect();
            count(r, n, picked)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn routes_are_counted_with_their_studies_labels_in_order() {
        let labels: Texts = ["s1", "s2", "s3", "s4"].into_iter().collect();
        let mixed = count_routes(
            &[Route::Counts, Route::Means, Route::Counts, Route::Means],
            Cow::Borrowed(&labels),
        );
        let got: Vec<(Route, usize, Vec<String>)> = mixed
            .iter()
            .map(|c| (c.computed_from, c.studies, c.labels.to_vec()))
            .collect();
        assert_eq!(
            got,
            [
                (Route::Means, 2, vec!["s2".to_string(), "s4".to_string()]),
                (Route::Counts, 2, vec!["s1".to_string(), "s3".to_string()]),
            ]
        );
        let one = count_routes(&[Route::Counts; 4], Cow::Borrowed(&labels));
        assert_eq!(one.len(), 1);
        assert_eq!((one[0].studies, &one[0].labels), (4, &labels));
        let moved = count_routes(&[Route::Counts; 4], Cow::Owned(labels.clone()));
        assert_eq!((moved[0].studies, &moved[0].labels), (4, &labels));
        // Runs of routes, owned labels.
        let runs = count_routes(
            &[Route::T, Route::T, Route::Means, Route::T],
            Cow::Owned(labels.clone()),
        );
        let got: Vec<(Route, usize, Vec<String>)> = runs
            .iter()
            .map(|c| (c.computed_from, c.studies, c.labels.to_vec()))
            .collect();
        assert_eq!(
            got,
            [
                (Route::Means, 1, vec!["s3".to_string()]),
                (
                    Route::T,
                    3,
                    vec!["s1".to_string(), "s2".to_string(), "s4".to_string()]
                ),
            ]
        );
        assert!(count_routes(&[], Cow::Owned(Texts::default())).is_empty());
    }
}
