//! Reading tables: CSV (delimiter detection, encoding checks) and
//! spreadsheets ([`sheet`]), column lookup, cell addresses for messages.
//!
//! Only the columns an analysis asks for are kept, in a compact text arena
//! ([`Column`]), so a million-row file costs little more than its requested
//! cells; a column of numbers in a file read in pieces is parsed straight
//! from the bytes into doubles, keeping only the texts that are not their
//! number's shortest form.

pub mod cells;
mod column;
mod decimal;
mod lines;
pub mod number;
pub mod parquet;
pub(crate) mod pieces;
mod places;
pub(crate) mod plain;
pub mod sheet;
mod stream;
mod table_pieces;

pub use column::Column;
pub use decimal::{choose_decimal, DecimalChoice, DecimalHow};
pub use lines::Lines;
pub use places::Places;
pub(crate) use stream::LineCounter;

use crate::error::{CellProblem, Error, Result};
use number::DecimalMark;
use std::io::Read;
use std::path::{Path, PathBuf};

/// Where a table comes from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Source {
    /// A file on disk.
    File(PathBuf),
    /// Standard input (`-` on the command line).
    Stdin,
}

impl Source {
    /// `-` means standard input; anything else is a path.
    pub fn from_arg(arg: &Path) -> Self {
        if arg.as_os_str() == "-" {
            Source::Stdin
        } else {
            Source::File(arg.to_path_buf())
        }
    }

    /// How the source is named in messages.
    pub fn name(&self) -> String {
        match self {
            Source::File(p) => p.display().to_string(),
            Source::Stdin => "<stdin>".to_string(),
        }
    }

    /// Checks that a file source opens for reading (standard input: nothing
    /// to check), with the error [`Source::read_all`] would give.
    ///
    /// # Errors
    /// As [`Source::read_all`].
    pub fn check_opens(&self) -> Result<()> {
        match self {
            Source::File(p) if p.is_dir() => Err(Error::Format {
                source_name: self.name(),
                message: "is a directory, not a CSV file".into(),
            }),
            Source::File(p) => std::fs::File::open(p)
                .map(drop)
                .map_err(|source| Error::Io {
                    path: self.name(),
                    action: "reading",
                    source,
                }),
            Source::Stdin => Ok(()),
        }
    }

    /// Reads the whole source.
    ///
    /// # Errors
    /// [`Error::Io`] when the file is missing, unreadable or a directory.
    pub fn read_all(&self) -> Result<Vec<u8>> {
        let io = |source| Error::Io {
            path: self.name(),
            action: "reading",
            source,
        };
        match self {
            Source::File(p) => {
                if p.is_dir() {
                    return Err(Error::Format {
                        source_name: self.name(),
                        message: "is a directory, not a CSV file".into(),
                    });
                }
                std::fs::read(p).map_err(io)
            }
            Source::Stdin => {
                let mut buf = Vec::new();
                std::io::stdin().read_to_end(&mut buf).map_err(io)?;
                Ok(buf)
            }
        }
    }
}

/// A column the caller wants from the table.
#[derive(Debug, Clone)]
pub struct ColumnRequest {
    /// The header to look for.
    pub header: String,
    /// Whether a missing column is an error.
    pub required: bool,
    /// What the column is for (used in messages).
    pub purpose: String,
    /// How to fix a missing column (used in messages).
    pub hint: String,
    /// Whether the column holds labels or ids (text, even when it looks
    /// like a number): the decimal mark is neither chosen from it nor
    /// applied to it.
    pub label: bool,
    /// Whether the column holds numbers: a file read in pieces then has its
    /// cells parsed straight from the bytes ([`Column::number`]), their
    /// texts still given back as written ([`Column::text`]).
    pub numbers: bool,
}

/// One empty column per request: `None` for a request not found (an
/// optional column), else a column named by its header at its position in
/// the header row, ready for the rows to be pushed.
pub(crate) fn empty_columns(headers: &[String], indices: &[Option<usize>]) -> Vec<Option<Column>> {
    indices
        .iter()
        .map(|ix| ix.map(|i| Column::new(headers[i].clone(), i)))
        .collect()
}

/// The requested columns of a CSV table.
#[derive(Debug, Clone)]
pub struct Table {
    /// Name of the source, for messages.
    pub source: String,
    /// The detected delimiter (0 for a spreadsheet, [`PARQUET`] for a
    /// Parquet file).
    pub delimiter: u8,
    /// All headers of the file, trimmed.
    pub headers: Vec<String>,
    /// One entry per request: `None` when an optional column is absent.
    pub columns: Vec<Option<Column>>,
    /// File line number (1-based) of each data row.
    pub lines: Vec<u64>,
    /// How many wholly blank rows were skipped.
    pub blank_rows: usize,
    /// The sheet the table was read from (None for CSV); `lines` then holds
    /// the sheet's row numbers.
    pub sheet: Option<SheetOrigin>,
    /// The decimal mark the numbers were read with, and why.
    pub decimal: DecimalChoice,
}

/// Where in a workbook a table was read from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SheetOrigin {
    /// The sheet's name.
    pub name: String,
    /// The 0-based column of the header row's first cell.
    pub first_column: u32,
}

impl Table {
    /// Number of data rows.
    pub fn len(&self) -> usize {
        self.lines.len()
    }

    /// Whether there are no data rows.
    pub fn is_empty(&self) -> bool {
        self.lines.is_empty()
    }

    /// The column for request `i`, if present.
    pub fn column(&self, i: usize) -> Option<&Column> {
        self.columns.get(i).and_then(|c| c.as_ref())
    }

    /// The delimiter in words.
    pub fn delimiter_name(&self) -> &'static str {
        Delimiter::of(self.delimiter).id()
    }

    /// The spreadsheet address of a cell (`extraction!D14`), or None for CSV.
    pub fn cell_address(&self, row: usize, column: &Column) -> Option<String> {
        let sheet = self.sheet.as_ref()?;
        Some(sheet::cell_address(
            &sheet.name,
            sheet.first_column + column.index as u32,
            self.lines[row],
        ))
    }

    /// Where a cell is when messages name it other than by its CSV line:
    /// `cell extraction!D14` in a spreadsheet, `row 14` in a Parquet file
    /// (None for CSV).
    pub fn cell_place(&self, row: usize, column: &Column) -> Option<String> {
        if self.delimiter == PARQUET {
            return Some(format!("row {}", self.lines[row]));
        }
        self.cell_address(row, column).map(|a| format!("cell {a}"))
    }

    /// How messages about this table name its rows and cells.
    pub fn places(&self) -> Places {
        Places {
            sheet: self.sheet.clone(),
            headers: self.headers.clone(),
            parquet: self.delimiter == PARQUET,
        }
    }

    /// A problem with the cell of `column` in data row `row`: its line (or
    /// sheet row) and, in a spreadsheet, its address.
    pub fn problem(&self, row: usize, column: &Column, message: impl Into<String>) -> CellProblem {
        CellProblem {
            line: self.lines[row],
            column: column.header.clone(),
            value: crate::effect::shorten(&column.text(row)),
            message: message.into(),
            cell: self.cell_place(row, column),
        }
    }
}

/// A detected delimiter, as named in the results.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum Delimiter {
    /// `,` (also the fallback).
    Comma,
    /// `;`.
    Semicolon,
    /// A tab.
    Tab,
    /// None: the table was read from a spreadsheet (delimiter byte 0).
    Sheet,
    /// None: the table was read from a Parquet file (delimiter byte 1).
    Parquet,
}

/// The delimiter byte that marks a table read from a Parquet file.
pub const PARQUET: u8 = 1;

impl Delimiter {
    /// The delimiter of the byte `b` (comma for any byte but `;`, tab, 0,
    /// which marks a spreadsheet, and [`PARQUET`]).
    pub fn of(b: u8) -> Self {
        match b {
            b';' => Delimiter::Semicolon,
            b'\t' => Delimiter::Tab,
            0 => Delimiter::Sheet,
            PARQUET => Delimiter::Parquet,
            _ => Delimiter::Comma,
        }
    }

    /// The word used in the results.
    pub fn id(self) -> &'static str {
        match self {
            Delimiter::Comma => "comma",
            Delimiter::Semicolon => "semicolon",
            Delimiter::Tab => "tab",
            Delimiter::Sheet => "sheet",
            Delimiter::Parquet => "parquet",
        }
    }
}

impl std::fmt::Display for Delimiter {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.id())
    }
}

/// Chooses the delimiter from the header line: the most frequent of comma,
/// semicolon and tab outside double quotes (comma when none occurs).
pub fn detect_delimiter(bytes: &[u8]) -> u8 {
    let mut counts = [0usize; 3];
    let mut quoted = false;
    for &b in bytes {
        match b {
            b'"' => quoted = !quoted,
            b'\n' | b'\r' if !quoted => break,
            b',' if !quoted => counts[0] += 1,
            b';' if !quoted => counts[1] += 1,
            b'\t' if !quoted => counts[2] += 1,
            _ => {}
        }
    }
    let candidates = [b',', b';', b'\t'];
    let mut best = 0;
    for i in 1..3 {
        if counts[i] > counts[best] {
            best = i;
        }
    }
    candidates[best]
}

/// Whether `bytes` look like UTF-16: a UTF-16 byte-order mark (FF FE or
/// FE FF), or, without one, a NUL in every other byte of the first line
/// (ASCII text in UTF-16). Text files in UTF-8 hold no NUL bytes.
pub fn is_utf16(bytes: &[u8]) -> bool {
    if bytes.starts_with(b"\xFF\xFE") || bytes.starts_with(b"\xFE\xFF") {
        return true;
    }
    let head = &bytes[..bytes.len().min(64)];
    let nul = head.iter().filter(|&&b| b == 0).count();
    head.len() >= 4 && nul * 3 >= head.len()
}

/// A first line `sep=X` (which some spreadsheet programs write, and read
/// as "the delimiter is X") names the delimiter and is not the header:
/// returns that delimiter and the bytes with the line's text blanked (its
/// line break kept, so line numbers stay those of the file).
pub fn separator_line(bytes: &[u8]) -> (Option<u8>, std::borrow::Cow<'_, [u8]>) {
    match separator_text(bytes) {
        Some((d, end)) => (Some(d), std::borrow::Cow::Owned(bytes[end..].to_vec())),
        None => (None, std::borrow::Cow::Borrowed(bytes)),
    }
}

/// The delimiter a first line `sep=X` names and the length of that line's
/// text (up to, not including, its line break: `\n`, `\r\n` or a lone
/// `\r`), for readers that skip it in a stream (see [`separator_line`]).
pub fn separator_text(bytes: &[u8]) -> Option<(u8, usize)> {
    let end = bytes
        .iter()
        .position(|&b| b == b'\n' || b == b'\r')
        .unwrap_or(bytes.len());
    match &bytes[..end] {
        [b's' | b'S', b'e' | b'E', b'p' | b'P', b'=', d @ (b',' | b';' | b'\t')] => Some((*d, end)),
        _ => None,
    }
}

/// The line on which a double quote opens a value that is never closed, if
/// one does: in CSV a quote inside a quoted value is doubled, so the quotes
/// of a well-formed file pair up and an odd count means one is left open.
/// Lines end at `\n`, `\r\n` or a `\r` alone.
pub fn unclosed_quote(bytes: &[u8]) -> Option<u64> {
    let mut open_at = None;
    let mut line = 1u64;
    let mut after_cr = false;
    for &b in bytes {
        match b {
            b'"' => open_at = if open_at.is_some() { None } else { Some(line) },
            b'\n' if after_cr => {}
            b'\n' | b'\r' => line += 1,
            _ => {}
        }
        after_cr = b == b'\r';
    }
    open_at
}

/// Finds a header: exact match after trimming, else a unique case-insensitive match.
pub fn find_header(headers: &[String], wanted: &str) -> Option<usize> {
    let wanted = wanted.trim();
    if let Some(i) = headers.iter().position(|h| h == wanted) {
        return Some(i);
    }
    let mut matches = headers
        .iter()
        .enumerate()
        .filter(|(_, h)| h.to_lowercase() == wanted.to_lowercase());
    match (matches.next(), matches.next()) {
        (Some((i, _)), None) => Some(i),
        _ => None,
    }
}

/// A format problem of the file `source`.
pub(crate) fn format_error(source: &str, message: impl Into<String>) -> Error {
    Error::Format {
        source_name: source.to_string(),
        message: message.into(),
    }
}

/// Parses CSV bytes and keeps the requested columns.
///
/// Accepts UTF-8 with or without a byte-order mark, comma, semicolon or tab
/// delimiters (see [`detect_delimiter`]) and quoted fields. Header names are
/// matched exactly after trimming, or case-insensitively when that is unique.
///
/// # Errors
/// [`Error::Format`] for an empty file, a file with no data rows, text that
/// is not UTF-8, a repeated header or a row whose field count differs from
/// the header's; [`Error::MissingColumn`] when a required column is absent.
pub fn parse_table(source: &str, bytes: &[u8], requests: &[ColumnRequest]) -> Result<Table> {
    parse_table_with(source, bytes, requests, None)
}

/// [`parse_table`] with the decimal mark forced (`Some`) or chosen from the
/// file ([`choose_decimal`]).
///
/// # Errors
/// Those of [`parse_table`] and [`choose_decimal`].
pub fn parse_table_with(
    source: &str,
    bytes: &[u8],
    requests: &[ColumnRequest],
    decimal: Option<DecimalMark>,
) -> Result<Table> {
    parse_csv(source, || Ok(bytes), requests, decimal)
}

/// [`parse_table_with`] reading the file at `path` without holding it
/// whole in memory: a file without any `"` is read in pieces on all of
/// rayon's threads (`input::table_pieces`); any other (and any file whose pieces
/// meet a problem, so that the message is the one described here) as a
/// stream, in two passes: a first checks the encoding, an empty file, an
/// open quote and the delimiter, a second parses the rows.
///
/// # Errors
/// Those of [`parse_table`]; [`Error::Io`] when the file cannot be read.
pub fn parse_table_file(
    source: &str,
    path: &Path,
    requests: &[ColumnRequest],
    decimal: Option<DecimalMark>,
) -> Result<Table> {
    parse_table_file_in(source, path, requests, decimal, pieces::PIECE)
}

/// [`parse_table_file`] with pieces of `size` bytes (≥ 1).
///
/// # Errors
/// As [`parse_table_file`].
pub(crate) fn parse_table_file_in(
    source: &str,
    path: &Path,
    requests: &[ColumnRequest],
    decimal: Option<DecimalMark>,
    size: u64,
) -> Result<Table> {
    if let Some(cells) = table_pieces::read(source, path, requests, decimal.is_none(), size) {
        return finish_table(source, requests, decimal, cells);
    }
    let open = || std::fs::File::open(path).map_err(|e| stream::io_error(source, e));
    parse_csv(source, open, requests, decimal)
}

/// The requested cells of a CSV table, before the decimal mark is chosen.
struct CsvCells {
    delimiter: u8,
    headers: Vec<String>,
    columns: Vec<Option<Column>>,
    /// File line of each data row.
    lines: Vec<u64>,
    blank_rows: usize,
}

/// [`parse_table_with`] over the bytes that `open` gives (called twice,
/// for the two passes of [`stream`]).
fn parse_csv<R: Read>(
    source: &str,
    open: impl Fn() -> Result<R>,
    requests: &[ColumnRequest],
    decimal: Option<DecimalMark>,
) -> Result<Table> {
    let head = stream::first_pass(source, open()?)?;
    let delimiter = head.delimiter;
    let mut reader = stream::parser(source, open()?, head)?;
    let headers = read_headers(source, &mut reader)?;
    let indices = match_requests(source, &headers, requests)?;
    let mut columns = empty_columns(&headers, &indices);
    let rows = read_rows(
        source,
        delimiter,
        &mut reader,
        &headers,
        &indices,
        &mut columns,
    )?;
    let cells = CsvCells {
        delimiter,
        headers,
        columns,
        lines: rows.lines,
        blank_rows: rows.blank_rows,
    };
    finish_table(source, requests, decimal, cells)
}

/// The table of a CSV file's cells: refuses a file without data rows and
/// chooses the decimal mark ([`choose_decimal`]).
fn finish_table(
    source: &str,
    requests: &[ColumnRequest],
    decimal: Option<DecimalMark>,
    mut cells: CsvCells,
) -> Result<Table> {
    if cells.lines.is_empty() {
        return Err(format_error(
            source,
            "the file has a header row but no data rows; add one row per study",
        ));
    }
    let labels: Vec<bool> = requests.iter().map(|r| r.label).collect();
    let decimal = choose_decimal(
        source,
        cells.delimiter,
        decimal,
        &mut cells.columns,
        &labels,
        &cells.lines,
    )?;
    Ok(Table {
        source: source.to_string(),
        delimiter: cells.delimiter,
        headers: cells.headers,
        columns: cells.columns,
        lines: cells.lines,
        blank_rows: cells.blank_rows,
        sheet: None,
        decimal,
    })
}

/// Reads a table from CSV bytes, from a spreadsheet when the source's
/// name ends in `.xlsx`, `.xlsm`, `.xls` or `.ods` (sheet `sheet`, else the
/// first), or from a Parquet file when it ends in `.parquet`, keeping the
/// requested columns.
///
/// # Errors
/// Those of [`parse_table`], [`sheet::parse_sheet`] and
/// [`parquet::parse_parquet`].
pub fn read_table(
    source: &str,
    bytes: &[u8],
    requests: &[ColumnRequest],
    sheet: Option<&str>,
    decimal: Option<DecimalMark>,
) -> Result<Table> {
    if sheet::is_spreadsheet(source) {
        sheet::parse_sheet(source, bytes, requests, sheet)
    } else if parquet::is_parquet(source) {
        parquet::parse_parquet(source, bytes, requests)
    } else {
        parse_table_with(source, bytes, requests, decimal)
    }
}

/// Where a table's bytes are.
#[derive(Debug, Clone, Copy)]
pub enum TableBytes<'a> {
    /// In memory (standard input, or a file read whole).
    Memory(&'a [u8]),
    /// A file on disk: a CSV file is read in pieces ([`parse_table_file`]),
    /// a spreadsheet or Parquet file whole.
    File(&'a Path),
}

/// [`read_table`] from bytes in memory or from a file on disk; `source`
/// names the file in messages.
///
/// # Errors
/// Those of [`read_table`]; [`Error::Io`] when the file cannot be read.
pub fn read_table_from(
    source: &str,
    input: TableBytes<'_>,
    requests: &[ColumnRequest],
    sheet: Option<&str>,
    decimal: Option<DecimalMark>,
) -> Result<Table> {
    match input {
        TableBytes::Memory(bytes) => read_table(source, bytes, requests, sheet, decimal),
        TableBytes::File(path) if sheet::is_spreadsheet(source) || parquet::is_parquet(source) => {
            let bytes = std::fs::read(path).map_err(|e| stream::io_error(source, e))?;
            read_table(source, &bytes, requests, sheet, decimal)
        }
        TableBytes::File(path) => parse_table_file(source, path, requests, decimal),
    }
}

/// The header row of a CSV reader, each name trimmed (used by the table
/// reader here and by the streaming reader of `pondus sites`).
///
/// # Errors
/// [`Error::Format`] when it cannot be read or is not UTF-8.
pub fn read_headers<R: std::io::Read>(
    source: &str,
    reader: &mut csv::Reader<R>,
) -> Result<Vec<String>> {
    let header_record = reader
        .byte_headers()
        .map_err(|e| format_error(source, format!("the header row cannot be read: {e}")))?;
    let mut headers = Vec::with_capacity(header_record.len());
    for (i, field) in header_record.iter().enumerate() {
        let text = std::str::from_utf8(field).map_err(|_| {
            format_error(
                source,
                format!(
                    "header field {} is not valid UTF-8; save the file as UTF-8",
                    i + 1
                ),
            )
        })?;
        headers.push(text.trim().to_string());
    }
    Ok(headers)
}

/// The header index of each requested column (None for an optional column
/// that is absent), the same for every format (CSV, spreadsheets, Parquet).
pub(crate) fn match_requests(
    source: &str,
    headers: &[String],
    requests: &[ColumnRequest],
) -> Result<Vec<Option<usize>>> {
    let mut indices = Vec::with_capacity(requests.len());
    for req in requests {
        match find_header(headers, &req.header) {
            Some(i) => {
                check_unique(source, headers, i)?;
                indices.push(Some(i));
            }
            None if req.required => {
                return Err(Error::MissingColumn {
                    source_name: source.to_string(),
                    column: req.header.clone(),
                    purpose: req.purpose.clone(),
                    available: headers.join(", "),
                    hint: req.hint.clone(),
                })
            }
            None => indices.push(None),
        }
    }
    Ok(indices)
}

/// Refuses a header name that stands more than once in the header row.
///
/// # Errors
/// [`Error::Format`] naming the column and the fix.
pub(crate) fn check_unique(source: &str, headers: &[String], i: usize) -> Result<()> {
    let dup = headers.iter().filter(|h| **h == headers[i]).count();
    if dup > 1 {
        return Err(format_error(
            source,
            format!(
                "the header has {dup} columns named '{}'; rename them so each is unique",
                headers[i]
            ),
        ));
    }
    Ok(())
}

/// What the row loop found besides the cells.
struct Rows {
    lines: Vec<u64>,
    blank_rows: usize,
}

/// Reads every data row into the requested columns; blank rows are
/// counted and skipped.
fn read_rows<R: Read>(
    source: &str,
    delimiter: u8,
    reader: &mut csv::Reader<stream::LineCounter<R>>,
    headers: &[String],
    indices: &[Option<usize>],
    columns: &mut [Option<Column>],
) -> Result<Rows> {
    let mut lines = Vec::new();
    let mut blank_rows = 0;
    let mut record = csv::ByteRecord::new();
    loop {
        match reader.read_byte_record(&mut record) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => {
                let line = e
                    .position()
                    .map(|p| reader.get_mut().line_at(p.byte()))
                    .unwrap_or(0);
                if let csv::ErrorKind::Io(_) = e.kind() {
                    let csv::ErrorKind::Io(inner) = e.into_kind() else {
                        unreachable!("matched above")
                    };
                    return Err(stream::io_error(source, inner));
                }
                return Err(format_error(
                    source,
                    format!("line {line} cannot be read as CSV: {e}"),
                ));
            }
        }
        let line = record
            .position()
            .map(|p| reader.get_mut().line_at(p.byte()))
            .unwrap_or(0);
        if record
            .iter()
            .all(|f| f.iter().all(|b| b.is_ascii_whitespace()))
        {
            blank_rows += 1;
            continue;
        }
        if record.len() != headers.len() {
            // A value that runs over line breaks is, in a table of effects,
            // almost always an opening quote that is never closed.
            let hint = if record.iter().any(|f| f.contains(&b'\n')) {
                "a value opened with '\"' on this line is not closed (it runs on over the \
                 following lines); add the closing '\"'"
                    .to_string()
            } else {
                format!(
                    "check for a missing value or an unquoted '{}' inside a value",
                    delimiter as char
                )
            };
            return Err(format_error(
                source,
                format!(
                    "line {line} has {} fields but the header has {}; {hint}",
                    record.len(),
                    headers.len(),
                ),
            ));
        }
        for (col, ix) in columns.iter_mut().zip(indices) {
            if let (Some(col), Some(i)) = (col.as_mut(), ix) {
                let text = std::str::from_utf8(&record[*i]).map_err(|_| {
                    format_error(
                        source,
                        format!(
                            "line {line}, column '{}' is not valid UTF-8; save the file as UTF-8",
                            col.header
                        ),
                    )
                })?;
                col.push(text.trim());
            }
        }
        lines.push(line);
    }
    Ok(Rows { lines, blank_rows })
}

#[cfg(test)]
mod table_pieces_tests;
#[cfg(test)]
mod tests;
