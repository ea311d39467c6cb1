//! Terminal sections of the publication-bias sensitivity analyses: the
//! selection model (`--selection`) and the side-by-side view of the average
//! effect and each moderator coefficient under every adjustment, rendered
//! from the public result only.

use super::layout::{pad, wrap, Ctx};
use crate::result::{FitReport, SensitivityRow, Verdict};
use crate::support::format::{self as fmt, num, opt_num};
use std::fmt::Write as _;

/// The step-function selection model (`--selection`).
pub fn selection(r: &FitReport, cx: &Ctx, o: &mut String) {
    let Some(s) = &r.selection else {
        return;
    };
    let level_pct = &cx.level_pct;
    let _ = writeln!(
        o,
        "Selection model (step function, one-sided p favouring {} effects; maximum likelihood)",
        s.favoured
    );
    let _ = writeln!(
        o,
        "  {}{}{}{}",
        pad("p-value interval", 22),
        pad("studies", 9),
        pad("weight", 10),
        format_args!("{level_pct} CI")
    );
    for (m, w) in s.weights.iter().enumerate() {
        let range = if m == 0 {
            format!("p < {}", fmt::typed(w.to))
        } else if w.to >= 1.0 {
            format!("p ≥ {}", fmt::typed(w.from))
        } else {
            format!("{} ≤ p < {}", fmt::typed(w.from), fmt::typed(w.to))
        };
        let ci = match (w.ci_low, w.ci_high) {
            (Some(a), Some(b)) => fmt::interval(a, b),
            _ => "(reference)".into(),
        };
        let _ = writeln!(
            o,
            "  {}{}{}{ci}",
            pad(&range, 22),
            pad(&w.studies.to_string(), 9),
            pad(&num(w.estimate), 10)
        );
    }
    let _ = writeln!(o, "  τ² = {} (SE {})", num(s.tau2), opt_num(s.tau2_se));
    for c in &s.coefficients {
        let _ = writeln!(
            o,
            "  {}{} (SE {}), {level_pct} CI {}, z = {:.2}, p {}",
            pad(&c.term, 16),
            num(c.contrast.estimate),
            num(c.contrast.se),
            fmt::interval(c.contrast.ci.ci_low, c.contrast.ci.ci_high),
            c.contrast.test.statistic,
            fmt::p(c.contrast.test.p)
        );
    }
    o.push_str(&wrap(
        &format!(
            "likelihood-ratio test of selection (all weights 1 against estimated): χ²({}) = \
             {:.2}, p {}",
            s.test.df,
            s.test.statistic,
            fmt::p(s.test.p)
        ),
        "  ",
        cx.width - 2,
    ));
    let _ = writeln!(o);
}

fn verdict_words(v: Option<Verdict>) -> &'static str {
    match v {
        None => "",
        Some(Verdict::Holds) => "holds",
        Some(Verdict::Fades) => "interval includes no effect",
        Some(Verdict::Reverses) => "changes sign",
        Some(Verdict::Appears) => "differs from no effect only here",
        Some(Verdict::NoneEither) => "still includes no effect",
    }
}

fn row_line(row: &SensitivityRow, reading: bool, o: &mut String) {
    let shown = if reading {
        row.reading
            .map(|rd| (rd.estimate, rd.ci.ci_low, rd.ci.ci_high))
    } else {
        match (row.estimate, row.ci.ci_low, row.ci.ci_high) {
            (Some(e), Some(a), Some(b)) => Some((e, a, b)),
            _ => None,
        }
    };
    let label = pad(row.adjustment.label(), 18);
    match shown {
        Some((e, a, b)) => {
            let _ = writeln!(
                o,
                "    {label}{}{}{}",
                pad(&num(e), 10),
                pad(&fmt::interval(a, b), 22),
                verdict_words(row.verdict)
            );
        }
        None => {
            let _ = writeln!(
                o,
                "    {label}— ({})",
                row.missing.as_deref().unwrap_or("no estimate")
            );
        }
    }
}

/// The side-by-side view (with `--small-study` or `--selection`).
pub fn sensitivity(r: &FitReport, cx: &Ctx, o: &mut String) {
    let Some(s) = &r.sensitivity else {
        return;
    };
    let _ = writeln!(
        o,
        "Sensitivity to small-study effects and selection ({} CI; verdicts against the fit)",
        cx.level_pct
    );
    for q in &s.quantities {
        let reading = q.rows[0].reading.is_some();
        let scale_name = match (&r.measure.reading_name, reading, q.moderator) {
            (Some(n), true, false) => format!(" (as {n})"),
            (Some(_), true, true) => " (as a ratio: the factor per unit)".into(),
            _ => String::new(),
        };
        let _ = writeln!(o, "  {}{scale_name}", q.quantity);
        for row in &q.rows {
            row_line(row, reading, o);
        }
    }
    for a in &s.answer {
        let w = wrap(a, "    ", cx.width - 4);
        let _ = write!(o, "  * {}", w.trim_start());
    }
    for c in &s.cautions {
        let w = wrap(c, "    ", cx.width - 4);
        let _ = write!(o, "  - {}", w.trim_start());
    }
    let _ = writeln!(o);
}
