//! Leave-one-out: the model refitted without each study in turn.

use super::{i2, Deleted, ModelData};
use crate::model::{inference, ModelFit};
use crate::result::LeaveOneOut;

/// The leave-one-out table from the refits of [`super::deleted_fits`].
///
/// # Formula
/// For each study i, the refit without it gives β̂₍₋ᵢ₎, τ̂²₍₋ᵢ₎, I²₍₋ᵢ₎ and the
/// omnibus moderator test's p with the user's inference (Knapp–Hartung F or
/// Wald chi-square, [`inference::omnibus`]). A removal is flagged when a
/// moderator coefficient changes sign (β̂ⱼ·β̂ⱼ₍₋ᵢ₎ < 0, j ≥ 1), or when the
/// tested p crosses α = 1 − level. Without moderators the same flags concern
/// the average effect (the intercept) and its test.
pub fn table(
    d: &ModelData<'_>,
    full: &ModelFit,
    deleted: &[Deleted],
    labels: &[String],
    lines: &[u64],
) -> Vec<LeaveOneOut> {
    let alpha = 1.0 - d.options.level;
    let has_mods = d.p > 1;
    let tested_p = |f: &ModelFit| -> Option<f64> {
        if has_mods {
            inference::omnibus(f).map(|t| t.p)
        } else {
            inference::coefficients(f).first().map(|c| c.p)
        }
    };
    let full_p = tested_p(full);
    let signed: Vec<usize> = if has_mods {
        (1..d.p).collect()
    } else {
        vec![0]
    };
    deleted
        .iter()
        .enumerate()
        .map(|(i, del)| {
            let base = LeaveOneOut {
                study: labels[i].clone(),
                line: lines[i],
                coefficients: Vec::new(),
                tau2: None,
                i2: None,
                moderator_p: None,
                average_p: None,
                sign_changed: false,
                significance_changed: false,
                problem: None,
            };
            let f = match del {
                Ok(f) => f,
                Err(why) => {
                    return LeaveOneOut {
                        problem: Some(why.clone()),
                        ..base
                    }
                }
            };
            let p = tested_p(f).filter(|p| p.is_finite());
            let Some(p) = p else {
                return LeaveOneOut {
                    problem: Some("the refit gives no finite p-value".into()),
                    ..base
                };
            };
            let sign_changed = signed.iter().any(|&j| full.beta[j] * f.beta[j] < 0.0);
            let significance_changed = full_p.is_some_and(|fp| (fp < alpha) != (p < alpha));
            LeaveOneOut {
                coefficients: f.beta.iter().copied().collect(),
                tau2: Some(f.tau2.estimate),
                i2: Some(i2(f)),
                moderator_p: has_mods.then_some(p),
                average_p: (!has_mods).then_some(p),
                sign_changed,
                significance_changed,
                ..base
            }
        })
        .collect()
}
