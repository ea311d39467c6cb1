//! The shrunken estimate of a study in its forest-plot row (`--shrink`):
//! an open square on a thin line of its interval, drawn just below the
//! study's own interval, so the eye reads observed → shrunken downwards.

use super::layout::Forest;
use crate::render::figure::palette::*;
use crate::render::figure::Scene;
use crate::result::Study;

/// The caption line of the marker.
pub(super) fn caption(lv: &str) -> String {
    format!(
        "□ with a thin line just below a study: its shrunken (empirical-Bayes) estimate of the \
         study's own true effect with its {lv} interval, pulled toward the fitted value."
    )
}

impl Forest<'_> {
    /// The open square and thin interval of a study's shrunken estimate
    /// (nothing without `--shrink`); parts beyond the axis are cut.
    pub(super) fn shrunken_marks(&self, sc: &mut Scene, s: &Study, y: f64) {
        let Some(sh) = &s.shrunken else {
            return;
        };
        let dy = (self.rh * 0.28).max(2.5);
        let yy = y + dy;
        let (l, h) = (self.tp(sh.ci.ci_low), self.tp(sh.ci.ci_high));
        let (lo, hi) = (self.axis.lo, self.axis.hi);
        if h >= lo && l <= hi {
            let (xl, xh) = (self.x_of(self.clip(l)), self.x_of(self.clip(h)));
            sc.line(vec![(xl, yy), (xh, yy)], INK, 1);
        }
        let e = self.tp(sh.estimate);
        if (lo..=hi).contains(&e) {
            let x = self.x_of(e);
            let t = (self.rh * 0.16).max(2.0);
            sc.poly(
                vec![
                    (x - t, yy - t),
                    (x + t, yy - t),
                    (x + t, yy + t),
                    (x - t, yy + t),
                ],
                Some((PAPER, 1.0)),
                Some((INK, 1)),
            );
        }
    }
}
