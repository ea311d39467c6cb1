//! The per-study CSV table (`--table`).

use crate::result::FitReport;
use std::io::Write;

/// Header of the per-study table.
pub const HEADER: [&str; 12] = [
    "study",
    "line",
    "included",
    "excluded_reason",
    "effect",
    "variance",
    "weight_percent",
    "fitted",
    "residual",
    "std_residual",
    "note",
    "computed_from",
];

/// Columns added after [`HEADER`] with `--loo` (τ² and the tested p without the study).
pub const LOO_COLUMNS: [&str; 3] = ["loo_tau2", "loo_p", "loo_flag"];

/// Columns added after [`HEADER`] (and the leave-one-out columns) with `--influence`.
pub const INFLUENCE_COLUMNS: [&str; 8] = [
    "rstudent",
    "dffits",
    "cooks_distance",
    "cov_ratio",
    "hat",
    "tau2_deleted",
    "q_deleted",
    "influential",
];

/// Columns added after the influence columns with `--shrink` (analysis scale).
pub const SHRINK_COLUMNS: [&str; 5] = [
    "shrunken",
    "shrunken_se",
    "shrunken_low",
    "shrunken_high",
    "own_weight",
];

/// A text cell (label, note, reason) safe to open in a spreadsheet: a
/// leading `=`, `+`, `-` or `@` gets an apostrophe in front
/// ([`crate::support::text::spreadsheet_cell`]).
fn cell(s: &str) -> String {
    crate::support::text::spreadsheet_cell(s).into_owned()
}

fn opt(x: Option<f64>) -> String {
    x.map(|x| x.to_string()).unwrap_or_default()
}

/// Writes one row per input row (included and excluded, in file order).
/// Numbers are written with full precision (shortest round-trip form).
///
/// # Errors
/// Any error of the writer.
pub fn write<W: Write>(report: &FitReport, out: W) -> std::io::Result<()> {
    let mut w = csv::Writer::from_writer(out);
    let art = report.artifacts.as_ref();
    let mut header: Vec<&str> = HEADER.to_vec();
    if report.leave_one_out.is_some() {
        header.extend(LOO_COLUMNS);
    }
    if report.influence.is_some() {
        header.extend(INFLUENCE_COLUMNS);
    }
    let shrink = report.studies.iter().any(|s| s.shrunken.is_some());
    if shrink {
        header.extend(SHRINK_COLUMNS);
    }
    // With artifact corrections, two columns more: the observed r and the SE factor.
    if art.is_some() {
        header.extend(["observed_r", "se_factor"]);
    }
    let extra = header.len() - HEADER.len();
    w.write_record(&header)?;
    let mut rows: Vec<(u64, Vec<String>)> = Vec::new();
    for (n, s) in report.studies.iter().enumerate() {
        let mut more = Vec::with_capacity(extra);
        if let Some(l) = report.leave_one_out.as_ref().and_then(|x| x.get(n)) {
            let flag = match (l.sign_changed, l.significance_changed) {
                (true, true) => "sign+significance",
                (true, false) => "sign",
                (false, true) => "significance",
                (false, false) => "",
            };
            more.extend([opt(l.tau2), opt(l.moderator_p.or(l.average_p)), flag.into()]);
        }
        if let Some(i) = report.influence.as_ref().and_then(|x| x.get(n)) {
            more.extend([
                opt(i.rstudent),
                opt(i.dffits),
                opt(i.cooks_distance),
                opt(i.cov_ratio),
                i.hat.to_string(),
                opt(i.tau2_deleted),
                opt(i.q_deleted),
                if i.influential { "yes" } else { "no" }.into(),
            ]);
        }
        if let Some(sh) = s.shrunken.as_ref().filter(|_| shrink) {
            more.extend([
                sh.estimate.to_string(),
                sh.se.to_string(),
                sh.ci.ci_low.to_string(),
                sh.ci.ci_high.to_string(),
                sh.own_weight.to_string(),
            ]);
        }
        let mut row = vec![
            cell(&s.study),
            s.line.to_string(),
            "yes".into(),
            String::new(),
            s.effect.to_string(),
            s.variance.to_string(),
            s.weight.to_string(),
            s.fitted.to_string(),
            s.residual.to_string(),
            s.std_residual.map(|r| r.to_string()).unwrap_or_default(),
            cell(s.note.as_deref().unwrap_or_default()),
            s.computed_from.to_string(),
        ];
        row.extend(more);
        rows.push((s.line, row));
    }
    if let Some(a) = art {
        for (row, s) in rows.iter_mut().zip(&a.studies) {
            row.1
                .extend([s.observed_r.to_string(), s.se_factor.to_string()]);
        }
    }
    for e in &report.excluded {
        let mut row = vec![
            cell(&e.study),
            e.line.to_string(),
            "no".into(),
            cell(&e.reason),
        ];
        row.extend(std::iter::repeat_n(String::new(), 8 + extra));
        rows.push((e.line, row));
    }
    rows.sort_by_key(|r| r.0);
    for (_, r) in rows {
        w.write_record(&r)?;
    }
    w.flush()
}
