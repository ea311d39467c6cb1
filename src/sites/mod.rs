//! `pondus sites`: per-site regressions from participant rows, streamed.
//!
//! Stage one of a two-stage analysis of multi-site raw data, as a pipeline:
//!
//! 1. `first_pass`: every site's rows are summarised in one pass by their
//!    count, means and co-moments ([`moments`]; the site of each row found
//!    through `index`). The same summaries can come from a SQL engine as a
//!    moments table ([`crate::sql`] writes the query, [`moments_table`]
//!    reads its result).
//! 2. `fits`: each site's OLS fits follow from that summary alone ([`ols`]).
//! 3. `robust`: HC3 standard errors need each row's leverage and residual,
//!    which a summary cannot give: with `robust` a second pass over the file
//!    adds them (memory still proportional to the number of sites).
//! 4. `assemble`: the [`SitesReport`], one effect per site.
//!
//! Then [`join`] adds the site characteristics, and [`stages`] runs the
//! second stage on the effects file (written by
//! [`crate::render::sites_effects`]) for `pondus fit`.

mod assemble;
mod decimal;
mod first_pass;
mod fits;
pub mod groups;
mod index;
pub mod join;
pub mod levels;
pub mod moments;
pub mod moments_table;
pub mod ols;
pub mod one_stage;
mod pieces;
#[cfg(test)]
mod pieces_tests;

pub mod read;
mod records;
mod robust;
mod settings;
pub mod stages;

pub use assemble::sort_ids;
pub use first_pass::{summarise_rows, SiteSummary, Summaries};
pub use one_stage::SiteMoments;
pub use settings::{Layout, SitesSettings};

use crate::error::{Error, Result};
use crate::input::Delimiter;
use crate::result::{SiteMeasure, SitesInput, SitesInputKind, SitesReport};
use crate::support::flag::Flag;
use assemble::assemble;
use fits::fit_sites;
use robust::robust_pass;
use std::io::Read;
use std::path::Path;

/// Where the participant rows come from.
pub enum RowInput<'a> {
    /// A file, which can be read twice.
    File(&'a Path),
    /// Standard input or any other one-time stream (HC3 is refused).
    Stream(Box<dyn Read + 'a>),
}

/// Runs the per-site stage on participant rows.
///
/// # Errors
/// Input errors with file, line and column; [`Error::Usage`] when HC3 is
/// asked for on a stream that cannot be read twice.
pub fn from_rows(source: &str, input: RowInput<'_>, s: &SitesSettings) -> Result<SitesReport> {
    Ok(rows_keeping(source, input, s, false)?.0)
}

/// [`from_rows`], also returning every site's moments for the one-stage
/// model ([`one_stage::fit`]).
///
/// # Errors
/// Those of [`from_rows`].
pub fn from_rows_with_moments(
    source: &str,
    input: RowInput<'_>,
    s: &SitesSettings,
) -> Result<(SitesReport, SiteMoments)> {
    rows_keeping(source, input, s, true)
}

/// The per-site stage on participant rows; with `keep`, the sites' moments too
/// (else an empty list).
fn rows_keeping(
    source: &str,
    input: RowInput<'_>,
    s: &SitesSettings,
    keep: bool,
) -> Result<(SitesReport, SiteMoments)> {
    check_effect(s, false)?;
    let open = |p: &Path| open_rows(source, p);
    let path = match &input {
        RowInput::File(p) => Some(p.to_path_buf()),
        RowInput::Stream(_) => None,
    };
    // A FIFO, a character device or a socket given as a path reads once
    // like standard input: the second pass would wait forever.
    if let (RowInput::File(p), true) = (&input, s.robust) {
        if std::fs::metadata(p).is_ok_and(|m| !m.is_file() && !m.is_dir()) {
            return Err(Error::usage(
                Flag::Robust,
                format!(
                    "{source}: HC3 standard errors need each row's leverage and residual, so the \
                     file is read a second time, and this path is a pipe or device that can be \
                     read only once; save the data to a regular file and give its path"
                ),
            ));
        }
    }
    let summaries =
        match input {
            RowInput::File(p) => summarise_rows(source, open(p)?, s)?,
            RowInput::Stream(_) if s.robust => return Err(Error::usage(
                Flag::Robust,
                "HC3 standard errors need each row's leverage and residual, so the file is read a \
                 second time, and standard input cannot be read twice; save the data to a file and \
                 give its path",
            )),
            RowInput::Stream(r) => summarise_rows(source, read::RowStream::Csv(r), s)?,
        };
    let layout = summaries.layout;
    let pass = summaries.pass.clone();
    let kept = SiteMoments {
        layout,
        sites: if keep {
            summaries.sites.clone()
        } else {
            vec![]
        },
    };
    if s.effect != SiteMeasure::Slope {
        let coded = SitesSettings {
            treat: summaries.treat.clone(),
            event: summaries.event.clone(),
            ..s.clone()
        };
        let (sites, excluded) = groups::group_sites(summaries.sites, s.effect);
        let mut report = usable(
            source,
            assemble::finish(
                rows_input(source, &pass, 1),
                &coded,
                layout,
                sites,
                excluded,
            ),
        )?;
        if let Some(note) = pass.decimal.as_ref().and_then(|d| d.note(source)) {
            report.notes.insert(0, note);
        }
        return Ok((report, kept));
    }
    let (fitted, excluded) = fit_sites(summaries.sites, layout, s);
    let robust = match (&path, s.robust) {
        (Some(p), true) => Some(robust_pass(source, open(p)?, s, layout, &fitted, &pass)?),
        _ => None,
    };
    let input_info = rows_input(source, &pass, if robust.is_some() { 2 } else { 1 });
    let mut report = usable(
        source,
        assemble(input_info, s, layout, fitted, excluded, robust),
    )?;
    if let Some(note) = pass.decimal.as_ref().and_then(|d| d.note(source)) {
        report.notes.insert(0, note);
    }
    Ok((report, kept))
}

/// What a pass over participant rows read.
fn rows_input(source: &str, pass: &read::PassSummary, passes: u32) -> SitesInput {
    SitesInput {
        file: source.to_string(),
        kind: SitesInputKind::Rows,
        delimiter: Delimiter::of(pass.delimiter),
        rows: pass.rows,
        missing_rows: pass.missing_rows,
        missing_lines: pass.missing_lines.clone(),
        blank_rows: pass.blank_rows,
        passes,
    }
}

/// Checks that the settings fit the per-site effect: a group comparison
/// takes x and y only (no w, covariates or HC3), `--treat` needs a group
/// comparison and `--event` the log odds ratio; on a moments table the
/// columns are already coded 0/1, so neither level flag applies.
///
/// # Errors
/// [`Error::Usage`] naming the flag.
fn check_effect(s: &SitesSettings, moments: bool) -> Result<()> {
    let groups = s.effect != SiteMeasure::Slope;
    let effect = Flag::Effect;
    if groups {
        let extra = if s.w.is_some() {
            Some(Flag::W)
        } else if !s.covariates.is_empty() {
            Some(Flag::Covariate)
        } else if s.robust {
            Some(Flag::Robust)
        } else {
            None
        };
        if let Some(flag) = extra {
            return Err(Error::usage(
                flag,
                format!(
                    "{effect} {} compares the two groups of x on y alone; {flag} applies to the \
                     slope (drop {effect}, or drop {flag})",
                    s.effect.id()
                ),
            ));
        }
    }
    if s.treat.is_some() && !groups {
        return Err(Error::usage(
            Flag::Treat,
            format!(
                "names the treatment group of x, which is read as two groups only with {effect} \
                 smd or {effect} log-or"
            ),
        ));
    }
    if s.event.is_some() && s.effect != SiteMeasure::LogOr {
        return Err(Error::usage(
            Flag::Event,
            format!(
                "names the event of a binary outcome y, which is read as two outcomes only with \
                 {effect} log-or"
            ),
        ));
    }
    if moments {
        if let Some(flag) = [(Flag::Treat, &s.treat), (Flag::Event, &s.event)]
            .into_iter()
            .find_map(|(f, v)| v.is_some().then_some(f))
        {
            return Err(Error::usage(
                flag,
                format!(
                    "a moments table holds x and y as the query computed them, so they must \
                     already be coded 0/1 in the database (1 = the treatment group, 1 = the \
                     event); drop {flag}, and code the column in the query's table or a view \
                     (CASE WHEN column = 'level' THEN 1 ELSE 0 END)"
                ),
            ));
        }
    }
    Ok(())
}

/// Runs the per-site stage on a per-site moments table (see
/// [`moments_table`]).
///
/// # Errors
/// Input errors of the table with line and column.
pub fn from_moments(source: &str, bytes: &[u8], s: &SitesSettings) -> Result<SitesReport> {
    Ok(from_moments_keeping(source, bytes, s)?.0)
}

/// [`from_moments`], also returning every site's moments for the one-stage
/// model ([`one_stage::fit`]).
///
/// # Errors
/// Those of [`from_moments`].
pub fn from_moments_keeping(
    source: &str,
    bytes: &[u8],
    s: &SitesSettings,
) -> Result<(SitesReport, SiteMoments)> {
    check_effect(s, true)?;
    if s.robust {
        return Err(Error::usage(
            Flag::Robust,
            format!(
                "HC3 standard errors need the participant rows (each row's leverage and residual); a \
                 moments table has only per-site summaries. Run on the raw rows, or drop {}",
                Flag::Robust
            ),
        ));
    }
    let table = moments_table::read_moments(source, bytes, s.decimal)?;
    let layout = table.layout;
    let (named, names_note) = moments_names(s, layout)?;
    let s = &named;
    let input_info = moments_input(source, &table);
    let kept = SiteMoments {
        layout,
        sites: table.sites.clone(),
    };
    let (fitted, excluded) = if s.effect == SiteMeasure::Slope {
        fit_sites(table.sites, layout, s)
    } else {
        if layout.with_w || layout.covariates > 0 {
            return Err(Error::usage(
                Flag::Effect,
                format!(
                    "{} {} compares the two groups of x on y alone, and this moments table has \
                     w or covariate columns; make the table with {}, {} and {} only",
                    Flag::Effect,
                    s.effect.id(),
                    Flag::Site,
                    Flag::X,
                    Flag::Y
                ),
            ));
        }
        let (sites, excluded) = groups::group_sites(table.sites, s.effect);
        let coded = SitesSettings {
            treat: Some("1".into()),
            event: (s.effect == SiteMeasure::LogOr).then(|| "1".into()),
            ..s.clone()
        };
        let mut report = usable(
            source,
            assemble::finish(input_info, &coded, layout, sites, excluded),
        )?;
        if let Some(note) = table.decimal.note(source) {
            report.notes.insert(0, note);
        }
        if let Some(note) = names_note {
            report.notes.insert(0, note);
        }
        return Ok((report, kept));
    };
    let mut report = usable(
        source,
        assemble(input_info, s, layout, fitted, excluded, None),
    )?;
    if let Some(note) = table.decimal.note(source) {
        report.notes.insert(0, note);
    }
    if let Some(note) = names_note {
        report.notes.insert(0, note);
    }
    Ok((report, kept))
}

/// What a moments table held.
fn moments_input(source: &str, table: &moments_table::MomentsTable) -> SitesInput {
    SitesInput {
        file: source.to_string(),
        kind: SitesInputKind::Moments,
        delimiter: Delimiter::of(table.delimiter),
        rows: table.rows,
        missing_rows: 0,
        missing_lines: vec![],
        blank_rows: table.blank_rows,
        passes: 1,
    }
}

/// The settings of a moments run: the table names its variables by role
/// (site, x, c1…, w, y); the names a user repeats from the raw-rows command
/// (`--site`, `--x`, `--y`, `--w`, `--covariate`; empty or absent when not
/// given) name them in the output, after a check that the table has the
/// variables they imply. Returns the settings and a note stating the names.
///
/// # Errors
/// [`Error::Usage`] when `--w` is given but the table has no w columns, or
/// the number of covariates differs from the table's.
fn moments_names(s: &SitesSettings, layout: Layout) -> Result<(SitesSettings, Option<String>)> {
    if let Some(w) = &s.w {
        if !layout.with_w {
            return Err(Error::usage(
                Flag::W,
                format!(
                    "'{w}': the moments table has no w columns (mean_w, mean_xw), so it was made \
                     without a participant-level moderator; drop {} or remake the table with it",
                    Flag::W
                ),
            ));
        }
    }
    if !s.covariates.is_empty() && s.covariates.len() != layout.covariates {
        return Err(Error::usage(
            Flag::Covariate,
            format!(
                "{} covariates given ({}) but the moments table has {} (mean_c1 …); give the \
                 covariates the table was made with, in the same order, or none",
                s.covariates.len(),
                s.covariates.join(", "),
                layout.covariates
            ),
        ));
    }
    let given = |name: &str, role: &str| {
        if name.trim().is_empty() {
            role.to_string()
        } else {
            name.to_string()
        }
    };
    let named = SitesSettings {
        site: given(&s.site, "site"),
        x: given(&s.x, "x"),
        y: given(&s.y, "y"),
        w: layout
            .with_w
            .then(|| s.w.clone().unwrap_or_else(|| "w".into())),
        covariates: if s.covariates.is_empty() {
            (1..=layout.covariates).map(|i| format!("c{i}")).collect()
        } else {
            s.covariates.clone()
        },
        robust: false,
        center_within: s.center_within,
        decimal: s.decimal,
        effect: s.effect,
        treat: s.treat.clone(),
        event: s.event.clone(),
    };
    let mut pairs = Vec::new();
    for (role, name) in [("site", &named.site), ("x", &named.x), ("y", &named.y)] {
        if name != role {
            pairs.push(format!("{role} = {name}"));
        }
    }
    if let Some(w) = named.w.as_ref().filter(|w| *w != "w") {
        pairs.push(format!("w = {w}"));
    }
    if !s.covariates.is_empty() {
        for (i, c) in named.covariates.iter().enumerate() {
            pairs.push(format!("c{} = {c}", i + 1));
        }
    }
    let note = (!pairs.is_empty()).then(|| {
        format!(
            "The moments table names its variables by role; the names given on the command line \
             are used for them: {}.",
            pairs.join(", ")
        )
    });
    Ok((named, note))
}

/// Opens the row file for one pass: as Parquet when its name ends in
/// `.parquet`, else as CSV.
///
/// # Errors
/// [`Error::Format`] for a directory; [`Error::Io`] when it cannot be opened.
fn open_rows(source: &str, p: &Path) -> Result<read::RowStream<std::fs::File>> {
    let file = open_file(source, p)?;
    Ok(
        if crate::input::parquet::is_parquet(&p.display().to_string()) {
            read::RowStream::Parquet(file)
        } else {
            read::RowStream::CsvFile(file)
        },
    )
}

/// Opens a file for reading.
///
/// # Errors
/// [`Error::Format`] for a directory; [`Error::Io`] when it cannot be opened.
fn open_file(source: &str, p: &Path) -> Result<std::fs::File> {
    if p.is_dir() {
        return Err(Error::Format {
            source_name: source.to_string(),
            message: "is a directory, not a CSV file".into(),
        });
    }
    std::fs::File::open(p).map_err(|e| Error::Io {
        path: source.to_string(),
        action: "reading",
        source: e,
    })
}

/// The report when at least one site has a usable regression.
///
/// # Errors
/// [`Error::Model`] when every site was left out, naming how many and the
/// first few with their reasons (a header-only effects file is not a result).
fn usable(source: &str, report: SitesReport) -> Result<SitesReport> {
    if !report.sites.is_empty() {
        return Ok(report);
    }
    let shown: Vec<String> = report
        .excluded
        .iter()
        .take(3)
        .map(|e| format!("'{}' ({})", e.study, e.reason))
        .collect();
    Err(Error::Model(format!(
        "{source}: no site has a usable regression; all {} were left out, for example {}",
        report.excluded.len(),
        shown.join(", ")
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn settings(w: bool) -> SitesSettings {
        SitesSettings {
            site: "site".into(),
            x: "x".into(),
            y: "y".into(),
            w: w.then(|| "w".into()),
            covariates: vec![],
            robust: false,
            center_within: false,
            decimal: None,
            effect: SiteMeasure::Slope,
            treat: None,
            event: None,
        }
    }

    fn data() -> String {
        let mut s = String::from("site,x,w,y\n");
        for i in 0..40 {
            let t = i as f64;
            let site = ["b", "a", "c"][i % 3];
            let x = (t * 0.7).sin() * 2.0;
            let w = (t * 0.3).cos();
            let y = 1.0 + 0.5 * x + 0.2 * w + 0.3 * x * w + (t * 2.1).sin() * 0.1;
            s.push_str(&format!("{site},{x},{w},{y}\n"));
        }
        s
    }

    #[test]
    fn centring_leaves_the_product_term_unchanged() {
        let d = data();
        let a = from_rows(
            "t",
            RowInput::Stream(Box::new(d.as_bytes())),
            &settings(true),
        )
        .unwrap();
        let mut s = settings(true);
        s.center_within = true;
        let b = from_rows("t", RowInput::Stream(Box::new(d.as_bytes())), &s).unwrap();
        assert_eq!(a.sites.len(), 3);
        for (p, q) in a.sites.iter().zip(&b.sites) {
            let (i, j) = (p.interaction.unwrap(), q.interaction.unwrap());
            assert!((i - j).abs() < 1e-10 * i.abs(), "{i} vs {j}");
            let (i, j) = (p.interaction_se.unwrap(), q.interaction_se.unwrap());
            assert!((i - j).abs() < 1e-10 * i.abs(), "{i} vs {j}");
        }
        assert_eq!(a.sites[0].study, "a", "sorted by id");
    }

    #[test]
    fn row_order_does_not_matter() {
        let d = data();
        let mut lines: Vec<&str> = d.lines().collect();
        let header = lines.remove(0);
        lines.reverse();
        let rev = format!("{header}\n{}\n", lines.join("\n"));
        let a = from_rows(
            "t",
            RowInput::Stream(Box::new(d.as_bytes())),
            &settings(true),
        )
        .unwrap();
        let b = from_rows(
            "t",
            RowInput::Stream(Box::new(rev.as_bytes())),
            &settings(true),
        )
        .unwrap();
        for (p, q) in a.sites.iter().zip(&b.sites) {
            assert!((p.slope - q.slope).abs() < 1e-12 * p.slope.abs());
            assert_eq!(p.n, q.n);
        }
    }

    #[test]
    fn robust_refused_on_a_stream() {
        let mut s = settings(false);
        s.robust = true;
        let e = from_rows(
            "<stdin>",
            RowInput::Stream(Box::new(&b"site,x,y\na,1,2\n"[..])),
            &s,
        )
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("--robust") && e.contains("cannot be read twice"),
            "{e}"
        );
    }

    #[test]
    fn constant_x_everywhere_is_an_error() {
        let e = from_rows(
            "t.csv",
            RowInput::Stream(Box::new(&b"site,x,y\na,1,2\na,1,3\nb,1,4\nb,1,5\n"[..])),
            &settings(false),
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("x ('x') is 1 in every used row"), "{e}");
    }

    #[test]
    fn small_and_degenerate_sites_are_listed() {
        let d = "site,x,y\na,1,2\na,2,3\nb,1,1\nb,1,2\nb,1,3\nc,1,1\nc,2,3\nc,3,2\nc,4,5\n";
        let r = from_rows(
            "t",
            RowInput::Stream(Box::new(d.as_bytes())),
            &settings(false),
        )
        .unwrap();
        assert_eq!(r.sites.len(), 1);
        assert_eq!(r.excluded.len(), 2);
        assert!(
            r.excluded[0].reason.contains("too few rows"),
            "{:?}",
            r.excluded
        );
        assert!(
            r.excluded[1].reason.contains("constant"),
            "{:?}",
            r.excluded
        );
    }
}
