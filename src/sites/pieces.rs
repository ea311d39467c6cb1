//! A CSV file of participant rows read in pieces on all of rayon's threads,
//! with the machinery that the table reader of `pondus fit` shares
//! ([`crate::input::pieces`]).
//!
//! The data after the header is cut into pieces of [`PIECE`] bytes, each
//! boundary moved on to the next line break, so the pieces depend on the file
//! alone, never on the number of threads. Each thread reads a piece into a
//! buffer of its own (reused), reads its rows (plain numbers straight from the
//! bytes, see [`super::plain`]; any other row through the same code as the
//! streamed pass, `super::read::take_record`) into a sink of its own, and
//! counts the piece's line breaks. The pieces' sinks and counts are merged
//! strictly in file order, so what the caller receives, and in which order, is
//! the same on 1, 2 or 4 threads. Memory: one buffer and a few pieces' sinks
//! per thread.
//!
//! Line numbers: a piece numbers its lines from its start; its problems and
//! missing-value lines are moved by the line its piece starts on when it is
//! merged. A piece that stops with an error (a row of the wrong width, a text
//! x) is read again once the pieces before it are merged, with its first line
//! known, so the message names the line the streamed pass would name; the
//! first error in file order wins.
//!
//! Quotes: a line break inside a quoted field would make a piece boundary
//! false, so from the first piece that holds a `"` on the rest of the file is
//! read as a stream with the csv crate (the pieces before it hold no quote,
//! so their boundaries are true line ends). Files whose cells depend on the
//! cells before them (a decimal comma to detect, two-level codings) and
//! anything but a regular file are read as a stream from the start.

use super::read::{self, PassSummary, Plan, RowColumns, RowSink, RowState, Tally};
use super::records::{CsvRecords, Records};
use crate::error::{Error, Result};
use crate::input::pieces::{self, read_exact_at, Halt, Layout, Outcome, Stopped, PIECE};
use crate::input::plain;
use std::fs::File;
use std::io::{Seek, SeekFrom};

/// Why a piece stopped the reading in pieces.
enum Stop {
    /// It holds a quote: the rest of the file is read as a stream.
    Quoted,
    /// It stopped with an error (lines numbered within the piece): it is
    /// read again with its first line known.
    Failed(Error),
}

/// What every thread reads with.
struct Job<'a> {
    source: &'a str,
    plan: &'a Plan,
    cols: &'a RowColumns,
    file: &'a File,
}

/// What a field of a row is read as, in a row read in one sweep.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Role {
    /// The site id.
    Site,
    /// The k-th numeric value.
    Number(usize),
    /// Not needed.
    Other,
}

/// The role of every field, when each needed column is a field of its own
/// (None when one field is needed twice: those rows are split first).
fn roles(plan: &Plan) -> Option<Vec<Role>> {
    let mut roles = vec![Role::Other; plan.names.len()];
    roles[plan.site_ix] = Role::Site;
    for (k, &i) in plan.num_ix.iter().enumerate() {
        if roles[i] != Role::Other {
            return None;
        }
        roles[i] = Role::Number(k);
    }
    Some(roles)
}

/// A thread's buffers, reused from piece to piece.
struct Scratch {
    state: RowState,
    record: csv::ByteRecord,
    fields: Vec<(usize, usize)>,
}

/// [`super::read::for_each`] for a CSV file: in pieces when the file allows
/// (see the module documentation), else as a stream.
///
/// # Errors
/// Those of [`read::for_each_row`], identical to the streamed pass's.
pub(super) fn for_each_piece<S: RowSink>(
    source: &str,
    file: File,
    cols: &RowColumns,
    make: impl Fn() -> S + Sync,
    merge: impl FnMut(S) + Send,
) -> Result<PassSummary> {
    for_each_piece_of(source, (file, PIECE), cols, make, merge)
}

/// [`for_each_piece`] with pieces of `size` bytes (≥ 1).
pub(super) fn for_each_piece_of<S: RowSink>(
    source: &str,
    (file, size): (File, u64),
    cols: &RowColumns,
    make: impl Fn() -> S + Sync,
    mut merge: impl FnMut(S) + Send,
) -> Result<PassSummary> {
    let io = |e| read::io_error(source, e);
    let meta = file.metadata().map_err(io)?;
    if !meta.is_file() || cols.coded.iter().any(Option::is_some) {
        return streamed(source, file, cols, make, merge);
    }
    let (mut records, skipped) = read::csv_records(source, &file)?;
    let plan = Plan::new(source, &mut records, cols)?;
    if !RowState::new(&plan, cols).dec.is_stateless() {
        drop(records);
        (&file).seek(SeekFrom::Start(0)).map_err(io)?;
        return streamed(source, file, cols, make, merge);
    }
    let data_start = (skipped + records.reader.position().byte()).min(meta.len());
    drop(records);
    // One byte past the header row, when the file has it: whether a `\r`
    // that ends the row is a line break of its own or half of a `\r\n`.
    let mut head = vec![0; (data_start + 1).min(meta.len()) as usize];
    read_exact_at(&file, &mut head, 0).map_err(io)?;
    let layout = Layout {
        file: &file,
        len: meta.len(),
        data_start,
        first_line: 1 + pieces::line_breaks(&head, data_start as usize),
        size,
    };
    let job = Job {
        source,
        plan: &plan,
        cols,
        file: &file,
    };
    let mut tally = Tally::default();
    let mut merge_piece = |(sink, piece): (S, Tally), line: u64| {
        tally.absorb(piece, line);
        merge(sink);
    };
    let stopped = pieces::read_in_pieces(
        &layout,
        || Scratch {
            state: RowState::new(&plan, cols),
            record: csv::ByteRecord::new(),
            fields: Vec::new(),
        },
        |scratch, bytes| read_piece(&job, bytes, scratch, &make),
        &mut merge_piece,
    );
    if let Some(Stopped {
        start,
        end,
        line,
        why,
    }) = stopped
    {
        match why {
            Halt::Io(e) => return Err(io(e)),
            Halt::Piece(Stop::Failed(error)) => {
                return Err(rerun(&job, (start, end), line, &make)
                    .err()
                    .unwrap_or(error))
            }
            Halt::Piece(Stop::Quoted) => {
                let (sink, rest) = tail(&job, start, line, &make)?;
                merge_piece((sink, rest), 0);
            }
        }
    }
    read::finish(source, tally, RowState::new(&plan, cols), plan.delimiter)
}

/// The whole file as one stream ([`read::for_each_row`]) into one sink.
fn streamed<S: RowSink>(
    source: &str,
    file: File,
    cols: &RowColumns,
    make: impl Fn() -> S,
    mut merge: impl FnMut(S),
) -> Result<PassSummary> {
    let mut sink = make();
    let summary = read::for_each_row(source, file, cols, |_, id, v| {
        sink.row(id, v);
        Ok(())
    })?;
    merge(sink);
    Ok(summary)
}

/// Reads one piece's bytes (its lines numbered from 0) into a sink of its
/// own; stops at a piece that holds a quote or a row in error.
fn read_piece<S: RowSink>(
    job: &Job<'_>,
    bytes: &[u8],
    scratch: &mut Scratch,
    make: &impl Fn() -> S,
) -> Outcome<(S, Tally), Stop> {
    if bytes.contains(&b'"') {
        return Outcome::Stop(Stop::Quoted);
    }
    let mut sink = make();
    match run_piece(job, bytes, 0, &mut sink, scratch) {
        Ok((tally, newlines)) => Outcome::Done {
            sink: (sink, tally),
            newlines,
        },
        Err(error) => Outcome::Stop(Stop::Failed(error)),
    }
}

/// Reads a failed piece again with its first line known: the error the
/// streamed pass gives.
fn rerun<S: RowSink>(
    job: &Job<'_>,
    (start, end): (u64, u64),
    line: u64,
    make: &impl Fn() -> S,
) -> Result<()> {
    let mut buf = vec![0; (end - start) as usize];
    read_exact_at(job.file, &mut buf, start).map_err(|e| read::io_error(job.source, e))?;
    let mut scratch = Scratch {
        state: RowState::new(job.plan, job.cols),
        record: csv::ByteRecord::new(),
        fields: Vec::new(),
    };
    run_piece(job, &buf, line, &mut make(), &mut scratch).map(|_| ())
}

/// The rest of the file from `start` (on line `line`) as a stream through
/// the csv crate, into one sink; lines numbered as in the file.
fn tail<S: RowSink>(
    job: &Job<'_>,
    start: u64,
    line: u64,
    make: &impl Fn() -> S,
) -> Result<(S, Tally)> {
    let mut file = job.file;
    file.seek(SeekFrom::Start(start))
        .map_err(|e| read::io_error(job.source, e))?;
    let mut records = CsvRecords {
        source: job.source.to_string(),
        reader: read::reader_at(file, job.plan.delimiter, line),
        headers: Vec::new(),
        delimiter: job.plan.delimiter,
    };
    let mut sink = make();
    let mut state = RowState::new(job.plan, job.cols);
    let mut tally = Tally::default();
    let mut record = csv::ByteRecord::new();
    while let Some(line) = records.next(&mut record)? {
        read::take_record(
            (job.source, job.plan),
            (&mut state, &mut tally),
            &record,
            line,
            &mut |_, id, v| {
                sink.row(id, v);
                Ok(())
            },
        )?;
    }
    Ok((sink, tally))
}

/// Reads the rows of one piece (no quotes in it) into `sink`, its lines
/// numbered from `base`; returns its counts and its number of `\n` bytes.
///
/// Records are split as the csv crate splits unquoted text: at `\n` and
/// `\r`, empty lines skipped, fields at every delimiter.
///
/// # Errors
/// Those of `super::read::take_record`.
fn run_piece<S: RowSink>(
    job: &Job<'_>,
    bytes: &[u8],
    base: u64,
    sink: &mut S,
    scratch: &mut Scratch,
) -> Result<(Tally, u64)> {
    let plan = job.plan;
    let delimiter = plan.delimiter;
    let plain_numbers = scratch.state.dec.reads_points();
    let sweep = roles(plan).filter(|_| plain_numbers);
    let mut tally = Tally::default();
    let (mut newlines, mut pos) = (0u64, 0usize);
    loop {
        pos = pieces::skip_breaks(bytes, pos, &mut newlines);
        if pos >= bytes.len() {
            break;
        }
        if let Some(roles) = &sweep {
            let values = &mut scratch.state.values;
            if let Some(end) = plain_line((roles, delimiter), bytes, pos, values, sink) {
                tally.rows += 1;
                pos = end;
                continue;
            }
        }
        let fields = &mut scratch.fields;
        pos = pieces::split_line(bytes, pos, delimiter, fields);
        if plain_numbers && plain_row(plan, bytes, fields, &mut scratch.state.values, sink) {
            tally.rows += 1;
            continue;
        }
        let record = &mut scratch.record;
        record.clear();
        for &(a, b) in fields.iter() {
            record.push_field(&bytes[a..b]);
        }
        read::take_record(
            (job.source, plan),
            (&mut scratch.state, &mut tally),
            record,
            base + newlines,
            &mut |_, id, v| {
                sink.row(id, v);
                Ok(())
            },
        )?;
    }
    Ok((tally, newlines))
}

/// Hands a row to `sink` when it is plain: the header's width, a site id
/// that is not blank and is UTF-8, and plain numbers ([`plain::parse`]) in
/// every numeric column. Such a row is exactly one that the general
/// reading finds usable with the same values; false for any other row,
/// which then goes the general way.
#[inline]
fn plain_row<S: RowSink>(
    plan: &Plan,
    bytes: &[u8],
    fields: &[(usize, usize)],
    values: &mut [f64],
    sink: &mut S,
) -> bool {
    if fields.len() != plan.names.len() {
        return false;
    }
    let (a, b) = fields[plan.site_ix];
    let site = bytes[a..b].trim_ascii();
    if site.is_empty() || !(site.is_ascii() || std::str::from_utf8(site).is_ok()) {
        return false;
    }
    for (v, &i) in values.iter_mut().zip(&plan.num_ix) {
        let (a, b) = fields[i];
        match plain::parse(&bytes[a..b]) {
            Some(x) => *v = x,
            None => return false,
        }
    }
    sink.row(site, values);
    true
}

/// Reads the line at `bytes[pos..]` in one sweep when it is a plain row
/// (see [`plain_row`]): each number read where its field starts
/// ([`plain::parse_prefix`]) and required to end at the delimiter (at the
/// line's end for the last field). Returns the position of the line's end
/// after handing the row to `sink`; None for any other line (nothing handed
/// on), which then goes the general way.
#[inline]
fn plain_line<S: RowSink>(
    (roles, delimiter): (&[Role], u8),
    bytes: &[u8],
    pos: usize,
    values: &mut [f64],
    sink: &mut S,
) -> Option<usize> {
    let last = roles.len() - 1;
    let (mut i, mut site) = (pos, (pos, pos));
    for (f, role) in roles.iter().enumerate() {
        if let Role::Number(k) = *role {
            let (v, n) = plain::parse_prefix(&bytes[i..])?;
            values[k] = v;
            i += n;
        } else {
            let from = i;
            while let Some(&b) = bytes.get(i) {
                if b == delimiter || b == b'\n' || b == b'\r' {
                    break;
                }
                i += 1;
            }
            if *role == Role::Site {
                site = (from, i);
            }
        }
        match bytes.get(i) {
            Some(&b) if b == delimiter && f < last => i += 1,
            Some(b'\n' | b'\r') | None if f == last => {}
            _ => return None,
        }
    }
    let site = bytes[site.0..site.1].trim_ascii();
    if site.is_empty() || !(site.is_ascii() || std::str::from_utf8(site).is_ok()) {
        return None;
    }
    sink.row(site, values);
    Some(i)
}
