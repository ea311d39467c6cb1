//! Stage 2 of `fit`: collect the studies. Effects from the measure's
//! columns, artifact corrections, the type of each moderator (read over all
//! rows), and which rows the model can use. The table's cells end with this
//! stage: what later stages need is copied out, and the table is dropped
//! before the model's arrays exist.

use super::columns::Columns;
use super::FitSettings;
use crate::effect::artifact::{self, Corrected};
use crate::effect::route::Route;
use crate::effect::{self, EffectColumn, ReadingScale};
use crate::error::{Error, Result};
use crate::input::{Column, Delimiter, Lines, Places, Table};
use crate::model::design::{self, Numbers, RawModerator};
use crate::result::Excluded;
use crate::support::flag::Flag;
use crate::support::rows::Rows;
use crate::support::texts::Texts;
use std::borrow::Cow;
use std::collections::BTreeMap;

/// The studies of the job. Fields "per study" hold the included rows in
/// file order; [`Studies::raw`] holds every table row (the design builder
/// reads it through [`Studies::included`]).
#[derive(Debug)]
pub struct Studies {
    /// Table rows the model uses, in file order.
    pub included: Rows,
    /// Effect per study, on the analysis scale.
    pub y: Vec<f64>,
    /// Sampling variance per study.
    pub v: Vec<f64>,
    /// Label per study (its line when the label cell or column is missing).
    pub labels: Texts,
    /// Line in the file per study.
    pub lines: Lines,
    /// Adjustments made to a study's effect, in words (a zero-cell
    /// correction), with the study's position; in study order, few or none.
    pub notes: Vec<(usize, String)>,
    /// The route each study's effect was computed from.
    pub routes: Vec<Route>,
    /// Disagreements between a study's routes, or asymmetric limits, in
    /// words, with the study's position; in study order, few or none.
    pub checks: Vec<(usize, String)>,
    /// Artifact correction per study (None for a study without one); empty
    /// when no correction is asked for.
    pub corrections: Vec<Option<Corrected>>,
    /// The `--cumulative-by` header and its cell per study.
    pub order: Option<(String, Vec<String>)>,
    /// The `--cluster` header and its (trimmed) id per study.
    pub cluster_ids: Option<(String, Vec<String>)>,
    /// The columns carried for the plots: each name as asked and its
    /// (trimmed) cell per study.
    pub shown: Vec<(String, Vec<String>)>,
    /// Every moderator's values over all table rows, typed. A numeric
    /// moderator's values are emptied once the design is built when no
    /// per-study record will be ([`Studies::release_numeric_moderators`]).
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

impl Studies {
    /// Frees the values of the numeric moderators (left empty), for a job
    /// that builds no per-study record: after the design is built only the
    /// records read them (the subgroups read the categorical ones).
    pub fn release_numeric_moderators(&mut self) {
        for r in &mut self.raw {
            if let RawModerator::Numeric(v) = r {
                *v = Default::default();
            }
        }
    }
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
/// and decides which rows the model uses. Each of the table's columns is
/// freed as soon as what later stages need has been taken from it.
///
/// # Errors
/// Errors of [`effect::compute`], [`artifact::apply`] and
/// [`design::classify`]; [`Error::Model`] when no row, or only one, is usable.
pub fn collect(settings: &FitSettings, source: &str, columns: Columns) -> Result<Studies> {
    let Columns {
        mut table,
        first_measure,
        first_moderator,
        first_artifact,
        spread,
        order,
        cluster,
        first_shown,
    } = columns;
    let facts = table_facts(settings, &table);
    let places = table.places();
    let artifacts = &settings.interpret.artifacts;
    // Corrections for artifacts read the measure's columns again: only
    // without them may the effects take those columns' values.
    let taken = if artifacts.any() {
        None
    } else {
        effect::take_plain(
            settings.measure,
            &settings.columns,
            &mut table,
            first_measure,
        )?
    };
    let mut effects = match taken {
        Some(effects) => effects,
        None => effect::compute(settings.measure, &settings.columns, &table, first_measure)?,
    };
    let corrections = artifact::apply(
        artifacts,
        &table,
        first_measure,
        first_measure + 1,
        first_artifact,
        &mut effects,
    )?;
    let artifact_columns = artifacts.columns().len();
    release(&mut table, first_measure..first_moderator);
    release(
        &mut table,
        first_artifact..first_artifact + artifact_columns,
    );
    let raw = moderators(settings, source, &mut table, first_moderator, &places)?;
    let spread_raw = spread_columns(settings, &table, &spread, &raw, &places, source)?;
    for j in spread.iter().flatten() {
        release(&mut table, *j..*j + 1);
    }
    let (included, excluded) = include(settings, &effects, (&raw, &spread_raw), &table);
    let missing_moderator = effects.len() - included.len() - effects.excluded.len();
    check_count(source, &included, &excluded, &places)?;
    let (y, v) = (
        pick_f64(effects.y, &included),
        pick_f64(effects.v, &included),
    );
    check_range(source, &y, &v, &included, (&table.lines, &places))?;
    let every_row = matches!(included, Rows::Every(_));
    let labels = labels(&mut table, &included);
    release(&mut table, 0..1);
    Ok(Studies {
        y,
        v,
        notes: by_study(effects.notes, &included),
        routes: if every_row {
            effects.from
        } else {
            included.iter().map(|i| effects.from[i]).collect()
        },
        checks: by_study(effects.checks, &included),
        labels,
        lines: Lines::of(&table.lines, &included),
        corrections: if corrections.is_empty() {
            Vec::new()
        } else {
            included.iter().map(|i| corrections[i]).collect()
        },
        order: order.map(|j| cells(&table, j, false, &included)),
        cluster_ids: cluster.map(|j| cells(&table, j, true, &included)),
        shown: settings
            .columns
            .shown()
            .iter()
            .enumerate()
            .map(|(n, (name, _))| {
                (
                    name.clone(),
                    cells(&table, first_shown + n, true, &included).1,
                )
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
        table: facts,
        included,
        places,
    })
}

/// What the report says about `table`.
fn table_facts(settings: &FitSettings, table: &Table) -> TableFacts {
    TableFacts {
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
    }
}

/// Frees the table's columns `range` (their cells are no longer needed).
fn release(table: &mut Table, range: std::ops::Range<usize>) {
    for c in table.columns.iter_mut().take(range.end).skip(range.start) {
        *c = None;
    }
}

/// Every moderator's values over all table rows, typed; each column is
/// freed once typed.
///
/// # Errors
/// [`Error::Usage`] for a moderator given twice; those of [`design::classify`].
fn moderators(
    settings: &FitSettings,
    source: &str,
    table: &mut Table,
    first_moderator: usize,
    places: &Places,
) -> Result<Vec<RawModerator>> {
    let headers: Vec<String> = (0..settings.moderators.len())
        .map(|j| {
            let col = table.column(first_moderator + j);
            col.expect("required column present").header.clone()
        })
        .collect();
    let mut raw = Vec::with_capacity(settings.moderators.len());
    for (j, spec) in settings.moderators.iter().enumerate() {
        let header = &headers[j];
        // Two spellings of one header (`--moderator m --moderator M`, the
        // second matched ignoring case) are one moderator given twice.
        if let Some(i) = headers[..j].iter().position(|h| h == header) {
            return Err(Error::usage(
                Flag::Moderator,
                format!(
                    "'{}' and '{}' both name the column '{header}' (headers match ignoring case \
                     when unique); give the moderator once",
                    settings.moderators[i].name, spec.name
                ),
            ));
        }
        // A column read as numbers without an invalid cell is the
        // moderator's values as they stand (NaN for a missing value).
        let slot = table.columns[first_moderator + j].as_mut();
        if let Some(values) = slot
            .filter(|_| !spec.categorical)
            .and_then(Column::take_numbers)
        {
            raw.push(RawModerator::Numeric(Numbers::from_values(values)));
            release(table, first_moderator + j..first_moderator + j + 1);
            continue;
        }
        let col = table
            .column(first_moderator + j)
            .expect("required column present");
        raw.push(design::classify_cells(
            spec,
            (table.len(), |i| col.number(i), |i| col.text(i)),
            &table.lines,
            (places, header),
            source,
        )?);
        release(table, first_moderator + j..first_moderator + j + 1);
    }
    Ok(raw)
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
                design::classify_cells(
                    spec,
                    (table.len(), |i| col.number(i), |i| col.text(i)),
                    &table.lines,
                    (places, &col.header),
                    source,
                )
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

/// A requested column's header and the cells of the included rows,
/// trimmed or as read.
fn cells(table: &Table, j: usize, trim: bool, included: &Rows) -> (String, Vec<String>) {
    let col = table.column(j).expect("required column present");
    let cell = |i: usize| {
        let c = col.text(i);
        if trim { c.trim() } else { &c }.to_string()
    };
    (col.header.clone(), included.iter().map(cell).collect())
}

/// The entries of the included rows, moved to the front of a per-row list
/// (`included` ascends, so each entry moves down or stays).
fn pick_f64(mut all: Vec<f64>, included: &Rows) -> Vec<f64> {
    let Rows::Listed(included) = included else {
        return all;
    };
    for (to, &from) in included.iter().enumerate() {
        all[to] = all[from];
    }
    all.truncate(included.len());
    all.shrink_to_fit();
    all
}

/// Texts kept by table row, renumbered by position among the included
/// rows (rows left out drop theirs).
fn by_study(by_row: BTreeMap<usize, String>, included: &Rows) -> Vec<(usize, String)> {
    by_row
        .into_iter()
        .filter_map(|(row, text)| included.position(row).map(|pos| (pos, text)))
        .collect()
}

/// The labels of the `included` rows (made in one pass: made in pieces on
/// both cores and joined, they took as long and 11 MB more at the peak on
/// the 1,000,000-study benchmark file).
///
/// When every row of the table is a study and has a label cell, the label
/// column is the list itself, moved out of the table instead of copied (at
/// a million studies the copy had taken ~9% of the job's CPU samples in a
/// profile); otherwise the labels are copied into a list of their exact size.
fn labels(table: &mut Table, included: &Rows) -> Texts {
    let every_row = matches!(included, Rows::Every(_));
    // Every row is a study here, so the column's cells are the labels.
    let labelled = |c: &Column| !c.any_empty();
    if let Some(slot) = table.columns.first_mut().filter(|_| every_row) {
        if slot.as_ref().is_some_and(labelled) {
            let mut cells = slot.take().map(Column::into_cells).unwrap_or_default();
            cells.shrink_to_fit();
            return cells;
        }
    }
    let bytes = included.iter().map(|i| label(table, i).len()).sum();
    let mut out = Texts::with_capacity_bytes(included.len(), bytes);
    for i in included.iter() {
        out.push(&label(table, i));
    }
    out
}

/// The label of row `i`: the label cell, or "line N" when it (or the
/// column) is missing ("row N" in a spreadsheet, N being the sheet's row).
fn label(table: &Table, i: usize) -> Cow<'_, str> {
    match table.column(0).map(|c| c.text(i)).filter(|l| !l.is_empty()) {
        Some(l) => l,
        None => {
            let word = if table.sheet.is_some() || table.delimiter == crate::input::PARQUET {
                "row"
            } else {
                "line"
            };
            Cow::Owned(format!("{word} {}", table.lines[i]))
        }
    }
}

/// Splits the rows into those the model uses and those left out (no
/// effect, or a missing moderator or spread value), in file order.
fn include(
    settings: &FitSettings,
    effects: &EffectColumn,
    (raw, spread_raw): (&[RawModerator], &[RawModerator]),
    table: &Table,
) -> (Rows, Vec<Excluded>) {
    // The usual case, every row complete, without a look at each row (and
    // without a list of them).
    if effects.excluded.is_empty() && raw.iter().chain(spread_raw).all(RawModerator::all_present) {
        return (Rows::Every(effects.len()), Vec::new());
    }
    let mut included = Vec::with_capacity(effects.len() - effects.excluded.len());
    let mut excluded = Vec::new();
    for i in 0..effects.len() {
        let reason = match effects.excluded.get(&i) {
            Some(why) => Some(why.clone()),
            None => settings
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
                study: label(table, i).into_owned(),
                line: table.lines[i],
                reason,
            }),
            None => included.push(i),
        }
    }
    (Rows::new(included, effects.len()), excluded)
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
    included: &Rows,
    (lines, places): (&[u64], &Places),
) -> Result<()> {
    // Comparisons, not a range's `contains`: a NaN compares false on both
    // sides and is not out of range here (as before; no included study
    // has one).
    #[allow(clippy::manual_range_contains)]
    let out =
        |y: f64, v: f64| (y.abs() > MAX_EFFECT) | (v > MAX_VARIANCE) | (v < 1.0 / MAX_VARIANCE);
    // Whether any is out of range, without a branch per study; which one
    // only then.
    let any = y.iter().zip(v).fold(false, |any, (&y, &v)| any | out(y, v));
    let bad = if any {
        (0..y.len()).find(|&i| out(y[i], v[i]))
    } else {
        None
    };
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
        places.row(lines[included.get(i)]),
        1.0 / MAX_VARIANCE
    )))
}

fn check_count(
    source: &str,
    included: &Rows,
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
