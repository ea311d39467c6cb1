//! The effects file of `pondus sites` (`--effects`): one row per site with
//! an estimate, the input of `pondus fit` and of the second stage. A pure
//! function of the [`SitesReport`].

use crate::result::{SiteMeasure, SitesReport};
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

/// The columns of the effects file of `--effect smd` before the joined
/// characteristics: the t route of `pondus fit --measure smd` (`t`,
/// `treat_n`, `ctrl_n`), which gives the same g and variance as `g` and
/// `var_g`, and the group means and pooled SD for reading.
pub const SMD_COLUMNS: [&str; 10] = [
    "study",
    "n",
    "treat_n",
    "ctrl_n",
    "treat_mean",
    "ctrl_mean",
    "sd_within",
    "t",
    "g",
    "var_g",
];

/// The columns of the effects file of `--effect log-or`: the counts route
/// of `pondus fit --measure log-or`, the log odds ratio and its variance
/// for reading, and whether a zero cell was corrected.
pub const LOG_OR_COLUMNS: [&str; 9] = [
    "study",
    "n",
    "treat_events",
    "treat_n",
    "ctrl_events",
    "ctrl_n",
    "log_or",
    "var_log_or",
    "zero_cell",
];

/// Whether `name` (in lower case) is a column of any effects file, so a
/// site characteristic may not take it.
pub fn is_effects_column(name: &str) -> bool {
    COLUMNS
        .iter()
        .chain(&SMD_COLUMNS)
        .chain(&LOG_OR_COLUMNS)
        .any(|c| *c == name)
}

/// The columns that need w.
const WITH_W_ONLY: [&str; 3] = ["interaction", "interaction_se", "mean_w"];

/// Writes the effects file: `study, n, slope, se, r, [interaction,
/// interaction_se,] mean_x, [mean_w,]` then the joined characteristics.
/// Numbers are written in the shortest form that reads back exactly.
///
/// # Errors
/// Any write error.
pub fn write<W: Write>(report: &SitesReport, out: W) -> std::io::Result<()> {
    if report.model.effect != SiteMeasure::Slope {
        return write_groups(report, out);
    }
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

/// Writes the effects file of a group comparison: [`SMD_COLUMNS`] or
/// [`LOG_OR_COLUMNS`], then the joined characteristics.
///
/// # Errors
/// Any write error.
fn write_groups<W: Write>(report: &SitesReport, out: W) -> std::io::Result<()> {
    let smd = report.model.effect == SiteMeasure::Smd;
    let mut w = csv::Writer::from_writer(out);
    let mut header: Vec<String> = if smd {
        SMD_COLUMNS.iter().map(|c| c.to_string()).collect()
    } else {
        LOG_OR_COLUMNS.iter().map(|c| c.to_string()).collect()
    };
    if let Some(j) = &report.join {
        header.extend(j.columns.iter().cloned());
    }
    w.write_record(&header)?;
    for s in &report.sites {
        let mut rec = vec![s.study.clone(), s.n.to_string()];
        if let Some(g) = &s.smd {
            rec.extend([
                g.treat_n.to_string(),
                g.ctrl_n.to_string(),
                g.treat_mean.to_string(),
                g.ctrl_mean.to_string(),
                g.sd_within.to_string(),
                g.t.to_string(),
                g.g.to_string(),
                g.var_g.to_string(),
            ]);
        }
        if let Some(o) = &s.log_or {
            rec.extend([
                o.treat_events.to_string(),
                o.treat_n.to_string(),
                o.ctrl_events.to_string(),
                o.ctrl_n.to_string(),
                o.log_or.to_string(),
                o.var_log_or.to_string(),
                if o.zero_cell { "yes" } else { "no" }.to_string(),
            ]);
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
