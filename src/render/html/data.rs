//! The "Data used" section of the `pondus fit` page: the input, the rows
//! left out with the reason, and the notes.

use super::page::Page;
use super::section::FitCtx;

/// The input file, the model, the rows left out and the notes.
pub(super) fn data(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, &cx.lv);
    page.facts(&[
        ("File", report.input.file.clone()),
        (
            "Rows read",
            match &report.input.sheet {
                Some(sheet) => format!("{} (sheet '{sheet}')", report.input.rows),
                None => format!(
                    "{} ({}-separated)",
                    report.input.rows, report.input.delimiter
                ),
            },
        ),
        ("Studies in the model", report.k.to_string()),
        ("Rows left out", report.excluded.len().to_string()),
        ("Effect measure", report.measure.description.clone()),
        (
            "Model",
            format!(
                "{}; {}; {lv} intervals",
                report.model.tau2_description, report.model.inference_description
            ),
        ),
    ]);
    if !report.excluded.is_empty() {
        let rows: Vec<Vec<String>> = report
            .excluded
            .iter()
            .map(|e| vec![e.study.clone(), e.line.to_string(), e.reason.clone()])
            .collect();
        page.table(
            "Rows left out of the model, with the reason",
            &["study", report.input.row_heading(), "reason"],
            &rows,
        );
    }
    if !report.notes.is_empty() {
        page.h3("Notes");
        page.list(&report.notes);
    }
}
