//! The decimal mark of a participant-row file read as a stream: the same
//! rule as for tables ([`crate::input::choose_decimal`]), decided on the
//! way, since the rows are read once. A cell with an unambiguous decimal
//! comma (`0,25`) in a semicolon- or tab-separated file settles on the
//! comma; a decimal point before or after it, or a comma that may separate
//! thousands (`1,234`) before any unambiguous one, stops the pass with a
//! message asking for `--decimal`.

use crate::error::Result;
use crate::input::number::{self, parse_cell, Cell, DecimalMark, Example, Shape};
use crate::input::{format_error, DecimalChoice, DecimalHow};
use crate::support::flag::Flag;

/// The decimal mark of one pass over the rows.
#[derive(Debug, Clone)]
pub(super) struct StreamDecimal {
    /// The mark forced with `--decimal`.
    forced: Option<DecimalMark>,
    /// Whether the file may hold decimal commas (semicolon or tab).
    detect: bool,
    /// Cells read with a decimal comma, and the first.
    commas: (u64, Option<Example>),
    /// The first cell with a decimal point.
    point: Option<Example>,
}

impl StreamDecimal {
    /// The state at the start of a pass over a file with `delimiter`.
    pub(super) fn new(forced: Option<DecimalMark>, delimiter: u8) -> Self {
        StreamDecimal {
            forced,
            detect: forced.is_none() && (delimiter == b';' || delimiter == b'\t'),
            commas: (0, None),
            point: None,
        }
    }

    /// Parses a numeric cell under the mark forced or found so far.
    ///
    /// # Errors
    /// [`crate::error::Error::Format`] when the file mixes decimal commas
    /// and points, or has a comma that may separate thousands before any
    /// unambiguous decimal comma.
    pub(super) fn parse(
        &mut self,
        source: &str,
        text: &str,
        line: u64,
        column: &str,
    ) -> Result<Cell> {
        if let Some(mark) = self.forced {
            return Ok(parse_cell(&number::normalise(text, mark)));
        }
        if !self.detect {
            return Ok(parse_cell(text));
        }
        let example = || Example {
            text: text.trim().to_string(),
            line,
            column: column.to_string(),
        };
        match number::shape(text) {
            Shape::Point => {
                if let Some(comma) = &self.commas.1 {
                    return Err(mixed(source, comma, &example()));
                }
                if self.point.is_none() {
                    self.point = Some(example());
                }
                Ok(parse_cell(text))
            }
            Shape::Comma | Shape::Ambiguous if self.commas.1.is_some() => {
                self.commas.0 += 1;
                Ok(parse_cell(&number::normalise(text, DecimalMark::Comma)))
            }
            Shape::Comma => {
                if let Some(point) = &self.point {
                    return Err(mixed(source, &example(), point));
                }
                self.commas = (1, Some(example()));
                Ok(parse_cell(&number::normalise(text, DecimalMark::Comma)))
            }
            Shape::Ambiguous => {
                let cell = example();
                match &self.point {
                    Some(point) => Err(mixed(source, &cell, point)),
                    None => Err(format_error(
                        source,
                        format!(
                            "{cell} could be a decimal comma ({}) or a thousands separator ({}), and \
                             no number before it tells which; run again with {flag} , for decimal \
                             commas or {flag} . for thousands separators",
                            cell.text.replace(',', "."),
                            cell.text.replace(',', ""),
                            flag = Flag::Decimal
                        ),
                    )),
                }
            }
            Shape::Neutral => Ok(parse_cell(text)),
        }
    }

    /// Whether the number parser's reading of `text` stands as it is: not
    /// when it holds a point that is being watched for (detecting) or that
    /// separates thousands (a forced decimal comma).
    pub(super) fn trusts(&self, text: &str) -> bool {
        let point_matters = self.detect || self.forced == Some(DecimalMark::Comma);
        !(point_matters && text.contains('.'))
    }

    /// Whether the reading of a cell never depends on the cells before it
    /// (no decimal comma to detect), so that pieces of the file can be read
    /// in any order ([`super::pieces`]).
    pub(super) fn is_stateless(&self) -> bool {
        !self.detect
    }

    /// Whether a plain number with a decimal point (`-12.5e3`) reads as the
    /// number parser reads it: stateless, and the point not a thousands
    /// separator.
    pub(super) fn reads_points(&self) -> bool {
        self.is_stateless() && self.forced != Some(DecimalMark::Comma)
    }

    /// The choice the pass made.
    pub(super) fn choice(&self) -> DecimalChoice {
        match (self.forced, &self.commas) {
            (Some(mark), _) => DecimalChoice {
                mark,
                how: DecimalHow::Forced,
            },
            (None, (n, Some(first))) => DecimalChoice {
                mark: DecimalMark::Comma,
                how: DecimalHow::Detected(*n, first.clone()),
            },
            (None, _) => DecimalChoice::POINT,
        }
    }
}

fn mixed(source: &str, comma: &Example, point: &Example) -> crate::error::Error {
    format_error(
        source,
        format!(
            "the numbers mix decimal marks: {comma} has a comma and {point} a point, so pondus \
             cannot tell which one is the decimal mark; write every number the same way, or say \
             which mark is decimal with {flag} , or {flag} . (the other one is then read as a \
             thousands separator)",
            flag = Flag::Decimal
        ),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_stream_settles_on_the_comma_or_stops() {
        let mut d = StreamDecimal::new(None, b';');
        assert_eq!(d.parse("f", "12", 2, "x").unwrap(), Cell::Value(12.0));
        assert_eq!(d.parse("f", "0,5", 3, "x").unwrap(), Cell::Value(0.5));
        assert_eq!(d.parse("f", "1,250", 4, "x").unwrap(), Cell::Value(1.25));
        assert_eq!(d.choice().mark, DecimalMark::Comma);
        assert!(d
            .parse("f", "0.5", 5, "y")
            .unwrap_err()
            .to_string()
            .contains("line 5"));
        let mut d = StreamDecimal::new(None, b';');
        let e = d.parse("f", "1,234", 2, "x").unwrap_err().to_string();
        assert!(e.contains("--decimal"), "{e}");
        let mut d = StreamDecimal::new(None, b',');
        assert_eq!(d.parse("f", "0,5", 2, "x").unwrap(), Cell::Invalid);
        let mut d = StreamDecimal::new(Some(DecimalMark::Comma), b',');
        assert_eq!(
            d.parse("f", "1.234,5", 2, "x").unwrap(),
            Cell::Value(1234.5)
        );
    }
}
