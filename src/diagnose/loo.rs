//! Leave-one-out: the model refitted without each study.

use super::{conclusion, i2, Deleted, ModelData};
use crate::effect::ReadingScale;
use crate::model::{inference, ModelFit};
use crate::result::LeaveOneOut;

/// The refits a leave-one-out or influence table reads: the model and the
/// average effect (intercept only) without each study.
#[derive(Debug, Clone, Copy)]
pub struct Refits<'a> {
    /// The model with every study.
    pub full: &'a ModelFit,
    /// The model without study i, for each i.
    pub deleted: &'a [Deleted],
    /// The average effect without study i (the same fits as `deleted`
    /// without moderators).
    pub averages: &'a [Deleted],
    /// Term names in model order.
    pub terms: &'a [String],
    /// The reading scale of the measure.
    pub scale: ReadingScale,
}

/// The leave-one-out table from the refits of [`super::deleted_fits`] and
/// [`super::average_fits`].
///
/// # Formula
/// For each study i, the refit without it gives β̂₍₋ᵢ₎, τ̂²₍₋ᵢ₎, I²₍₋ᵢ₎ and
/// the omnibus moderator test's p with the user's inference (Knapp–Hartung F
/// or Wald chi-square, [`inference::omnibus`]); the intercept-only refit
/// gives the average effect μ̂₍₋ᵢ₎, shown also on the reading scale (tanh for
/// Fisher z, exp for a log ratio). A removal is flagged by the conclusions
/// it reverses ([`conclusion::changes`]): the moderator test crossing
/// α = 1 − level, or a moderator coefficient's interval starting or ceasing
/// to exclude 0 (the average's without moderators). A sign change of a
/// coefficient that no interval separates from 0 is not flagged.
pub fn table(
    d: &ModelData<'_>,
    r: Refits<'_>,
    labels: &[String],
    lines: &[u64],
) -> Vec<LeaveOneOut> {
    let has_mods = d.p > 1;
    let tested_p = |f: &ModelFit| -> Option<f64> {
        if has_mods {
            inference::omnibus(f).map(|t| t.p)
        } else {
            inference::coefficients(f).first().map(|c| c.p)
        }
    };
    let reading = |x: f64| (r.scale != ReadingScale::Same).then(|| r.scale.apply(x));
    r.deleted
        .iter()
        .enumerate()
        .map(|(i, del)| {
            let base = LeaveOneOut {
                study: labels[i].clone(),
                line: lines[i],
                coefficients: Vec::new(),
                average: None,
                average_reading: None,
                tau2: None,
                i2: None,
                moderator_p: None,
                average_p: None,
                changes: Vec::new(),
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
            let average = r
                .averages
                .get(i)
                .and_then(|a| a.as_ref().ok())
                .map(|a| a.beta[0]);
            LeaveOneOut {
                coefficients: f.beta.iter().copied().collect(),
                average,
                average_reading: average.and_then(reading),
                tau2: Some(f.tau2.estimate),
                i2: Some(i2(f)),
                moderator_p: has_mods.then_some(p),
                average_p: (!has_mods).then_some(p),
                changes: conclusion::changes(r.full, f, r.terms, d.options.level),
                ..base
            }
        })
        .collect()
}
