//! `pondus sites`: per-site regressions from participant rows, streamed.
//!
//! Stage one of a two-stage analysis of multi-site raw data. Every site's
//! rows are summarised in one pass by their count, means and co-moments
//! ([`moments`]); each site's OLS fits follow from that summary alone
//! ([`ols`]). HC3 standard errors need each row's leverage and residual,
//! which a summary cannot give: with `robust` a second pass over the file
//! adds them (memory still proportional to the number of sites). The same
//! summaries can come from a SQL engine ([`sql`]). The effects file is
//! written for `pondus fit`; [`stages`] runs the second stage.

pub mod join;
pub mod moments;
pub mod ols;
pub mod read;
pub mod sql;
pub mod stages;

use crate::error::{Error, Result};
use crate::input::Delimiter;
use crate::result::{
    ExcludedSite, SeType, SiteEffect, SitesInput, SitesInputKind, SitesModel, SitesReport, ToolInfo,
};
use moments::Moments;
use ols::{Hc3, OlsProblem};
use read::{PassSummary, RowColumns};
use std::collections::HashMap;
use std::io::Read;

/// Checked settings of the per-site stage.
#[derive(Debug, Clone)]
pub struct SitesSettings {
    /// Site id column.
    pub site: String,
    /// Predictor column.
    pub x: String,
    /// Outcome column.
    pub y: String,
    /// Participant-level moderator column.
    pub w: Option<String>,
    /// Covariate columns.
    pub covariates: Vec<String>,
    /// HC3 standard errors (second pass over the rows).
    pub robust: bool,
    /// Centre x and w at the site means in the product-term model.
    pub center_within: bool,
}

/// Positions of the variables in each site's moment vector
/// (x, covariates…, [w, x·w], y).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Layout {
    /// Number of covariates.
    pub covariates: usize,
    /// Whether w and x·w are present.
    pub with_w: bool,
}

impl Layout {
    /// Length of the moment vector.
    pub fn dim(self) -> usize {
        self.covariates + if self.with_w { 4 } else { 2 }
    }
    /// Index of x.
    pub const X: usize = 0;
    /// Index of w (with w only).
    pub fn w(self) -> usize {
        1 + self.covariates
    }
    /// Index of x·w (with w only).
    pub fn xw(self) -> usize {
        2 + self.covariates
    }
    /// Index of y.
    pub fn y(self) -> usize {
        self.dim() - 1
    }
    /// Predictors of the slope model: x and the covariates.
    pub fn slope_predictors(self) -> Vec<usize> {
        (0..=self.covariates).collect()
    }
    /// Predictors of the product-term model: x, covariates, w, x·w.
    pub fn interaction_predictors(self) -> Vec<usize> {
        (0..self.covariates + 3).collect()
    }
    /// Short names of the moment variables: x, c1…, w, xw, y (used in the moments table).
    pub fn short_names(self) -> Vec<String> {
        let mut v = vec!["x".to_string()];
        v.extend((1..=self.covariates).map(|i| format!("c{i}")));
        if self.with_w {
            v.push("w".into());
            v.push("xw".into());
        }
        v.push("y".into());
        v
    }
}

/// One site's first-pass summary.
#[derive(Debug, Clone)]
pub struct SiteSummary {
    /// Site id.
    pub id: String,
    /// Its moments.
    pub moments: Moments,
}

/// What the first pass produced.
#[derive(Debug, Clone)]
pub struct Summaries {
    /// Sites in order of first appearance.
    pub sites: Vec<SiteSummary>,
    /// The moment layout.
    pub layout: Layout,
    /// Counts of the pass.
    pub pass: PassSummary,
}

fn row_columns(s: &SitesSettings) -> RowColumns {
    let mut numeric = vec![(s.x.clone(), "--x")];
    numeric.extend(s.covariates.iter().map(|c| (c.clone(), "--covariate")));
    if let Some(w) = &s.w {
        numeric.push((w.clone(), "--w"));
    }
    numeric.push((s.y.clone(), "--y"));
    RowColumns {
        site: s.site.clone(),
        numeric,
    }
}

/// Fills the moment vector from a row's values (x, covariates, [w], y).
#[inline]
fn moment_vector(layout: Layout, values: &[f64], v: &mut [f64]) {
    let k = layout.covariates;
    v[..=k].copy_from_slice(&values[..=k]);
    if layout.with_w {
        let w = values[k + 1];
        v[k + 1] = w;
        v[k + 2] = values[0] * w;
    }
    v[layout.y()] = values[values.len() - 1];
}

/// A fast multiplicative hash of site ids (the rotate-xor-multiply step of
/// the hash used inside the Rust compiler). Not collision-resistant against
/// crafted ids, which can only slow a run down, never change its result.
#[derive(Default, Clone, Copy)]
struct IdHasher(u64);

impl std::hash::Hasher for IdHasher {
    #[inline]
    fn write(&mut self, bytes: &[u8]) {
        for chunk in bytes.chunks(8) {
            let mut b = [0u8; 8];
            b[..chunk.len()].copy_from_slice(chunk);
            self.0 =
                (self.0.rotate_left(5) ^ u64::from_le_bytes(b)).wrapping_mul(0x517c_c1b7_2722_0a95);
        }
    }
    #[inline]
    fn write_usize(&mut self, n: usize) {
        self.0 = (self.0.rotate_left(5) ^ n as u64).wrapping_mul(0x517c_c1b7_2722_0a95);
    }
    fn finish(&self) -> u64 {
        self.0
    }
}

type IdMap = HashMap<Vec<u8>, usize, std::hash::BuildHasherDefault<IdHasher>>;

/// Looks a site up, trying the previous row's site first (rows usually come in runs).
struct SiteIndex {
    map: IdMap,
    last: Vec<u8>,
    last_ix: usize,
}

impl SiteIndex {
    fn new() -> Self {
        SiteIndex {
            map: IdMap::default(),
            last: Vec::new(),
            last_ix: usize::MAX,
        }
    }

    #[inline]
    fn find_or_insert(&mut self, id: &[u8], mut insert: impl FnMut(&[u8]) -> usize) -> usize {
        if self.last_ix != usize::MAX && self.last == id {
            return self.last_ix;
        }
        let ix = match self.map.get(id) {
            Some(&i) => i,
            None => {
                let i = insert(id);
                self.map.insert(id.to_vec(), i);
                i
            }
        };
        self.last.clear();
        self.last.extend_from_slice(id);
        self.last_ix = ix;
        ix
    }
}

/// The first pass: every row read once, per-site moments updated in place.
///
/// # Errors
/// Input errors from [`read::for_each_row`]; [`Error::Model`] when x takes
/// one value in every row of the file.
pub fn summarise_rows<R: Read>(source: &str, input: R, s: &SitesSettings) -> Result<Summaries> {
    let layout = Layout {
        covariates: s.covariates.len(),
        with_w: s.w.is_some(),
    };
    if layout.dim() > moments::MAX_DIM {
        return Err(Error::usage(
            "--covariate",
            format!("at most {} covariates are supported", moments::MAX_DIM - 4),
        ));
    }
    let cols = row_columns(s);
    let mut sites: Vec<SiteSummary> = Vec::new();
    let mut index = SiteIndex::new();
    let mut v = vec![0.0; layout.dim()];
    let mut first_x: Option<f64> = None;
    let mut x_varies = false;
    let pass = read::for_each_row(source, input, &cols, |_, id, values| {
        let ix = index.find_or_insert(id, |id| {
            sites.push(SiteSummary {
                id: String::from_utf8_lossy(id).into_owned(),
                moments: Moments::new(layout.dim()),
            });
            sites.len() - 1
        });
        match first_x {
            None => first_x = Some(values[0]),
            Some(f) => x_varies |= f != values[0],
        }
        moment_vector(layout, values, &mut v);
        sites[ix].moments.push(&v);
        Ok(())
    })?;
    if sites.is_empty() {
        return Err(Error::Model(format!(
            "{source}: every row has a missing value in a needed column ({} rows read); no site can be estimated",
            pass.rows
        )));
    }
    if !x_varies {
        return Err(Error::Model(format!(
            "{source}: x ('{}') is {} in every used row, so no site has a slope; check that --x names the predictor",
            s.x,
            first_x.unwrap_or(f64::NAN)
        )));
    }
    Ok(Summaries {
        sites,
        layout,
        pass,
    })
}

/// One site's estimates before the join.
#[derive(Debug, Clone)]
struct Fitted {
    id: String,
    moments: Moments,
    slope: ols::OlsFit,
    interaction: Option<(ols::OlsFit, Moments)>,
    interaction_note: Option<String>,
}

fn problem_text(p: &OlsProblem, names: &[String], what: &str) -> String {
    match p {
        OlsProblem::TooFewRows { n, need } => format!(
            "too few rows for the {what}: {n} row{}, it needs at least {need}",
            if *n == 1 { "" } else { "s" }
        ),
        OlsProblem::Constant(i) => format!("{} is constant in this site", names[*i]),
        OlsProblem::Collinear(i) => format!(
            "singular design in the {what}: {} is a linear combination of the other predictors",
            names[*i]
        ),
        OlsProblem::ConstantResponse => {
            format!("{} is constant in this site", names[names.len() - 1])
        }
        OlsProblem::ExactFit => format!(
            "the {what} fits this site's rows exactly (no residual variation), so it has no standard error"
        ),
    }
}

/// Display names of the moment variables, from the settings' headers.
fn display_names(layout: Layout, s: &SitesSettings) -> Vec<String> {
    let mut v = vec![format!("x ('{}')", s.x)];
    v.extend(s.covariates.iter().map(|c| format!("covariate '{c}'")));
    if layout.with_w {
        let w = s.w.as_deref().unwrap_or("w");
        v.push(format!("w ('{w}')"));
        v.push("the product x·w".to_string());
    }
    v.push(format!("y ('{}')", s.y));
    v
}

/// Moments of the product-term model, with x and w centred at the site
/// means when asked: x·w becomes (x − x̄)(w − w̄) = x·w − w̄x − x̄w + x̄w̄, a
/// linear map of the moment vector, so its co-moments are A C Aᵀ
/// ([`Moments::transformed`]); b₃ is unchanged and b₁ becomes the slope
/// at the site's mean w.
fn interaction_moments(m: &Moments, layout: Layout, center: bool) -> Moments {
    if !center {
        return m.clone();
    }
    let d = layout.dim();
    let (mx, mw) = (m.mean(Layout::X), m.mean(layout.w()));
    let mut a = vec![0.0; d * d];
    for i in 0..d {
        a[i * d + i] = 1.0;
    }
    let xw = layout.xw();
    a[xw * d + Layout::X] = -mw;
    a[xw * d + layout.w()] = -mx;
    let mut b = vec![0.0; d];
    b[xw] = mx * mw;
    m.transformed(&a, &b)
}

fn fit_sites(
    summaries: Vec<SiteSummary>,
    layout: Layout,
    s: &SitesSettings,
) -> (Vec<Fitted>, Vec<ExcludedSite>) {
    let names = display_names(layout, s);
    let mut fitted = Vec::new();
    let mut excluded = Vec::new();
    for site in summaries {
        let m = site.moments;
        let slope = match ols::fit(&m, &layout.slope_predictors(), layout.y()) {
            Ok(f) => f,
            Err(p) => {
                excluded.push(ExcludedSite {
                    study: site.id,
                    n: m.n(),
                    reason: problem_text(&p, &names, "slope model"),
                });
                continue;
            }
        };
        let (interaction, interaction_note) = if layout.with_w {
            let im = interaction_moments(&m, layout, s.center_within);
            match ols::fit(&im, &layout.interaction_predictors(), layout.y()) {
                Ok(f) => (Some((f, im)), None),
                Err(p) => (
                    None,
                    Some(format!(
                        "no product term: {}",
                        problem_text(&p, &names, "product-term model")
                    )),
                ),
            }
        } else {
            (None, None)
        };
        fitted.push(Fitted {
            id: site.id,
            moments: m,
            slope,
            interaction,
            interaction_note,
        });
    }
    (fitted, excluded)
}

/// HC3 sums for one site: the slope, and the product term when fitted.
struct RobustSite {
    slope: Hc3,
    interaction: Option<(Hc3, f64, f64)>,
    rows: u64,
}

/// The second pass: HC3 sums for every fitted site.
fn robust_pass<R: Read>(
    source: &str,
    input: R,
    s: &SitesSettings,
    layout: Layout,
    fitted: &[Fitted],
    first: &PassSummary,
) -> Result<Vec<RobustSite>> {
    let mut robust: Vec<RobustSite> = fitted
        .iter()
        .map(|f| RobustSite {
            slope: Hc3::new(&f.slope, &f.moments, 0),
            interaction: f.interaction.as_ref().map(|(fit, im)| {
                (
                    Hc3::new(fit, im, layout.xw()),
                    f.moments.mean(Layout::X),
                    f.moments.mean(layout.w()),
                )
            }),
            rows: 0,
        })
        .collect();
    let mut index = SiteIndex::new();
    let by_id: HashMap<&str, usize> = fitted
        .iter()
        .enumerate()
        .map(|(i, f)| (f.id.as_str(), i))
        .collect();
    let k = layout.covariates;
    let mut z = vec![0.0; layout.dim()];
    let center = s.center_within;
    let pass = read::for_each_row(source, input, &row_columns(s), |_, id, values| {
        let ix = index.find_or_insert(id, |id| {
            std::str::from_utf8(id)
                .ok()
                .and_then(|t| by_id.get(t).copied())
                .unwrap_or(usize::MAX)
        });
        if ix == usize::MAX {
            return Ok(());
        }
        let site = &mut robust[ix];
        site.rows += 1;
        let y = values[values.len() - 1];
        site.slope.add(&values[..=k], y);
        if let Some((h, mx, mw)) = &mut site.interaction {
            z[..=k].copy_from_slice(&values[..=k]);
            let (x, w) = (values[0], values[k + 1]);
            z[k + 1] = w;
            z[k + 2] = if center { (x - *mx) * (w - *mw) } else { x * w };
            h.add(&z[..k + 3], y);
        }
        Ok(())
    })?;
    // The two passes must see the same rows: a file rewritten in between
    // would mix two data sets silently.
    let changed = pass.rows != first.rows
        || pass.missing_rows != first.missing_rows
        || robust
            .iter()
            .zip(fitted)
            .any(|(r, f)| r.rows != f.moments.n());
    if changed {
        return Err(Error::Format {
            source_name: source.to_string(),
            message:
                "the file changed between the two passes that --robust makes (its rows differ \
                      from the first reading); run again on a file that is not being written to"
                    .into(),
        });
    }
    Ok(robust)
}

/// Where the participant rows come from.
pub enum RowInput<'a> {
    /// A file, which can be read twice.
    File(&'a std::path::Path),
    /// Standard input or any other one-time stream (HC3 is refused).
    Stream(Box<dyn Read + 'a>),
}

/// Runs the per-site stage on participant rows.
///
/// # Errors
/// Input errors with file, line and column; [`Error::Usage`] when HC3 is
/// asked for on a stream that cannot be read twice.
pub fn from_rows(source: &str, input: RowInput<'_>, s: &SitesSettings) -> Result<SitesReport> {
    let open = |p: &std::path::Path| -> Result<std::fs::File> {
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
    };
    let path = match &input {
        RowInput::File(p) => Some(p.to_path_buf()),
        RowInput::Stream(_) => None,
    };
    let summaries =
        match input {
            RowInput::File(p) => summarise_rows(source, open(p)?, s)?,
            RowInput::Stream(_) if s.robust => return Err(Error::usage(
                "--robust",
                "HC3 standard errors need each row's leverage and residual, so the file is read a \
                 second time, and standard input cannot be read twice; save the data to a file and \
                 give its path",
            )),
            RowInput::Stream(r) => summarise_rows(source, r, s)?,
        };
    let layout = summaries.layout;
    let pass = summaries.pass.clone();
    let (fitted, excluded) = fit_sites(summaries.sites, layout, s);
    let robust = match (&path, s.robust) {
        (Some(p), true) => Some(robust_pass(source, open(p)?, s, layout, &fitted, &pass)?),
        _ => None,
    };
    let input_info = SitesInput {
        file: source.to_string(),
        kind: SitesInputKind::Rows,
        delimiter: Delimiter::of(pass.delimiter),
        rows: pass.rows,
        missing_rows: pass.missing_rows,
        missing_lines: pass.missing_lines.clone(),
        passes: if robust.is_some() { 2 } else { 1 },
    };
    Ok(assemble(input_info, s, layout, fitted, excluded, robust))
}

/// Runs the per-site stage on a per-site moments table (see [`sql`]).
///
/// # Errors
/// Input errors of the table with line and column.
pub fn from_moments(source: &str, bytes: &[u8], s: &SitesSettings) -> Result<SitesReport> {
    if s.robust {
        return Err(Error::usage(
            "--robust",
            "HC3 standard errors need the participant rows (each row's leverage and residual); a \
             moments table has only per-site summaries. Run on the raw rows, or drop --robust",
        ));
    }
    let table = sql::read_moments(source, bytes)?;
    let layout = table.layout;
    // The moments table names its variables by role (x, c1…, w, y).
    let s = &SitesSettings {
        site: "site".into(),
        x: "x".into(),
        y: "y".into(),
        w: layout.with_w.then(|| "w".into()),
        covariates: (1..=layout.covariates).map(|i| format!("c{i}")).collect(),
        robust: false,
        center_within: s.center_within,
    };
    let (fitted, excluded) = fit_sites(table.sites, layout, s);
    let input_info = SitesInput {
        file: source.to_string(),
        kind: SitesInputKind::Moments,
        delimiter: Delimiter::of(table.delimiter),
        rows: table.rows,
        missing_rows: 0,
        missing_lines: vec![],
        passes: 1,
    };
    Ok(assemble(input_info, s, layout, fitted, excluded, None))
}

/// Orders site ids numerically when every id is a number, else by text.
pub fn sort_ids<T>(items: &mut [T], id: impl Fn(&T) -> &str) {
    let all_numeric = items.iter().all(|t| id(t).trim().parse::<f64>().is_ok());
    if all_numeric {
        items.sort_by(|a, b| {
            let (x, y) = (
                id(a).trim().parse::<f64>().unwrap_or(0.0),
                id(b).trim().parse::<f64>().unwrap_or(0.0),
            );
            x.total_cmp(&y).then_with(|| id(a).cmp(id(b)))
        });
    } else {
        items.sort_by(|a, b| id(a).cmp(id(b)));
    }
}

fn assemble(
    input: SitesInput,
    s: &SitesSettings,
    layout: Layout,
    fitted: Vec<Fitted>,
    mut excluded: Vec<ExcludedSite>,
    robust: Option<Vec<RobustSite>>,
) -> SitesReport {
    let mut sites = Vec::with_capacity(fitted.len());
    let mut notes = Vec::new();
    let mut robust = robust.map(|r| r.into_iter());
    for f in fitted {
        let m = &f.moments;
        let rob = robust.as_mut().and_then(|it| it.next());
        let (se, interaction_se, note) = match &rob {
            None => (
                f.slope.se(0),
                f.interaction.as_ref().map(|(fit, _)| fit.se(layout.xw())),
                f.interaction_note.clone(),
            ),
            Some(rs) => {
                let Some(se) = rs.slope.se() else {
                    excluded.push(ExcludedSite {
                        study: f.id,
                        n: m.n(),
                        reason: "a row has leverage 1 in the slope model (it alone determines a coefficient), so HC3 is undefined".into(),
                    });
                    continue;
                };
                let ise = rs.interaction.as_ref().and_then(|(h, _, _)| h.se());
                let note = match (&f.interaction, ise) {
                    (Some(_), None) => Some("no product-term SE: a row has leverage 1 in the product-term model, so HC3 is undefined".to_string()),
                    _ => f.interaction_note.clone(),
                };
                (se, ise, note)
            }
        };
        let interaction =
            interaction_se.and(f.interaction.as_ref().map(|(fit, _)| fit.beta[layout.xw()]));
        let (x, y) = (Layout::X, layout.y());
        sites.push(SiteEffect {
            study: f.id,
            n: m.n(),
            slope: f.slope.beta[0],
            se,
            r: m.comoment(x, y) / (m.comoment(x, x) * m.comoment(y, y)).sqrt(),
            interaction,
            interaction_se,
            mean_x: m.mean(x),
            mean_w: layout.with_w.then(|| m.mean(layout.w())),
            note,
            characteristics: vec![],
        });
    }
    sort_ids(&mut sites, |e| e.study.as_str());
    sort_ids(&mut excluded, |e| e.study.as_str());
    if input.missing_rows > 0 {
        notes.push(format!(
            "{} row{} left out for an empty or missing-mark value in a needed column (first lines: {}).",
            input.missing_rows,
            if input.missing_rows == 1 { "" } else { "s" },
            input
                .missing_lines
                .iter()
                .map(|l| l.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    if s.robust {
        notes.push("Standard errors are HC3 (heteroskedasticity-consistent, MacKinnon & White 1985); the file was read twice, the second time for each row's leverage and residual.".into());
    }
    if layout.with_w && s.center_within {
        notes.push("x and w were centred at their site means in the product-term model: the product term is unchanged, the design better conditioned.".into());
    }
    SitesReport {
        tool: ToolInfo {
            name: "pondus".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        input,
        model: SitesModel {
            site: s.site.clone(),
            x: s.x.clone(),
            y: s.y.clone(),
            w: s.w.clone(),
            covariates: s.covariates.clone(),
            se_type: if s.robust {
                SeType::Hc3
            } else {
                SeType::Classical
            },
            center_within: s.center_within,
        },
        sites,
        excluded,
        join: None,
        notes,
        stages: None,
    }
}

/// Writes the effects file: `study, n, slope, se, r, [interaction,
/// interaction_se,] mean_x, [mean_w,]` then the joined characteristics.
/// Numbers are written in the shortest form that reads back exactly.
///
/// # Errors
/// Any write error.
pub fn write_effects<W: std::io::Write>(report: &SitesReport, out: W) -> std::io::Result<()> {
    let with_w = report.model.w.is_some();
    let mut w = csv::Writer::from_writer(out);
    let mut header: Vec<String> = ["study", "n", "slope", "se", "r"]
        .map(String::from)
        .to_vec();
    if with_w {
        header.push("interaction".into());
        header.push("interaction_se".into());
    }
    header.push("mean_x".into());
    if with_w {
        header.push("mean_w".into());
    }
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
pub fn effects_bytes(report: &SitesReport) -> Vec<u8> {
    let mut buf = Vec::new();
    write_effects(report, &mut buf).expect("writing to memory cannot fail");
    buf
}

pub use crate::support::hash::sha256_file;

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
