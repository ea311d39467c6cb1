//! The band of a study under the location-scale model (`--spread-by`): a
//! pale bar behind the study's row from one end to the other of the band
//! for a new study's true effect with the same characteristics, so rows
//! whose characteristics imply a wider spread of true effects show wider bars.

use super::layout::Forest;
use crate::render::figure::palette::*;
use crate::render::figure::Scene;
use crate::result::FitReport;
use crate::support::flag::Flag;

/// The caption line of the bars (None without spread terms).
pub(super) fn caption(report: &FitReport, lv: &str) -> Option<String> {
    let s = report.spread.as_ref()?;
    Some(format!(
        "Pale bar behind a study: the {lv} band for a new study's true effect with that study's \
         characteristics, fitted value ± z·√(its own τ² + the fitted value's variance), τ² \
         depending on {} ({}).",
        s.spread_by.join(", "),
        Flag::SpreadBy
    ))
}

impl Forest<'_> {
    /// The pale bar of study `i`'s band, cut at the axis (nothing without
    /// spread terms).
    pub(super) fn band_bar(&self, sc: &mut Scene, i: usize, y: f64) {
        let Some(s) = self.report.spread.as_ref().and_then(|s| s.studies.get(i)) else {
            return;
        };
        let (l, h) = (self.tp(s.pi_low), self.tp(s.pi_high));
        if h < self.axis.lo || l > self.axis.hi {
            return;
        }
        let (xl, xh) = (self.x_of(self.clip(l)), self.x_of(self.clip(h)));
        let t = (self.rh * 0.3).max(2.5);
        sc.poly(
            vec![(xl, y - t), (xh, y - t), (xh, y + t), (xl, y + t)],
            Some((PREDICT, 0.25)),
            None,
        );
        for (x, v) in [(xl, l), (xh, h)] {
            if (self.axis.lo..=self.axis.hi).contains(&v) {
                sc.line(vec![(x, y - t), (x, y + t)], PREDICT, 1);
            }
        }
    }
}
