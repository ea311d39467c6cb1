//! The effects file of `pondus sites` (`--effects`): one row per site with
//! an estimate, the input of `pondus fit` and of the second stage. A pure
//! function of the [`SitesReport`].

use crate::result::SitesReport;
use std::io::Write;

/// Every column the effects file can have, in order, before the joined
/// characteristics: `interaction`, `interaction_se` and `mean_w` only with
/// a participant-level moderator w.
pub const COLUMNS: [&str; 9] = [
    "study",
    "n",
    "slope",
    "se",
    "r",
    "interaction",
    "interaction_se",
    "mean_x",
    "mean_w",
];

/// The columns that need w.
const WITH_W_ONLY: [&str; 3] = ["interaction", "interaction_se", "mean_w"];

/// Writes the effects file: `study, n, slope, se, r, [interaction,
/// interaction_se,] mean_x, [mean_w,]` then the joined characteristics.
/// Numbers are written in the shortest form that reads back exactly.
///
/// # Errors
/// Any write error.
pub fn write<W: Write>(report: &SitesReport, out: W) -> std::io::Result<()> {
    let with_w = report.model.w.is_some();
    let mut w = csv::Writer::from_writer(out);
    let mut header: Vec<String> = COLUMNS
        .iter()
        .filter(|c| with_w || !WITH_W_ONLY.contains(c))
        .map(|c| c.to_string())
        .collect();
    if let Some(j) = &report.join {
        header.extend(j.columns.iter().cloned());
    }
    w.write_record(&header)?;
    let opt = |v: Option<f64>| v.map(|x| x.to_string()).unwrap_or_default();
    for s in &report.sites {
        let mut rec = vec![
            s.study.clone(),
            s.n.to_string(),
            s.slope.to_string(),
            s.se.to_string(),
            s.r.to_string(),
        ];
        if with_w {
            rec.push(opt(s.interaction));
            rec.push(opt(s.interaction_se));
        }
        rec.push(s.mean_x.to_string());
        if with_w {
            rec.push(opt(s.mean_w));
        }
        rec.extend(s.characteristics.iter().cloned());
        w.write_record(&rec)?;
    }
    w.flush()
}

/// The effects file as bytes.
pub fn bytes(report: &SitesReport) -> Vec<u8> {
    let mut buf = Vec::new();
    write(report, &mut buf).expect("writing to memory cannot fail");
    buf
}
