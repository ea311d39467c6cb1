//! The sensitivity view: the average effect and each moderator coefficient
//! as fitted and under trim-and-fill, PET, PEESE and the selection model,
//! with what each adjustment does to the conclusion, in plain words.

use crate::effect::ReadingScale;
use crate::result::{
    Adjustment, Coefficient, ContrastTest, Estimate, Interval, ReadingRow, SelectionModel,
    Sensitivity, SensitivityQuantity, SensitivityRow, SmallStudy, Verdict,
};
use crate::support::format::{interval, num};

/// The adjusted average effects that are not in the small-study and
/// selection results themselves (the intercept-only PET, PEESE and
/// selection fits when the model has moderators).
#[derive(Debug, Clone, Default)]
pub struct AverageAdjustments {
    /// PET's intercept without moderators, or why there is none.
    pub pet: Option<std::result::Result<ContrastTest, String>>,
    /// PEESE's intercept without moderators.
    pub peese: Option<std::result::Result<ContrastTest, String>>,
    /// The intercept-only selection model's intercept.
    pub selection: Option<std::result::Result<ContrastTest, String>>,
}

/// Everything the view is built from.
#[derive(Debug, Clone, Copy)]
pub struct ViewInputs<'a> {
    /// The model's coefficients as fitted (intercept first).
    pub coefficients: &'a [Coefficient],
    /// The average effect as fitted.
    pub average: &'a Estimate,
    /// `--small-study` results.
    pub small_study: Option<&'a SmallStudy>,
    /// `--selection` results.
    pub selection: Option<&'a SelectionModel>,
    /// The adjusted averages.
    pub averages: &'a AverageAdjustments,
    /// The reading scale.
    pub scale: ReadingScale,
    /// I² of the model (a fraction), for the caution on heterogeneity.
    pub i2: f64,
    /// Studies in the model.
    pub k: usize,
}

/// I² above this (a fraction) makes the adjustments unreliable (Carter et
/// al. 2019 and Stanley 2017 find PET-PEESE and selection models biased or
/// erratic under large heterogeneity; 75% is the usual "large", Higgins et
/// al. 2003, a rule of thumb in common practice).
pub const LARGE_I2: f64 = 0.75;

/// An estimate, its interval and its p (when known).
type Point = (f64, Interval, Option<f64>);

/// Builds the view.
pub fn view(inp: &ViewInputs<'_>) -> Sensitivity {
    let mut quantities = vec![average_quantity(inp)];
    for (j, c) in inp.coefficients.iter().enumerate().skip(1) {
        quantities.push(moderator_quantity(inp, j, c));
    }
    let answer = answer(&quantities, inp.scale == ReadingScale::Ratio);
    Sensitivity {
        quantities,
        answer,
        cautions: cautions(inp),
    }
}

fn row(
    adjustment: Adjustment,
    est: Option<Point>,
    missing: Option<String>,
    reading: impl Fn(f64) -> Option<f64>,
) -> SensitivityRow {
    SensitivityRow {
        adjustment,
        estimate: est.map(|e| e.0),
        ci: Interval::new(est.map(|e| e.1.ci_low), est.map(|e| e.1.ci_high)),
        p: est.and_then(|e| e.2),
        reading: est.and_then(|(e, ci, _)| {
            Some(ReadingRow {
                estimate: reading(e)?,
                ci: Interval::new(reading(ci.ci_low)?, reading(ci.ci_high)?),
            })
        }),
        verdict: None,
        missing: if est.is_some() { None } else { missing },
    }
}

fn from_contrast(c: &ContrastTest) -> Option<Point> {
    Some((c.estimate, c.ci, Some(c.test.p)))
}

fn from_result(r: &std::result::Result<ContrastTest, String>) -> (Option<Point>, Option<String>) {
    match r {
        Ok(c) => (from_contrast(c), None),
        Err(e) => (None, Some(e.clone())),
    }
}

fn average_quantity(inp: &ViewInputs<'_>) -> SensitivityQuantity {
    let scale = inp.scale;
    let rd = |x: f64| (scale != ReadingScale::Same).then(|| scale.apply(x));
    let m = &inp.average.mean;
    let mut rows = vec![row(
        Adjustment::Unadjusted,
        Some((m.estimate, m.ci, None)),
        None,
        rd,
    )];
    if let Some(ss) = inp.small_study {
        let t = &ss.trim_fill;
        rows.push(row(
            Adjustment::TrimAndFill,
            Some((t.estimate, t.ci, None)),
            None,
            rd,
        ));
        for (adj, r) in [
            (Adjustment::Pet, &inp.averages.pet),
            (Adjustment::Peese, &inp.averages.peese),
        ] {
            if let Some(r) = r {
                let (e, miss) = from_result(r);
                rows.push(row(adj, e, miss, rd));
            }
        }
    }
    if inp.selection.is_some() {
        if let Some(r) = &inp.averages.selection {
            let (e, miss) = from_result(r);
            rows.push(row(Adjustment::Selection, e, miss, rd));
        }
    }
    finish("average effect".into(), false, rows)
}

fn moderator_quantity(inp: &ViewInputs<'_>, j: usize, c: &Coefficient) -> SensitivityQuantity {
    let scale = inp.scale;
    let rd = |x: f64| (scale == ReadingScale::Ratio).then(|| x.exp());
    let mut rows = vec![row(
        Adjustment::Unadjusted,
        from_contrast(&c.contrast),
        None,
        rd,
    )];
    if let Some(ss) = inp.small_study {
        rows.push(row(
            Adjustment::TrimAndFill,
            None,
            Some("trim-and-fill works on the average effect only".into()),
            rd,
        ));
        rows.push(row(
            Adjustment::Pet,
            ss.pet.moderators.get(j - 1).and_then(from_contrast),
            Some("not computed".into()),
            rd,
        ));
        rows.push(row(
            Adjustment::Peese,
            ss.peese.moderators.get(j - 1).and_then(from_contrast),
            Some("not computed".into()),
            rd,
        ));
    }
    if let Some(sel) = inp.selection {
        rows.push(row(
            Adjustment::Selection,
            sel.coefficients
                .get(j)
                .and_then(|c| from_contrast(&c.contrast)),
            Some("not computed".into()),
            rd,
        ));
    }
    finish(c.term.clone(), true, rows)
}

/// Whether an interval excludes 0, and the sign of the estimate.
fn reading_of(r: &SensitivityRow) -> Option<(bool, bool)> {
    let (e, lo, hi) = (r.estimate?, r.ci.ci_low?, r.ci.ci_high?);
    Some((lo > 0.0 || hi < 0.0, e > 0.0))
}

/// The verdict of an adjusted row against the unadjusted one.
///
/// Significance is read from the confidence interval at the model's level
/// (excluding 0), the same rule for every row.
pub fn verdict(before: (bool, bool), after: (bool, bool)) -> Verdict {
    match (before, after) {
        ((true, s0), (true, s1)) if s0 == s1 => Verdict::Holds,
        ((true, _), (true, _)) => Verdict::Reverses,
        ((true, _), (false, _)) => Verdict::Fades,
        ((false, _), (true, _)) => Verdict::Appears,
        ((false, _), (false, _)) => Verdict::NoneEither,
    }
}

fn finish(quantity: String, moderator: bool, mut rows: Vec<SensitivityRow>) -> SensitivityQuantity {
    let before = reading_of(&rows[0]);
    for r in rows.iter_mut().skip(1) {
        r.verdict = before.zip(reading_of(r)).map(|(b, a)| verdict(b, a));
    }
    SensitivityQuantity {
        quantity,
        moderator,
        rows,
    }
}

fn names(rows: &[&SensitivityRow]) -> String {
    let n: Vec<&str> = rows
        .iter()
        .map(|r| match r.adjustment {
            Adjustment::Selection => "the selection model",
            other => other.label(),
        })
        .collect();
    match n.len() {
        0 => String::new(),
        1 => n[0].to_string(),
        _ => format!("{} and {}", n[..n.len() - 1].join(", "), n[n.len() - 1]),
    }
}

/// The plain answer, one sentence per quantity and one on the moderators.
fn answer(quantities: &[SensitivityQuantity], ratio: bool) -> Vec<String> {
    let mut out = Vec::new();
    let mut moderator_lost = Vec::new();
    let mut any_moderator = false;
    for q in quantities {
        let first = &q.rows[0];
        let Some((sig, pos)) = reading_of(first) else {
            continue;
        };
        let what = if q.moderator {
            format!("The coefficient of {}", q.quantity)
        } else {
            "The average effect".to_string()
        };
        // The numbers as the table shows them: on the reading scale when it has one.
        let (e, lo, hi) = match first.reading {
            Some(r) => (r.estimate, r.ci.ci_low, r.ci.ci_high),
            None => (
                first.estimate.unwrap_or(f64::NAN),
                first.ci.ci_low.unwrap_or(f64::NAN),
                first.ci.ci_high.unwrap_or(f64::NAN),
            ),
        };
        let null = if ratio && first.reading.is_some() {
            "1"
        } else {
            "0"
        };
        let base = format!(
            "{what} is {} as fitted ({} {})",
            match (sig, pos) {
                (true, true) => format!("above {null}"),
                (true, false) => format!("below {null}"),
                (false, _) => format!("not distinguishable from {null}"),
            },
            num(e),
            interval(lo, hi)
        );
        let mut tail: Vec<String> = Vec::new();
        for words in PHRASES {
            let rows: Vec<&SensitivityRow> = q.rows[1..]
                .iter()
                .filter(|r| r.verdict.is_some_and(|v| phrase(v) == words))
                .collect();
            if !rows.is_empty() {
                tail.push(format!("{words} {}", names(&rows)));
            }
        }
        out.push(if tail.is_empty() {
            format!("{base}; no adjustment gives an estimate for it.")
        } else {
            format!("{base}; {}.", tail.join("; "))
        });
        if q.moderator {
            any_moderator = true;
            for r in &q.rows[1..] {
                if matches!(
                    r.verdict,
                    Some(Verdict::Fades | Verdict::Reverses | Verdict::Appears)
                ) {
                    moderator_lost.push(format!("{} ({})", q.quantity, names(&[r])));
                }
            }
        }
    }
    if any_moderator {
        out.push(if moderator_lost.is_empty() {
            "The conclusion about the moderators survives every adjustment shown.".into()
        } else {
            format!(
                "The conclusion about the moderators does not survive every adjustment: it \
                 changes for {}.",
                moderator_lost.join(", ")
            )
        });
    }
    out
}

/// The phrases of the answer, in the order they are given.
const PHRASES: [&str; 4] = [
    "it stays so under",
    "its interval includes no effect under",
    "it changes sign under",
    "it differs from no effect only under",
];

fn phrase(v: Verdict) -> &'static str {
    match v {
        Verdict::Holds | Verdict::NoneEither => "it stays so under",
        Verdict::Fades => "its interval includes no effect under",
        Verdict::Reverses => "it changes sign under",
        Verdict::Appears => "it differs from no effect only under",
    }
}

fn cautions(inp: &ViewInputs<'_>) -> Vec<String> {
    let mut c = vec![
        "These are sensitivity analyses under assumptions, not corrections: each asks how the \
         estimates would look if small-study effects or selective publication worked in one \
         particular way (Carter, Schönbrodt, Gervais & Hilgard 2019, AMPPS 2:115; Stanley 2017, \
         Soc. Psychol. Personal. Sci. 8:581). When they disagree, none of them is the answer."
            .to_string(),
        "Asymmetry and apparent selection have causes other than publication bias: true \
         differences between small and large studies, heterogeneity, and chance."
            .to_string(),
    ];
    if inp.k < super::small_study::LOW_POWER_STUDIES {
        c.push(format!(
            "With only {} studies every adjustment here is unreliable.",
            inp.k
        ));
    }
    if inp.i2 > LARGE_I2 {
        c.push(format!(
            "Heterogeneity is large (I² = {:.0}%): PET, PEESE and selection models are then \
             biased or erratic in simulations (Carter et al. 2019; Stanley 2017).",
            100.0 * inp.i2
        ));
    }
    if let Some(sel) = inp.selection {
        let thin: Vec<String> = sel
            .weights
            .iter()
            .enumerate()
            .filter(|(_, w)| w.studies < super::selection::FEW_PER_INTERVAL)
            .map(|(m, w)| {
                format!(
                    "{} ({} stud{})",
                    super::selection::interval_text(&sel.cutpoints, m),
                    w.studies,
                    if w.studies == 1 { "y" } else { "ies" }
                )
            })
            .collect();
        if !thin.is_empty() {
            c.push(format!(
                "The selection model has fewer than about {} studies in the p-value interval{} \
                 {}: its weights and adjusted estimates are poorly determined.",
                super::selection::FEW_PER_INTERVAL,
                if thin.len() == 1 { "" } else { "s" },
                thin.join(", ")
            ));
        }
        c.push(format!(
            "The selection model was fitted by maximum likelihood whatever {} says, with z \
             tests and intervals; part of a difference from the fit can come from that rather \
             than from the selection.",
            crate::support::flag::Flag::Tau2
        ));
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn verdicts_compare_sign_and_significance() {
        assert_eq!(verdict((true, true), (true, true)), Verdict::Holds);
        assert_eq!(verdict((true, true), (true, false)), Verdict::Reverses);
        assert_eq!(verdict((true, false), (false, true)), Verdict::Fades);
        assert_eq!(verdict((false, true), (true, true)), Verdict::Appears);
        assert_eq!(verdict((false, true), (false, false)), Verdict::NoneEither);
    }
}
