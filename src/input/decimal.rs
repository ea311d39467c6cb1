//! The decimal mark of a CSV table: the usual point, a decimal comma
//! detected in a semicolon- or tab-separated file when it is unambiguous,
//! or the mark forced with `--decimal`; the cells rewritten for the number
//! parser, and the note that states the choice.

use super::number::{self, DecimalMark, Decision, Detector, Example};
use super::{format_error, Column};
use crate::error::Result;
use crate::support::flag::Flag;

/// The decimal mark a table's numbers were read with, and why.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DecimalChoice {
    /// The mark.
    pub mark: DecimalMark,
    /// Why.
    pub how: DecimalHow,
}

/// Why a table's numbers were read with their decimal mark.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum DecimalHow {
    /// The usual point: nothing in the file suggested otherwise (or a
    /// spreadsheet, whose numbers are typed).
    Default,
    /// Decimal commas detected in a semicolon- or tab-separated file: how
    /// many cells had one, and the first.
    Detected(u64, Example),
    /// Forced with `--decimal`.
    Forced,
}

impl DecimalChoice {
    /// The default: a decimal point.
    pub const POINT: DecimalChoice = DecimalChoice {
        mark: DecimalMark::Point,
        how: DecimalHow::Default,
    };

    /// The note that states the choice (None for the default point).
    pub fn note(&self, source: &str) -> Option<String> {
        match (&self.how, self.mark) {
            (DecimalHow::Default, _) => None,
            (DecimalHow::Detected(n, first), _) => Some(format!(
                "Numbers in {source} were read with a decimal comma: {n} cell{} such as {first} \
                 {} a comma and no cell has a decimal point. If the commas separate thousands, \
                 run again with {} .",
                if *n == 1 { "" } else { "s" },
                if *n == 1 { "has" } else { "have" },
                Flag::Decimal
            )),
            (DecimalHow::Forced, mark) => Some(format!(
                "Numbers in {source} were read with '{}' as the decimal mark ({} {}){}.",
                mark.symbol(),
                Flag::Decimal,
                mark.symbol(),
                match mark {
                    DecimalMark::Comma => "; a point, if any, separates thousands",
                    DecimalMark::Point =>
                        "; a comma, if any, separates thousands (groups of three digits)",
                }
            )),
        }
    }
}

/// Chooses the decimal mark of the requested cells of a CSV file and
/// rewrites them for the number parser ([`number::normalise`]).
///
/// Forced with `forced`; otherwise a decimal comma is read only in a
/// semicolon- or tab-separated file (in a comma-separated one a decimal
/// comma would have to be quoted) and only when it is unambiguous: some
/// cell has a comma that cannot separate thousands (`0,25`, `12,5`) and
/// no cell has a decimal point.
///
/// # Errors
/// [`Error::Format`](crate::error::Error::Format) naming the file, the cells and `--decimal` when the
/// file has both decimal commas and decimal points, or only commas that
/// may separate thousands (`1,234`).
pub fn choose_decimal(
    source: &str,
    delimiter: u8,
    forced: Option<DecimalMark>,
    columns: &mut [Option<Column>],
    labels: &[bool],
    lines: &[u64],
) -> Result<DecimalChoice> {
    let numeric = |i: usize| !labels.get(i).copied().unwrap_or(false);
    let choice = match forced {
        Some(mark) => DecimalChoice {
            mark,
            how: DecimalHow::Forced,
        },
        None if delimiter != b';' && delimiter != b'\t' => DecimalChoice::POINT,
        None => {
            let mut d = Detector::default();
            for (_, c) in columns.iter().enumerate().filter(|(i, _)| numeric(*i)) {
                let Some(c) = c else { continue };
                for (row, line) in lines.iter().enumerate() {
                    d.see(&c.text(row), *line, &c.header);
                }
            }
            match d.decide() {
                Decision::Mark(DecimalMark::Point) => DecimalChoice::POINT,
                Decision::Mark(mark) => DecimalChoice {
                    mark,
                    how: DecimalHow::Detected(
                        d.commas.0 + d.ambiguous.0,
                        d.commas.1.clone().expect("a comma cell decided it"),
                    ),
                },
                Decision::Mixed { comma, point } => {
                    return Err(format_error(
                        source,
                        format!(
                            "the numbers mix decimal marks: {comma} has a comma and {point} a point, \
                             so pondus cannot tell which one is the decimal mark; write every number \
                             the same way, or say which mark is decimal with {flag} , or {flag} . (the \
                             other one is then read as a thousands separator)",
                            flag = Flag::Decimal
                        ),
                    ))
                }
                Decision::Ambiguous(cell) => {
                    return Err(format_error(
                        source,
                        format!(
                            "{cell} could be a decimal comma ({}) or a thousands separator ({}), and no \
                             other number in the file tells which; run again with {flag} , for decimal \
                             commas or {flag} . for thousands separators",
                            cell.text.replace(',', "."),
                            cell.text.replace(',', ""),
                            flag = Flag::Decimal
                        ),
                    ))
                }
            }
        }
    };
    let rewrite = choice.mark == DecimalMark::Comma || choice.how == DecimalHow::Forced;
    if rewrite {
        for (i, c) in columns.iter_mut().enumerate() {
            let Some(c) = c.as_mut().filter(|_| numeric(i)) else {
                continue;
            };
            let mut fresh = Column::new(c.header.clone(), c.index);
            for row in 0..lines.len() {
                fresh.push(&number::normalise(&c.text(row), choice.mark));
            }
            *c = fresh;
        }
    }
    Ok(choice)
}
