//! The requested columns of a plain CSV file read in pieces on all of
//! rayon's threads ([`super::pieces`]): the same cells, line numbers and
//! blank-row count as the streamed reading ([`super::parse_csv`]) gives.
//!
//! Only a file that holds no `"` at all is read this way: without quotes,
//! records end at every `\n` and `\r` and fields at every delimiter, which
//! is how [`super::pieces::split_line`] splits them, and none of the first
//! pass's checks can fail but the two checked here (UTF-16 text, a file of
//! blanks). The header is read by the streamed path's own CSV parser. Any
//! other file (a quote anywhere, a header line longer than the first
//! 64 KiB, a file that is not a regular file) and any problem met on the way
//! (a row of the wrong width, a cell that is not UTF-8, a missing column, a
//! read that fails) hands the whole file back to the streamed reading: so
//! every error message is the streamed reading's own, with its line, and a
//! problem the first pass finds later in the file keeps its precedence.

use super::column::{Cells, NumberCells};
use super::pieces::{self, read_exact_at, Layout, Outcome};
use super::plain;
use super::stream::{self, Head};
use super::{
    detect_delimiter, empty_columns, is_utf16, match_requests, read_headers, separator_text,
    Column, ColumnRequest, CsvCells,
};
use crate::support::texts::Texts;
use std::fs::File;
use std::io::{Seek, SeekFrom};
use std::path::Path;
use std::sync::{Mutex, PoisonError};

/// How many bytes at the start of the file the encoding, a `sep=X` line and
/// the delimiter are read from (as the first pass of the streamed reading
/// reads them from its first buffer).
const HEAD: u64 = 1 << 16;

/// The requested cells of the CSV file at `path`, read in pieces of `size`
/// bytes; None when the file must be read as a stream (see the module
/// documentation), which then gives the table or the error.
///
/// A column requested as numbers ([`ColumnRequest::numbers`]) is read as
/// numbers straight from the bytes ([`super::column::NumberCells`]) when
/// the decimal mark is the point without a doubt: `chosen` (not forced
/// with `--decimal`) and a delimiter other than `;` and tab (only those
/// files are searched for decimal commas, which needs every cell's text).
pub(super) fn read(
    source: &str,
    path: &Path,
    requests: &[ColumnRequest],
    chosen: bool,
    size: u64,
) -> Option<CsvCells> {
    // Anything but a regular file (a pipe, a device) is not even opened
    // here: opening a pipe would wait for a writer, and reading it would
    // take its bytes from the stream.
    if !std::fs::metadata(path).ok()?.is_file() {
        return None;
    }
    let file = File::open(path).ok()?;
    let meta = file.metadata().ok()?;
    if !meta.is_file() {
        return None;
    }
    let len = meta.len();
    let Header {
        delimiter,
        headers,
        data_start,
        first_line,
    } = header(source, &file, len)?;
    let indices = match_requests(source, &headers, requests).ok()?;
    let point = chosen && delimiter != b';' && delimiter != b'\t';
    let numbers: Vec<bool> = requests
        .iter()
        .zip(&indices)
        .filter(|(_, ix)| ix.is_some())
        .map(|(r, _)| point && r.numbers && !r.label)
        .collect();
    let mut columns = empty_columns(&headers, &indices);
    for (column, &numbers) in columns.iter_mut().flatten().zip(&numbers) {
        if numbers {
            *column = Column::of_numbers(std::mem::take(&mut column.header), column.index);
        }
    }
    let wanted: Vec<usize> = indices.iter().flatten().copied().collect();
    let layout = Layout {
        file: &file,
        len,
        data_start,
        first_line,
        size,
    };
    let mut number_fields = vec![false; headers.len()];
    for (&i, &n) in wanted.iter().zip(&numbers) {
        number_fields[i] |= n;
    }
    let shape = Shape {
        number_fields,
        delimiter,
        width: headers.len(),
        wanted: &wanted,
        numbers: &numbers,
    };
    let (mut lines, mut blank_rows) = (Vec::new(), 0);
    // Merged pieces' lists, emptied, for the pieces still to read: their
    // memory is taken once, not once per piece.
    let spare = Mutex::new(Vec::new());
    let mut merge = |mut piece: PieceCells, line: u64| {
        for (column, cells) in columns.iter_mut().flatten().zip(&piece.columns) {
            column.append(cells);
        }
        lines.extend(piece.rows.iter().map(|r| line + r));
        blank_rows += piece.blank_rows;
        piece.clear();
        spare
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .push(piece);
    };
    let stopped = pieces::read_in_pieces(
        &layout,
        Vec::new,
        |fields, bytes| {
            let cells = spare.lock().unwrap_or_else(PoisonError::into_inner).pop();
            read_piece(&shape, bytes, fields, cells)
        },
        &mut merge,
    );
    if stopped.is_some() {
        return None;
    }
    Some(CsvCells {
        delimiter,
        headers,
        columns,
        lines,
        blank_rows,
    })
}

/// What the header row tells the piece-wise reading.
struct Header {
    delimiter: u8,
    headers: Vec<String>,
    /// The byte where the data rows start.
    data_start: u64,
    /// The line of that byte (for a `\r\n` that ends the header row, the
    /// line of the `\r`: the `\n` starts the data and is counted there).
    first_line: u64,
}

/// The delimiter, the header names, the offset where the data start and
/// the line it is on, read as the streamed reading reads them; None when
/// the file must be read as a stream (among other cases, when the bytes
/// before the data hold a `"`).
fn header(source: &str, file: &File, len: u64) -> Option<Header> {
    let mut head = vec![0; len.min(HEAD) as usize];
    read_exact_at(file, &mut head, 0).ok()?;
    let start = if head.starts_with(b"\xEF\xBB\xBF") {
        3
    } else {
        0
    };
    if is_utf16(&head[start..]) {
        return None;
    }
    let sep = separator_text(&head[start..]);
    let skip = start + sep.map_or(0, |(_, end)| end);
    let delimiter = match sep {
        Some((d, _)) => d,
        None => {
            let first = &head[start..];
            let ends = first.iter().any(|&b| b == b'\n' || b == b'\r');
            if !ends && len > HEAD {
                return None;
            }
            detect_delimiter(first)
        }
    };
    let mut input = file;
    input.seek(SeekFrom::Start(0)).ok()?;
    let mut reader = stream::parser(source, input, Head { skip, delimiter }).ok()?;
    let headers = read_headers(source, &mut reader).ok()?;
    let data_start = (skip as u64 + reader.position().byte()).min(len);
    drop(reader);
    // One byte past the header row, when the file has it: whether a `\r`
    // that ends the row is a line break of its own or half of a `\r\n`.
    let through = (data_start + 1).min(len);
    head.resize(through as usize, 0);
    if through > HEAD.min(len) {
        read_exact_at(file, &mut head, 0).ok()?;
    }
    let first_line = 1 + pieces::line_breaks(&head, data_start as usize);
    head.truncate(data_start as usize);
    let blank = head[start..].iter().all(u8::is_ascii_whitespace);
    if blank || head.contains(&b'"') {
        return None;
    }
    Some(Header {
        delimiter,
        headers,
        data_start,
        first_line,
    })
}

/// What every piece is read with.
struct Shape<'a> {
    /// Per field of the header, whether a column of numbers reads it.
    number_fields: Vec<bool>,
    delimiter: u8,
    /// The number of fields in the header.
    width: usize,
    /// The field of each requested column found, in request order.
    wanted: &'a [usize],
    /// Whether each is read as numbers.
    numbers: &'a [bool],
}

/// The requested cells of one piece.
struct PieceCells {
    /// One list of cells per requested column found, in request order.
    columns: Vec<Cells>,
    /// Per data row, the `\n` bytes in the piece before it.
    rows: Vec<u64>,
    blank_rows: usize,
}

impl PieceCells {
    /// Empties the lists, keeping their room.
    fn clear(&mut self) {
        self.columns.iter_mut().for_each(Cells::clear);
        self.rows.clear();
        self.blank_rows = 0;
    }
}

/// Reads the rows of one piece into `cells` (emptied lists, or None for new
/// ones), as `super::read_rows` reads them: a row of blanks (and
/// delimiters) counted and skipped, every cell of a requested column
/// checked as UTF-8 and trimmed. Stops at a `"` in the piece, a row whose width is not the
/// header's and a cell that is not UTF-8.
fn read_piece(
    shape: &Shape<'_>,
    bytes: &[u8],
    fields: &mut Vec<(usize, usize)>,
    cells: Option<PieceCells>,
) -> Outcome<PieceCells, ()> {
    if bytes.contains(&b'"') {
        return Outcome::Stop(());
    }
    let delimiter = shape.delimiter;
    // A piece that is UTF-8 as a whole (the usual case) is checked once:
    // its fields end at ASCII bytes, so each is UTF-8 too.
    let text = std::str::from_utf8(bytes).ok();
    let mut cells = cells.unwrap_or_else(|| PieceCells {
        columns: shape
            .numbers
            .iter()
            .map(|&n| {
                if n {
                    Cells::Numbers(NumberCells::default())
                } else {
                    Cells::Text(Texts::default())
                }
            })
            .collect(),
        rows: Vec::new(),
        blank_rows: 0,
    });
    let (mut newlines, mut pos) = (0u64, 0usize);
    let mut parsed = vec![None; shape.width];
    let numbers_read = shape.number_fields.contains(&true);
    loop {
        pos = pieces::skip_breaks(bytes, pos, &mut newlines);
        if pos >= bytes.len() {
            break;
        }
        let end = if numbers_read {
            split_reading_numbers(bytes, pos, shape, fields, &mut parsed)
        } else {
            pieces::split_line(bytes, pos, delimiter, fields)
        };
        let blank = bytes[pos..end]
            .iter()
            .all(|&b| b == delimiter || b.is_ascii_whitespace());
        pos = end;
        if blank {
            cells.blank_rows += 1;
            continue;
        }
        if fields.len() != shape.width {
            return Outcome::Stop(());
        }
        for (column, &i) in cells.columns.iter_mut().zip(shape.wanted) {
            if let (Cells::Numbers(n), Some((x, true))) = (&mut *column, parsed[i]) {
                n.push_value(x);
                continue;
            }
            let (a, b) = fields[i];
            let cell = match text {
                Some(text) => &text[a..b],
                None => match std::str::from_utf8(&bytes[a..b]) {
                    Ok(cell) => cell,
                    Err(_) => return Outcome::Stop(()),
                },
            };
            // A short number not in its shortest form (`1.6430`): its value
            // read while the row was split, its text (the whole field, with
            // nothing to trim) kept beside it.
            if let (Cells::Numbers(n), Some((x, false))) = (&mut *column, parsed[i]) {
                n.push_kept(x, cell);
                continue;
            }
            // A cell of numbers not read while the row was split is not
            // a short number in its shortest form: read from its text.
            column.push(trim(cell));
        }
        cells.rows.push(newlines);
    }
    Outcome::Done {
        sink: cells,
        newlines,
    }
}

/// [`pieces::split_line`], reading on the way each field of numbers
/// (`shape.number_fields`) that starts with a short plain number ending at
/// the field's end ([`plain::short_with_form`]): its value and whether it is
/// written in its shortest form in `parsed` (None for any other such field,
/// read later from its text), the number's bytes swept once instead of
/// twice.
#[inline]
fn split_reading_numbers(
    bytes: &[u8],
    pos: usize,
    shape: &Shape<'_>,
    fields: &mut Vec<(usize, usize)>,
    parsed: &mut [Option<(f64, bool)>],
) -> usize {
    let delimiter = shape.delimiter;
    pieces::split_line_reading(bytes, pos, delimiter, fields, |f, pos| {
        if shape.number_fields.get(f) != Some(&true) {
            return None;
        }
        let read = plain::short_with_form(&bytes[pos..]).filter(|&(_, n, _)| {
            matches!(bytes.get(pos + n), None | Some(b'\n' | b'\r')) || bytes[pos + n] == delimiter
        });
        parsed[f] = read.map(|(x, _, shortest)| (x, shortest));
        read.map(|(_, n, _)| pos + n)
    })
}

/// `cell.trim()`, without its scan when the cell starts and ends with a
/// visible ASCII character (`!` to `~`), which is never white space.
#[inline]
pub(super) fn trim(cell: &str) -> &str {
    match cell.as_bytes() {
        [first, .., last] if first.is_ascii_graphic() && last.is_ascii_graphic() => cell,
        [only] if only.is_ascii_graphic() => cell,
        _ => cell.trim(),
    }
}
