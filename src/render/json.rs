//! JSON rendering.

use crate::result::FitReport;
use serde::Serialize;
use std::io::Write;

/// Writes the report as pretty-printed JSON followed by a newline.
///
/// # Errors
/// Any error of the writer.
pub fn write<W: Write>(report: &FitReport, mut out: W) -> std::io::Result<()> {
    serde_json::to_writer_pretty(&mut out, report)?;
    out.write_all(b"\n")
}

/// Any result (a fit, a plan, a sites report) as pretty-printed JSON
/// followed by a newline: the bytes every `--json` output holds.
///
/// # Errors
/// A value serde cannot represent as JSON (a map with non-string keys).
pub fn to_bytes<T: Serialize + ?Sized>(value: &T) -> serde_json::Result<Vec<u8>> {
    let mut buf = serde_json::to_vec_pretty(value)?;
    buf.push(b'\n');
    Ok(buf)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn to_bytes_is_pretty_json_with_a_final_newline() {
        let v = serde_json::json!({"a": [1, 2], "b": "x"});
        let bytes = to_bytes(&v).unwrap();
        assert_eq!(
            String::from_utf8(bytes).unwrap(),
            "{\n  \"a\": [\n    1,\n    2\n  ],\n  \"b\": \"x\"\n}\n"
        );
    }
}
