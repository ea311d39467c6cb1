//! The Johnson–Neyman region of significance drawn into the bubble plot:
//! a tinted background over the observed values of the moderator where the
//! confidence interval of the mean effect excludes 0, and a dotted line with
//! its value at each bound inside the range. Drawn only when the result has
//! the region (`--regions`).

use super::palette::{GROUP, MUTED};
use super::scene::{Align, Scene};
use super::{size, Frame};
use crate::result::{FitReport, QuantityKind, RegionOfSignificance};

/// The region of the mean effect along moderator `name`.
fn effect_region<'a>(report: &'a FitReport, name: &str) -> Option<&'a RegionOfSignificance> {
    report
        .interpretation
        .regions_of_significance
        .iter()
        .find(|r| r.moderator == name && r.quantity_kind == QuantityKind::MeanEffect)
}

/// The caption line for the shading (None without a region for `name`).
pub(crate) fn caption(report: &FitReport, name: &str, level_pct: &str) -> Option<String> {
    let r = effect_region(report, name)?;
    let spans: Vec<String> = r
        .observed_significant
        .iter()
        .map(|[a, b]| {
            format!(
                "{} to {}",
                crate::support::format::short(*a),
                crate::support::format::short(*b)
            )
        })
        .collect();
    Some(if spans.is_empty() {
        format!(
            "No tint: the {level_pct} CI of the mean effect contains 0 at every observed value of \
             {name} (Johnson–Neyman)."
        )
    } else {
        format!(
            "Tinted: values of {name} where the {level_pct} CI of the mean effect excludes 0 \
             (Johnson–Neyman region: {}){}.",
            spans.join(" and "),
            if r.observed_bounds.is_empty() {
                ", the whole observed range"
            } else {
                "; dotted lines mark the bounds"
            }
        )
    })
}

/// Tints the region and marks the bounds; call after the grid, before the data.
pub(crate) fn shade(sc: &mut Scene, f: &Frame, report: &FitReport, name: &str) {
    let Some(r) = effect_region(report, name) else {
        return;
    };
    for [a, b] in &r.observed_significant {
        let (xa, xb) = (f.x(*a), f.x(*b));
        sc.poly(
            vec![(xa, f.y0), (xb, f.y0), (xb, f.y1), (xa, f.y1)],
            Some((GROUP, 0.13)),
            None,
        );
    }
    for b in &r.observed_bounds {
        let x = f.x(*b);
        sc.dashed(vec![(x, f.y0), (x, f.y1)], GROUP, 2, (2.0, 3.0));
        sc.text(
            (x, f.y0 - 6.0 * f.k),
            crate::support::format::short(*b),
            size::SMALL * f.k,
            MUTED,
            Align::Center,
        );
    }
}
