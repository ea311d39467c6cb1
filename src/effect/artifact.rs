//! Artifact corrections of correlations (Hunter & Schmidt 2004, *Methods of
//! Meta-Analysis*, 2nd ed., ch. 3; cited from memory): unreliability of x and
//! y, and direct range restriction on x (Thorndike's Case II).
//!
//! # The analysis scale
//! With any correction the correlations are analysed as corrected r on the r
//! scale (not Fisher z): each study's corrected r_c with the sampling variance
//! of its observed r, (1 − r²)²/(n − 1), multiplied by the square of the
//! derivative dr_c/dr (the first-order, delta-method propagation, which for
//! the linear reliability corrections is Hunter & Schmidt's division by the
//! squared attenuation factor, and for Case II is the derivative-based
//! adjustment they give for the range-restriction correction). This is the
//! measure mode `r-corrected` in the output.
//!
//! # Order of the corrections
//! Following Hunter & Schmidt's procedure for direct range restriction
//! (ch. 3, cited from memory): (1) divide by √r_yy (y's reliability in the
//! study's own, restricted sample); (2) Thorndike's Case II with u = s/S;
//! (3) divide by √r_xx,a, x's reliability in the unrestricted population,
//! obtained from the study's r_xx by r_xx,a = 1 − u²(1 − r_xx) (the error
//! variance of x is the same in both groups: (1 − r_xx) s² = (1 − r_xx,a) S²).
//! Without `--range-ratio` step (2) is skipped and r_xx,a = r_xx.

use super::route::Route;
use super::{shorten, EffectColumn, Measure, RowProblem};
use crate::error::{CellProblem, CellProblems, Error, Result};
use crate::input::number::{invalid_hint, Cell};
use crate::input::{ColumnRequest, Table};
use crate::support::flag::Flag;

/// Which columns hold the artifact values (None: that correction is not made).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ArtifactSettings {
    /// Column of x's reliability in each study's sample (`--reliability-x`).
    pub reliability_x: Option<String>,
    /// Column of y's reliability in each study's sample (`--reliability-y`).
    pub reliability_y: Option<String>,
    /// Column of u = restricted SD / unrestricted SD of x (`--range-ratio`).
    pub range_ratio: Option<String>,
}

impl ArtifactSettings {
    /// Whether any correction is asked for.
    pub fn any(&self) -> bool {
        self.reliability_x.is_some() || self.reliability_y.is_some() || self.range_ratio.is_some()
    }

    /// (flag, role, column) for each correction asked for, in the order applied.
    pub fn columns(&self) -> Vec<(Flag, &'static str, String)> {
        let mut out = Vec::new();
        if let Some(c) = &self.reliability_y {
            out.push((Flag::ReliabilityY, "reliability of y", c.clone()));
        }
        if let Some(c) = &self.range_ratio {
            out.push((Flag::RangeRatio, "range ratio u", c.clone()));
        }
        if let Some(c) = &self.reliability_x {
            out.push((Flag::ReliabilityX, "reliability of x", c.clone()));
        }
        out
    }
}

/// One study's artifact values (None: not corrected for).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Artifacts {
    /// x's reliability in the study's sample.
    pub rxx: Option<f64>,
    /// y's reliability in the study's sample.
    pub ryy: Option<f64>,
    /// u = restricted SD / unrestricted SD of x.
    pub u: Option<f64>,
}

/// A corrected correlation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Corrected {
    /// Observed r.
    pub r_obs: f64,
    /// (1 − r²)²/(n − 1).
    pub v_obs: f64,
    /// Corrected r.
    pub r: f64,
    /// Its sampling variance v_obs · factor².
    pub v: f64,
    /// dr_c/dr.
    pub factor: f64,
}

/// Thorndike's Case II correction for direct range restriction on x.
///
/// # Formula
/// With U = 1/u = S/s: r_c = U r / √((U² − 1) r² + 1)
/// (Thorndike 1949, *Personnel Selection*; Hunter & Schmidt 2004, ch. 3; cited
/// from memory). Its derivative is dr_c/dr = U / ((U² − 1) r² + 1)^{3/2}
/// (differentiate: U D^{−1/2} − U r² (U² − 1) D^{−3/2} = U D^{−3/2}).
///
/// # Examples
/// ```
/// // r = 0.3, u = 0.5 (U = 2): 0.6 / √(3·0.09 + 1) = 0.6/√1.27.
/// let (rc, d) = pondus::effect::artifact::case_ii(0.3, 0.5);
/// assert!((rc - 0.6 / 1.27f64.sqrt()).abs() < 1e-15);
/// assert!((d - 2.0 / 1.27f64.powf(1.5)).abs() < 1e-15);
/// ```
pub fn case_ii(r: f64, u: f64) -> (f64, f64) {
    let big = 1.0 / u;
    let d = (big * big - 1.0) * r * r + 1.0;
    (big * r / d.sqrt(), big / d.powf(1.5))
}

/// Corrects one observed correlation.
///
/// # Formula
/// v_obs = (1 − r²)²/(n − 1) (Hunter & Schmidt 2004, ch. 3, the sampling
/// error variance of r, here with the study's own r; cited from memory);
/// r₁ = r/√r_yy; r₂ = Case II(r₁, u); r_xx,a = 1 − u²(1 − r_xx);
/// r_c = r₂/√r_xx,a; factor = dr_c/dr = (1/√r_yy)·(dr₂/dr₁)·(1/√r_xx,a);
/// v = v_obs·factor².
///
/// # Errors
/// A [`RowProblem`] for |r| ≥ 1, n ≤ 1, a reliability outside (0, 1], u ≤ 0,
/// or r_xx,a ≤ 0 (the reliability and u do not fit together).
///
/// # Examples
/// ```
/// use pondus::effect::artifact::{correct, Artifacts};
/// let a = Artifacts { rxx: Some(0.81), ryy: Some(0.64), u: None };
/// let c = correct(0.36, 101.0, a).unwrap();
/// assert!((c.r - 0.36 / 0.72).abs() < 1e-15);
/// assert!((c.factor - 1.0 / 0.72).abs() < 1e-15);
/// ```
pub fn correct(r: f64, n: f64, a: Artifacts) -> std::result::Result<Corrected, RowProblem> {
    if !(r > -1.0 && r < 1.0) {
        return Err(RowProblem::new(
            "r",
            "a correlation must lie strictly between -1 and 1",
        ));
    }
    if n.is_nan() || n <= 1.0 {
        return Err(RowProblem::new(
            "n",
            "n must be greater than 1 for the variance (1 - r^2)^2/(n - 1)",
        ));
    }
    let reliability =
        |x: Option<f64>, role: &'static str| -> std::result::Result<f64, RowProblem> {
            match x {
                None => Ok(1.0),
                Some(x) if x > 0.0 && x <= 1.0 => Ok(x),
                Some(_) => Err(RowProblem::new(
                    role,
                    "a reliability must be greater than 0 and at most 1",
                )),
            }
        };
    let ryy = reliability(a.ryy, "reliability_y")?;
    let rxx = reliability(a.rxx, "reliability_x")?;
    let v_obs = (1.0 - r * r).powi(2) / (n - 1.0);
    let r1 = r / ryy.sqrt();
    let mut factor = 1.0 / ryy.sqrt();
    let (r2, rxx_a) = match a.u {
        None => (r1, rxx),
        Some(u) if u > 0.0 && u.is_finite() => {
            let (r2, d) = case_ii(r1, u);
            factor *= d;
            let rxx_a = 1.0 - u * u * (1.0 - rxx);
            if rxx_a <= 0.0 {
                return Err(RowProblem::new(
                    "reliability_x",
                    format!(
                        "with this range ratio the reliability of x in the unrestricted group, \
                         1 - u^2(1 - rxx), is {rxx_a:.3} (not positive); check the reliability and \
                         the range ratio"
                    ),
                ));
            }
            (r2, rxx_a)
        }
        Some(_) => {
            return Err(RowProblem::new(
                "range_ratio",
                "the range ratio u (restricted SD / unrestricted SD) must be greater than 0",
            ))
        }
    };
    factor /= rxx_a.sqrt();
    let rc = r2 / rxx_a.sqrt();
    Ok(Corrected {
        r_obs: r,
        v_obs,
        r: rc,
        v: v_obs * factor * factor,
        factor,
    })
}

/// Column requests for the artifact columns (after the moderators').
///
/// # Errors
/// [`Error::Usage`] naming the flag when the measure is not `r`.
pub fn requests(settings: &ArtifactSettings, measure: Measure) -> Result<Vec<ColumnRequest>> {
    let cols = settings.columns();
    if let Some((flag, _, _)) = cols.first() {
        if measure != Measure::R {
            return Err(Error::usage(
                *flag,
                format!(
                    "artifact corrections apply to Pearson correlations; use {} r (not {})",
                    Flag::Measure,
                    measure.id()
                ),
            ));
        }
    }
    Ok(cols
        .into_iter()
        .map(|(flag, role, header)| ColumnRequest {
            header,
            required: true,
            purpose: format!("the {role} of each study ({flag})"),
            label: false,
            numbers: true,
            hint: format!("Check the column named in {flag}; headers are matched exactly, or ignoring case when unique."),
        })
        .collect())
}

/// Applies the corrections to every row with a usable r and n: the row's
/// effect becomes the corrected r with its corrected variance (see the
/// module documentation). Rows missing an artifact value are excluded with
/// the reason; `first` is the request index of the first artifact column,
/// `r_col` and `n_col` those of r and n. Returns one entry per row, or none
/// at all when no correction is asked for.
///
/// # Errors
/// [`Error::Cells`] listing every artifact cell that is not a number or is
/// out of range (a reliability outside (0, 1], u ≤ 0), with line and column.
pub fn apply(
    settings: &ArtifactSettings,
    table: &Table,
    r_col: usize,
    n_col: usize,
    first: usize,
    effects: &mut EffectColumn,
) -> Result<Vec<Option<Corrected>>> {
    let cols = settings.columns();
    if cols.is_empty() {
        return Ok(Vec::new());
    }
    let mut out = vec![None; table.len()];
    let mut problems = Vec::new();
    let mut total = 0usize;
    let number = |col: usize, row: usize| match table.column(col) {
        Some(c) => c.number(row),
        None => Cell::Missing,
    };
    for (i, slot) in out.iter_mut().enumerate() {
        if !effects.is_value(i) {
            continue;
        }
        let mut a = Artifacts::default();
        let mut missing = None;
        let mut bad = false;
        for (j, (flag, role, header)) in cols.iter().enumerate() {
            let x = match number(first + j, i) {
                Cell::Value(x) => x,
                Cell::Missing => {
                    missing.get_or_insert(format!("missing {role} (column '{header}', {flag})"));
                    continue;
                }
                Cell::Invalid => {
                    let text = table
                        .column(first + j)
                        .map(|c| c.text(i))
                        .unwrap_or_default();
                    total += 1;
                    if problems.len() < CellProblems::MAX_LISTED {
                        problems.push(CellProblem {
                            line: table.lines[i],
                            column: header.clone(),
                            value: shorten(&text),
                            message: format!("{} for the {role} ({flag})", invalid_hint(&text)),
                            cell: table.column(first + j).and_then(|c| table.cell_place(i, c)),
                        });
                    }
                    bad = true;
                    continue;
                }
            };
            match *flag {
                Flag::ReliabilityX => a.rxx = Some(x),
                Flag::ReliabilityY => a.ryy = Some(x),
                _ => a.u = Some(x),
            }
        }
        if bad {
            effects.exclude(i, "invalid value".into());
            continue;
        }
        if let Some(reason) = missing {
            effects.exclude(i, reason);
            continue;
        }
        // The observed r: the r cell for rows reporting r, else the r of
        // the row's effect (t or p routes, which also have n).
        let (from, y) = (effects.from[i], effects.y[i]);
        let r = match (from, number(r_col, i)) {
            (Route::R, Cell::Value(r)) => r,
            (Route::R, _) => continue,
            _ => y.tanh(),
        };
        let Cell::Value(n) = number(n_col, i) else {
            effects.exclude(
                i,
                format!("artifact corrections need n (this row's r comes from route {from})"),
            );
            continue;
        };
        match correct(r, n, a) {
            Ok(c) => {
                // The corrected effect keeps the row's route and check;
                // a note on the uncorrected effect no longer applies.
                effects.y[i] = c.r;
                effects.v[i] = c.v;
                effects.notes.remove(&i);
                *slot = Some(c);
            }
            Err(p) => {
                let (col, flag) = match p.role {
                    "r" => (r_col, ""),
                    "n" => (n_col, ""),
                    role => {
                        let want = match role {
                            "reliability_x" => Flag::ReliabilityX,
                            "reliability_y" => Flag::ReliabilityY,
                            _ => Flag::RangeRatio,
                        };
                        let j = cols.iter().position(|(f, _, _)| *f == want).unwrap_or(0);
                        (first + j, want.name())
                    }
                };
                let (column, value, cell) = table
                    .column(col)
                    .map(|c| {
                        (
                            c.header.clone(),
                            shorten(&c.text(i)),
                            table.cell_place(i, c),
                        )
                    })
                    .unwrap_or_default();
                total += 1;
                if problems.len() < CellProblems::MAX_LISTED {
                    problems.push(CellProblem {
                        line: table.lines[i],
                        column,
                        value,
                        message: if flag.is_empty() {
                            p.message
                        } else {
                            format!("{} ({flag})", p.message)
                        },
                        cell,
                    });
                }
                effects.exclude(i, "invalid value".into());
            }
        }
    }
    CellProblems::check(&table.source, problems, total)?;
    Ok(out)
}

/// How the corrections are described in the output.
pub fn describe(settings: &ArtifactSettings) -> (Vec<String>, String) {
    let mut applied = Vec::new();
    if settings.reliability_y.is_some() {
        applied.push("unreliability of y (divide by √r_yy)".to_string());
    }
    if settings.range_ratio.is_some() {
        applied.push("direct range restriction on x (Thorndike Case II)".to_string());
    }
    if settings.reliability_x.is_some() {
        applied.push(if settings.range_ratio.is_some() {
            "unreliability of x (divide by √r_xx,a, r_xx,a = 1 − u²(1 − r_xx))".to_string()
        } else {
            "unreliability of x (divide by √r_xx)".to_string()
        });
    }
    let method = "Each study's r is corrected in the order listed (Hunter & Schmidt 2004, Methods of Meta-Analysis, 2nd ed., ch. 3) and analysed on the r scale, not Fisher z: the sampling variance (1 − r²)²/(n − 1) of the observed r is multiplied by the square of the derivative of the corrected r with respect to the observed r (exactly the squared inverse attenuation factor for the reliability corrections, the derivative-based factor for Case II)."
        .to_string();
    (applied, method)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thorndike_case_ii_by_hand() {
        // Hand calculation: r = 0.25, u = 0.6 → U = 1/0.6 = 1.666…, U² = 2.777…,
        // (U² − 1) r² = 1.777…·0.0625 = 0.111 111…, D = 1.111 111… = 10/9,
        // r_c = 1.666…·0.25/√(10/9) = 0.416 666…/1.054 092 55 = 0.395 284 71.
        // dr_c/dr = U/D^{3/2} = 1.666…/1.171 213 95 = 1.423 024 95.
        let (rc, d) = case_ii(0.25, 0.6);
        assert!((rc - 0.395_284_71).abs() < 1e-8, "{rc}");
        assert!((d - 1.423_024_95).abs() < 1e-8, "{d}");
        // u = 1: nothing changes.
        let (rc, d) = case_ii(0.4, 1.0);
        assert!((rc - 0.4).abs() < 1e-15 && (d - 1.0).abs() < 1e-15);
    }

    #[test]
    fn derivative_matches_finite_difference() {
        let a = Artifacts {
            rxx: Some(0.8),
            ryy: Some(0.7),
            u: Some(0.55),
        };
        let h = 1e-6;
        let c = correct(0.31, 80.0, a).unwrap();
        let up = correct(0.31 + h, 80.0, a).unwrap().r;
        let dn = correct(0.31 - h, 80.0, a).unwrap().r;
        let fd = (up - dn) / (2.0 * h);
        assert!((c.factor - fd).abs() < 1e-7 * fd, "{} vs {fd}", c.factor);
        assert!((c.v - c.v_obs * c.factor * c.factor).abs() < 1e-18);
    }

    #[test]
    fn full_procedure_by_hand() {
        // r = 0.2, ryy = 0.64, rxx = 0.75, u = 0.5, n = 51:
        // r₁ = 0.2/0.8 = 0.25; U = 2, D = 3·0.0625 + 1 = 1.1875,
        // r₂ = 0.5/√1.1875 = 0.458 831 20; r_xx,a = 1 − 0.25·0.25 = 0.9375,
        // r_c = 0.458 831 20/0.968 245 84 = 0.473 879 10.
        // v_obs = 0.96²/50 = 0.018 432.
        let a = Artifacts {
            rxx: Some(0.75),
            ryy: Some(0.64),
            u: Some(0.5),
        };
        let c = correct(0.2, 51.0, a).unwrap();
        assert!((c.r - 0.473_879_10).abs() < 1e-8, "{}", c.r);
        assert!((c.v_obs - 0.018_432).abs() < 1e-15);
    }

    #[test]
    fn bad_values_name_their_role() {
        let bad = |a: Artifacts| correct(0.3, 50.0, a).unwrap_err().role;
        let none = Artifacts::default();
        assert_eq!(
            bad(Artifacts {
                rxx: Some(0.0),
                ..none
            }),
            "reliability_x"
        );
        assert_eq!(
            bad(Artifacts {
                ryy: Some(1.2),
                ..none
            }),
            "reliability_y"
        );
        assert_eq!(
            bad(Artifacts {
                u: Some(0.0),
                ..none
            }),
            "range_ratio"
        );
        assert_eq!(
            bad(Artifacts {
                u: Some(-0.5),
                ..none
            }),
            "range_ratio"
        );
        // rxx = 0.2 with u = 0.3: 1 − 0.09·0.8 > 0 fine; rxx = 0.05, u = 1.1: 1 − 1.21·0.95 < 0.
        assert_eq!(
            bad(Artifacts {
                rxx: Some(0.05),
                u: Some(1.1),
                ..none
            }),
            "reliability_x"
        );
        assert_eq!(correct(1.0, 50.0, none).unwrap_err().role, "r");
        assert_eq!(correct(0.2, 1.0, none).unwrap_err().role, "n");
    }
}
