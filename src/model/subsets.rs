//! Every subset of the candidate moderators, each fitted by maximum
//! likelihood and ranked by AICc, with Akaike weights, the importance of
//! each candidate and model-averaged coefficients (Burnham & Anderson 2002).

use super::design::{Design, ModeratorKind};
use super::tau2::Tau2Method;
use super::{fit_parts, FitOptions, Inference};
use crate::error::{Error, Result};
use crate::support::flag::Flag;

/// The most candidates (moderators and product terms) `--all-subsets` ranks:
/// 2^15 = 32,768 models.
pub const MAX_CANDIDATES: usize = 15;

/// A candidate: one moderator (all its columns) or one product term.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// The moderator's name, or `a×b` for a product term.
    pub name: String,
    /// The design columns it adds.
    pub columns: Vec<usize>,
    /// For a product term, the indices of its two moderators' candidates
    /// (a product term enters only with both).
    pub needs: Vec<usize>,
}

/// One fitted subset.
#[derive(Debug, Clone, PartialEq)]
pub struct SubsetFit {
    /// The candidates in the model (indices into the candidate list).
    pub members: Vec<usize>,
    /// Design columns of the model, intercept first.
    pub columns: Vec<usize>,
    /// Parameters q = p + 1 (the coefficients and τ²).
    pub parameters: usize,
    /// Full ML log-likelihood, −(k/2)·ln 2π included.
    pub log_likelihood: f64,
    /// AICc.
    pub aicc: f64,
    /// AICc − the smallest AICc.
    pub delta: f64,
    /// Akaike weight.
    pub weight: f64,
    /// Coefficients by design column (0 where absent).
    pub beta: Vec<f64>,
    /// Their variances at the ML τ² (0 where absent).
    pub var: Vec<f64>,
}

/// The candidates of a design: each moderator, then each product term.
pub fn candidates(design: &Design) -> Vec<Candidate> {
    let mut out = Vec::new();
    let mut next = 1;
    let mut width = Vec::new();
    for m in &design.moderators {
        let w = match &m.kind {
            ModeratorKind::Numeric { .. } => 1,
            ModeratorKind::Categorical { levels, .. } => levels.len() - 1,
        };
        width.push(w);
        out.push(Candidate {
            name: m.name.clone(),
            columns: (next..next + w).collect(),
            needs: Vec::new(),
        });
        next += w;
    }
    for &(a, b) in &design.interactions {
        let w = width[a] * width[b];
        out.push(Candidate {
            name: format!(
                "{}×{}",
                design.moderators[a].name, design.moderators[b].name
            ),
            columns: (next..next + w).collect(),
            needs: vec![a, b],
        });
        next += w;
    }
    out
}

/// AICc = −2ℓ + 2q + 2q(q + 1)/(k − q − 1) (Burnham & Anderson 2002,
/// *Model Selection and Multimodel Inference*, 2nd ed., eq. 2.14; cited
/// from memory). Needs k > q + 1.
pub fn aicc(log_likelihood: f64, q: usize, k: usize) -> f64 {
    let (q, k) = (q as f64, k as f64);
    -2.0 * log_likelihood + 2.0 * q + 2.0 * q * (q + 1.0) / (k - q - 1.0)
}

/// Fits every subset of the candidates (a product term only with both its
/// moderators) by ML and ranks them by AICc, best first.
///
/// # Formula
/// Each model: the random-effects meta-regression with τ² by ML
/// ([`fit_parts`]), ℓ its full log-likelihood, q = p + 1; [`aicc`];
/// Δ_m = AICc_m − min AICc; Akaike weight w_m = exp(−Δ_m/2)/Σ exp(−Δ/2)
/// (Burnham & Anderson 2002, eq. 2.16).
///
/// # Errors
/// [`Error::Usage`] for more than [`MAX_CANDIDATES`] candidates, or too few
/// studies for the AICc of the largest model (k must exceed p + 2);
/// the errors of [`fit_parts`].
pub fn fit_all(y: &[f64], v: &[f64], design: &Design, level: f64) -> Result<Vec<SubsetFit>> {
    let cands = candidates(design);
    let k = y.len();
    if cands.is_empty() {
        return Err(Error::usage(
            Flag::AllSubsets,
            format!(
                "ranks sets of moderators; name the candidates with {} (repeatable)",
                Flag::Moderator
            ),
        ));
    }
    if cands.len() > MAX_CANDIDATES {
        return Err(Error::usage(
            Flag::AllSubsets,
            format!(
                "{} candidates (moderators and product terms) would make {} models; at most \
                 {MAX_CANDIDATES} are ranked. Choose the candidates the question needs, by \
                 subject knowledge, before looking at the data",
                cands.len(),
                1u64 << cands.len()
            ),
        ));
    }
    if k <= design.p + 2 {
        return Err(Error::usage(
            Flag::AllSubsets,
            format!(
                "the largest model has {} parameters ({} coefficients and τ²), and AICc needs \
                 more studies than parameters + 1; {k} studies are too few. Use fewer candidates \
                 (at least {} studies are needed for these)",
                design.p + 1,
                design.p,
                design.p + 3
            ),
        ));
    }
    let options = FitOptions {
        method: Tau2Method::Ml,
        inference: Inference::Z,
        level,
    };
    let mut fits = Vec::new();
    for mask in 0u32..(1u32 << cands.len()) {
        let members: Vec<usize> = (0..cands.len()).filter(|&c| mask & (1 << c) != 0).collect();
        let hierarchical = members
            .iter()
            .all(|&c| cands[c].needs.iter().all(|n| mask & (1 << n) != 0));
        if !hierarchical {
            continue;
        }
        let mut columns = vec![0];
        for &c in &members {
            columns.extend(&cands[c].columns);
        }
        let p = columns.len();
        let x: Vec<f64> = (0..k)
            .flat_map(|i| columns.iter().map(move |&j| (i, j)))
            .map(|(i, j)| design.x[i * design.p + j])
            .collect();
        let f = fit_parts(y, v, &x, p, options, false)?;
        let ll = f.log_likelihood.unwrap_or(f64::NAN);
        let mut beta = vec![0.0; design.p];
        let mut var = vec![0.0; design.p];
        for (a, &j) in columns.iter().enumerate() {
            beta[j] = f.beta[a];
            var[j] = f.cov[(a, a)].max(0.0);
        }
        fits.push(SubsetFit {
            members,
            columns,
            parameters: p + 1,
            log_likelihood: ll,
            aicc: aicc(ll, p + 1, k),
            delta: 0.0,
            weight: 0.0,
            beta,
            var,
        });
    }
    let best = fits.iter().map(|f| f.aicc).fold(f64::INFINITY, f64::min);
    let total: f64 = fits.iter().map(|f| (-(f.aicc - best) / 2.0).exp()).sum();
    for f in &mut fits {
        f.delta = f.aicc - best;
        f.weight = (-f.delta / 2.0).exp() / total;
    }
    // Best first; ties keep the enumeration order (fewer terms first).
    fits.sort_by(|a, b| a.aicc.total_cmp(&b.aicc));
    Ok(fits)
}

/// Summed Akaike weight of the models containing each candidate.
pub fn importance(fits: &[SubsetFit], n_candidates: usize) -> Vec<f64> {
    (0..n_candidates)
        .map(|c| {
            fits.iter()
                .filter(|f| f.members.contains(&c))
                .map(|f| f.weight)
                .sum()
        })
        .collect()
}

/// Model-averaged coefficients over all models (0 where a term is absent)
/// and their unconditional standard errors.
///
/// # Formula
/// θ̄_j = Σ_m w_m β̂_jm; SE(θ̄_j) = Σ_m w_m √(var(β̂_jm | m) + (β̂_jm − θ̄_j)²)
/// (Burnham & Anderson 2002, eq. 4.9, cited from memory), with β̂_jm and
/// its variance 0 in the models without term j.
pub fn averaged(fits: &[SubsetFit], p: usize) -> Vec<(f64, f64)> {
    (0..p)
        .map(|j| {
            let mean: f64 = fits.iter().map(|f| f.weight * f.beta[j]).sum();
            let se: f64 = fits
                .iter()
                .map(|f| f.weight * (f.var[j] + (f.beta[j] - mean).powi(2)).sqrt())
                .sum();
            (mean, se)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// AICc by hand: ℓ = −10, q = 3, k = 20: 20 + 6 + 24/16 = 27.5.
    #[test]
    fn aicc_by_hand() {
        assert!((aicc(-10.0, 3, 20) - 27.5).abs() < 1e-12);
    }

    /// Two models with weights 0.75 and 0.25, the term present only in the
    /// first with β = 2, var = 1: θ̄ = 1.5, SE = 0.75·√(1 + 0.25) + 0.25·√2.25.
    #[test]
    fn averaged_by_hand() {
        let f = |w: f64, b: f64, var: f64| SubsetFit {
            members: vec![],
            columns: vec![],
            parameters: 0,
            log_likelihood: 0.0,
            aicc: 0.0,
            delta: 0.0,
            weight: w,
            beta: vec![b],
            var: vec![var],
        };
        let a = averaged(&[f(0.75, 2.0, 1.0), f(0.25, 0.0, 0.0)], 1);
        assert!((a[0].0 - 1.5).abs() < 1e-15);
        let se = 0.75 * 1.25f64.sqrt() + 0.25 * 1.5;
        assert!((a[0].1 - se).abs() < 1e-15);
    }
}
