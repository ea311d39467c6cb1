//! Standardised mean differences (Hedges' g).

use super::RowProblem;

/// Hedges' g and its sampling variance from two groups' summaries.
///
/// # Formula
/// s_p = √(((n_t − 1)s_t² + (n_c − 1)s_c²) / df), df = n_t + n_c − 2,
/// d = (m_t − m_c)/s_p, J = 1 − 3/(4·df − 1), g = J·d,
/// v = (n_t + n_c)/(n_t·n_c) + g²/(2(n_t + n_c))
/// (Hedges & Olkin 1985, *Statistical Methods for Meta-Analysis*, ch. 5;
/// J is Hedges' approximation to the exact small-sample factor).
///
/// # Errors
/// Returns a [`RowProblem`] for an SD ≤ 0 or a group with fewer than 2 members.
///
/// # Examples
/// ```
/// // Borenstein et al. (2009), Introduction to Meta-Analysis, ch. 4 (from memory):
/// // 103 (5.5, n 50) vs 100 (4.5, n 50): d = 0.5970, J = 0.9923, g = 0.5924.
/// let g = pondus::effect::smd::hedges_g(103.0, 5.5, 50.0, 100.0, 4.5, 50.0).unwrap();
/// assert!((g.d - 0.5970).abs() < 5e-5);
/// assert!((g.j - 0.9923).abs() < 5e-5);
/// assert!((g.g - 0.5924).abs() < 5e-5);
/// ```
pub fn hedges_g(mt: f64, sdt: f64, nt: f64, mc: f64, sdc: f64, nc: f64) -> Result<Smd, RowProblem> {
    if sdt <= 0.0 {
        return Err(RowProblem::new("treat_sd", "an SD must be greater than 0"));
    }
    if sdc <= 0.0 {
        return Err(RowProblem::new("ctrl_sd", "an SD must be greater than 0"));
    }
    if nt < 2.0 {
        return Err(RowProblem::new(
            "treat_n",
            "a group needs at least 2 members",
        ));
    }
    if nc < 2.0 {
        return Err(RowProblem::new(
            "ctrl_n",
            "a group needs at least 2 members",
        ));
    }
    let df = nt + nc - 2.0;
    let sp = (((nt - 1.0) * sdt * sdt + (nc - 1.0) * sdc * sdc) / df).sqrt();
    let d = (mt - mc) / sp;
    let j = 1.0 - 3.0 / (4.0 * df - 1.0);
    let g = j * d;
    let v = (nt + nc) / (nt * nc) + g * g / (2.0 * (nt + nc));
    Ok(Smd { d, j, g, v })
}

/// The parts of a standardised mean difference.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Smd {
    /// Cohen's d with the pooled SD.
    pub d: f64,
    /// Small-sample correction factor.
    pub j: f64,
    /// Hedges' g = J·d.
    pub g: f64,
    /// Sampling variance of g.
    pub v: f64,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn by_hand() {
        // Equal SDs of 2, n = 10 + 10: d = 1, df = 18, J = 1 − 3/71.
        let s = hedges_g(12.0, 2.0, 10.0, 10.0, 2.0, 10.0).unwrap();
        assert!((s.d - 1.0).abs() < 1e-15);
        assert!((s.j - (1.0 - 3.0 / 71.0)).abs() < 1e-15);
        assert!((s.v - (0.2 + s.g * s.g / 40.0)).abs() < 1e-15);
    }

    #[test]
    fn rejects_bad_groups() {
        assert_eq!(
            hedges_g(1.0, 0.0, 10.0, 0.0, 1.0, 10.0).unwrap_err().role,
            "treat_sd"
        );
        assert_eq!(
            hedges_g(1.0, 1.0, 10.0, 0.0, -1.0, 10.0).unwrap_err().role,
            "ctrl_sd"
        );
        assert_eq!(
            hedges_g(1.0, 1.0, 1.0, 0.0, 1.0, 10.0).unwrap_err().role,
            "treat_n"
        );
        assert_eq!(
            hedges_g(1.0, 1.0, 10.0, 0.0, 1.0, 1.0).unwrap_err().role,
            "ctrl_n"
        );
    }
}
