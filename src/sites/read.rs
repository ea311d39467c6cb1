//! Streaming the raw participant rows: one record at a time, with the file's
//! own line numbers.

use super::decimal::StreamDecimal;
use super::levels::Coding;
use crate::error::{CellProblem, CellProblems, Error, Result};
use crate::input::number::{invalid_hint, Cell, DecimalMark};
use crate::input::parquet as parquet_input;
use crate::input::DecimalChoice;
use crate::input::{check_unique, format_error, read_headers};
use crate::input::{detect_delimiter, find_header, separator_text};
use crate::support::flag::Flag;
use std::collections::VecDeque;
use std::io::{BufRead, BufReader, Read};

/// A reader that notes the byte offsets of every line break it passes on,
/// so that a record's line number can be found from its byte offset.
///
/// The csv crate's own line count skips blank lines and miscounts CRLF
/// files (see `crate::input::parse_table`, which counts from byte offsets
/// in memory). Here the bytes stream through, so the offsets of `\n` and
/// `\r` are queued as they pass and dropped once the parser is beyond
/// them: memory stays within the parser's look-ahead buffer.
struct BreakCounter<R> {
    inner: R,
    offset: u64,
    /// Offsets of line-break bytes not yet counted, shifted left by one; the
    /// low bit is 1 for `\n`, 0 for `\r`.
    breaks: VecDeque<u64>,
    line: u64,
}

impl<R: Read> Read for BreakCounter<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let got = self.inner.read(buf)?;
        for (i, &b) in buf[..got].iter().enumerate() {
            if b == b'\n' || b == b'\r' {
                self.breaks
                    .push_back(((self.offset + i as u64) << 1) | u64::from(b == b'\n'));
            }
        }
        self.offset += got as u64;
        Ok(got)
    }
}

impl<R> BreakCounter<R> {
    /// The 1-based line of a record that the parser says starts at byte
    /// `offset`: line breaks before it are counted, and so are the breaks
    /// right at `offset` (the parser's offset can point at the terminators
    /// of blank lines before the record).
    fn line_at(&mut self, offset: u64) -> u64 {
        let mut end = offset;
        while let Some(&b) = self.breaks.front() {
            let at = b >> 1;
            if at <= end {
                if at == end {
                    end += 1;
                }
                self.line += b & 1;
                self.breaks.pop_front();
            } else {
                break;
            }
        }
        self.line
    }
}

/// The columns a pass needs, by header.
#[derive(Debug, Clone)]
pub struct RowColumns {
    /// Site id header.
    pub site: String,
    /// Numeric headers in the order of the values handed to the caller, with
    /// the flag each was given as (for messages).
    pub numeric: Vec<(String, Flag)>,
    /// The decimal mark forced with `--decimal` (None: chosen on the way).
    pub decimal: Option<DecimalMark>,
    /// For each numeric column, its two-level coding when it is a group or
    /// a binary outcome (read as labels and coded 0/1), else None. Empty:
    /// every column numeric.
    pub coded: Vec<Option<Coding>>,
    /// Whether a text cell in the `--x` column stops the pass at once with
    /// the advice to code the groups 0/1 or compare them as groups (one
    /// message instead of one per row).
    pub text_x_advice: bool,
}

/// What a pass saw besides the rows it handed on.
#[derive(Debug, Clone, Default)]
pub struct PassSummary {
    /// The delimiter found.
    pub delimiter: u8,
    /// Data rows read (blank rows not counted).
    pub rows: u64,
    /// Rows left out because a numeric cell was empty or a missing mark.
    pub missing_rows: u64,
    /// The first of those rows' lines.
    pub missing_lines: Vec<u64>,
    /// Wholly blank rows skipped.
    pub blank_rows: u64,
    /// The decimal mark the numbers were read with, and why.
    pub decimal: Option<DecimalChoice>,
    /// The two-level codings after the pass, with the values they met
    /// (in the order of [`RowColumns::coded`]).
    pub coded: Vec<Option<Coding>>,
}

/// Parses a numeric cell: a plain number directly (the common case), anything
/// else (blanks, missing marks, text, decimal commas) through the pass's
/// decimal mark ([`StreamDecimal::parse`]).
///
/// # Errors
/// Those of [`StreamDecimal::parse`].
#[inline]
fn parse_number(
    cell: &[u8],
    dec: &mut StreamDecimal,
    (source, line, column): (&str, u64, &str),
) -> Result<Cell> {
    match std::str::from_utf8(cell) {
        Ok(t) => match t.parse::<f64>() {
            Ok(v) if v.is_finite() && dec.trusts(t) => Ok(Cell::Value(v)),
            _ => dec.parse(source, t, line, column),
        },
        Err(_) => Ok(Cell::Invalid),
    }
}

/// The cell problems of a pass: the first [`CellProblems::MAX_LISTED`] kept,
/// all counted.
#[derive(Default)]
struct Problems {
    list: Vec<CellProblem>,
    total: usize,
}

impl Problems {
    fn push(&mut self, line: u64, column: &str, value: &[u8], message: String) {
        self.total += 1;
        if self.list.len() < CellProblems::MAX_LISTED {
            let text = String::from_utf8_lossy(value);
            let value: String = text.trim().chars().take(40).collect();
            self.list.push(CellProblem {
                line,
                column: column.to_string(),
                value,
                message,
                cell: None,
            });
        }
    }
}

/// How many line numbers of rows with missing values are kept for display.
pub const MISSING_LINES_KEPT: usize = 20;

/// The CSV reader of a pass, over the line-break counter.
type RowReader<R> = csv::Reader<BreakCounter<BufReader<R>>>;

fn io_error(source: &str, e: std::io::Error) -> Error {
    Error::Io {
        path: source.to_string(),
        action: "reading",
        source: e,
    }
}

/// The CSV reader over `input` (a byte-order mark skipped) and the
/// delimiter detected from the first buffer.
///
/// # Errors
/// [`Error::Format`] for an empty file; [`Error::Io`] when reading fails.
fn open<R: Read>(source: &str, input: R) -> Result<(RowReader<R>, u8)> {
    let mut buffered = BufReader::with_capacity(1 << 16, input);
    let head = buffered.fill_buf().map_err(|e| io_error(source, e))?;
    let bom = head.starts_with(b"\xEF\xBB\xBF");
    if bom {
        buffered.consume(3);
    }
    let head = buffered.fill_buf().map_err(|e| io_error(source, e))?;
    if head.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(format_error(
            source,
            "the file is empty; it needs a header row and one row per participant",
        ));
    }
    // A first line `sep=X` names the delimiter; its text is skipped and its
    // line break kept, so line numbers stay those of the file.
    let delimiter = match separator_text(head) {
        Some((d, text)) => {
            buffered.consume(text);
            d
        }
        None => detect_delimiter(head),
    };
    let counter = BreakCounter {
        inner: buffered,
        offset: 0,
        breaks: VecDeque::new(),
        line: 1,
    };
    let reader = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(true)
        .buffer_capacity(1 << 16)
        .from_reader(counter);
    Ok((reader, delimiter))
}

/// The position of the column `wanted` (given as `flag`) in `headers`.
///
/// # Errors
/// [`Error::MissingColumn`] when it is absent; [`Error::Format`] when its
/// name is repeated in the header.
fn locate(source: &str, headers: &[String], wanted: &str, flag: Flag) -> Result<usize> {
    let i = find_header(headers, wanted).ok_or_else(|| Error::MissingColumn {
        source_name: source.to_string(),
        column: wanted.to_string(),
        purpose: flag.to_string(),
        available: headers.join(", "),
        hint: format!(
            "Check the spelling of {flag}; headers are matched exactly, or ignoring case when unique."
        ),
    })?;
    check_unique(source, headers, i)?;
    Ok(i)
}

/// Reads the next record into `record`; false at the end of the file.
///
/// # Errors
/// [`Error::Io`] when reading fails; [`Error::Format`] naming the line
/// for a record that is not CSV.
fn next_record<R: Read>(
    source: &str,
    reader: &mut RowReader<R>,
    record: &mut csv::ByteRecord,
) -> Result<bool> {
    match reader.read_byte_record(record) {
        Ok(more) => Ok(more),
        Err(e) => {
            let line = match e.position() {
                Some(p) => reader.get_mut().line_at(p.byte()),
                None => 0,
            };
            if let csv::ErrorKind::Io(_) = e.kind() {
                let csv::ErrorKind::Io(inner) = e.into_kind() else {
                    unreachable!("matched above")
                };
                return Err(io_error(source, inner));
            }
            Err(format_error(
                source,
                format!("line {line} cannot be read as CSV: {e}"),
            ))
        }
    }
}

/// What a record of the header's width holds.
enum RowCheck {
    /// Every field empty: not a data row.
    Blank,
    /// A problem was recorded (a text value, a missing or non-UTF-8 site id).
    Problem,
    /// An empty or missing-mark numeric cell: the row is left out and counted.
    Missing,
    /// Every value read into the values buffer.
    Usable,
}

/// Reads the numeric cells at `numeric` into `values` and checks the site
/// id at `site`, recording problems.
#[inline]
fn check_row(
    record: &csv::ByteRecord,
    (source, line, word): (&str, u64, &'static str),
    (site_ix, num_ix): (usize, &[usize]),
    headers: &[String],
    values: &mut [f64],
    (problems, dec, coded, advice): (
        &mut Problems,
        &mut StreamDecimal,
        &mut [Option<Coding>],
        Option<usize>,
    ),
) -> Result<RowCheck> {
    let site = record[site_ix].trim_ascii();
    let mut bad = false;
    let mut missing = false;
    for (k, &i) in num_ix.iter().enumerate() {
        let cell = &record[i];
        if let Some(Some(c)) = coded.get_mut(k) {
            match c.code(cell, line) {
                Some(v) => values[k] = v,
                None => missing = true,
            }
            continue;
        }
        let parsed = parse_number(cell, dec, (source, line, &headers[i]))?;
        match parsed {
            Cell::Value(v) => values[k] = v,
            Cell::Missing => missing = true,
            Cell::Invalid if advice == Some(k) => {
                return Err(text_x(&headers[i], cell, (word, line)));
            }
            Cell::Invalid => {
                bad = true;
                let text = String::from_utf8_lossy(cell);
                problems.push(
                    line,
                    &headers[i],
                    cell,
                    format!(
                        "{}; fix the cell, or empty it to leave this row out",
                        invalid_hint(&text)
                    ),
                );
            }
        }
    }
    if site.is_empty() {
        if num_ix.iter().all(|&i| record[i].trim_ascii().is_empty())
            && record.iter().all(|f| f.trim_ascii().is_empty())
        {
            return Ok(RowCheck::Blank);
        }
        problems.push(
            line,
            &headers[site_ix],
            site,
            "the site id is missing; give every row its site id, or delete the row".into(),
        );
        return Ok(RowCheck::Problem);
    }
    if std::str::from_utf8(site).is_err() {
        problems.push(
            line,
            &headers[site_ix],
            site,
            "the site id is not valid UTF-8; save the file as UTF-8".into(),
        );
        return Ok(RowCheck::Problem);
    }
    Ok(if bad {
        RowCheck::Problem
    } else if missing {
        RowCheck::Missing
    } else {
        RowCheck::Usable
    })
}

/// The one message for a text cell in the x column of a slope run.
fn text_x(header: &str, cell: &[u8], (word, line): (&str, u64)) -> Error {
    let text: String = String::from_utf8_lossy(cell)
        .trim()
        .chars()
        .take(40)
        .collect();
    Error::usage(
        Flag::X,
        format!(
            "column '{header}' holds text ('{text}' on {word} {line}), and a slope needs numbers. To \
             compare two groups, code them 0/1 (1 = treatment), or add {} smd (Hedges' g) or {} \
             log-or (a binary outcome) with {} LEVEL naming the treatment group",
            Flag::Effect,
            Flag::Effect,
            Flag::Treat
        ),
    )
}

/// Where a pass reads its rows from.
pub enum RowStream<R> {
    /// CSV text (a file or standard input).
    Csv(R),
    /// A Parquet file (read by position, so a file only).
    Parquet(std::fs::File),
}

/// [`for_each_row`] or [`for_each_parquet_row`], as `input` is.
///
/// # Errors
/// Those of the two.
pub fn for_each<R: Read>(
    source: &str,
    input: RowStream<R>,
    cols: &RowColumns,
    row: impl FnMut(u64, &[u8], &[f64]) -> Result<()>,
) -> Result<PassSummary> {
    match input {
        RowStream::Csv(r) => for_each_row(source, r, cols, row),
        RowStream::Parquet(f) => for_each_parquet_row(source, f, cols, row),
    }
}

/// A source of records for a pass: CSV rows, or a Parquet file's rows.
trait Records {
    /// Every column name of the file, trimmed.
    fn headers(&self) -> &[String];
    /// The delimiter byte (see [`crate::input::Delimiter::of`]).
    fn delimiter(&self) -> u8;
    /// Starts reading the columns at header positions `ix`; returns the
    /// position of each in the records handed out and the column name of
    /// every record position.
    fn select(&mut self, ix: &[usize]) -> Result<(Vec<usize>, Vec<String>)>;
    /// Reads the next record; its line (row) number, None at the end.
    fn next(&mut self, record: &mut csv::ByteRecord) -> Result<Option<u64>>;
    /// How a problem's place is named besides its line (None: `line N`).
    fn place(&self, line: u64) -> Option<String>;
    /// The word for a place in messages: "line" or "row".
    fn word(&self) -> &'static str;
}

/// CSV rows through the line-break counter.
struct CsvRecords<R: Read> {
    source: String,
    reader: RowReader<R>,
    headers: Vec<String>,
    delimiter: u8,
}

impl<R: Read> Records for CsvRecords<R> {
    fn headers(&self) -> &[String] {
        &self.headers
    }
    fn delimiter(&self) -> u8 {
        self.delimiter
    }
    fn select(&mut self, ix: &[usize]) -> Result<(Vec<usize>, Vec<String>)> {
        Ok((ix.to_vec(), self.headers.clone()))
    }
    fn next(&mut self, record: &mut csv::ByteRecord) -> Result<Option<u64>> {
        if !next_record(&self.source, &mut self.reader, record)? {
            return Ok(None);
        }
        Ok(Some(match record.position() {
            Some(p) => self.reader.get_mut().line_at(p.byte()),
            None => 0,
        }))
    }
    fn place(&self, _line: u64) -> Option<String> {
        None
    }
    fn word(&self) -> &'static str {
        "line"
    }
}

/// A Parquet file's rows, batch by batch ([`crate::input::parquet`]).
struct ParquetRecords {
    headers: Vec<String>,
    file: Option<parquet_input::ParquetFile<std::fs::File>>,
    batches: Option<parquet_input::Batches<std::fs::File>>,
    batch: parquet_input::Batch,
    at: usize,
    width: usize,
}

impl Records for ParquetRecords {
    fn headers(&self) -> &[String] {
        &self.headers
    }
    fn delimiter(&self) -> u8 {
        crate::input::PARQUET
    }
    fn select(&mut self, ix: &[usize]) -> Result<(Vec<usize>, Vec<String>)> {
        let mut wanted = ix.to_vec();
        wanted.sort_unstable();
        wanted.dedup();
        let positions = ix
            .iter()
            .map(|i| wanted.iter().position(|w| w == i).unwrap_or(0))
            .collect();
        let names = wanted.iter().map(|&i| self.headers[i].clone()).collect();
        if let Some(file) = self.file.take() {
            self.batches = Some(file.batches(&wanted)?);
        }
        self.width = wanted.len();
        Ok((positions, names))
    }
    fn next(&mut self, record: &mut csv::ByteRecord) -> Result<Option<u64>> {
        let Some(batches) = self.batches.as_mut() else {
            return Ok(None);
        };
        if self.at >= self.batch.len {
            if !batches.next(&mut self.batch)? {
                return Ok(None);
            }
            self.at = 0;
        }
        record.clear();
        for k in 0..self.width {
            record.push_field(self.batch.cell(k, self.at));
        }
        let row = self.batch.first_row + self.at as u64;
        self.at += 1;
        Ok(Some(row))
    }
    fn place(&self, line: u64) -> Option<String> {
        Some(format!("row {line}"))
    }
    fn word(&self) -> &'static str {
        "row"
    }
}

/// Reads CSV rows from `input` and hands each usable row to `row` as
/// (line, site id bytes, numeric values in `cols.numeric` order).
///
/// Rows with an empty (or missing-mark) numeric cell are skipped and counted;
/// a missing site id, text that is not a number, or a field count different
/// from the header's are problems: they are collected (the first
/// [`CellProblems::MAX_LISTED`] kept) and returned together after the pass.
///
/// # Errors
/// [`Error::Format`], [`Error::MissingColumn`], [`Error::Cells`] naming the
/// file, line and column; [`Error::Io`] when reading fails.
pub fn for_each_row<R: Read>(
    source: &str,
    input: R,
    cols: &RowColumns,
    row: impl FnMut(u64, &[u8], &[f64]) -> Result<()>,
) -> Result<PassSummary> {
    let (mut reader, delimiter) = open(source, input)?;
    let headers = read_headers(source, &mut reader)?;
    let records = CsvRecords {
        source: source.to_string(),
        reader,
        headers,
        delimiter,
    };
    pass(source, records, cols, row)
}

/// [`for_each_row`] for a Parquet file: the rows are numbered 1, 2, ...
/// within the file, nulls are missing values, and the needed columns are
/// read batch by batch ([`crate::input::parquet`]).
///
/// # Errors
/// Those of [`for_each_row`]; [`Error::Format`] for a file that is not
/// readable Parquet or a needed column of a type pondus does not read.
pub fn for_each_parquet_row(
    source: &str,
    file: std::fs::File,
    cols: &RowColumns,
    row: impl FnMut(u64, &[u8], &[f64]) -> Result<()>,
) -> Result<PassSummary> {
    let file = parquet_input::ParquetFile::open(source, file)?;
    let records = ParquetRecords {
        headers: file.headers().to_vec(),
        file: Some(file),
        batches: None,
        batch: parquet_input::Batch::default(),
        at: 0,
        width: 0,
    };
    pass(source, records, cols, row)
}

/// One pass over the records of `records` (see [`for_each_row`]).
fn pass(
    source: &str,
    mut records: impl Records,
    cols: &RowColumns,
    mut row: impl FnMut(u64, &[u8], &[f64]) -> Result<()>,
) -> Result<PassSummary> {
    let delimiter = records.delimiter();
    let headers = records.headers().to_vec();
    let mut wanted = vec![locate(source, &headers, &cols.site, Flag::Site)?];
    for (h, flag) in &cols.numeric {
        wanted.push(locate(source, &headers, h, *flag)?);
    }
    let (positions, names) = records.select(&wanted)?;
    let site_ix = positions[0];
    let num_ix = &positions[1..];
    let mut summary = PassSummary {
        delimiter,
        ..PassSummary::default()
    };
    let mut coded = cols.coded.clone();
    if records.word() == "row" {
        coded.iter_mut().flatten().for_each(Coding::in_rows);
    }
    let advice = cols
        .text_x_advice
        .then(|| cols.numeric.iter().position(|(_, f)| *f == Flag::X))
        .flatten();
    let mut problems = Problems::default();
    let mut dec = StreamDecimal::new(cols.decimal, delimiter);
    let mut record = csv::ByteRecord::new();
    let mut values = vec![0.0; num_ix.len()];
    let width = names.len();
    while let Some(line) = records.next(&mut record)? {
        if record.len() != width {
            if record
                .iter()
                .all(|f| f.iter().all(|b| b.is_ascii_whitespace()))
            {
                summary.blank_rows += 1;
                continue;
            }
            return Err(format_error(
                source,
                format!(
                    "line {line} has {} fields but the header has {width}; check for a missing \
                     value or an unquoted '{}' inside a value",
                    record.len(),
                    delimiter as char
                ),
            ));
        }
        summary.rows += 1;
        let before = problems.list.len();
        let check = check_row(
            &record,
            (source, line, records.word()),
            (site_ix, num_ix),
            &names,
            &mut values,
            (&mut problems, &mut dec, &mut coded, advice),
        )?;
        if let Some(place) = records.place(line) {
            for p in &mut problems.list[before..] {
                p.cell = Some(place.clone());
            }
        }
        match check {
            RowCheck::Blank => {
                summary.rows -= 1;
                summary.blank_rows += 1;
            }
            RowCheck::Problem => {}
            RowCheck::Missing => {
                summary.missing_rows += 1;
                if summary.missing_lines.len() < MISSING_LINES_KEPT {
                    summary.missing_lines.push(line);
                }
            }
            RowCheck::Usable => {
                if problems.total == 0 {
                    row(line, record[site_ix].trim_ascii(), &values)?;
                }
            }
        }
    }
    if problems.total > 0 {
        return Err(Error::Cells(CellProblems {
            source: source.to_string(),
            problems: problems.list,
            total: problems.total,
        }));
    }
    if summary.rows == 0 {
        return Err(format_error(
            source,
            "the file has a header row but no data rows; add one row per participant",
        ));
    }
    summary.decimal = Some(dec.choice());
    summary.coded = coded;
    Ok(summary)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cols() -> RowColumns {
        RowColumns {
            site: "site".into(),
            numeric: vec![("x".into(), Flag::X), ("y".into(), Flag::Y)],
            decimal: None,
            coded: vec![],
            text_x_advice: false,
        }
    }

    fn lines(data: &[u8]) -> Vec<u64> {
        let mut out = Vec::new();
        for_each_row("t.csv", data, &cols(), |l, _, _| {
            out.push(l);
            Ok(())
        })
        .unwrap();
        out
    }

    #[test]
    fn line_numbers_survive_blank_lines_crlf_and_quotes() {
        assert_eq!(lines(b"site,x,y\na,1,2\n\n\nb,3,4\n"), vec![2, 5]);
        assert_eq!(lines(b"site,x,y\r\na,1,2\r\n\r\nb,3,4\r\n"), vec![2, 4]);
        assert_eq!(lines(b"site,x,y\n\"a\nb\",1,2\nc,3,4"), vec![2, 4]);
        assert_eq!(
            lines(b"\xEF\xBB\xBFsite;x;y\na;1;2\n;;\nb;3;4\n"),
            vec![2, 4]
        );
    }

    #[test]
    fn line_numbers_across_buffer_refills() {
        let mut data = b"site,x,y\n".to_vec();
        for i in 0..30_000 {
            if i % 1000 == 7 {
                data.extend_from_slice(b"\r\n\n");
            }
            data.extend_from_slice(format!("s{},{i},{}\n", i % 13, i * 2).as_bytes());
        }
        let got = lines(&data);
        // Reference: count lines in memory.
        let text = std::str::from_utf8(&data).unwrap();
        let want: Vec<u64> = text
            .split('\n')
            .enumerate()
            .filter(|(i, l)| *i > 0 && l.starts_with('s'))
            .map(|(i, _)| i as u64 + 1)
            .collect();
        assert_eq!(got, want);
    }

    #[test]
    fn problems_are_collected_with_lines() {
        let e = for_each_row(
            "t.csv",
            &b"site,x,y\na,1,2\n,3,4\nb,1;5,3\nc,abc,1\n"[..],
            &cols(),
            |_, _, _| Ok(()),
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("3 problems"), "{e}");
        assert!(
            e.contains("line 3, column 'site'") && e.contains("site id is missing"),
            "{e}"
        );
        assert!(e.contains("line 5, column 'x' (value 'abc')"), "{e}");
    }

    #[test]
    fn missing_values_skip_the_row_and_are_counted() {
        let mut n = 0;
        let s = for_each_row(
            "t.csv",
            &b"site,x,y\na,1,2\na,NA,3\na,,4\nb,1,2\n"[..],
            &cols(),
            |_, _, _| {
                n += 1;
                Ok(())
            },
        )
        .unwrap();
        assert_eq!((n, s.rows, s.missing_rows), (2, 4, 2));
        assert_eq!(s.missing_lines, vec![3, 4]);
    }
}
