//! From moderator columns to a design matrix: type detection, dummy coding,
//! centring, product terms, and the checks that the model can be estimated.

use crate::error::{Error, Result};
use crate::input::cells::read_number;
use crate::input::number::{is_missing, Cell};
use crate::input::Places;
use crate::support::flag::Flag;
use crate::support::pieces;
use crate::support::rows::Rows;
use rayon::prelude::*;
use serde::Serialize;
use std::borrow::Cow;

/// What the user asked for one moderator.
#[derive(Debug, Clone, PartialEq)]
pub struct ModeratorSpec {
    /// Column header.
    pub name: String,
    /// Treat as categorical even when every value is a number.
    pub categorical: bool,
    /// Reference level of a categorical moderator.
    pub reference: Option<String>,
    /// Mean-centre a numeric moderator.
    pub center: bool,
}

pub use crate::result::{Moderator, ModeratorKind};
pub use values::{Categories, Numbers};

mod fill;
mod rank;
mod sweep;
mod values;

pub(crate) use sweep::moderator_sweeps;

/// The per-row raw values of one moderator (all rows of the table).
#[derive(Debug, Clone)]
pub enum RawModerator {
    /// Every non-missing value parsed as a number.
    Numeric(Numbers),
    /// Labels.
    Text(Categories),
}

impl RawModerator {
    /// Whether row `i` has a value.
    pub fn present(&self, i: usize) -> bool {
        match self {
            RawModerator::Numeric(v) => v.get(i).is_some(),
            RawModerator::Text(v) => v.get(i).is_some(),
        }
    }

    /// Whether every row has a value ([`RawModerator::present`] for each
    /// row, in one scan that needs no branch per row).
    pub fn all_present(&self) -> bool {
        match self {
            RawModerator::Numeric(v) => {
                use rayon::prelude::*;
                v.0.par_chunks(1 << 16)
                    .all(|c| c.iter().fold(true, |all, x| all & !x.is_nan()))
            }
            RawModerator::Text(v) => v.all_present(),
        }
    }
}

/// Reads a moderator's cells and decides its type.
///
/// # Errors
/// [`Error::Usage`] when a column is mostly numbers but has a few cells that
/// are not, which is far more often a typo than a categorical moderator; the
/// message names those cells by line (CSV) or sheet address (spreadsheet)
/// through `places`, `header` being the column's header as in the table.
pub fn classify(
    spec: &ModeratorSpec,
    cells: &[&str],
    lines: &[u64],
    (places, header): (&Places, &str),
    source: &str,
) -> Result<RawModerator> {
    classify_cells(
        spec,
        (
            cells.len(),
            |i| read_number(cells[i]),
            |i| Cow::Borrowed(cells[i]),
        ),
        lines,
        (places, header),
        source,
    )
}

/// [`classify`] over `rows` cells, cell i read as a number by `number(i)`
/// (as [`read_number`] reads its text) and as text by `text(i)` (a table's
/// column read in place, without a list of its cells). The cells are read in
/// the fixed pieces of [`pieces`] on every core; the values and the cells
/// that are not numbers come back in row order.
///
/// # Errors
/// As [`classify`].
pub fn classify_cells<'a>(
    spec: &ModeratorSpec,
    (rows, number, text): (
        usize,
        impl Fn(usize) -> Cell + Sync,
        impl Fn(usize) -> Cow<'a, str> + Sync,
    ),
    lines: &[u64],
    (places, header): (&Places, &str),
    source: &str,
) -> Result<RawModerator> {
    // A label with its blanks trimmed, None when missing.
    let label = |i: usize| {
        let c = text(i);
        (!is_missing(&c)).then(|| match c {
            Cow::Borrowed(c) => Cow::Borrowed(c.trim()),
            Cow::Owned(c) => Cow::Owned(c.trim().to_string()),
        })
    };
    if spec.categorical {
        return Ok(RawModerator::Text(Categories::from_rows(rows, label)));
    }
    let mut numeric = vec![0.0; rows];
    // Per piece: the cells present and the rows of those that are not numbers.
    let parts = pieces::fill(&mut numeric, |first, out| {
        let mut present = 0usize;
        let mut bad = Vec::new();
        for (n, x) in out.iter_mut().enumerate() {
            *x = match number(first + n) {
                Cell::Missing => f64::NAN,
                Cell::Value(v) => {
                    present += 1;
                    v
                }
                Cell::Invalid => {
                    present += 1;
                    bad.push(first + n);
                    f64::NAN
                }
            };
        }
        (present, bad)
    });
    let present: usize = parts.iter().map(|p| p.0).sum();
    let bad: Vec<usize> = parts.into_iter().flat_map(|p| p.1).collect();
    if !bad.is_empty() {
        let good = present - bad.len();
        if good * 2 > present {
            let shown: Vec<String> = bad
                .iter()
                .take(5)
                .map(|&i| format!("{} ('{}')", places.at(lines[i], header), text(i)))
                .collect();
            return Err(Error::usage(
                Flag::Moderator,
                format!(
                    "{source}: column '{}' is mostly numbers but not at {}; fix those cells, or pass \
                     {} {} to treat every value as a category label",
                    spec.name,
                    shown.join(", "),
                    Flag::Categorical,
                    spec.name
                ),
            ));
        }
        return Ok(RawModerator::Text(Categories::from_rows(rows, label)));
    }
    Ok(RawModerator::Numeric(Numbers(numeric)))
}

/// A term of the model.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Term {
    /// Label, e.g. `intercept`, `dose`, `region=south`, `dose×region=south`.
    pub name: String,
}

/// The design matrix and what it is made of.
#[derive(Debug, Clone)]
pub struct Design {
    /// Row-major k × p.
    pub x: Vec<f64>,
    /// Number of columns.
    pub p: usize,
    /// Terms, intercept first.
    pub terms: Vec<Term>,
    /// Moderators in the order given.
    pub moderators: Vec<Moderator>,
    /// Interactions as moderator-index pairs.
    pub interactions: Vec<(usize, usize)>,
    /// What the standardisation of the fit reads of the rows of `x` as
    /// built ([`super::Swept`]: from the rank check's sweep, the squares
    /// summed beside the rank check's triangle), for a design of
    /// [`super::wls::PARALLEL_MIN_ROWS`] rows or more; None below, and
    /// once taken.
    pub(crate) swept: Option<super::Swept>,
}

/// One study's value of one moderator, ready for coding: a number on the
/// original scale, or the index of a level in the moderator's sorted levels.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Coded {
    Number(f64),
    Level(usize),
}

/// How the moderators' values become a design row: each moderator's
/// columns (their first and one-past-last position in the row) and, for a
/// categorical one, the position of its reference level among its levels.
struct Coder<'a> {
    mods: &'a [Moderator],
    interactions: &'a [(usize, usize)],
    spans: Vec<(usize, usize)>,
    references: Vec<usize>,
    width: usize,
}

impl<'a> Coder<'a> {
    fn new(mods: &'a [Moderator], interactions: &'a [(usize, usize)]) -> Self {
        let mut spans = Vec::with_capacity(mods.len());
        let mut references = Vec::with_capacity(mods.len());
        let mut width = 1;
        for m in mods {
            let (columns, reference) = match &m.kind {
                ModeratorKind::Numeric { .. } => (1, 0),
                ModeratorKind::Categorical {
                    levels, reference, ..
                } => {
                    let r = levels.iter().position(|l| l == reference);
                    (
                        levels.len() - usize::from(r.is_some()),
                        r.unwrap_or(usize::MAX),
                    )
                }
            };
            spans.push((width, width + columns));
            references.push(reference);
            width += columns;
        }
        for &(a, b) in interactions {
            width += (spans[a].1 - spans[a].0) * (spans[b].1 - spans[b].0);
        }
        Coder {
            mods,
            interactions,
            spans,
            references,
            width,
        }
    }

    /// Writes one design row into `out` (`width` entries): 1, each
    /// moderator's columns (a centred or plain number, or dummies against
    /// the reference level), then the products of the paired moderators'
    /// columns.
    fn encode(&self, value: impl Fn(usize) -> Coded, out: &mut [f64]) {
        out[0] = 1.0;
        for (j, m) in self.mods.iter().enumerate() {
            let (start, end) = self.spans[j];
            match (&m.kind, value(j)) {
                (ModeratorKind::Numeric { mean, centered, .. }, Coded::Number(x)) => {
                    out[start] = if *centered { x - mean } else { x };
                }
                (ModeratorKind::Categorical { levels, .. }, Coded::Level(code)) => {
                    let dummies = (0..levels.len()).filter(|&l| l != self.references[j]);
                    for (o, l) in out[start..end].iter_mut().zip(dummies) {
                        *o = if l == code { 1.0 } else { 0.0 };
                    }
                }
                // A number for a categorical moderator or a level for a
                // numeric one cannot be built by the callers below.
                _ => out[start..end].fill(f64::NAN),
            }
        }
        let mut c = self.spans.last().map_or(1, |s| s.1);
        for &(a, b) in self.interactions {
            for ia in self.spans[a].0..self.spans[a].1 {
                for ib in self.spans[b].0..self.spans[b].1 {
                    out[c] = out[ia] * out[ib];
                    c += 1;
                }
            }
        }
    }
}

fn term_names(m: &Moderator) -> Vec<String> {
    match &m.kind {
        ModeratorKind::Numeric { .. } => vec![m.name.clone()],
        ModeratorKind::Categorical {
            levels, reference, ..
        } => levels
            .iter()
            .filter(|x| *x != reference)
            .map(|x| format!("{}={}", m.name, x))
            .collect(),
    }
}

/// One study's values of every moderator: a number or a label.
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    /// For a numeric moderator (on the original scale).
    Number(f64),
    /// For a categorical moderator.
    Label(String),
}

/// Builds the design row for one study from its moderator values (in moderator order).
///
/// # Errors
/// [`Error::Usage`] for a label that is not a level, or a value of the wrong kind.
pub fn design_row(
    design_mods: &[Moderator],
    interactions: &[(usize, usize)],
    values: &[Value],
) -> Result<Vec<f64>> {
    let mut coded = Vec::with_capacity(values.len());
    for (m, v) in design_mods.iter().zip(values) {
        coded.push(match (&m.kind, v) {
            (ModeratorKind::Numeric { .. }, Value::Number(x)) => Coded::Number(*x),
            (ModeratorKind::Categorical { levels, .. }, Value::Label(l)) => {
                let code = levels.iter().position(|x| x == l).ok_or_else(|| {
                    Error::usage(
                        Flag::At,
                        format!(
                            "'{l}' is not a level of moderator '{}'; its levels are: {}",
                            m.name,
                            levels.join(", ")
                        ),
                    )
                })?;
                Coded::Level(code)
            }
            (ModeratorKind::Numeric { .. }, Value::Label(l)) => {
                return Err(Error::usage(
                    Flag::At,
                    format!("'{l}' is not a number (moderator '{}' is numeric)", m.name),
                ))
            }
            (ModeratorKind::Categorical { levels, .. }, Value::Number(x)) => {
                return Err(Error::usage(
                    Flag::At,
                    format!(
                        "moderator '{}' is categorical; give one of its levels ({}) instead of {x}",
                        m.name,
                        levels.join(", ")
                    ),
                ))
            }
        });
    }
    let coder = Coder::new(design_mods, interactions);
    let mut row = vec![0.0; coder.width];
    coder.encode(|j| coded[j], &mut row);
    Ok(row)
}

/// Builds the design from the included rows' raw moderator values.
///
/// # Errors
/// [`Error::Model`] for a moderator with a single value, an unknown reference
/// level, too many terms for the studies, or collinear terms.
pub fn build(
    specs: &[ModeratorSpec],
    raw: &[RawModerator],
    included: &Rows,
    interactions: &[(usize, usize)],
) -> Result<Design> {
    let sweeps = moderator_sweeps(raw, included);
    build_swept(specs, raw, included, interactions, &sweeps)
}

/// [`build`] with each moderator's sweep over the included rows already
/// made ([`moderator_sweeps`]).
///
/// # Errors
/// Those of [`build`].
pub(crate) fn build_swept(
    specs: &[ModeratorSpec],
    raw: &[RawModerator],
    included: &Rows,
    interactions: &[(usize, usize)],
    sweeps: &[Option<super::ColumnSweep>],
) -> Result<Design> {
    let k = included.len();
    // The moderators side by side on every core; the first error in
    // moderator order is the one reported.
    let moderators = specs
        .par_iter()
        .zip(raw)
        .enumerate()
        .map(|(j, (spec, r))| {
            let kind = match r {
                RawModerator::Numeric(v) => {
                    numeric_kind(spec, v, included, sweeps.get(j).and_then(Option::as_ref))?
                }
                RawModerator::Text(v) => categorical_kind(spec, v, included)?,
            };
            Ok(Moderator {
                name: spec.name.clone(),
                kind,
            })
        })
        .collect::<Vec<Result<_>>>()
        .into_iter()
        .collect::<Result<Vec<_>>>()?;

    let mut terms = vec![Term {
        name: "intercept".into(),
    }];
    for m in &moderators {
        terms.extend(term_names(m).into_iter().map(|name| Term { name }));
    }
    for &(a, b) in interactions {
        for na in term_names(&moderators[a]) {
            for nb in term_names(&moderators[b]) {
                terms.push(Term {
                    name: format!("{na}×{nb}"),
                });
            }
        }
    }
    let p = terms.len();
    if k <= p {
        return Err(Error::Model(format!(
            "the model has {p} coefficients ({}) but only {k} studies are included; it needs at \
             least {} studies (one more than the coefficients) to estimate the residual \
             heterogeneity. Use fewer moderators or levels",
            terms
                .iter()
                .map(|t| t.name.as_str())
                .collect::<Vec<_>>()
                .join(", "),
            p + 1
        )));
    }
    let codes = level_codes(raw, &moderators);
    let coder = Coder::new(&moderators, interactions);
    debug_assert_eq!(coder.width, p);
    let x = fill::rows(&coder, raw, &codes, included);
    // Each column's sum and ends, from the moderators' sweeps when they
    // give them (checked against a sweep of the design in debug builds).
    let sweep = match sweep::from_moderators(&coder, sweeps, k) {
        Some(s) => {
            debug_assert!(
                sweep::same_bits(&s, &super::ColumnSweep::of(&x, k, p)),
                "the design's sweep from the moderators' differs from a sweep of the design"
            );
            s
        }
        None => super::ColumnSweep::of(&x, k, p),
    };
    // The rank check's triangle on every core; beside it, on one, the sums
    // of squares the standardisation will need (a sweep in row order).
    let (rank, swept) = rayon::join(
        || rank::check_rank(&x, k, p, &terms, &sweep),
        || (k >= super::wls::PARALLEL_MIN_ROWS).then(|| super::Swept::of(&x, k, p, &sweep)),
    );
    rank?;
    Ok(Design {
        swept,
        x,
        p,
        terms,
        moderators,
        interactions: interactions.to_vec(),
    })
}

/// The kind of a numeric moderator among the included studies: mean, SD
/// (divisor k − 1), range, whether it is centred.
///
/// # Errors
/// [`Error::Model`] when it has one value in every included study.
fn numeric_kind(
    spec: &ModeratorSpec,
    v: &Numbers,
    included: &Rows,
    sweep: Option<&super::ColumnSweep>,
) -> Result<ModeratorKind> {
    let k = included.len();
    let xs = v.of_rows(included);
    // The sum, smallest and largest value in one sweep (each the same
    // running value in row order as a sweep of its own; made before when
    // given), then the squares.
    let made;
    let sweep = match sweep {
        Some(s) => s,
        None => {
            made = super::ColumnSweep::of(&xs, k, 1);
            &made
        }
    };
    let (min, max) = (sweep.lo[0], sweep.hi[0]);
    let mean = sweep.sum[0] / k as f64;
    let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (k as f64 - 1.0).max(1.0);
    if min == max {
        return Err(Error::Model(format!(
            "moderator '{}' has the same value ({min}) in every included study, so its \
             effect cannot be estimated; drop it",
            spec.name
        )));
    }
    Ok(ModeratorKind::Numeric {
        mean,
        sd: var.sqrt(),
        min,
        max,
        centered: spec.center,
        centered_at: spec.center.then_some(mean),
    })
}

/// The most levels a categorical moderator may have: each level is a
/// column of the dense design (k × p numbers, and O(k·p²) for the rank
/// check), so thousands of levels would take gigabytes and minutes; a
/// moderator with more than this many levels is refused with advice.
pub const MAX_LEVELS: usize = 200;

/// The kind of a categorical moderator among the included studies: its
/// levels (sorted), their counts and the reference level.
///
/// # Errors
/// [`Error::Usage`] for `--center` on it or an unknown `--reference` level;
/// [`Error::Model`] when only one level is present.
fn categorical_kind(
    spec: &ModeratorSpec,
    v: &Categories,
    included: &Rows,
) -> Result<ModeratorKind> {
    if spec.center {
        return Err(Error::usage(
            Flag::Center,
            format!(
                "moderator '{}' is categorical and cannot be centred",
                spec.name
            ),
        ));
    }
    // Levels are the labels as written (`1` and `01` are two levels), each
    // once: counted in one pass over the rows' codes, then sorted.
    let mut tally = v.tally(included);
    if tally.len() > MAX_LEVELS {
        return Err(Error::Model(format!(
            "moderator '{}' has {} levels among the included studies; pondus codes at most \
             {MAX_LEVELS} levels of a categorical moderator (one coefficient each). Group the \
             levels into fewer categories, or, when they are studies, labs or sites whose \
             effects are related, give the column to {} instead",
            spec.name,
            tally.len(),
            Flag::Cluster
        )));
    }
    sort_levels(&mut tally, |&(l, _)| l);
    let levels: Vec<String> = tally.iter().map(|(l, _)| l.to_string()).collect();
    if levels.len() < 2 {
        return Err(Error::Model(format!(
            "moderator '{}' has only one level ('{}') among the included studies, so its \
             effect cannot be estimated; drop it",
            spec.name,
            levels.first().cloned().unwrap_or_default()
        )));
    }
    let counts = tally.iter().map(|&(_, n)| n).collect();
    let reference = match &spec.reference {
        Some(r) if levels.contains(r) => r.clone(),
        Some(r) => {
            return Err(Error::usage(
                Flag::Reference,
                format!(
                    "'{r}' is not a level of moderator '{}' among the included studies; \
                     its levels are: {}",
                    spec.name,
                    levels.join(", ")
                ),
            ))
        }
        None => levels[0].clone(),
    };
    Ok(ModeratorKind::Categorical {
        levels,
        counts,
        reference,
    })
}

/// Level codes of every categorical moderator, by row (None for a numeric
/// one); a missing or unknown level codes as 0 (such rows are excluded).
fn level_codes(raw: &[RawModerator], moderators: &[Moderator]) -> Vec<Option<Vec<usize>>> {
    raw.iter()
        .zip(moderators)
        .map(|(r, m)| match (r, &m.kind) {
            (RawModerator::Text(v), ModeratorKind::Categorical { levels, .. }) => {
                let by_code = v.positions(levels);
                // In fixed pieces on every core (each row on its own).
                let mut codes = vec![0; v.len()];
                pieces::fill(&mut codes, |first, out| {
                    for (n, o) in out.iter_mut().enumerate() {
                        *o = v.code(first + n).and_then(|c| by_code[c]).unwrap_or(0);
                    }
                });
                Some(codes)
            }
            _ => None,
        })
        .collect()
}

/// Sorts levels, each named by `label`: numerically when every level is a
/// number, else by text.
fn sort_levels<T>(levels: &mut [T], label: impl Fn(&T) -> &str) {
    let all_numbers = levels.iter().all(|l| label(l).parse::<f64>().is_ok());
    if all_numbers {
        levels.sort_by(|a, b| {
            let (a, b) = (label(a), label(b));
            let (x, y) = (
                a.parse::<f64>().unwrap_or(0.0),
                b.parse::<f64>().unwrap_or(0.0),
            );
            // Equal numbers written differently (`1`, `01`) keep a fixed order.
            x.total_cmp(&y).then_with(|| a.cmp(b))
        });
    } else {
        levels.sort_by(|a, b| label(a).cmp(label(b)));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(name: &str) -> ModeratorSpec {
        ModeratorSpec {
            name: name.into(),
            categorical: false,
            reference: None,
            center: false,
        }
    }

    #[test]
    fn type_detection() {
        let lines = [2, 3, 4, 5];
        let r = classify(
            &spec("a"),
            &["1", "2", "", "3.5"],
            &lines,
            (&Places::csv(), "a"),
            "f",
        )
        .unwrap();
        assert!(
            matches!(r, RawModerator::Numeric(ref v) if v.get(2).is_none() && v.get(3) == Some(3.5))
        );
        let r = classify(
            &spec("a"),
            &["x", "y", "NA", "x"],
            &lines,
            (&Places::csv(), "a"),
            "f",
        )
        .unwrap();
        assert!(matches!(r, RawModerator::Text(_)));
        let e = classify(
            &spec("a"),
            &["1", "2", "1O", "3"],
            &lines,
            (&Places::csv(), "a"),
            "f",
        )
        .unwrap_err();
        assert!(e.to_string().contains("line 4 ('1O')"), "{e}");
        let sheet = crate::input::Table {
            source: "f.ods".into(),
            delimiter: 0,
            headers: vec!["study".into(), "a".into()],
            columns: Vec::new(),
            lines: lines.to_vec(),
            blank_rows: 0,
            decimal: crate::input::DecimalChoice {
                mark: crate::input::number::DecimalMark::Point,
                how: crate::input::DecimalHow::Default,
            },
            sheet: Some(crate::input::SheetOrigin {
                name: "bad dose".into(),
                first_column: 0,
            }),
        }
        .places();
        let e = classify(
            &spec("a"),
            &["1", "2", "1O", "3"],
            &lines,
            (&sheet, "a"),
            "f",
        )
        .unwrap_err();
        assert!(e.to_string().contains("cell 'bad dose'!B4 ('1O')"), "{e}");
        let mut s = spec("a");
        s.categorical = true;
        assert!(matches!(
            classify(
                &s,
                &["1", "2", "1O", "3"],
                &lines,
                (&Places::csv(), "a"),
                "f"
            )
            .unwrap(),
            RawModerator::Text(_)
        ));
    }

    #[test]
    fn dummy_coding_and_interaction() {
        let raw = vec![
            RawModerator::Numeric(
                vec![Some(1.0), Some(2.0), Some(3.0), Some(4.0), Some(5.0)].into(),
            ),
            RawModerator::Text(
                ["b", "a", "c", "a", "b"]
                    .iter()
                    .map(|s| Some(s.to_string()))
                    .collect(),
            ),
        ];
        let specs = vec![spec("dose"), spec("arm")];
        let d = build(&specs, &raw, &Rows::Every(5), &[]).unwrap();
        // The same rows listed one by one give the same design.
        let listed = build(&specs, &raw, &Rows::Listed(vec![0, 1, 2, 3, 4]), &[]).unwrap();
        assert_eq!(listed.x, d.x);
        let names: Vec<&str> = d.terms.iter().map(|t| t.name.as_str()).collect();
        assert_eq!(names, ["intercept", "dose", "arm=b", "arm=c"]);
        assert_eq!(&d.x[0..4], &[1.0, 1.0, 1.0, 0.0]);
        assert_eq!(&d.x[8..12], &[1.0, 3.0, 0.0, 1.0]);
        // Five studies cannot carry an interaction on top (p = 6).
        assert!(build(&specs, &raw, &Rows::Every(5), &[(0, 1)]).is_err());
    }

    #[test]
    fn constant_and_collinear_moderators() {
        let raw = vec![RawModerator::Numeric(vec![Some(2.0); 4].into())];
        let e = build(&[spec("c")], &raw, &Rows::Every(4), &[]).unwrap_err();
        assert!(e.to_string().contains("same value"), "{e}");
        let raw = vec![
            RawModerator::Numeric(vec![Some(1.0), Some(2.0), Some(3.0), Some(4.0)].into()),
            RawModerator::Numeric(vec![Some(2.0), Some(4.0), Some(6.0), Some(8.0)].into()),
        ];
        let e = build(&[spec("a"), spec("b")], &raw, &Rows::Every(4), &[]).unwrap_err();
        assert!(
            e.to_string().contains("term 'b' is a linear combination"),
            "{e}"
        );
    }

    #[test]
    fn reference_and_numeric_level_order() {
        let raw = vec![RawModerator::Text(
            ["10", "2", "10", "2", "3"]
                .iter()
                .map(|s| Some(s.to_string()))
                .collect(),
        )];
        let mut s = spec("g");
        s.categorical = true;
        let d = build(std::slice::from_ref(&s), &raw, &Rows::Every(5), &[]).unwrap();
        assert_eq!(d.terms[1].name, "g=3");
        s.reference = Some("10".into());
        let d = build(std::slice::from_ref(&s), &raw, &Rows::Every(5), &[]).unwrap();
        assert_eq!(d.terms[1].name, "g=2");
        s.reference = Some("7".into());
        assert!(build(&[s], &raw, &Rows::Every(5), &[]).is_err());
    }
}
