//! The included studies' records ([`Study`]), kept column by column.
//!
//! A report of a million studies would hold a million [`Study`] values of
//! about 330 bytes each (a label `String`, a moderator `Vec`, a cell map);
//! kept as columns — labels back to back in one text ([`Texts`]), numbers in one vector
//! per field, one column per moderator (numbers, or level codes), notes and
//! cells only where there are any — the same records take about 100 bytes
//! a study with three numeric moderators. A fit hands its columns over
//! whole ([`StudyColumns`], moved, not copied). A [`Study`] is built when
//! it is read ([`StudyList::get`], [`StudyList::iter`]), and the JSON
//! serialisation writes one after the other, so `--json` never holds them
//! all as values. The JSON and its
//! schema are exactly those of a `Vec<Study>`.

pub use super::study_values::ModeratorColumn;
use super::study_values::Values;
use super::{AtValue, Interval, Route, Shrunken, Study};
use crate::support::texts::Texts;
use serde::{Serialize, Serializer};
use std::collections::BTreeMap;

/// The included studies' records, in input order (see the module docs).
#[derive(Debug, Clone, Default)]
pub struct StudyList {
    labels: Texts,
    lines: Vec<u64>,
    effect: Vec<f64>,
    variance: Vec<f64>,
    ci_low: Vec<f64>,
    ci_high: Vec<f64>,
    weight: Vec<f64>,
    fitted: Vec<f64>,
    residual: Vec<f64>,
    std_residual: Vec<Option<f64>>,
    /// One column per moderator, in the model's order.
    moderators: Vec<Values>,
    /// Notes of the studies that have one: (study, note), in study order.
    notes: Vec<(usize, String)>,
    /// Shrunken estimates: empty when no study has one, else one per study.
    shrunken: Vec<Option<Shrunken>>,
    routes: Vec<Route>,
    /// Cells of further columns: empty when no study has any, else one map
    /// per study.
    cells: Vec<BTreeMap<String, String>>,
}

impl StudyList {
    /// An empty list.
    pub fn new() -> Self {
        Self::default()
    }

    /// Number of studies.
    pub fn len(&self) -> usize {
        self.lines.len()
    }

    /// Whether there is no study.
    pub fn is_empty(&self) -> bool {
        self.lines.is_empty()
    }

    /// Adds a study at the end.
    pub fn push(&mut self, s: Study) {
        let n = self.len();
        self.labels.push(&s.study);
        self.lines.push(s.line);
        self.effect.push(s.effect);
        self.variance.push(s.variance);
        self.ci_low.push(s.ci.ci_low);
        self.ci_high.push(s.ci.ci_high);
        self.weight.push(s.weight);
        self.fitted.push(s.fitted);
        self.residual.push(s.residual);
        self.std_residual.push(s.std_residual);
        let width = s.moderators.len();
        for column in self.moderators.iter_mut().skip(width) {
            column.push(None);
        }
        for (j, m) in s.moderators.into_iter().enumerate() {
            match self.moderators.get_mut(j) {
                Some(column) => column.push(Some(m)),
                None => self.moderators.push(Values::starting(n, m)),
            }
        }
        if let Some(note) = s.note {
            self.notes.push((n, note));
        }
        if s.shrunken.is_some() || !self.shrunken.is_empty() {
            self.shrunken.resize(n, None);
            self.shrunken.push(s.shrunken);
        }
        self.routes.push(s.computed_from);
        if !s.cells.is_empty() || !self.cells.is_empty() {
            self.cells.resize(n, BTreeMap::new());
            self.cells.push(s.cells);
        }
    }

    /// Study `i`'s label.
    ///
    /// # Panics
    /// When `i` is not below [`StudyList::len`].
    pub fn label(&self, i: usize) -> &str {
        self.labels.get(i)
    }

    /// Every study's effect, in order.
    pub fn effects(&self) -> &[f64] {
        &self.effect
    }

    /// Every study's sampling variance, in order.
    pub fn variances(&self) -> &[f64] {
        &self.variance
    }

    /// Every study's share of the total weight (percent), in order.
    pub fn weights(&self) -> &[f64] {
        &self.weight
    }

    /// Whether any study has a shrunken estimate.
    pub fn any_shrunken(&self) -> bool {
        self.shrunken.iter().any(Option::is_some)
    }

    /// Whether any study has a note.
    pub fn any_note(&self) -> bool {
        !self.notes.is_empty()
    }

    /// Study `i`'s moderator value `j` (in the order of the model's
    /// moderators).
    ///
    /// # Panics
    /// When `i` or `j` is out of range.
    pub fn moderator(&self, i: usize, j: usize) -> AtValue {
        self.moderators[j]
            .get(i)
            .expect("the study has a value of this moderator")
    }

    /// Study `i`'s record.
    ///
    /// # Panics
    /// When `i` is not below [`StudyList::len`].
    pub fn get(&self, i: usize) -> Study {
        // A study's values are the first ones of the columns (a study
        // pushed with fewer values than others has none in the last).
        let moderators = self.moderators.iter().map_while(|c| c.get(i)).collect();
        let note = self
            .notes
            .binary_search_by_key(&i, |(n, _)| *n)
            .ok()
            .map(|k| self.notes[k].1.clone());
        Study {
            study: self.label(i).to_string(),
            line: self.lines[i],
            effect: self.effect[i],
            variance: self.variance[i],
            ci: Interval::new(self.ci_low[i], self.ci_high[i]),
            weight: self.weight[i],
            fitted: self.fitted[i],
            residual: self.residual[i],
            std_residual: self.std_residual[i],
            moderators,
            note,
            shrunken: self.shrunken.get(i).copied().flatten(),
            computed_from: self.routes[i],
            cells: self.cells.get(i).cloned().unwrap_or_default(),
        }
    }

    /// The records in order, each built as it is read.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = Study> + '_ {
        (0..self.len()).map(|i| self.get(i))
    }
}

/// Every column of a [`StudyList`], each with one entry per study (or,
/// for `notes`, `shrunken` and `cells`, as documented on each), handed
/// over whole: a fit's report moves the studies' labels, lines, effects,
/// variances, routes and moderator values into its list instead of copying
/// them (at a million studies, ~130 MB less at the peak of `--json`).
#[derive(Debug, Clone, Default)]
pub struct StudyColumns {
    /// Labels.
    pub labels: Texts,
    /// Lines in the input.
    pub lines: Vec<u64>,
    /// Effects.
    pub effect: Vec<f64>,
    /// Sampling variances.
    pub variance: Vec<f64>,
    /// Lower ends of the studies' own intervals.
    pub ci_low: Vec<f64>,
    /// Upper ends of the studies' own intervals.
    pub ci_high: Vec<f64>,
    /// Shares of the total weight (percent).
    pub weight: Vec<f64>,
    /// Fitted values.
    pub fitted: Vec<f64>,
    /// Residuals.
    pub residual: Vec<f64>,
    /// Standardised residuals.
    pub std_residual: Vec<Option<f64>>,
    /// One column per moderator, in the model's order.
    pub moderators: Vec<ModeratorColumn>,
    /// Notes of the studies that have one: (study, note), in study order.
    pub notes: Vec<(usize, String)>,
    /// Shrunken estimates: empty, or one per study.
    pub shrunken: Vec<Option<Shrunken>>,
    /// Routes the effects were computed from.
    pub routes: Vec<Route>,
    /// Cells of further columns: empty, or one map per study.
    pub cells: Vec<BTreeMap<String, String>>,
}

impl From<StudyColumns> for StudyList {
    /// # Panics
    /// When a column's length is not the number of labels (a fault of the
    /// code that built them, not of any input).
    fn from(c: StudyColumns) -> Self {
        let n = c.labels.len();
        let lengths = [
            c.lines.len(),
            c.effect.len(),
            c.variance.len(),
            c.ci_low.len(),
            c.ci_high.len(),
            c.weight.len(),
            c.fitted.len(),
            c.residual.len(),
            c.std_residual.len(),
            c.routes.len(),
        ];
        let moderators: Vec<Values> = c.moderators.into_iter().map(Values::from).collect();
        assert!(
            lengths.iter().all(|&l| l == n)
                && moderators.iter().all(|m| m.len() == n)
                && [c.shrunken.len(), c.cells.len()]
                    .iter()
                    .all(|&l| l == 0 || l == n)
                && c.notes.iter().all(|(i, _)| *i < n),
            "a study list's columns have one entry per study"
        );
        StudyList {
            labels: c.labels,
            lines: c.lines,
            effect: c.effect,
            variance: c.variance,
            ci_low: c.ci_low,
            ci_high: c.ci_high,
            weight: c.weight,
            fitted: c.fitted,
            residual: c.residual,
            std_residual: c.std_residual,
            moderators,
            notes: c.notes,
            shrunken: c.shrunken,
            routes: c.routes,
            cells: c.cells,
        }
    }
}

impl FromIterator<Study> for StudyList {
    fn from_iter<I: IntoIterator<Item = Study>>(iter: I) -> Self {
        let mut list = StudyList::new();
        for s in iter {
            list.push(s);
        }
        list
    }
}

impl From<Vec<Study>> for StudyList {
    fn from(v: Vec<Study>) -> Self {
        v.into_iter().collect()
    }
}

/// Written as a JSON array of [`Study`] objects, one built at a time.
impl Serialize for StudyList {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.collect_seq(self.iter())
    }
}

/// The schema of a `Vec<Study>`, which is what the JSON holds.
impl schemars::JsonSchema for StudyList {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        <Vec<Study> as schemars::JsonSchema>::schema_name()
    }

    fn inline_schema() -> bool {
        <Vec<Study> as schemars::JsonSchema>::inline_schema()
    }

    fn json_schema(generator: &mut schemars::SchemaGenerator) -> schemars::Schema {
        <Vec<Study> as schemars::JsonSchema>::json_schema(generator)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn study(n: u64, level: Option<&str>, note: bool) -> Study {
        let x = n as f64;
        Study {
            study: format!("study {n}"),
            line: n + 1,
            effect: x / 10.0,
            variance: 0.01 * x + 0.001,
            ci: Interval::new(x - 1.0, x + 1.0),
            weight: 100.0 / (x + 1.0),
            fitted: 0.3,
            residual: x / 10.0 - 0.3,
            std_residual: (n % 3 != 0).then_some(x / 7.0),
            moderators: vec![
                AtValue::Number(x * 2.5),
                AtValue::Level(level.unwrap_or("none").to_string()),
            ],
            note: note.then(|| format!("note {n}")),
            shrunken: None,
            computed_from: if n % 2 == 0 {
                Route::Means
            } else {
                Route::Counts
            },
            cells: if n == 4 {
                BTreeMap::from([("country".to_string(), "NZ".to_string())])
            } else {
                BTreeMap::new()
            },
        }
    }

    /// Every record reads back as it was pushed, and the list serialises to
    /// exactly the JSON of the vector of the same records.
    #[test]
    fn records_read_back_and_serialise_as_a_vector() {
        let records: Vec<Study> = (0..7)
            .map(|n| {
                study(
                    n,
                    [Some("a"), Some("b"), None][n as usize % 3],
                    n == 2 || n == 5,
                )
            })
            .collect();
        let list: StudyList = records.clone().into();
        assert_eq!(list.len(), 7);
        for (i, r) in records.iter().enumerate() {
            let back = list.get(i);
            assert_eq!(
                serde_json::to_string(&back).unwrap(),
                serde_json::to_string(r).unwrap(),
                "study {i}"
            );
            assert_eq!(list.label(i), r.study);
            assert_eq!(list.moderator(i, 1), r.moderators[1]);
        }
        assert_eq!(
            serde_json::to_string(&list).unwrap(),
            serde_json::to_string(&records).unwrap()
        );
        assert!(list.any_note());
        assert!(!list.any_shrunken());
        assert_eq!(list.effects()[3], 0.3);
        // A list handed its columns whole holds the same records.
        let column = |f: fn(&Study) -> f64| records.iter().map(f).collect::<Vec<f64>>();
        let whole: StudyList = StudyColumns {
            labels: records.iter().map(|r| r.study.as_str()).collect(),
            lines: records.iter().map(|r| r.line).collect(),
            effect: column(|r| r.effect),
            variance: column(|r| r.variance),
            ci_low: column(|r| r.ci.ci_low),
            ci_high: column(|r| r.ci.ci_high),
            weight: column(|r| r.weight),
            fitted: column(|r| r.fitted),
            residual: column(|r| r.residual),
            std_residual: records.iter().map(|r| r.std_residual).collect(),
            moderators: vec![
                ModeratorColumn::Numbers(column(|r| match r.moderators[0] {
                    AtValue::Number(x) => x,
                    AtValue::Level(_) => f64::NAN,
                })),
                ModeratorColumn::Levels {
                    names: vec!["a".into(), "b".into(), "none".into()],
                    codes: (0..records.len() as u32).map(|n| n % 3).collect(),
                },
            ],
            notes: records
                .iter()
                .enumerate()
                .filter_map(|(i, r)| r.note.clone().map(|n| (i, n)))
                .collect(),
            shrunken: Vec::new(),
            routes: records.iter().map(|r| r.computed_from).collect(),
            cells: records.iter().map(|r| r.cells.clone()).collect(),
        }
        .into();
        assert_eq!(
            serde_json::to_string(&whole).unwrap(),
            serde_json::to_string(&records).unwrap()
        );
    }

    #[test]
    fn empty_list_is_an_empty_array() {
        let list = StudyList::new();
        assert!(list.is_empty());
        assert_eq!(serde_json::to_string(&list).unwrap(), "[]");
    }
}
