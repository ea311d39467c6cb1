//! One moderator's values over the studies of a [`super::StudyList`]: a
//! column of numbers (8 bytes a study) or of level codes (4 bytes a study),
//! instead of a tagged value per study and moderator (16 bytes, plus where
//! each study's values end).

use super::AtValue;
use std::collections::HashMap;

/// One moderator's value for every study, as a [`super::StudyList`] is
/// given them in bulk (moved in, not copied).
#[derive(Debug, Clone, PartialEq)]
pub enum ModeratorColumn {
    /// A numeric moderator's values.
    Numbers(Vec<f64>),
    /// A categorical moderator's levels: each distinct level once, and each
    /// study's index into them.
    Levels {
        /// The distinct levels.
        names: Vec<String>,
        /// Each study's level, an index into `names`.
        codes: Vec<u32>,
    },
}

/// A moderator's values as kept: typed while every study's value is of one
/// kind, else one optional value per study (`None` for a study with fewer
/// moderator values than the others; records pushed one at a time may mix
/// kinds and widths, which no fit does).
#[derive(Debug, Clone, PartialEq)]
pub(super) enum Values {
    Numbers(Vec<f64>),
    Levels {
        names: Vec<String>,
        codes: Vec<u32>,
        /// Where each name is in `names` (built when values are pushed one
        /// at a time; empty for a column given in bulk until then).
        index: HashMap<String, u32>,
    },
    Mixed(Vec<Option<AtValue>>),
}

impl From<ModeratorColumn> for Values {
    fn from(c: ModeratorColumn) -> Self {
        match c {
            ModeratorColumn::Numbers(v) => Values::Numbers(v),
            ModeratorColumn::Levels { names, codes } => Values::Levels {
                names,
                codes,
                index: HashMap::new(),
            },
        }
    }
}

impl Values {
    /// A column for a moderator first seen at study `before` (the studies
    /// before it have no value), starting with `first`.
    pub(super) fn starting(before: usize, first: AtValue) -> Self {
        let mut v = if before == 0 {
            match first {
                AtValue::Number(_) => Values::Numbers(Vec::new()),
                AtValue::Level(_) => Values::Levels {
                    names: Vec::new(),
                    codes: Vec::new(),
                    index: HashMap::new(),
                },
            }
        } else {
            Values::Mixed(vec![None; before])
        };
        v.push(Some(first));
        v
    }

    /// Number of studies.
    pub(super) fn len(&self) -> usize {
        match self {
            Values::Numbers(v) => v.len(),
            Values::Levels { codes, .. } => codes.len(),
            Values::Mixed(v) => v.len(),
        }
    }

    /// Adds the next study's value (`None`: it has none).
    pub(super) fn push(&mut self, value: Option<AtValue>) {
        match (&mut *self, value) {
            (Values::Numbers(v), Some(AtValue::Number(x))) => v.push(x),
            (
                Values::Levels {
                    names,
                    codes,
                    index,
                },
                Some(AtValue::Level(l)),
            ) => {
                if index.len() < names.len() {
                    index.extend(names.iter().cloned().zip(0..));
                }
                let code = match index.get(&l) {
                    Some(&c) => c,
                    None => {
                        let c =
                            u32::try_from(names.len()).expect("fewer than 2^32 distinct levels");
                        names.push(l.clone());
                        index.insert(l, c);
                        c
                    }
                };
                codes.push(code);
            }
            (Values::Mixed(v), value) => v.push(value),
            (_, value) => {
                let mut mixed: Vec<Option<AtValue>> =
                    (0..self.len()).map(|i| self.get(i)).collect();
                mixed.push(value);
                *self = Values::Mixed(mixed);
            }
        }
    }

    /// Study `i`'s value (None when it has none).
    pub(super) fn get(&self, i: usize) -> Option<AtValue> {
        match self {
            Values::Numbers(v) => Some(AtValue::Number(v[i])),
            Values::Levels { names, codes, .. } => {
                Some(AtValue::Level(names[codes[i] as usize].clone()))
            }
            Values::Mixed(v) => v[i].clone(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn num(x: f64) -> Option<AtValue> {
        Some(AtValue::Number(x))
    }

    fn level(l: &str) -> Option<AtValue> {
        Some(AtValue::Level(l.to_string()))
    }

    #[test]
    fn typed_columns_give_back_what_was_pushed() {
        let mut n = Values::starting(0, AtValue::Number(1.5));
        n.push(num(-2.0));
        assert!(matches!(n, Values::Numbers(_)));
        assert_eq!((n.get(0), n.get(1)), (num(1.5), num(-2.0)));
        let mut l = Values::starting(0, AtValue::Level("b".into()));
        for x in ["a", "b", "a"] {
            l.push(level(x));
        }
        let Values::Levels { names, codes, .. } = &l else {
            panic!("levels stay levels: {l:?}");
        };
        assert_eq!((names.len(), codes.as_slice()), (2, &[0, 1, 0, 1][..]));
        assert_eq!(l.get(2), level("b"));
    }

    #[test]
    fn a_column_given_in_bulk_takes_more_levels() {
        let mut l: Values = ModeratorColumn::Levels {
            names: vec!["x".into(), "y".into()],
            codes: vec![1, 0],
        }
        .into();
        l.push(level("y"));
        l.push(level("z"));
        let back: Vec<_> = (0..4).map(|i| l.get(i)).collect();
        assert_eq!(back, [level("y"), level("x"), level("y"), level("z")]);
        let Values::Levels { names, .. } = &l else {
            panic!("levels stay levels: {l:?}");
        };
        assert_eq!(names.len(), 3);
    }

    #[test]
    fn mixed_kinds_and_missing_values_are_kept_in_order() {
        let mut v = Values::starting(0, AtValue::Number(3.0));
        v.push(level("a"));
        v.push(None);
        assert_eq!(v.len(), 3);
        assert_eq!((v.get(0), v.get(1), v.get(2)), (num(3.0), level("a"), None));
        let late = Values::starting(2, AtValue::Number(7.0));
        assert_eq!((late.get(0), late.get(2)), (None, num(7.0)));
    }
}
