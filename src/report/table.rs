//! The per-study CSV table (`--table`).

use crate::result::FitReport;
use std::io::Write;

/// Header of the per-study table.
pub const HEADER: [&str; 11] = [
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
];

/// Writes one row per input row (included and excluded, in file order).
/// Numbers are written with full precision (shortest round-trip form).
///
/// # Errors
/// Any error of the writer.
pub fn write<W: Write>(report: &FitReport, out: W) -> std::io::Result<()> {
    let mut w = csv::Writer::from_writer(out);
    // With artifact corrections, two columns more: the observed r and the SE factor.
    let art = report.artifacts.as_ref();
    if art.is_some() {
        let mut h: Vec<&str> = HEADER.to_vec();
        h.extend(["observed_r", "se_factor"]);
        w.write_record(h)?;
    } else {
        w.write_record(HEADER)?;
    }
    let mut rows: Vec<(u64, Vec<String>)> = Vec::new();
    for s in &report.studies {
        rows.push((
            s.line,
            vec![
                s.study.clone(),
                s.line.to_string(),
                "yes".into(),
                String::new(),
                s.effect.to_string(),
                s.variance.to_string(),
                s.weight.to_string(),
                s.fitted.to_string(),
                s.residual.to_string(),
                s.std_residual.map(|r| r.to_string()).unwrap_or_default(),
                s.note.clone().unwrap_or_default(),
            ],
        ));
    }
    if let Some(a) = art {
        for (row, s) in rows.iter_mut().zip(&a.studies) {
            row.1
                .extend([s.observed_r.to_string(), s.se_factor.to_string()]);
        }
    }
    for e in &report.excluded {
        let mut row = vec![
            e.study.clone(),
            e.line.to_string(),
            "no".into(),
            e.reason.clone(),
        ];
        row.extend(std::iter::repeat_n(
            String::new(),
            if art.is_some() { 9 } else { 7 },
        ));
        rows.push((e.line, row));
    }
    rows.sort_by_key(|r| r.0);
    for (_, r) in rows {
        w.write_record(&r)?;
    }
    w.flush()
}
