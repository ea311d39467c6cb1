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

/// Columns added after [`HEADER`] with `--loo`: the average effect without
/// the study (analysis and reading scale), τ² and the tested p without it,
/// and the conclusions its removal reverses ("moderator_test:lost;
/// session_minutes:gained", empty when none).
pub const LOO_COLUMNS: [&str; 5] = [
    "loo_average",
    "loo_average_reading",
    "loo_tau2",
    "loo_p",
    "loo_changes",
];

/// Columns added after [`HEADER`] (and the leave-one-out columns) with
/// `--influence`: the average without the study and its shift (analysis
/// scale; the shift also on the reading scale), the coefficient it moves
/// most in standard errors (its term and the signed shift), the moderator
/// test's p without it, its standardised deleted residual, its leverage and
/// the flags it meets ("moves_coefficient;high_leverage").
pub const INFLUENCE_COLUMNS: [&str; 9] = [
    "without_average",
    "average_shift",
    "average_shift_reading",
    "most_moved_term",
    "most_moved_shift_se",
    "moderator_p_without",
    "deleted_residual",
    "leverage",
    "influence_flags",
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

/// The coefficient that leaving the study out moves most, in standard
/// errors ([`crate::result::Influence::largest_shift`]).
fn most_moved(report: &FitReport, i: &crate::result::Influence) -> (String, Option<f64>) {
    i.largest_shift(report.model.terms.len() > 1)
        .map(|(j, s)| (report.model.terms[j].clone(), Some(s)))
        .unwrap_or_default()
}

/// Writes one row per input row (included and excluded, in file order).
/// Numbers are written with full precision (shortest round-trip form).
///
/// Rows are written one at a time as they are built (the table is never
/// held in memory): the order is decided first from the line numbers
/// alone, a stable sort of the included rows followed by the excluded ones.
///
/// # Errors
/// Any error of the writer.
pub fn write<W: Write>(report: &FitReport, out: W) -> std::io::Result<()> {
    let mut w = csv::Writer::from_writer(out);
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
    if report.artifacts.is_some() {
        header.extend(["observed_r", "se_factor"]);
    }
    let extra = header.len() - HEADER.len();
    w.write_record(&header)?;
    // (line, index): indices below the number of studies are included rows,
    // the rest excluded ones; the sort is stable, as the old in-memory one was.
    let studies = report.studies.len();
    let mut order: Vec<(u64, usize)> = report
        .studies
        .iter()
        .map(|s| s.line)
        .chain(report.excluded.iter().map(|e| e.line))
        .enumerate()
        .map(|(i, line)| (line, i))
        .collect();
    order.sort_by_key(|r| r.0);
    let mut row = Vec::with_capacity(header.len());
    for (_, i) in order {
        row.clear();
        if i < studies {
            study_row(report, i, shrink, &mut row);
        } else {
            let e = &report.excluded[i - studies];
            row.extend([
                cell(&e.study),
                e.line.to_string(),
                "no".into(),
                cell(&e.reason),
            ]);
            row.extend(std::iter::repeat_n(String::new(), 8 + extra));
        }
        w.write_record(&row)?;
    }
    w.flush()
}

/// The cells of included study `n`: the fixed columns, then those of
/// `--loo`, `--influence`, `--shrink` (when `shrink`) and the artifact
/// corrections, as far as the report holds them.
fn study_row(report: &FitReport, n: usize, shrink: bool, row: &mut Vec<String>) {
    let s = &report.studies.get(n);
    row.extend([
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
    ]);
    if let Some(l) = report.leave_one_out.as_ref().and_then(|x| x.get(n)) {
        let changes: Vec<String> = l
            .changes
            .iter()
            .map(|c| {
                let what = c.term.clone().unwrap_or_else(|| c.kind.id().into());
                let how = if c.significant_without {
                    "gained"
                } else {
                    "lost"
                };
                format!("{what}:{how}")
            })
            .collect();
        row.extend([
            opt(l.average),
            opt(l.average_reading),
            opt(l.tau2),
            opt(l.moderator_p.or(l.average_p)),
            cell(&changes.join(";")),
        ]);
    }
    if let Some(i) = report.influence.as_ref().and_then(|x| x.get(n)) {
        let (term, shift) = most_moved(report, i);
        row.extend([
            opt(i.average_without),
            opt(i.average_shift),
            opt(i.average_shift_reading),
            cell(&term),
            opt(shift),
            opt(i.moderator_p_without),
            opt(i.deleted_residual),
            i.leverage.to_string(),
            i.flags.iter().map(|f| f.id()).collect::<Vec<_>>().join(";"),
        ]);
    }
    if let Some(sh) = s.shrunken.as_ref().filter(|_| shrink) {
        row.extend([
            sh.estimate.to_string(),
            sh.se.to_string(),
            sh.ci.ci_low.to_string(),
            sh.ci.ci_high.to_string(),
            sh.own_weight.to_string(),
        ]);
    }
    if let Some(a) = report.artifacts.as_ref().and_then(|a| a.studies.get(n)) {
        row.extend([a.observed_r.to_string(), a.se_factor.to_string()]);
    }
}
