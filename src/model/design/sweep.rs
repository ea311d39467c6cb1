//! The design's [`ColumnSweep`] (each column's running sum, smallest and
//! largest value) from what the moderators' own sweeps and counts already
//! give, so that the design written on every core need not be swept again
//! on one.

use super::{Coder, ModeratorKind, RawModerator};
use crate::model::ColumnSweep;
use crate::support::rows::Rows;
use rayon::prelude::*;

/// Each numeric moderator's one-column sweep over the included rows, in
/// their order (None for a categorical one), the moderators side by side on
/// every core. The moderators' scale check, their mean and range
/// ([`super::build_swept`]) and the design's sweep all read these.
pub(crate) fn moderator_sweeps(raw: &[RawModerator], included: &Rows) -> Vec<Option<ColumnSweep>> {
    raw.par_iter()
        .map(|r| match r {
            RawModerator::Numeric(v) => {
                let xs = v.of_rows(included);
                Some(ColumnSweep::of(&xs, xs.len(), 1))
            }
            RawModerator::Text(_) => None,
        })
        .collect()
}

/// The sweep of the design's k rows as [`ColumnSweep::of`] would give it,
/// when every column follows from the moderators: the intercept (k ones:
/// the running sum from −0.0 is k exactly, for k < 2⁵³), a numeric moderator
/// that is not centred (its column holds its values, in the same order:
/// its own sweep), a level's dummy column (as many ones as the level has
/// studies, zeros elsewhere: again an exact sum, and the ends follow from
/// whether the level holds none, some or all of the studies). None when a
/// column does not (a centred moderator, a product term): then the design
/// is swept.
pub(super) fn from_moderators(
    coder: &Coder<'_>,
    sweeps: &[Option<ColumnSweep>],
    k: usize,
) -> Option<ColumnSweep> {
    if !coder.interactions.is_empty() || k == 0 {
        return None;
    }
    let p = coder.width;
    let mut out = ColumnSweep {
        sum: vec![k as f64; p],
        lo: vec![1.0; p],
        hi: vec![1.0; p],
        ones: true,
    };
    for (j, m) in coder.mods.iter().enumerate() {
        let (start, end) = coder.spans[j];
        match &m.kind {
            ModeratorKind::Numeric {
                centered: false, ..
            } => {
                let s = sweeps.get(j)?.as_ref()?;
                (out.sum[start], out.lo[start], out.hi[start]) = (s.sum[0], s.lo[0], s.hi[0]);
            }
            ModeratorKind::Numeric { centered: true, .. } => return None,
            ModeratorKind::Categorical { levels, counts, .. } => {
                let dummies = (0..levels.len()).filter(|&l| l != coder.references[j]);
                for (c, l) in (start..end).zip(dummies) {
                    let n = *counts.get(l)?;
                    out.sum[c] = n as f64;
                    out.lo[c] = if n < k { 0.0 } else { 1.0 };
                    out.hi[c] = if n > 0 { 1.0 } else { 0.0 };
                }
            }
        }
    }
    Some(out)
}

/// Whether two sweeps hold the same bits (the check, in debug builds, that
/// [`from_moderators`] gives what a sweep of the design gives).
pub(super) fn same_bits(a: &ColumnSweep, b: &ColumnSweep) -> bool {
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    a.ones == b.ones
        && bits(&a.sum) == bits(&b.sum)
        && bits(&a.lo) == bits(&b.lo)
        && bits(&a.hi) == bits(&b.hi)
}

#[cfg(test)]
mod tests {
    use super::super::{build, Categories, ModeratorSpec, Numbers};
    use super::*;

    fn spec(name: &str, categorical: bool, center: bool) -> ModeratorSpec {
        ModeratorSpec {
            name: name.into(),
            categorical,
            reference: None,
            center,
        }
    }

    /// Invented values: negative numbers, −0.0, a missing value (its row
    /// excluded below), a repeated largest value, labels of three levels.
    fn raw(k: usize) -> Vec<RawModerator> {
        let a: Vec<f64> = (0..k)
            .map(|i| match i % 7 {
                0 => -0.0,
                3 if i == 3 => f64::NAN,
                5 => 2.5e3,
                _ => (i as f64 * 0.37).sin() * 10.0 - 1.0,
            })
            .collect();
        let b: Vec<f64> = (0..k).map(|i| 1e-3 * (i as f64) - 0.1).collect();
        let c = Categories::from_iter((0..k).map(|i| Some(["lo", "mid", "hi"][(i * 5 / 3) % 3])));
        vec![
            RawModerator::Numeric(Numbers::from_values(a)),
            RawModerator::Numeric(Numbers::from_values(b)),
            RawModerator::Text(c),
        ]
    }

    #[test]
    fn the_sweep_from_the_moderators_is_the_designs_own_to_the_bit() {
        let k = 500;
        let raw = raw(k);
        let included = Rows::Listed((0..k).filter(|&i| i != 3).collect());
        let specs = [
            spec("a", false, false),
            spec("b", false, false),
            spec("c", true, false),
        ];
        for take in [1, 2, 3] {
            let d = build(&specs[..take], &raw[..take], &included, &[]).unwrap();
            let coder = Coder::new(&d.moderators, &d.interactions);
            let sweeps = moderator_sweeps(&raw[..take], &included);
            let got = from_moderators(&coder, &sweeps, included.len()).expect("all columns follow");
            let want = ColumnSweep::of(&d.x, included.len(), d.p);
            assert!(
                same_bits(&got, &want),
                "{take} moderators: {got:?} against {want:?}"
            );
            // A count one off, or a moderator's sweep of other rows, is seen.
            let mut off = got.clone();
            off.sum[d.p - 1] += 1.0;
            assert!(!same_bits(&off, &want));
        }
        let every = Rows::Every(k);
        let other = moderator_sweeps(&raw[..1], &every);
        let d = build(&specs[..1], &raw[..1], &included, &[]).unwrap();
        let coder = Coder::new(&d.moderators, &d.interactions);
        let want = ColumnSweep::of(&d.x, included.len(), d.p);
        let got = from_moderators(&coder, &other, included.len()).unwrap();
        assert!(!same_bits(&got, &want));
    }

    #[test]
    fn centred_moderators_and_product_terms_are_swept() {
        let k = 200;
        let raw = raw(k);
        let included = Rows::Listed((0..k).filter(|&i| i != 3).collect());
        let specs = [spec("a", false, true), spec("b", false, false)];
        let d = build(&specs, &raw[..2], &included, &[]).unwrap();
        let coder = Coder::new(&d.moderators, &d.interactions);
        let sweeps = moderator_sweeps(&raw[..2], &included);
        assert!(from_moderators(&coder, &sweeps, included.len()).is_none());
        let specs = [spec("a", false, false), spec("b", false, false)];
        let d = build(&specs, &raw[..2], &included, &[(0, 1)]).unwrap();
        let coder = Coder::new(&d.moderators, &d.interactions);
        assert!(from_moderators(&coder, &sweeps, included.len()).is_none());
    }
}
