//! Streaming the raw participant rows: one record at a time, with the file's
//! own line numbers.

use super::decimal::StreamDecimal;
use super::levels::Coding;
use super::records::{CsvRecords, ParquetRecords, Records};
use crate::error::{CellProblem, CellProblems, Error, Result};
use crate::input::number::{invalid_hint, Cell, DecimalMark};
use crate::input::parquet as parquet_input;
use crate::input::{check_unique, format_error, read_headers};
use crate::input::{detect_delimiter, find_header, separator_text};
use crate::input::{DecimalChoice, LineCounter};
use crate::support::flag::Flag;
use std::io::{BufRead, BufReader, Read};

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
pub(super) struct Problems {
    /// The problems kept.
    pub(super) list: Vec<CellProblem>,
    /// All problems found.
    pub(super) total: usize,
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
pub(super) type RowReader<R> = csv::Reader<LineCounter<BufReader<R>>>;

pub(super) fn io_error(source: &str, e: std::io::Error) -> Error {
    Error::Io {
        path: source.to_string(),
        action: "reading",
        source: e,
    }
}

/// The CSV reader over `input` (a byte-order mark skipped), the
/// delimiter detected from the first buffer, and the number of bytes
/// skipped before the reader's stream (the mark, a `sep=` line's text).
///
/// # Errors
/// [`Error::Format`] for an empty file; [`Error::Io`] when reading fails.
fn open<R: Read>(source: &str, input: R) -> Result<(RowReader<R>, u8, u64)> {
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
    let mut skipped = if bom { 3 } else { 0 };
    let delimiter = match separator_text(head) {
        Some((d, text)) => {
            buffered.consume(text);
            skipped += text as u64;
            d
        }
        None => detect_delimiter(head),
    };
    let counter = LineCounter::new(buffered);
    let reader = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(true)
        .buffer_capacity(1 << 16)
        .from_reader(counter);
    Ok((reader, delimiter, skipped))
}

/// The CSV reader over `input`, which starts at a record boundary on line
/// `line` of a file whose header was read already.
pub(super) fn reader_at<R: Read>(input: R, delimiter: u8, line: u64) -> RowReader<R> {
    let counter = LineCounter::starting_at(BufReader::with_capacity(1 << 16, input), line);
    csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(false)
        .flexible(true)
        .buffer_capacity(1 << 16)
        .from_reader(counter)
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
pub(super) fn next_record<R: Read>(
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
    /// CSV text from standard input or another one-time stream.
    Csv(R),
    /// A CSV file: read in pieces on all of rayon's threads when it is a
    /// regular file (`sites::pieces`), else as a stream.
    CsvFile(std::fs::File),
    /// A Parquet file (read by position, so a file only).
    Parquet(std::fs::File),
}

/// Where each usable row goes: the per-site sums of one piece of the file
/// (or of the whole file when it is read as a stream). Sums of pieces are
/// merged in file order, whatever thread read them.
pub trait RowSink: Send {
    /// Takes one usable row: its site id and its values in
    /// [`RowColumns::numeric`] order.
    fn row(&mut self, id: &[u8], values: &[f64]);
}

/// One pass over the rows of `input`: every usable row handed to a sink
/// made by `make`, and each sink handed to `merge` in file order (one sink
/// for a stream or a Parquet file, one per piece for a CSV file read in
/// pieces). What reaches `merge`, and in which order, does not depend on the
/// number of threads.
///
/// # Errors
/// Those of [`for_each_row`] and [`for_each_parquet_row`].
pub fn for_each<R: Read, S: RowSink>(
    source: &str,
    input: RowStream<R>,
    cols: &RowColumns,
    make: impl Fn() -> S + Sync,
    mut merge: impl FnMut(S) + Send,
) -> Result<PassSummary> {
    let mut sink = make();
    let summary = match input {
        RowStream::CsvFile(f) => {
            return super::pieces::for_each_piece(source, f, cols, make, merge)
        }
        RowStream::Csv(r) => for_each_row(source, r, cols, |_, id, v| {
            sink.row(id, v);
            Ok(())
        }),
        RowStream::Parquet(f) => for_each_parquet_row(source, f, cols, |_, id, v| {
            sink.row(id, v);
            Ok(())
        }),
    }?;
    merge(sink);
    Ok(summary)
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
    let (mut records, _) = csv_records(source, input)?;
    let plan = Plan::new(source, &mut records, cols)?;
    pass(source, &plan, records, cols, row)
}

/// The CSV records of `input` with its header read, and the number of bytes
/// before the records' stream (a byte-order mark, a `sep=` line's text).
///
/// # Errors
/// Those of [`open`] and [`read_headers`].
pub(super) fn csv_records<R: Read>(source: &str, input: R) -> Result<(CsvRecords<R>, u64)> {
    let (mut reader, delimiter, skipped) = open(source, input)?;
    let headers = read_headers(source, &mut reader)?;
    let records = CsvRecords {
        source: source.to_string(),
        reader,
        headers,
        delimiter,
    };
    Ok((records, skipped))
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
    let mut records = ParquetRecords::new(file);
    let plan = Plan::new(source, &mut records, cols)?;
    pass(source, &plan, records, cols, row)
}

/// What a pass reads where: found from the header once.
pub(super) struct Plan {
    /// Record position of the site id.
    pub(super) site_ix: usize,
    /// Record positions of the numeric columns.
    pub(super) num_ix: Vec<usize>,
    /// Column name of every record position.
    pub(super) names: Vec<String>,
    /// Position in `num_ix` of x when a text x stops the pass at once.
    advice: Option<usize>,
    /// The delimiter byte.
    pub(super) delimiter: u8,
    /// "line" (CSV) or "row" (Parquet).
    word: &'static str,
}

impl Plan {
    /// Finds the columns of `cols` in the header of `records` and starts
    /// reading them.
    ///
    /// # Errors
    /// Those of [`locate`] and [`Records::select`].
    pub(super) fn new(source: &str, records: &mut impl Records, cols: &RowColumns) -> Result<Self> {
        let headers = records.headers().to_vec();
        let mut wanted = vec![locate(source, &headers, &cols.site, Flag::Site)?];
        for (h, flag) in &cols.numeric {
            wanted.push(locate(source, &headers, h, *flag)?);
        }
        let (positions, names) = records.select(&wanted)?;
        Ok(Plan {
            site_ix: positions[0],
            num_ix: positions[1..].to_vec(),
            names,
            advice: cols
                .text_x_advice
                .then(|| cols.numeric.iter().position(|(_, f)| *f == Flag::X))
                .flatten(),
            delimiter: records.delimiter(),
            word: records.word(),
        })
    }
}

/// The running state of a pass (or of one piece) besides its counts.
pub(super) struct RowState {
    /// The decimal mark.
    pub(super) dec: StreamDecimal,
    /// The two-level codings (see [`RowColumns::coded`]).
    pub(super) coded: Vec<Option<Coding>>,
    /// The numeric values of the current row.
    pub(super) values: Vec<f64>,
}

impl RowState {
    /// The state at the start of a pass.
    pub(super) fn new(plan: &Plan, cols: &RowColumns) -> Self {
        let mut coded = cols.coded.clone();
        if plan.word == "row" {
            coded.iter_mut().flatten().for_each(Coding::in_rows);
        }
        RowState {
            dec: StreamDecimal::new(cols.decimal, plan.delimiter),
            coded,
            values: vec![0.0; plan.num_ix.len()],
        }
    }
}

/// The counts of a pass, or of one piece of it.
#[derive(Default)]
pub(super) struct Tally {
    /// Data rows read.
    pub(super) rows: u64,
    /// Rows left out for a missing value.
    pub(super) missing_rows: u64,
    /// The first [`MISSING_LINES_KEPT`] of their lines.
    pub(super) missing_lines: Vec<u64>,
    /// Blank rows skipped.
    pub(super) blank_rows: u64,
    /// Cell problems.
    pub(super) problems: Problems,
}

impl Tally {
    /// Adds the counts of the next stretch of the file, whose lines are
    /// numbered from `shift` + 1 on.
    pub(super) fn absorb(&mut self, next: Tally, shift: u64) {
        self.rows += next.rows;
        self.missing_rows += next.missing_rows;
        self.blank_rows += next.blank_rows;
        let room = MISSING_LINES_KEPT.saturating_sub(self.missing_lines.len());
        self.missing_lines
            .extend(next.missing_lines.iter().take(room).map(|l| l + shift));
        self.problems.total += next.problems.total;
        let room = CellProblems::MAX_LISTED.saturating_sub(self.problems.list.len());
        self.problems
            .list
            .extend(next.problems.list.into_iter().take(room).map(|mut p| {
                p.line += shift;
                p
            }));
    }
}

/// Takes one record on line `line`: a blank row or a row of the wrong width,
/// a row with problems or a missing value (counted), or a usable row handed
/// to `row`.
///
/// # Errors
/// [`Error::Format`] for a row of the wrong width; those of [`check_row`].
pub(super) fn take_record(
    (source, plan): (&str, &Plan),
    (state, tally): (&mut RowState, &mut Tally),
    record: &csv::ByteRecord,
    line: u64,
    row: &mut impl FnMut(u64, &[u8], &[f64]) -> Result<()>,
) -> Result<()> {
    let width = plan.names.len();
    if record.len() != width {
        if record
            .iter()
            .all(|f| f.iter().all(|b| b.is_ascii_whitespace()))
        {
            tally.blank_rows += 1;
            return Ok(());
        }
        return Err(format_error(
            source,
            format!(
                "line {line} has {} fields but the header has {width}; check for a missing \
                 value or an unquoted '{}' inside a value",
                record.len(),
                plan.delimiter as char
            ),
        ));
    }
    tally.rows += 1;
    let before = tally.problems.list.len();
    let check = check_row(
        record,
        (source, line, plan.word),
        (plan.site_ix, &plan.num_ix),
        &plan.names,
        &mut state.values,
        (
            &mut tally.problems,
            &mut state.dec,
            &mut state.coded,
            plan.advice,
        ),
    )?;
    if plan.word == "row" {
        for p in &mut tally.problems.list[before..] {
            p.cell = Some(format!("row {line}"));
        }
    }
    match check {
        RowCheck::Blank => {
            tally.rows -= 1;
            tally.blank_rows += 1;
        }
        RowCheck::Problem => {}
        RowCheck::Missing => {
            tally.missing_rows += 1;
            if tally.missing_lines.len() < MISSING_LINES_KEPT {
                tally.missing_lines.push(line);
            }
        }
        RowCheck::Usable => {
            if tally.problems.total == 0 {
                row(line, record[plan.site_ix].trim_ascii(), &state.values)?;
            }
        }
    }
    Ok(())
}

/// The summary of a finished pass.
///
/// # Errors
/// [`Error::Cells`] when cell problems were found; [`Error::Format`] when
/// the file has no data rows.
pub(super) fn finish(
    source: &str,
    tally: Tally,
    state: RowState,
    delimiter: u8,
) -> Result<PassSummary> {
    CellProblems::check(source, tally.problems.list, tally.problems.total)?;
    if tally.rows == 0 {
        return Err(format_error(
            source,
            "the file has a header row but no data rows; add one row per participant",
        ));
    }
    Ok(PassSummary {
        delimiter,
        rows: tally.rows,
        missing_rows: tally.missing_rows,
        missing_lines: tally.missing_lines,
        blank_rows: tally.blank_rows,
        decimal: Some(state.dec.choice()),
        coded: state.coded,
    })
}

/// One pass over the records of `records` (see [`for_each_row`]).
pub(super) fn pass(
    source: &str,
    plan: &Plan,
    mut records: impl Records,
    cols: &RowColumns,
    mut row: impl FnMut(u64, &[u8], &[f64]) -> Result<()>,
) -> Result<PassSummary> {
    let mut state = RowState::new(plan, cols);
    let mut tally = Tally::default();
    let mut record = csv::ByteRecord::new();
    while let Some(line) = records.next(&mut record)? {
        take_record(
            (source, plan),
            (&mut state, &mut tally),
            &record,
            line,
            &mut row,
        )?;
    }
    finish(source, tally, state, plan.delimiter)
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
