//! Stage 3 of `fit`: build the design. The `--interaction` names become
//! moderator-index pairs, numeric moderators are checked for a scale that
//! floating point can carry, and [`crate::model::design::build`] codes the
//! included studies into the design matrix.

use super::studies::Studies;
use super::{in_file, FitSettings};
use crate::error::{Error, Result};
use crate::model::design::{self, Design, ModeratorSpec};
use crate::model::ColumnSweep;
use crate::support::flag::Flag;

/// The design of the included studies.
///
/// # Errors
/// [`Error::Usage`] for an `--interaction` naming one moderator twice or a
/// name that is not a moderator; [`Error::Model`] for a moderator whose
/// scale leaves floating point, and the errors of [`design::build`].
pub fn build(settings: &FitSettings, source: &str, studies: &Studies) -> Result<Design> {
    let pairs = interaction_pairs(&settings.moderators, &settings.interactions)?;
    // One sweep of each numeric moderator for its scale check, its mean and
    // range, and the design's own sweep.
    let sweeps = design::moderator_sweeps(&studies.raw, &studies.included);
    check_moderator_scale(source, &settings.moderators, &sweeps)?;
    design::build_swept(
        &settings.moderators,
        &studies.raw,
        &studies.included,
        &pairs,
        &sweeps,
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
    sweeps: &[Option<ColumnSweep>],
) -> Result<()> {
    use crate::tolerance::MODERATOR_MAGNITUDE;
    // Each numeric moderator's range over the included rows: the ends of its
    // one-column sweep (NaN passed over).
    for (spec, sweep) in specs.iter().zip(sweeps) {
        let Some((lo, hi)) = sweep.as_ref().map(|s| (s.lo[0], s.hi[0])) else {
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
