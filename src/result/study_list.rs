//! The included studies' records ([`Study`]), kept column by column.
//!
//! A report of a million studies would hold a million [`Study`] values of
//! about 330 bytes each (a label `String`, a moderator `Vec`, a cell map);
//! kept as columns — labels back to back in one text ([`Texts`]), numbers in one vector
//! per field, moderator levels as indices into the levels seen, notes and
//! cells only where there are any — the same records take about 140 bytes
//! a study. A [`Study`] is built when it is read ([`StudyList::get`],
//! [`StudyList::iter`]), and the JSON serialisation writes one after the
//! other, so `--json` never holds them all as values. The JSON and its
//! schema are exactly those of a `Vec<Study>`.

use super::{AtValue, Interval, Route, Shrunken, Study};
use crate::support::texts::Texts;
use serde::{Serialize, Serializer};
use std::collections::{BTreeMap, HashMap};

/// A moderator value of one study: a number, or the index of a level in
/// [`StudyList::levels`].
#[derive(Debug, Clone, Copy, PartialEq)]
enum Cell {
    Number(f64),
    Level(u32),
}

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
    /// Moderator values, `width[i]` of them per study, back to back.
    moderators: Vec<Cell>,
    /// Where study `i`'s moderator values end in `moderators`.
    moderator_ends: Vec<usize>,
    /// The levels seen, each once, and where each is in that list.
    levels: Vec<String>,
    level_index: HashMap<String, u32>,
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

    /// An empty list with room for `n` studies with labels of
    /// `label_bytes` bytes in all and `width` moderator values each: the
    /// per-study columns are allocated once, at their final size (growing
    /// them by doubling would leave freed blocks of up to half their size
    /// each, which the allocator keeps; at a million studies that was most
    /// of the memory `--json` took beyond the report's own).
    pub fn with_capacity(n: usize, label_bytes: usize, width: usize) -> Self {
        StudyList {
            labels: Texts::with_capacity_bytes(n, label_bytes),
            lines: Vec::with_capacity(n),
            effect: Vec::with_capacity(n),
            variance: Vec::with_capacity(n),
            ci_low: Vec::with_capacity(n),
            ci_high: Vec::with_capacity(n),
            weight: Vec::with_capacity(n),
            fitted: Vec::with_capacity(n),
            residual: Vec::with_capacity(n),
            std_residual: Vec::with_capacity(n),
            moderators: Vec::with_capacity(n.saturating_mul(width)),
            moderator_ends: Vec::with_capacity(n),
            routes: Vec::with_capacity(n),
            ..Self::default()
        }
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
        for m in s.moderators {
            let cell = match m {
                AtValue::Number(x) => Cell::Number(x),
                AtValue::Level(l) => Cell::Level(self.level(l)),
            };
            self.moderators.push(cell);
        }
        self.moderator_ends.push(self.moderators.len());
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

    /// The index of level `l` in [`StudyList::levels`], adding it when new.
    fn level(&mut self, l: String) -> u32 {
        if let Some(&j) = self.level_index.get(&l) {
            return j;
        }
        let j = u32::try_from(self.levels.len()).expect("fewer than 2^32 distinct levels");
        self.levels.push(l.clone());
        self.level_index.insert(l, j);
        j
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
        self.value(self.cells_of(i)[j])
    }

    /// Study `i`'s moderator values.
    fn cells_of(&self, i: usize) -> &[Cell] {
        let start = if i == 0 {
            0
        } else {
            self.moderator_ends[i - 1]
        };
        &self.moderators[start..self.moderator_ends[i]]
    }

    /// A stored moderator value as reported.
    fn value(&self, c: Cell) -> AtValue {
        match c {
            Cell::Number(x) => AtValue::Number(x),
            Cell::Level(l) => AtValue::Level(self.levels[l as usize].clone()),
        }
    }

    /// Study `i`'s record.
    ///
    /// # Panics
    /// When `i` is not below [`StudyList::len`].
    pub fn get(&self, i: usize) -> Study {
        let moderators = self.cells_of(i).iter().map(|&c| self.value(c)).collect();
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
        // A list made with room for the records holds the same records.
        let labels: usize = records.iter().map(|r| r.study.len()).sum();
        let mut sized = StudyList::with_capacity(records.len(), labels, 2);
        for r in &records {
            sized.push(r.clone());
        }
        assert_eq!(
            serde_json::to_string(&sized).unwrap(),
            serde_json::to_string(&records).unwrap()
        );
        assert!(sized.lines.capacity() >= records.len());
    }

    #[test]
    fn empty_list_is_an_empty_array() {
        let list = StudyList::new();
        assert!(list.is_empty());
        assert_eq!(serde_json::to_string(&list).unwrap(), "[]");
    }
}
