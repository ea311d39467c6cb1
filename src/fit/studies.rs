//! Stage 2 of `fit`: collect the studies. Effects from the measure's
//! columns, artifact corrections, the type of each moderator (read over all
//! rows), and which rows the model can use. The table's cells end with this
//! stage: what later stages need is copied out, and the table is dropped
//! before the model's arrays exist.

use super::columns::Columns;
use super::FitSettings;
use crate::effect::artifact::{self, Corrected};
use crate::effect::route::Route;
use crate::effect::{self, ReadingScale, RowEffect};
use crate::error::{Error, Result};
use crate::input::{Delimiter, Places, Table};
use crate::model::design::{self, RawModerator};
use crate::result::Excluded;
use crate::support::flag::Flag;

/// The studies of the job. Fields "per study" hold the included rows in
/// file order; [`Studies::raw`] holds every table row (the design builder
/// reads it through [`Studies::included`]).
#[derive(Debug)]
pub struct Studies {
    /// Table rows the model uses, in file order.
    pub included: Vec<usize>,
    /// Effect per study, on the analysis scale.
    pub y: Vec<f64>,
    /// Sampling variance per study.
    pub v: Vec<f64>,
    /// Label per study (its line when the label cell or column is missing).
    pub labels: Vec<String>,
    /// Line in the file per study.
    pub lines: Vec<u64>,
    /// Adjustment made to the study's effect, in words (a zero-cell correction).
    pub notes: Vec<Option<String>>,
    /// The route each study's effect was computed from.
    pub routes: Vec<Route>,
    /// A disagreement between a study's routes, or asymmetric limits, in words.
    pub checks: Vec<Option<String>>,
    /// Artifact correction per study (None without corrections).
    pub corrections: Vec<Option<Corrected>>,
    /// The `--cumulative-by` header and its cell per study.
    pub order: Option<(String, Vec<String>)>,
    /// The `--cluster` header and its (trimmed) id per study.
    pub cluster_ids: Option<(String, Vec<String>)>,
    /// The columns carried for the plots: each name as asked and its
    /// (trimmed) cell per study.
    pub shown: Vec<(String, Vec<String>)>,
    /// Every moderator's values over all table rows, typed.
    pub raw: Vec<RawModerator>,
    /// Every `--spread-by` characteristic's values over all table rows, typed.
    pub spread_raw: Vec<RawModerator>,
    /// Rows left out, with the reason, in file order.
    pub excluded: Vec<Excluded>,
    /// Of those, rows with a usable effect left out only for a missing
    /// moderator value (the model without moderators does not use them either).
    pub missing_moderator: usize,
    /// How results are read: the measure's scale, or as analysed when the
    /// correlations were corrected for artifacts.
    pub scale: ReadingScale,
    /// What the report says about the table.
    pub table: TableFacts,
    /// How messages name the table's rows and cells (lines, or sheet
    /// addresses).
    pub places: Places,
}

/// What the report says about the table read.
#[derive(Debug, Clone)]
pub struct TableFacts {
    /// The delimiter.
    pub delimiter: Delimiter,
    /// The sheet, for a spreadsheet.
    pub sheet: Option<String>,
    /// Data rows.
    pub rows: usize,
    /// Blank rows skipped.
    pub blank_rows: usize,
    /// Header of the label column, when there is one.
    pub label_column: Option<String>,
    /// Whether a header matches the label column's name (ignoring case).
    pub label_found: bool,
    /// The note stating the decimal mark, when it is not the default point.
    pub decimal_note: Option<String>,
}

/// Computes the effects, applies artifact corrections, types the moderators
/// and decides which rows the model uses.
///
/// # Errors
/// Errors of [`effect::compute`], [`artifact::apply`] and
/// [`design::classify`]; [`Error::Model`] when no row, or only one, is usable.
pub fn collect(settings: &FitSettings, source: &str, columns: Columns) -> Result<Studies> {
    let Columns {
        table,
        first_measure,
        first_moderator,
        first_artifact,
        spread,
        order,
        cluster,
        first_shown,
    } = columns;
    let cluster_cells = cluster.map(|j| cells(&table, j, true));
    let order_cells = order.map(|j| cells(&table, j, false));
    let mut effects = effect::compute(settings.measure, &settings.columns, &table, first_measure)?;
    let artifacts = &settings.interpret.artifacts;
    let corrections = artifact::apply(
        artifacts,
        &table,
        first_measure,
        first_measure + 1,
        first_artifact,
        &mut effects,
    )?;
    let labels = labels(&table);
    let places = table.places();
    let mut raw = Vec::with_capacity(settings.moderators.len());
    for (j, spec) in settings.moderators.iter().enumerate() {
        let col = table
            .column(first_moderator + j)
            .expect("required column present");
        // Two spellings of one header (`--moderator m --moderator M`, the
        // second matched ignoring case) are one moderator given twice.
        if let Some(before) = settings.moderators[..j]
            .iter()
            .enumerate()
            .find_map(|(i, m)| {
                let c = table.column(first_moderator + i)?;
                (c.header == col.header).then_some(&m.name)
            })
        {
            return Err(Error::usage(
                Flag::Moderator,
                format!(
                    "'{before}' and '{}' both name the column '{}' (headers match ignoring case \
                     when unique); give the moderator once",
                    spec.name, col.header
                ),
            ));
        }
        let cells: Vec<&str> = (0..table.len()).map(|i| col.get(i)).collect();
        raw.push(design::classify(
            spec,
            &cells,
            &table.lines,
            (&places, &col.header),
            source,
        )?);
    }
    let spread_raw = spread_columns(settings, &table, &spread, &raw, &places, source)?;
    let (included, excluded) = include(
        settings,
        &effects.rows,
        (&raw, &spread_raw),
        &labels,
        &table.lines,
    );
    let missing_moderator = effects.rows.len()
        - included.len()
        - effects
            .rows
            .iter()
            .filter(|r| matches!(r, RowEffect::Excluded(_)))
            .count();
    check_count(source, &included, &excluded, &places)?;
    let mut y = Vec::with_capacity(included.len());
    let mut v = Vec::with_capacity(included.len());
    let mut notes = Vec::with_capacity(included.len());
    let mut routes = Vec::with_capacity(included.len());
    let mut checks = Vec::with_capacity(included.len());
    for &i in &included {
        let (yi, vi, note, from, check) = match &mut effects.rows[i] {
            RowEffect::Value {
                y,
                v,
                note,
                from,
                check,
            } => (*y, *v, note.take(), *from, check.take()),
            RowEffect::Excluded(_) => (f64::NAN, f64::NAN, None, Route::Means, None),
        };
        y.push(yi);
        v.push(vi);
        notes.push(note);
        routes.push(from);
        checks.push(check);
    }
    check_range(source, &y, &v, &included, (&table.lines, &places))?;
    Ok(Studies {
        y,
        v,
        notes,
        routes,
        checks,
        labels: pick(labels, &included),
        lines: included.iter().map(|&i| table.lines[i]).collect(),
        corrections: included.iter().map(|&i| corrections[i]).collect(),
        order: order_cells.map(|(h, c)| (h, pick(c, &included))),
        cluster_ids: cluster_cells.map(|(h, c)| (h, pick(c, &included))),
        shown: settings
            .columns
            .shown()
            .iter()
            .enumerate()
            .map(|(n, (name, _))| {
                let (_, c) = cells(&table, first_shown + n, true);
                (name.clone(), pick(c, &included))
            })
            .collect(),
        raw,
        spread_raw,
        excluded,
        missing_moderator,
        scale: if artifacts.any() {
            ReadingScale::Same
        } else {
            settings.measure.reading_scale()
        },
        table: TableFacts {
            delimiter: Delimiter::of(table.delimiter),
            sheet: table.sheet.as_ref().map(|s| s.name.clone()),
            rows: table.len(),
            blank_rows: table.blank_rows,
            decimal_note: table.decimal.note(&table.source),
            label_column: table.column(0).map(|c| c.header.clone()),
            label_found: table
                .headers
                .iter()
                .any(|h| h.eq_ignore_ascii_case(&settings.label.0)),
        },
        included,
        places,
    })
}

/// The `--spread-by` characteristics' values, typed like moderators: a
/// characteristic that is also a moderator shares the moderator's values.
///
/// # Errors
/// Those of [`design::classify`].
fn spread_columns(
    settings: &FitSettings,
    table: &Table,
    columns: &[Option<usize>],
    raw: &[RawModerator],
    places: &Places,
    source: &str,
) -> Result<Vec<RawModerator>> {
    let specs = &settings.answers.spread_by;
    specs
        .iter()
        .zip(columns)
        .map(|(spec, col)| match col {
            Some(j) => {
                let col = table.column(*j).expect("required column present");
                let cells: Vec<&str> = (0..table.len()).map(|i| col.get(i)).collect();
                design::classify(spec, &cells, &table.lines, (places, &col.header), source)
            }
            None => {
                let m = settings
                    .moderators
                    .iter()
                    .position(|m| m.name == spec.name)
                    .expect("a spread term without a column of its own is a moderator");
                Ok(raw[m].clone())
            }
        })
        .collect()
}

/// A requested column's header and cells (one per table row), trimmed or as read.
fn cells(table: &Table, j: usize, trim: bool) -> (String, Vec<String>) {
    let col = table.column(j).expect("required column present");
    let cell = |i: usize| {
        let c = col.get(i);
        if trim { c.trim() } else { c }.to_string()
    };
    (col.header.clone(), (0..table.len()).map(cell).collect())
}

/// The entries of the included rows, taken out of a per-row list.
fn pick(mut all: Vec<String>, included: &[usize]) -> Vec<String> {
    included
        .iter()
        .map(|&i| std::mem::take(&mut all[i]))
        .collect()
}

/// The label of every row: the label cell, or "line N" when it (or the
/// column) is missing ("row N" in a spreadsheet, N being the sheet's row).
fn labels(table: &Table) -> Vec<String> {
    let word = if table.sheet.is_some() || table.delimiter == crate::input::PARQUET {
        "row"
    } else {
        "line"
    };
    let number = |i: usize| format!("{word} {}", table.lines[i]);
    match table.column(0) {
        Some(c) => (0..table.len())
            .map(|i| {
                let l = c.get(i);
                if l.is_empty() {
                    number(i)
                } else {
                    l.to_string()
                }
            })
            .collect(),
        None => (0..table.len()).map(number).collect(),
    }
}

/// Splits the rows into those the model uses and those left out (no
/// effect, or a missing moderator or spread value), in file order.
fn include(
    settings: &FitSettings,
    rows: &[RowEffect],
    (raw, spread_raw): (&[RawModerator], &[RawModerator]),
    labels: &[String],
    lines: &[u64],
) -> (Vec<usize>, Vec<Excluded>) {
    let mut included = Vec::new();
    let mut excluded = Vec::new();
    for (i, row) in rows.iter().enumerate() {
        let reason = match row {
            RowEffect::Excluded(why) => Some(why.clone()),
            RowEffect::Value { .. } => settings
                .moderators
                .iter()
                .zip(raw)
                .find(|(_, r)| !r.present(i))
                .map(|(m, _)| format!("missing moderator {}", m.name))
                .or_else(|| {
                    settings
                        .answers
                        .spread_by
                        .iter()
                        .zip(spread_raw)
                        .find(|(_, r)| !r.present(i))
                        .map(|(m, _)| format!("missing spread characteristic {}", m.name))
                }),
        };
        match reason {
            Some(reason) => excluded.push(Excluded {
                study: labels[i].clone(),
                line: lines[i],
                reason,
            }),
            None => included.push(i),
        }
    }
    (included, excluded)
}

/// Refuses a job with no usable study, or only one.
/// The largest |effect| the model is fitted on.
pub const MAX_EFFECT: f64 = 1e50;
/// Sampling variances are fitted between 1/[`MAX_VARIANCE`] and [`MAX_VARIANCE`].
pub const MAX_VARIANCE: f64 = 1e100;

/// Refuses an effect or a sampling variance outside the range in which the
/// fit's sums stay representable: the REML score needs Σ w_i² and
/// Σ w_i² r_i² with w_i = 1/(v_i + τ²), which underflow or overflow double
/// precision (about 1e±308) when |y| or 1/v is near 1e100 or beyond — the
/// restricted likelihood then silently loses its correction term (REML
/// turns into ML) and rank checks or searches fail for the wrong reason.
/// With |y| ≤ [`MAX_EFFECT`] and v within [`MAX_VARIANCE`]^±1 every such
/// sum stays below about 1e300; real effects are many orders inside it.
///
/// # Errors
/// [`Error::Model`] naming the line, the value and asking to rescale.
fn check_range(
    source: &str,
    y: &[f64],
    v: &[f64],
    included: &[usize],
    (lines, places): (&[u64], &Places),
) -> Result<()> {
    let bad = (0..y.len())
        .find(|&i| y[i].abs() > MAX_EFFECT || v[i] > MAX_VARIANCE || v[i] < 1.0 / MAX_VARIANCE);
    let Some(i) = bad else {
        return Ok(());
    };
    let (what, value) = if y[i].abs() > MAX_EFFECT {
        ("effect", y[i])
    } else {
        ("sampling variance", v[i])
    };
    Err(Error::Model(format!(
        "{source}: {}: the {what} is {value:e}, outside the range pondus can fit (effects \
         up to {MAX_EFFECT:e} in size, sampling variances from {:e} to {MAX_VARIANCE:e}); at \
         this scale the sums of the fit leave the range of floating-point numbers. Express the \
         effects in other units (divide or multiply the columns by a power of ten) and run again",
        places.row(lines[included[i]]),
        1.0 / MAX_VARIANCE
    )))
}

fn check_count(
    source: &str,
    included: &[usize],
    excluded: &[Excluded],
    places: &Places,
) -> Result<()> {
    if included.is_empty() {
        return Err(Error::Model(format!(
            "{source}: no study has every value the model needs ({} rows left out; the first: {}, {})",
            excluded.len(),
            places.row(excluded[0].line),
            excluded[0].reason
        )));
    }
    if included.len() == 1 {
        return Err(Error::Model(format!(
            "{source}: only one study is usable; no between-study heterogeneity can be estimated and \
             there is nothing to pool. At least 2 studies are needed (3 or more to say much)"
        )));
    }
    Ok(())
}
