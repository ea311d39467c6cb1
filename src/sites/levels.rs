//! Two-level columns: a group column x (`--effect smd`, `--effect log-or`)
//! or a binary outcome y (`--effect log-or`), given as 0/1 numbers or as
//! two text labels, coded 0/1 while the rows stream past.
//!
//! The coding of a row cannot wait for the end of the pass (each site's
//! moments are updated row by row), so it is fixed by the level named with
//! `--treat` / `--event` (that level is 1, any other 0), or, without it, by
//! the numbers themselves (1 is 1, anything else 0). Every distinct value is
//! recorded with its first line, and [`Coding::check`] refuses the column
//! after the pass when the coding was not the one asked for: more than two
//! values, one value only, a named level that never occurs, or text labels
//! without a named level.

use crate::error::{Error, Result};
use crate::input::number::is_missing;
use crate::support::flag::Flag;

/// Distinct values recorded for the messages; more are counted only.
const MAX_SEEN: usize = 12;

/// The coding of one two-level column, and the values it has met.
#[derive(Debug, Clone)]
pub struct Coding {
    /// `--treat` (for x) or `--event` (for y).
    level_flag: Flag,
    /// The level coded 1, as a comparison key (see [`key`]).
    level: Option<String>,
    /// The level as typed.
    level_text: Option<String>,
    /// Distinct values (as keys) with the line each first occurs on.
    seen: Vec<(String, u64)>,
    /// Whether more than [`MAX_SEEN`] distinct values occurred.
    more: bool,
    /// Cells already coded, as their trimmed bytes, with the code: a
    /// column repeats a few spellings, so most cells are found here
    /// without building their key.
    cache: Vec<(Vec<u8>, f64)>,
    /// How the places in [`Coding::seen`] are named: "line" (CSV) or "row"
    /// (Parquet).
    place_word: &'static str,
}

/// The comparison key of a cell: a number in its shortest form (so `1`,
/// `1.0` and ` 1 ` are one level), otherwise the trimmed text; None for an
/// empty cell or a missing mark.
fn key(text: &str) -> Option<String> {
    if is_missing(text) {
        return None;
    }
    let t = text.trim();
    Some(match t.parse::<f64>() {
        Ok(v) if v.is_finite() => format!("{v}"),
        _ => t.to_string(),
    })
}

impl Coding {
    /// The coding of a column whose level `level` (None: the number 1) is
    /// coded 1; `level_flag` is the flag that names it.
    pub fn new(level_flag: Flag, level: Option<String>) -> Self {
        Coding {
            level_flag,
            level: level.as_deref().and_then(key),
            level_text: level.map(|l| l.trim().to_string()),
            seen: Vec::new(),
            more: false,
            cache: Vec::new(),
            place_word: "line",
        }
    }

    /// Names the places of the values met as rows (a Parquet file's row
    /// numbers) instead of lines.
    pub fn in_rows(&mut self) {
        self.place_word = "row";
    }

    /// The column's own flag: `--x` for the group, `--y` for the outcome.
    fn column_flag(&self) -> Flag {
        if self.level_flag == Flag::Treat {
            Flag::X
        } else {
            Flag::Y
        }
    }

    /// Codes one cell: Some(1.0) for the level coded 1, Some(0.0) for any
    /// other value, None for an empty cell or missing mark.
    #[inline]
    pub fn code(&mut self, cell: &[u8], line: u64) -> Option<f64> {
        let trimmed = cell.trim_ascii();
        if let Some((_, v)) = self.cache.iter().find(|(c, _)| c == trimmed) {
            return Some(*v);
        }
        let v = self.code_new(cell, line)?;
        if self.cache.len() < MAX_SEEN {
            self.cache.push((trimmed.to_vec(), v));
        }
        Some(v)
    }

    /// [`Coding::code`] for a spelling not in the cache: its key, the
    /// value it is coded as, and the record of a new value.
    fn code_new(&mut self, cell: &[u8], line: u64) -> Option<f64> {
        let text = String::from_utf8_lossy(cell);
        let k = key(&text)?;
        let one = match &self.level {
            Some(l) => *l == k,
            None => k == "1",
        };
        if !self.seen.iter().any(|(s, _)| *s == k) {
            if self.seen.len() < MAX_SEEN {
                self.seen.push((k, line));
            } else {
                self.more = true;
            }
        }
        Some(if one { 1.0 } else { 0.0 })
    }

    /// The values found, quoted with their first lines.
    fn found(&self) -> String {
        let mut s = self
            .seen
            .iter()
            .map(|(v, l)| format!("'{v}' ({} {l})", self.place_word))
            .collect::<Vec<_>>()
            .join(", ");
        if self.more {
            s.push_str(" and more");
        }
        s
    }

    /// After the pass: the level that was coded 1, as it reads in the output.
    ///
    /// # Errors
    /// [`Error::Usage`] when the column (named `column`) has more than two
    /// values or only one, when the named level does not occur, or when
    /// it holds anything but 0 and 1 and no level was named.
    pub fn check(&self, column: &str) -> Result<String> {
        let (col_flag, flag) = (self.column_flag(), self.level_flag);
        let (what, keep) = if flag == Flag::Treat {
            (
                "a group column needs exactly two values (treatment and control)",
                "Keep the rows of two groups only",
            )
        } else {
            (
                "a binary outcome needs exactly two values (event and no event)",
                "Leave out the rows with any other value",
            )
        };
        if self.seen.len() > 2 {
            return Err(Error::usage(
                col_flag,
                format!(
                    "column '{column}' has more than two values: {}; {what}. {keep} (or \
                     recode the column) and run again",
                    self.found()
                ),
            ));
        }
        if self.seen.len() < 2 {
            return Err(Error::usage(
                col_flag,
                format!(
                    "column '{column}' has one value only in the rows used: {}; {what}",
                    self.found()
                ),
            ));
        }
        let keys: Vec<&str> = self.seen.iter().map(|(k, _)| k.as_str()).collect();
        match (&self.level, &self.level_text) {
            (Some(l), Some(text)) => {
                if keys.contains(&l.as_str()) {
                    Ok(l.clone())
                } else {
                    Err(Error::usage(
                        flag,
                        format!(
                            "'{text}' is not a value of column '{column}', which holds {}; name \
                             one of them",
                            self.found()
                        ),
                    ))
                }
            }
            _ if keys.contains(&"0") && keys.contains(&"1") => Ok("1".into()),
            _ => {
                let role = if flag == Flag::Treat {
                    "treatment level"
                } else {
                    "event"
                };
                Err(Error::usage(
                    flag,
                    format!(
                        "column '{column}' holds {}; name the {role} with {flag} '{}' (or \
                         '{}'), or code the column 0/1 (1 = the {role})",
                        self.found(),
                        keys[0],
                        keys[1]
                    ),
                ))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(level: Option<&str>, cells: &[&str]) -> (Vec<Option<f64>>, Result<String>) {
        let mut c = Coding::new(Flag::Treat, level.map(str::to_string));
        let coded = cells
            .iter()
            .enumerate()
            .map(|(i, t)| c.code(t.as_bytes(), i as u64 + 2))
            .collect();
        (coded, c.check("group"))
    }

    #[test]
    fn labels_and_numbers() {
        let (v, l) = run(Some("trt"), &["ctl", " trt ", "NA", "ctl"]);
        assert_eq!(v, vec![Some(0.0), Some(1.0), None, Some(0.0)]);
        assert_eq!(l.unwrap(), "trt");
        let (v, l) = run(None, &["0", "1.0", "1"]);
        assert_eq!(v, vec![Some(0.0), Some(1.0), Some(1.0)]);
        assert_eq!(l.unwrap(), "1");
        let (v, l) = run(Some("2"), &["1", "2.0"]);
        assert_eq!(v, vec![Some(0.0), Some(1.0)]);
        assert_eq!(l.unwrap(), "2");
    }

    #[test]
    fn refusals_name_the_values() {
        let e = run(Some("a"), &["a", "b", "c"]).1.unwrap_err().to_string();
        assert!(
            e.contains("'c' (line 4)") && e.contains("more than two"),
            "{e}"
        );
        let e = run(Some("x"), &["a", "b"]).1.unwrap_err().to_string();
        assert!(
            e.contains("'x' is not a value") && e.contains("'b' (line 3)"),
            "{e}"
        );
        let e = run(None, &["a", "b"]).1.unwrap_err().to_string();
        assert!(e.contains("--treat 'a'") && e.contains("0/1"), "{e}");
        let e = run(None, &["1", "2"]).1.unwrap_err().to_string();
        assert!(e.contains("--treat '1'"), "{e}");
        let e = run(None, &["1", "1"]).1.unwrap_err().to_string();
        assert!(e.contains("one value only"), "{e}");
    }
}
