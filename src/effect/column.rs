//! The effects of every row of a table, kept column by column.

use super::route::Route;
use super::RowEffect;
use std::collections::BTreeMap;

/// Effects of every row of a table, column by column: every row has an
/// entry in `y`, `v` and `from`; the rare parts (rows left out, notes,
/// checks) are kept by row, so a million rows cost 17 bytes each.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct EffectColumn {
    /// Effect per row on the analysis scale (NaN for a row left out).
    pub y: Vec<f64>,
    /// Sampling variance per row (NaN for a row left out).
    pub v: Vec<f64>,
    /// The route each row's effect was computed from (meaningless for a
    /// row left out).
    pub from: Vec<Route>,
    /// The rows left out, with the reason in words.
    pub excluded: BTreeMap<usize, String>,
    /// Adjustments made to a row's effect, in words (a zero-cell correction).
    pub notes: BTreeMap<usize, String>,
    /// Disagreements between a row's routes, or asymmetric limits, in words.
    pub checks: BTreeMap<usize, String>,
}

impl EffectColumn {
    /// An empty column with room for `rows` rows.
    pub fn with_capacity(rows: usize) -> Self {
        EffectColumn {
            y: Vec::with_capacity(rows),
            v: Vec::with_capacity(rows),
            from: Vec::with_capacity(rows),
            ..EffectColumn::default()
        }
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.y.len()
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.y.is_empty()
    }

    /// Appends the next row.
    pub fn push(&mut self, row: RowEffect) {
        let i = self.len();
        match row {
            RowEffect::Value {
                y,
                v,
                note,
                from,
                check,
            } => {
                self.y.push(y);
                self.v.push(v);
                self.from.push(from);
                if let Some(n) = note {
                    self.notes.insert(i, n);
                }
                if let Some(c) = check {
                    self.checks.insert(i, c);
                }
            }
            RowEffect::Excluded(why) => {
                self.y.push(f64::NAN);
                self.v.push(f64::NAN);
                self.from.push(Route::Means);
                self.excluded.insert(i, why);
            }
        }
    }

    /// Whether row `i` has a usable effect.
    pub fn is_value(&self, i: usize) -> bool {
        !self.excluded.contains_key(&i)
    }

    /// Leaves row `i` out for `reason` (its note and check go with it).
    pub fn exclude(&mut self, i: usize, reason: String) {
        self.y[i] = f64::NAN;
        self.v[i] = f64::NAN;
        self.notes.remove(&i);
        self.checks.remove(&i);
        self.excluded.insert(i, reason);
    }

    /// Row `i` as a [`RowEffect`].
    pub fn row(&self, i: usize) -> RowEffect {
        match self.excluded.get(&i) {
            Some(why) => RowEffect::Excluded(why.clone()),
            None => RowEffect::Value {
                y: self.y[i],
                v: self.v[i],
                note: self.notes.get(&i).cloned(),
                from: self.from[i],
                check: self.checks.get(&i).cloned(),
            },
        }
    }
}
