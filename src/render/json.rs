//! JSON rendering.

use crate::result::FitReport;
use std::io::Write;

/// Writes the report as pretty-printed JSON followed by a newline.
///
/// # Errors
/// Any error of the writer.
pub fn write<W: Write>(report: &FitReport, mut out: W) -> std::io::Result<()> {
    serde_json::to_writer_pretty(&mut out, report)?;
    out.write_all(b"\n")
}
