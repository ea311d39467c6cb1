//! A CSV file of participant rows read in pieces on all of rayon's threads.
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

use super::plain;
use super::read::{self, PassSummary, Plan, RowColumns, RowSink, RowState, Tally};
use super::records::{CsvRecords, Records};
use crate::error::{Error, Result};
use std::collections::BTreeMap;
use std::fs::File;
use std::io::{Seek, SeekFrom};
use std::sync::{Condvar, Mutex, PoisonError};

/// Bytes per piece (before the boundary moves on to a line break): large
/// enough that merging a piece's per-site sums (1,000 sites: tens of
/// microseconds) is negligible next to reading it, small enough that the
/// buffer stays in a core's cache and two threads share the work evenly.
pub const PIECE: u64 = 1 << 20;

/// How many pieces past the next one to merge a thread may start: bounds the
/// sums waiting to be merged when one thread falls behind.
const AHEAD_PER_THREAD: usize = 4;

/// Reads `buf.len()` bytes of `file` from `offset`.
fn read_exact_at(file: &File, buf: &mut [u8], offset: u64) -> std::io::Result<()> {
    #[cfg(unix)]
    {
        std::os::unix::fs::FileExt::read_exact_at(file, buf, offset)
    }
    #[cfg(not(unix))]
    {
        use std::io::Read;
        let mut f = file;
        f.seek(SeekFrom::Start(offset))?;
        f.read_exact(buf)
    }
}

/// The bytes of a file around one piece, in a buffer reused across pieces.
struct PieceReader<'a> {
    file: &'a File,
    len: u64,
    /// Bytes per piece ([`PIECE`]).
    size: u64,
    buf: Vec<u8>,
    /// File offset of `buf[0]`.
    at: u64,
}

impl PieceReader<'_> {
    /// Fills the buffer with the file's bytes `from..to` (`to` ≤ length).
    fn load(&mut self, from: u64, to: u64) -> std::io::Result<()> {
        self.at = from;
        // Only the growth is zeroed: the bytes kept are overwritten below.
        self.buf.resize((to - from) as usize, 0);
        read_exact_at(self.file, &mut self.buf, from)
    }

    /// The byte at `pos` (≥ the loaded start), reading on when needed; None
    /// past the end of the file.
    fn byte(&mut self, pos: u64) -> std::io::Result<Option<u8>> {
        if pos >= self.len {
            return Ok(None);
        }
        let end = self.at + self.buf.len() as u64;
        if pos >= end {
            let to = (pos + 1).max(end + (1 << 16)).min(self.len);
            let old = self.buf.len();
            self.buf.resize((to - self.at) as usize, 0);
            read_exact_at(self.file, &mut self.buf[old..], end)?;
        }
        Ok(Some(self.buf[(pos - self.at) as usize]))
    }

    /// The first line start at or after `t` (≥ 1): a position right after
    /// `\n`, or after a `\r` not followed by `\n`; the file's length if none.
    fn boundary(&mut self, t: u64) -> std::io::Result<u64> {
        let mut b = t;
        while b < self.len {
            match self.byte(b - 1)? {
                Some(b'\n') => return Ok(b),
                Some(b'\r') if self.byte(b)? != Some(b'\n') => return Ok(b),
                _ => b += 1,
            }
        }
        Ok(self.len)
    }

    /// Loads piece `j` of a file whose data start at `data_start`; returns
    /// its file offsets.
    fn piece(&mut self, j: u64, data_start: u64) -> std::io::Result<(u64, u64)> {
        let size = self.size;
        let from = if j == 0 {
            data_start.min(size - 1)
        } else {
            j * size - 1
        };
        self.load(from, ((j + 1) * size + 1).min(self.len).max(from))?;
        let start = if j == 0 {
            data_start
        } else {
            self.boundary(j * size)?.max(data_start)
        };
        let end = if (j + 1) * size >= self.len {
            self.len
        } else {
            self.boundary((j + 1) * size)?.max(data_start)
        };
        if end > start {
            // Reads on to the end of the piece when it lies beyond the
            // bytes loaded (a header longer than a piece).
            self.byte(end - 1)?;
        }
        Ok((start, end.max(start)))
    }

    /// The loaded bytes at file offsets `start..end`.
    fn bytes(&self, start: u64, end: u64) -> &[u8] {
        if end <= start {
            return &[];
        }
        &self.buf[(start - self.at) as usize..(end - self.at) as usize]
    }
}

/// What reading one piece gave.
enum Piece<S> {
    /// Its rows' sink, counts and line breaks.
    Done {
        sink: S,
        tally: Tally,
        newlines: u64,
    },
    /// It holds a quote: the rest of the file is read as a stream.
    Quoted { start: u64 },
    /// It stopped with an error (lines numbered within the piece).
    Failed { start: u64, end: u64, error: Error },
    /// Reading it failed.
    Io(Error),
}

/// Why the parallel reading stopped before the end.
enum Stop {
    /// A piece with a quote, starting at `start` on line `line`.
    Tail { start: u64, line: u64 },
    /// A piece that failed, read again with its first line known.
    Rerun {
        start: u64,
        end: u64,
        line: u64,
        error: Error,
    },
    /// An error that needs no line.
    Error(Error),
}

/// What the threads share: the next piece to start and to merge, the pieces
/// waiting to be merged, and the merged counts.
struct Shared<S, M> {
    next_take: u64,
    next_merge: u64,
    pending: BTreeMap<u64, Piece<S>>,
    stop: Option<Stop>,
    tally: Tally,
    /// The line the piece `next_merge` starts on.
    line: u64,
    merge: M,
}

impl<S, M: FnMut(S)> Shared<S, M> {
    /// Merges the pieces that are next in file order.
    fn drain(&mut self) {
        while self.stop.is_none() {
            let Some(piece) = self.pending.remove(&self.next_merge) else {
                return;
            };
            match piece {
                Piece::Done {
                    sink,
                    tally,
                    newlines,
                } => {
                    self.tally.absorb(tally, self.line);
                    (self.merge)(sink);
                    self.line += newlines;
                    self.next_merge += 1;
                }
                Piece::Quoted { start } => {
                    self.stop = Some(Stop::Tail {
                        start,
                        line: self.line,
                    })
                }
                Piece::Failed { start, end, error } => {
                    self.stop = Some(Stop::Rerun {
                        start,
                        end,
                        line: self.line,
                        error,
                    })
                }
                Piece::Io(e) => self.stop = Some(Stop::Error(e)),
            }
        }
        self.pending.clear();
    }
}

/// What every thread reads with.
struct Job<'a> {
    source: &'a str,
    plan: &'a Plan,
    cols: &'a RowColumns,
    file: &'a File,
    len: u64,
    data_start: u64,
    /// Bytes per piece, and the number of pieces.
    size: u64,
    pieces: u64,
    ahead: u64,
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
    merge: impl FnMut(S) + Send,
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
    let mut head = vec![0; data_start as usize];
    read_exact_at(&file, &mut head, 0).map_err(io)?;
    let first_line = 1 + head.iter().filter(|&&b| b == b'\n').count() as u64;
    let threads = rayon::current_num_threads().max(1);
    let job = Job {
        source,
        plan: &plan,
        cols,
        file: &file,
        len: meta.len(),
        data_start,
        size,
        pieces: meta.len().div_ceil(size),
        ahead: (AHEAD_PER_THREAD * threads) as u64,
    };
    let shared = Mutex::new(Shared {
        next_take: 0,
        next_merge: 0,
        pending: BTreeMap::new(),
        stop: None,
        tally: Tally::default(),
        line: first_line,
        merge,
    });
    let turn = Condvar::new();
    rayon::scope(|s| {
        for _ in 0..threads {
            s.spawn(|_| worker(&job, &shared, &turn, &make));
        }
    });
    let shared = shared.into_inner().unwrap_or_else(PoisonError::into_inner);
    let (mut tally, mut merge) = (shared.tally, shared.merge);
    match shared.stop {
        None => {}
        Some(Stop::Error(e)) => return Err(e),
        Some(Stop::Rerun {
            start,
            end,
            line,
            error,
        }) => {
            return Err(rerun(&job, (start, end), line, &make)
                .err()
                .unwrap_or(error))
        }
        Some(Stop::Tail { start, line }) => {
            let (sink, rest) = tail(&job, start, line, &make)?;
            tally.absorb(rest, 0);
            merge(sink);
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

/// One thread: takes the next piece, reads it, hands it in for merging,
/// until the pieces run out or the reading stopped.
fn worker<S: RowSink, M: FnMut(S) + Send>(
    job: &Job<'_>,
    shared: &Mutex<Shared<S, M>>,
    turn: &Condvar,
    make: &(impl Fn() -> S + Sync),
) {
    let mut reader = PieceReader {
        file: job.file,
        len: job.len,
        size: job.size,
        buf: Vec::new(),
        at: 0,
    };
    let mut scratch = Scratch {
        state: RowState::new(job.plan, job.cols),
        record: csv::ByteRecord::new(),
        fields: Vec::new(),
    };
    loop {
        let j = {
            let mut g = shared.lock().unwrap_or_else(PoisonError::into_inner);
            loop {
                if g.stop.is_some() || g.next_take >= job.pieces {
                    return;
                }
                if g.next_take < g.next_merge + job.ahead {
                    g.next_take += 1;
                    break g.next_take - 1;
                }
                g = turn.wait(g).unwrap_or_else(PoisonError::into_inner);
            }
        };
        let piece = read_piece(job, j, &mut reader, &mut scratch, make);
        let mut g = shared.lock().unwrap_or_else(PoisonError::into_inner);
        g.pending.insert(j, piece);
        g.drain();
        drop(g);
        turn.notify_all();
    }
}

/// Reads piece `j` (its lines numbered from 0).
fn read_piece<S: RowSink>(
    job: &Job<'_>,
    j: u64,
    reader: &mut PieceReader<'_>,
    scratch: &mut Scratch,
    make: &impl Fn() -> S,
) -> Piece<S> {
    let (start, end) = match reader.piece(j, job.data_start) {
        Ok(r) => r,
        Err(e) => return Piece::Io(read::io_error(job.source, e)),
    };
    let bytes = reader.bytes(start, end);
    if bytes.contains(&b'"') {
        return Piece::Quoted { start };
    }
    let mut sink = make();
    match run_piece(job, bytes, 0, &mut sink, scratch) {
        Ok((tally, newlines)) => Piece::Done {
            sink,
            tally,
            newlines,
        },
        Err(error) => Piece::Failed { start, end, error },
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
    while pos < bytes.len() {
        match bytes[pos] {
            b'\n' => {
                newlines += 1;
                pos += 1;
                continue;
            }
            b'\r' => {
                pos += 1;
                continue;
            }
            _ => {}
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
        fields.clear();
        let mut from = pos;
        while let Some(&b) = bytes.get(pos) {
            if b == delimiter {
                fields.push((from, pos));
                from = pos + 1;
            } else if b == b'\n' || b == b'\r' {
                break;
            }
            pos += 1;
        }
        fields.push((from, pos));
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
