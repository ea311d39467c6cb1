//! The effects of every row of a table, kept column by column, and their
//! computation from the table's cells.

use super::route::Route;
use super::{check_route_columns, compute_row, is_inequality, shorten};
use super::{ColumnMap, Measure, RowEffect, RowValues};
use crate::error::{CellProblem, CellProblems, Result};
use crate::input::number::{invalid_hint, Cell};
use crate::input::{Column, Table};
use crate::support::pieces;
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

/// Computes effects for every row. `first` is the index of the first measure
/// column in the table's requests (the measure's roles are consecutive).
/// The rows are worked in the fixed pieces of [`pieces`] on every core and
/// merged in row order, so the result and the problems listed are those
/// of one pass in row order, whatever the number of threads.
///
/// # Errors
/// [`Error::MissingColumn`](crate::error::Error::MissingColumn) when
/// `effect` has none of its precision columns;
/// [`Error::Cells`](crate::error::Error::Cells) listing every cell that is
/// not a number or is out of range.
pub fn compute(
    measure: Measure,
    map: &ColumnMap,
    table: &Table,
    first: usize,
) -> Result<EffectColumn> {
    use rayon::prelude::*;
    check_route_columns(measure, map, table, first)?;
    let cells = Cells::new(measure, map, table, first);
    let n = table.len();
    let mut out = EffectColumn {
        y: vec![0.0; n],
        v: vec![0.0; n],
        from: vec![Route::Means; n],
        ..EffectColumn::default()
    };
    let rare: Vec<Rare> = if n <= pieces::ROWS {
        vec![cells.piece(0, &mut out.y, &mut out.v, &mut out.from)]
    } else {
        let step = pieces::ROWS;
        out.y
            .par_chunks_mut(step)
            .zip(out.v.par_chunks_mut(step))
            .zip(out.from.par_chunks_mut(step))
            .enumerate()
            .map(|(c, ((y, v), from))| cells.piece(c * step, y, v, from))
            .collect()
    };
    let mut problems = Vec::new();
    let mut total = 0usize;
    for r in rare {
        out.excluded.extend(r.excluded);
        out.notes.extend(r.notes);
        out.checks.extend(r.checks);
        total += r.total;
        let room = CellProblems::MAX_LISTED - problems.len();
        problems.extend(r.problems.into_iter().take(room));
    }
    CellProblems::check(&table.source, problems, total)?;
    Ok(out)
}

/// [`compute`] for the usual large table of effects given with their
/// variances (the measure's only columns, on the scale analysed) in which
/// every row has both numbers and a variance above 0: the two columns'
/// values are taken out of the table (moved, not copied, so no second
/// 16 bytes a row exist beside them) and every row's route is the
/// variance; the same values, routes and (no) notes [`compute`] gives such
/// a table. None, the table untouched, for any other table.
///
/// # Errors
/// Those of [`compute`] for a missing column.
pub fn take_plain(
    measure: Measure,
    map: &ColumnMap,
    table: &mut Table,
    first: usize,
) -> Result<Option<EffectColumn>> {
    use rayon::prelude::*;
    check_route_columns(measure, map, table, first)?;
    let plain = {
        let cells = Cells::new(measure, map, table, first);
        let numbers = cells
            .effects_and_variances()
            .and_then(|(e, v)| e.numbers().zip(v.numbers()));
        numbers.is_some_and(|(y, v)| {
            y.par_chunks(pieces::ROWS)
                .zip(v.par_chunks(pieces::ROWS))
                .all(|(y, v)| {
                    y.iter()
                        .zip(v)
                        .fold(true, |all, (y, v)| all & !y.is_nan() & (*v > 0.0))
                })
        })
    };
    if !plain {
        return Ok(None);
    }
    let n = table.len();
    let mut take = |j: usize| {
        table.columns[first + j]
            .as_mut()
            .and_then(Column::take_numbers)
            .expect("a column of numbers without invalid cells, checked above")
    };
    let (y, v) = (take(0), take(1));
    Ok(Some(EffectColumn {
        y,
        v,
        from: vec![Route::Variance; n],
        ..EffectColumn::default()
    }))
}

/// What [`compute`] reads: the measure, the map of its columns and the
/// table with the measure's columns (None for one not in the file).
struct Cells<'a> {
    measure: Measure,
    map: &'a ColumnMap,
    table: &'a Table,
    columns: Vec<Option<&'a Column>>,
}

/// The rare parts of a piece of rows, by table row: rows left out, notes,
/// checks, the first [`CellProblems::MAX_LISTED`] cell problems and their
/// count.
#[derive(Default)]
struct Rare {
    excluded: Vec<(usize, String)>,
    notes: Vec<(usize, String)>,
    checks: Vec<(usize, String)>,
    problems: Vec<CellProblem>,
    total: usize,
}

impl Rare {
    fn problem(&mut self, p: CellProblem) {
        self.total += 1;
        if self.problems.len() < CellProblems::MAX_LISTED {
            self.problems.push(p);
        }
    }
}

impl<'a> Cells<'a> {
    /// The measure's columns of `table`, the first at `first`.
    fn new(measure: Measure, map: &'a ColumnMap, table: &'a Table, first: usize) -> Self {
        Cells {
            measure,
            map,
            table,
            columns: (0..measure.roles().len())
                .map(|j| table.column(first + j))
                .collect(),
        }
    }

    /// The effect and variance columns, when the measure is effects as
    /// supplied on the scale analysed (no `--effect-scale log`) and they
    /// are its only columns in the table (no se or interval to check them
    /// against).
    fn effects_and_variances(&self) -> Option<(&Column, &Column)> {
        let roles = self.measure.roles();
        let names: Vec<&str> = roles.iter().map(|r| r.name).collect();
        if self.measure != Measure::Effect
            || self.map.reading().log_scale
            || names[..] != ["effect", "variance", "se", "ci_low", "ci_high"]
        {
            return None;
        }
        match self.columns[..] {
            [Some(e), Some(v), None, None, None] => Some((e, v)),
            _ => None,
        }
    }

    /// The effects of the rows `first..first + y.len()` into `y`, `v` and
    /// `from` (as [`EffectColumn::push`] would store them).
    fn piece(&self, first: usize, y: &mut [f64], v: &mut [f64], from: &mut [Route]) -> Rare {
        let roles = self.measure.roles();
        let table = self.table;
        let mut rare = Rare::default();
        let mut values = vec![None; roles.len()];
        let pair = self.effects_and_variances();
        for n in 0..y.len() {
            let row = first + n;
            // The usual row of effects given with their variances: both
            // numbers, the variance above 0, taken as they stand (what
            // `compute_row` makes of such a row); any other row below.
            if let Some((e, var)) = pair {
                if let (Some(ey), Some(ev)) = (e.value(row), var.value(row)) {
                    if ev > 0.0 {
                        (y[n], v[n], from[n]) = (ey, ev, Route::Variance);
                        continue;
                    }
                }
            }
            let mut bad = false;
            let mut inequality = None;
            for (j, r) in roles.iter().enumerate() {
                values[j] = None;
                let Some(col) = self.columns[j] else {
                    continue;
                };
                match col.number(row) {
                    Cell::Missing => {}
                    Cell::Value(x) => values[j] = Some(x),
                    Cell::Invalid => {
                        let text = col.text(row);
                        if r.name == "p" && is_inequality(&text) {
                            inequality = Some(text);
                            continue;
                        }
                        bad = true;
                        rare.problem(CellProblem {
                            line: table.lines[row],
                            column: col.header.clone(),
                            value: shorten(&text),
                            message: format!("{} for {}", invalid_hint(&text), r.name),
                            cell: table.cell_place(row, col),
                        });
                    }
                }
            }
            let effect = if bad {
                RowEffect::Excluded("invalid value".into())
            } else {
                let view = RowValues::new(roles, &values).with_inequality(inequality.as_deref());
                match compute_row(self.measure, self.map.reading(), view) {
                    Ok(e) => e,
                    Err(p) => {
                        let j = roles.iter().position(|r| r.name == p.role).unwrap_or(0);
                        let (column, value, cell) = match self.columns[j] {
                            Some(c) => (
                                c.header.clone(),
                                shorten(&c.text(row)),
                                table.cell_place(row, c),
                            ),
                            None => (self.map.header(p.role), String::new(), None),
                        };
                        rare.problem(CellProblem {
                            line: table.lines[row],
                            column,
                            value,
                            message: p.message,
                            cell,
                        });
                        RowEffect::Excluded("invalid value".into())
                    }
                }
            };
            match effect {
                RowEffect::Value {
                    y: ey,
                    v: ev,
                    note,
                    from: route,
                    check,
                } => {
                    (y[n], v[n], from[n]) = (ey, ev, route);
                    rare.notes.extend(note.map(|t| (row, t)));
                    rare.checks.extend(check.map(|t| (row, t)));
                }
                RowEffect::Excluded(why) => {
                    (y[n], v[n], from[n]) = (f64::NAN, f64::NAN, Route::Means);
                    rare.excluded.push((row, why));
                }
            }
        }
        rare
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::input::{read_table_from, TableBytes};

    /// Every row of effects with their variances gets what the general
    /// per-row computation gives it, whether it takes the shortcut (both
    /// numbers, the variance above 0) or not: zero, negative and missing
    /// variances, missing marks, text, numbers not in their shortest form,
    /// and the same rows with an se column beside (no shortcut at all).
    #[test]
    fn effects_with_variances_are_those_of_the_general_route() {
        let rows = [
            ("0.5", "0.04"),
            ("-1.25", "0.10"),
            ("0.30", "1e-2"),
            ("0.2", "0"),
            ("0.2", "-0.5"),
            ("", "0.1"),
            ("0.2", ""),
            ("NA", "0.1"),
            ("0.2", "NA"),
            ("abc", "0.1"),
            ("0.2", "x"),
            ("1e400", "0.1"),
            ("0.7", "3"),
        ];
        for with_se in [false, true] {
            let mut csv = String::from(if with_se {
                "effect,variance,se\n"
            } else {
                "effect,variance\n"
            });
            for (e, v) in rows {
                csv.push_str(&format!("{e},{v}{}\n", if with_se { "," } else { "" }));
            }
            let map = ColumnMap::default();
            let requests = map.requests(Measure::Effect);
            // Read from a file, as the fit job reads one (its columns of
            // numbers parsed as they are read).
            let dir = tempfile::tempdir().unwrap();
            let path = dir.path().join("t.csv");
            std::fs::write(&path, &csv).unwrap();
            let table =
                read_table_from("t.csv", TableBytes::File(&path), &requests, None, None).unwrap();
            let cells = Cells {
                measure: Measure::Effect,
                map: &map,
                table: &table,
                columns: (0..5).map(|j| table.column(j)).collect(),
            };
            assert_eq!(cells.effects_and_variances().is_some(), !with_se);
            // The columns hold numbers, so the shortcut is taken.
            assert_eq!(table.column(0).and_then(|c| c.value(0)), Some(0.5));
            let n = table.len();
            let (mut y, mut v, mut from) = (vec![0.0; n], vec![0.0; n], vec![Route::Means; n]);
            let rare = cells.piece(0, &mut y, &mut v, &mut from);
            // Row by row through the general route alone.
            let general = Cells {
                measure: Measure::Slope,
                ..cells
            };
            assert!(general.effects_and_variances().is_none());
            let roles = Measure::Effect.roles();
            let mut problems = 0;
            for row in 0..n {
                let values: Vec<Option<f64>> = (0..5)
                    .map(|j| match table.column(j).map(|c| c.number(row)) {
                        Some(Cell::Value(x)) => Some(x),
                        _ => None,
                    })
                    .collect();
                let invalid = (0..5)
                    .filter(|&j| {
                        table
                            .column(j)
                            .is_some_and(|c| c.number(row) == Cell::Invalid)
                    })
                    .count();
                let want = if invalid > 0 {
                    problems += invalid;
                    RowEffect::Excluded("invalid value".into())
                } else {
                    compute_row(
                        Measure::Effect,
                        map.reading(),
                        RowValues::new(roles, &values),
                    )
                    .unwrap_or_else(|_| {
                        problems += 1;
                        RowEffect::Excluded("invalid value".into())
                    })
                };
                let excluded = rare.excluded.iter().find(|(r, _)| *r == row);
                match want {
                    RowEffect::Value {
                        y: wy,
                        v: wv,
                        from: wf,
                        ..
                    } => {
                        assert!(excluded.is_none(), "row {row}");
                        assert_eq!(
                            (y[row].to_bits(), v[row].to_bits(), from[row]),
                            (wy.to_bits(), wv.to_bits(), wf),
                            "row {row}"
                        );
                    }
                    RowEffect::Excluded(why) => {
                        assert_eq!(
                            excluded.map(|(_, w)| w.as_str()),
                            Some(why.as_str()),
                            "row {row}"
                        );
                        assert!(y[row].is_nan() && v[row].is_nan(), "row {row}");
                    }
                }
            }
            // The rows with a problem are listed (the cells that are not
            // numbers, variances not above 0).
            assert!(problems >= 4);
            assert_eq!(rare.total, problems, "{with_se}");
        }
    }

    /// A table whose every row has an effect and a variance above 0 has
    /// its two columns taken, with the values, routes and (no) notes that
    /// [`compute`] gives; any other table is left to [`compute`], untouched.
    #[test]
    fn plain_effects_are_taken_as_compute_makes_them() {
        let map = ColumnMap::default();
        let requests = map.requests(Measure::Effect);
        let dir = tempfile::tempdir().unwrap();
        let read = |csv: &str| {
            let path = dir.path().join("t.csv");
            std::fs::write(&path, csv).unwrap();
            read_table_from("t.csv", TableBytes::File(&path), &requests, None, None).unwrap()
        };
        let plain = "effect,variance\n0.5,0.04\n-1.25,0.10\n0.30,1e-2\n-0.0,3\n";
        let want = compute(Measure::Effect, &map, &read(plain), 0).unwrap();
        let mut table = read(plain);
        let got = take_plain(Measure::Effect, &map, &mut table, 0)
            .unwrap()
            .expect("every row plain");
        let bits = |x: &[f64]| x.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&got.y), bits(&want.y));
        assert_eq!(bits(&got.v), bits(&want.v));
        assert_eq!(got.from, want.from);
        assert!(got.excluded.is_empty() && got.notes.is_empty() && got.checks.is_empty());
        assert!(table
            .column(0)
            .and_then(Column::numbers)
            .is_some_and(<[f64]>::is_empty));
        // A variance of 0, a missing effect, text, or an se column beside:
        // not taken, and the table still holds its cells.
        for csv in [
            "effect,variance\n0.5,0.04\n0.2,0\n",
            "effect,variance\n0.5,0.04\n,0.1\n",
            "effect,variance\n0.5,0.04\nabc,0.1\n",
            "effect,variance,se\n0.5,0.04,0.2\n0.1,0.1,\n",
        ] {
            let mut table = read(csv);
            assert!(
                take_plain(Measure::Effect, &map, &mut table, 0)
                    .unwrap()
                    .is_none(),
                "{csv}"
            );
            assert_eq!(
                table.column(0).map(|c| c.text(0).into_owned()).as_deref(),
                Some("0.5")
            );
        }
    }
}
