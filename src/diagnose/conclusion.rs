//! Which conclusions a removal reverses: the shared rule of the leave-one-out
//! flags (`--loo`) and the influence view (`--influence`).

use crate::model::{inference, ModelFit};
use crate::result::{ConclusionChange, ConclusionKind};

/// The conclusions of `full` that the refit `without` reverses.
///
/// # Formula
/// With moderators (p > 1): the omnibus moderator test with the user's
/// inference ([`inference::omnibus`]) is a conclusion (p < α, α = 1 − level),
/// and so is each moderator coefficient j ≥ 1 whose confidence interval
/// excludes 0 (`ci_low > 0` or `ci_high < 0`). The intercept, the effect at
/// every moderator 0, is not a conclusion. Without moderators the one
/// conclusion is whether the average effect's interval excludes 0. A change
/// is listed when the answer differs between the two fits, in either
/// direction (lost or gained). A change of sign of a coefficient whose
/// interval includes 0 in both fits is no change of conclusion: the data
/// could not tell its sign in the first place.
pub fn changes(
    full: &ModelFit,
    without: &ModelFit,
    terms: &[String],
    level: f64,
) -> Vec<ConclusionChange> {
    let alpha = 1.0 - level;
    let mut out = Vec::new();
    let excludes = |c: &inference::CoefInference| c.ci_low > 0.0 || c.ci_high < 0.0;
    let with_c = inference::coefficients(full);
    let without_c = inference::coefficients(without);
    if full.p > 1 {
        if let (Some(a), Some(b)) = (inference::omnibus(full), inference::omnibus(without)) {
            if (a.p < alpha) != (b.p < alpha) {
                out.push(ConclusionChange {
                    kind: ConclusionKind::ModeratorTest,
                    term: None,
                    significant_with: a.p < alpha,
                    significant_without: b.p < alpha,
                });
            }
        }
        for j in 1..full.p {
            let (a, b) = (excludes(&with_c[j]), excludes(&without_c[j]));
            if a != b {
                out.push(ConclusionChange {
                    kind: ConclusionKind::Coefficient,
                    term: terms.get(j).cloned(),
                    significant_with: a,
                    significant_without: b,
                });
            }
        }
    } else if let (Some(a), Some(b)) = (with_c.first(), without_c.first()) {
        let (a, b) = (excludes(a), excludes(b));
        if a != b {
            out.push(ConclusionChange {
                kind: ConclusionKind::Average,
                term: None,
                significant_with: a,
                significant_without: b,
            });
        }
    }
    out
}
