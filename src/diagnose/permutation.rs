//! Permutation test of the moderators (Higgins & Thompson 2004, *Statistics
//! in Medicine* 23:1663, cited from memory).

use super::{ModelData, PermutationSettings};
use crate::error::{Error, Result};
use crate::model::{self, inference};
use crate::result::Permutation;
use crate::support::flag::Flag;
use crate::support::rng::{block_rng, Xoshiro256StarStar};
use crate::tolerance::PERMUTATION_TIE_REL;

/// Arrangements per block. Block b draws from its own generator
/// ([`block_rng`](seed, b), the scheme of `pondus plan`), and the counts are
/// summed in block order, so the answer does not depend on the number of
/// threads.
pub const PERM_BLOCK: usize = 250;

/// Blocks of arrangements generated at a time under exact enumeration.
const EXACT_BATCH_BLOCKS: usize = 64;

/// Distinct arrangements above this are not counted exactly.
const ARRANGEMENTS_MAX: u128 = 1_000_000_000_000_000_000;

/// The test statistics of one fit: the omnibus statistic (F under
/// Knapp–Hartung, chi-square under z) and |t| (or |z|) of each coefficient.
fn statistics(y: &[f64], v: &[f64], x: &[f64], d: &ModelData<'_>) -> Option<(f64, Vec<f64>)> {
    let f = model::fit_summary(y, v, std::borrow::Cow::Borrowed(x), d.p, d.options, false).ok()?;
    if f.kh_scale == Some(0.0) {
        return None;
    }
    // The statistics alone: their p-values and intervals (a t quantile per
    // coefficient) had been a sixth of the test's time, unread.
    let omni = inference::omnibus_statistic(&f)?;
    let coefs: Vec<f64> = inference::coefficient_statistics(&f)
        .iter()
        .map(|c| c.abs())
        .collect();
    (omni.is_finite() && coefs.iter().all(|c| c.is_finite())).then_some((omni, coefs))
}

/// A uniform integer in 0..n (n ≥ 1) by rejection, without modulo bias.
fn below(rng: &mut Xoshiro256StarStar, n: u64) -> u64 {
    let zone = u64::MAX - (u64::MAX % n);
    loop {
        let r = rng.next_u64();
        if r < zone {
            return r % n;
        }
    }
}

/// Counts of arrangements at least as extreme as observed.
#[derive(Debug, Clone, Default)]
struct Counts {
    omnibus: usize,
    coefficients: Vec<usize>,
    used: usize,
    failed: usize,
}

impl Counts {
    fn new(p: usize) -> Self {
        Counts {
            coefficients: vec![0; p],
            ..Default::default()
        }
    }

    fn add(&mut self, other: &Counts) {
        self.omnibus += other.omnibus;
        for (a, b) in self.coefficients.iter_mut().zip(&other.coefficients) {
            *a += b;
        }
        self.used += other.used;
        self.failed += other.failed;
    }
}

fn at_least(stat: f64, observed: f64) -> bool {
    stat >= observed - PERMUTATION_TIE_REL * observed.abs()
}

/// Evaluates the arrangements `perms` (each a list of source rows).
fn evaluate<'p>(
    d: &ModelData<'_>,
    observed: &(f64, Vec<f64>),
    perms: impl Iterator<Item = &'p [u32]>,
) -> Counts {
    let (k, p) = (d.k(), d.p);
    let mut x = vec![0.0; k * p];
    let mut c = Counts::new(p);
    for perm in perms {
        for (i, &src) in perm.iter().enumerate() {
            x[i * p..(i + 1) * p].copy_from_slice(d.row(src as usize));
        }
        match statistics(d.y, d.v, &x, d) {
            None => c.failed += 1,
            Some((omni, coefs)) => {
                c.used += 1;
                if at_least(omni, observed.0) {
                    c.omnibus += 1;
                }
                for (j, (s, o)) in coefs.iter().zip(&observed.1).enumerate() {
                    if at_least(*s, *o) {
                        c.coefficients[j] += 1;
                    }
                }
            }
        }
    }
    c
}

/// Groups identical design rows: the group of each row, in row order.
fn row_groups(d: &ModelData<'_>) -> Vec<u32> {
    let mut reps: Vec<usize> = Vec::new();
    let mut group = Vec::with_capacity(d.k());
    for i in 0..d.k() {
        let r = d.row(i);
        let g = reps
            .iter()
            .position(|&j| {
                d.row(j)
                    .iter()
                    .zip(r)
                    .all(|(a, b)| a.to_bits() == b.to_bits())
            })
            .unwrap_or_else(|| {
                reps.push(i);
                reps.len() - 1
            });
        group.push(g as u32);
    }
    group
}

/// Number of distinct arrangements of rows with these groups:
/// k!/∏ m_g! = ∏_g C(m₁ + … + m_g, m_g), None when above 10¹⁸.
pub fn arrangements(groups: &[u32]) -> Option<u128> {
    let g = groups.iter().copied().max().map_or(0, |m| m as usize + 1);
    let mut counts = vec![0u128; g];
    for &x in groups {
        counts[x as usize] += 1;
    }
    let mut total: u128 = 1;
    let mut n: u128 = 0;
    for m in counts {
        // C(n + m, m), built up as a product of exact binomial steps.
        let mut c: u128 = 1;
        for j in 1..=m {
            c = c.checked_mul(n + j)? / j;
            if c > ARRANGEMENTS_MAX {
                return None;
            }
        }
        n += m;
        total = total.checked_mul(c)?;
        if total > ARRANGEMENTS_MAX {
            return None;
        }
    }
    Some(total)
}

/// The next lexicographic arrangement of a multiset (false after the last).
fn next_arrangement(a: &mut [u32]) -> bool {
    if a.len() < 2 {
        return false;
    }
    let mut i = a.len() - 1;
    while i > 0 && a[i - 1] >= a[i] {
        i -= 1;
    }
    if i == 0 {
        return false;
    }
    let mut j = a.len() - 1;
    while a[j] <= a[i - 1] {
        j -= 1;
    }
    a.swap(i - 1, j);
    a[i..].reverse();
    true
}

/// The permutation test.
///
/// # Formula
/// The rows of the design (the moderator values of each study, product terms
/// included) are permuted relative to the effects and variances, and the
/// model is refitted with the same estimator and inference. b = the number of
/// arrangements whose statistic is at least the observed one (omnibus F or
/// chi-square; |t| or |z| for each coefficient). With N random permutations,
/// p = (b + 1)/(N + 1), counting the observed arrangement (Phipson & Smyth
/// 2010, *Stat. Appl. Genet. Mol. Biol.* 9:39, cited from memory). When the
/// rows have at most N distinct arrangements (k!/∏ m_g! for groups of
/// identical rows of sizes m_g), all are enumerated and p = b/M, the
/// observed arrangement among the M. Arrangements whose refit fails are
/// left out of N (or M) and counted in `failed`. Random permutations are
/// Fisher–Yates shuffles drawn in blocks of [`PERM_BLOCK`]; `progress` is
/// called with the arrangements of each finished block.
///
/// # Errors
/// [`Error::Usage`] without moderators; [`Error::Model`] when the observed
/// model has no test or no arrangement can be refitted.
pub fn test(
    d: &ModelData<'_>,
    settings: PermutationSettings,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Permutation> {
    use rayon::prelude::*;
    let (k, p) = (d.k(), d.p);
    if p < 2 {
        return Err(Error::usage(
            Flag::Permutations,
            format!(
                "the model has no moderators to permute; add {} NAME",
                Flag::Moderator
            ),
        ));
    }
    let observed = statistics(d.y, d.v, d.x, d).ok_or_else(|| {
        Error::Model("the observed model gives no moderator test to compare with".into())
    })?;
    let groups = row_groups(d);
    let total = arrangements(&groups);
    let n = settings.permutations;
    let exact = total.is_some_and(|m| m <= n as u128);
    let counts = if exact {
        let mut a = groups.clone();
        a.sort_unstable();
        // Source rows of each group, to map an arrangement of groups to rows.
        let mut rep = vec![0u32; groups.len()];
        for (i, &g) in groups.iter().enumerate().rev() {
            rep[g as usize] = i as u32;
        }
        // Arrangements are generated in batches of whole blocks, so memory
        // stays bounded however many there are; counts are integers, so
        // the order of summation cannot change them.
        let mut parts = Vec::new();
        let mut batch: Vec<u32> = Vec::with_capacity(EXACT_BATCH_BLOCKS * PERM_BLOCK * k);
        let mut more = true;
        while more {
            batch.clear();
            while more && batch.len() < EXACT_BATCH_BLOCKS * PERM_BLOCK * k {
                batch.extend(a.iter().map(|&g| rep[g as usize]));
                more = next_arrangement(&mut a);
            }
            let counts: Vec<Counts> = batch
                .par_chunks(PERM_BLOCK * k)
                .map(|chunk| {
                    let c = evaluate(d, &observed, chunk.chunks_exact(k));
                    progress((chunk.len() / k) as u64);
                    c
                })
                .collect();
            parts.extend(counts);
        }
        parts
    } else {
        let blocks = n.div_ceil(PERM_BLOCK);
        (0..blocks)
            .into_par_iter()
            .map(|b| {
                let m = PERM_BLOCK.min(n - b * PERM_BLOCK);
                let mut rng = block_rng(settings.seed, b as u64);
                let mut perms = vec![0u32; m * k];
                for perm in perms.chunks_exact_mut(k) {
                    for (i, x) in perm.iter_mut().enumerate() {
                        *x = i as u32;
                    }
                    for i in (1..k).rev() {
                        let j = below(&mut rng, i as u64 + 1) as usize;
                        perm.swap(i, j);
                    }
                }
                let c = evaluate(d, &observed, perms.chunks_exact(k));
                progress(m as u64);
                c
            })
            .collect()
    };
    let mut c = Counts::new(p);
    for part in &counts {
        c.add(part);
    }
    if c.used == 0 {
        return Err(Error::Model(
            "no permuted arrangement of the moderators could be refitted".into(),
        ));
    }
    let share = |b: usize| {
        if exact {
            b as f64 / c.used as f64
        } else {
            (b + 1) as f64 / (c.used + 1) as f64
        }
    };
    Ok(Permutation {
        permutations: c.used + c.failed,
        seed: (!exact).then_some(settings.seed),
        exact,
        arrangements: total.map(|m| m as f64),
        moderator_p: share(c.omnibus),
        coefficient_p: (0..p)
            .map(|j| (j > 0).then(|| share(c.coefficients[j])))
            .collect(),
        failed: c.failed,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counts_distinct_arrangements() {
        // 4 rows, two identical pairs: 4!/(2!·2!) = 6.
        assert_eq!(arrangements(&[0, 1, 0, 1]), Some(6));
        // All distinct: 5! = 120.
        assert_eq!(arrangements(&[0, 1, 2, 3, 4]), Some(120));
        // 30 distinct rows: 30! > 10¹⁸.
        let g: Vec<u32> = (0..30).collect();
        assert_eq!(arrangements(&g), None);
        let mut a = vec![0, 0, 1, 1];
        let mut n = 1;
        while next_arrangement(&mut a) {
            n += 1;
        }
        assert_eq!(n, 6);
    }

    #[test]
    fn shuffles_are_uniform() {
        // Every one of the 3! = 6 orders of three items about equally often:
        // counts of 6,000 draws have SD √(6000·(1/6)(5/6)) ≈ 28.9; allow 5 SD.
        let mut rng = block_rng(5, 0);
        let mut seen = std::collections::HashMap::new();
        for _ in 0..6000 {
            let mut p = [0u32, 1, 2];
            for i in (1..3).rev() {
                let j = below(&mut rng, i as u64 + 1) as usize;
                p.swap(i, j);
            }
            *seen.entry(p).or_insert(0usize) += 1;
        }
        assert_eq!(seen.len(), 6);
        for (p, n) in seen {
            assert!((n as f64 - 1000.0).abs() < 5.0 * 28.9, "{p:?}: {n}");
        }
    }
}
