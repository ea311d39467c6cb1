//! Stage 3 of `fit`: build the design. The `--interaction` names become
//! moderator-index pairs, numeric moderators are checked for a scale that
//! floating point can carry, and [`crate::model::design::build`] codes the
//! included studies into the design matrix.

use super::studies::Studies;
use super::{in_file, FitSettings};
use crate::error::{Error, Result};
use crate::model::design::{self, Design, ModeratorSpec, RawModerator};
use crate::support::flag::Flag;
use crate::support::rows::Rows;

/// The design of the included studies.
///
/// # Errors
/// [`Error::Usage`] for an `--interaction` naming one moderator twice or a
/// name that is not a moderator; [`Error::Model`] for a moderator whose
/// scale leaves floating point, and the errors of [`design::build`].
pub fn build(settings: &FitSettings, source: &str, studies: &Studies) -> Result<Design> {
    let pairs = interaction_pairs(&settings.moderators, &settings.interactions)?;
    check_moderator_scale(
        source,
        &settings.moderators,
        &studies.raw,
        &studies.included,
    )?;
    design::build(
        &settings.moderators,
        &studies.raw,
        &studies.included,
        &pairs,
    )
    .map_err(|e| in_file(source, e))
}

/// The product terms as pairs of moderator indices.
fn interaction_pairs(
    moderators: &[ModeratorSpec],
    interactions: &[(String, String)],
) -> Result<Vec<(usize, usize)>> {
    let index_of = |name: &str| moderators.iter().position(|m| m.name == name);
    let mut pairs = Vec::new();
    for (a, b) in interactions {
        let ia = index_of(a);
        let ib = index_of(b);
        match (ia, ib) {
            (Some(x), Some(y)) if x != y => pairs.push((x, y)),
            (Some(_), Some(_)) => {
                return Err(Error::usage(
                    Flag::Interaction,
                    format!(
                        "'{a},{b}' names the same moderator twice; give two different moderators"
                    ),
                ))
            }
            _ => {
                let missing = if ia.is_none() { a } else { b };
                return Err(Error::usage(
                    Flag::Interaction,
                    format!(
                        "'{missing}' is not a moderator of this model; add {} {missing} \
                         (a product term needs both of its moderators in the model)",
                        Flag::Moderator
                    ),
                ));
            }
        }
    }
    Ok(pairs)
}

/// Refuses a numeric moderator whose values are so large, or whose spread
/// is so small, that its coefficient's variance would leave the range of
/// floating point (it scales with 1/spread²): the fix is to express the
/// moderator in other units.
fn check_moderator_scale(
    source: &str,
    specs: &[ModeratorSpec],
    raw: &[RawModerator],
    included: &Rows,
) -> Result<()> {
    use crate::tolerance::MODERATOR_MAGNITUDE;
    use rayon::prelude::*;
    // Each moderator's range (in row order, as one pass would find it), the
    // moderators side by side on every core.
    let ranges: Vec<Option<(f64, f64)>> = raw
        .par_iter()
        .map(|r| {
            let RawModerator::Numeric(x) = r else {
                return None;
            };
            // The ends of the one-column sweep (NaN passed over).
            let xs = x.of_rows(included);
            let sweep = crate::model::ColumnSweep::of(&xs, xs.len(), 1);
            Some((sweep.lo[0], sweep.hi[0]))
        })
        .collect();
    for (spec, range) in specs.iter().zip(ranges) {
        let Some((lo, hi)) = range else {
            continue;
        };
        let big = lo.abs().max(hi.abs());
        let spread = hi - lo;
        if big > MODERATOR_MAGNITUDE || (spread > 0.0 && spread < 1.0 / MODERATOR_MAGNITUDE) {
            return Err(Error::Model(format!(
                "{source}: moderator '{}' runs from {lo:e} to {hi:e}; at this scale its coefficient \
                 and standard error leave the range of floating-point numbers. Express it in other \
                 units (for example divide or multiply the column by a power of ten) and run again",
                spec.name
            )));
        }
    }
    Ok(())
}
