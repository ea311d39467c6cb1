//! A regular file's data read in pieces on all of rayon's threads, merged
//! strictly in file order: the machinery shared by the table reader of
//! `pondus fit` ([`super::table_pieces`]) and the participant-row reader of
//! `pondus sites` (`crate::sites::pieces`).
//!
//! The data after the header are cut into pieces of a fixed number of bytes
//! ([`PIECE`] outside tests), each boundary moved on to the next line start,
//! so the pieces depend on the file alone, never on the number of threads.
//! Each thread reads a piece into a buffer of its own (reused) and hands its
//! bytes to the caller's reader, which fills a sink of its own and counts the
//! piece's `\n` bytes. The sinks are merged strictly in file order, each with
//! the line its piece starts on, so what the caller receives, and in which
//! order, is the same on 1, 2 or 4 threads. A reader may stop the reading (a
//! quote, an error): the pieces before it are merged, none after it, and the
//! caller learns where the stopping piece lies and on which line it starts.
//!
//! Line starts: a line break is `\n`, `\r\n` or a `\r` alone, as the csv
//! crate splits records outside quotes; a boundary is therefore only a true
//! record boundary when no quoted value spans it, which the callers ensure
//! by stopping at the first piece that holds a `"`. Line numbers count the
//! same line breaks, as [`super::LineCounter`] does: each `\n`, and each
//! `\r` not followed by `\n`.

use std::collections::BTreeMap;
use std::fs::File;
use std::sync::{Condvar, Mutex, PoisonError};

/// Bytes per piece (before the boundary moves on to a line break): large
/// enough that merging a piece is negligible next to reading it, small
/// enough that the buffer stays in a core's cache and two threads share the
/// work evenly.
pub const PIECE: u64 = 1 << 20;

/// How many pieces past the next one to merge a thread may start: bounds the
/// sinks waiting to be merged when one thread falls behind.
const AHEAD_PER_THREAD: usize = 4;

/// Reads `buf.len()` bytes of `file` from `offset`.
///
/// # Errors
/// Those of the operating system's read, and an unexpected end of file.
pub(crate) fn read_exact_at(file: &File, buf: &mut [u8], offset: u64) -> std::io::Result<()> {
    #[cfg(unix)]
    {
        std::os::unix::fs::FileExt::read_exact_at(file, buf, offset)
    }
    #[cfg(not(unix))]
    {
        use std::io::{Read, Seek, SeekFrom};
        let mut f = file;
        f.seek(SeekFrom::Start(offset))?;
        f.read_exact(buf)
    }
}

/// The number of line breaks in `bytes[..end]` (the line count that
/// [`super::LineCounter`] keeps): each `\n`, and each `\r` whose next byte,
/// looked up in `bytes` beyond `end` too, is not `\n` (a `\r` that ends
/// `bytes` is a break of its own: `bytes` must run to the end of the file or
/// at least one byte past `end`).
pub(crate) fn line_breaks(bytes: &[u8], end: usize) -> u64 {
    (0..end)
        .filter(|&i| match bytes[i] {
            b'\n' => true,
            b'\r' => bytes.get(i + 1) != Some(&b'\n'),
            _ => false,
        })
        .count() as u64
}

/// Skips the line breaks (`\n`, `\r`) at `bytes[pos..]`, adding the
/// breaks to `count` (each `\n`, and each `\r` not followed by `\n`: a
/// piece never ends between the two bytes of a `\r\n`); the position of the
/// next line's first byte (or the end). Empty lines are skipped this way,
/// as the csv crate skips them.
#[inline]
pub(crate) fn skip_breaks(bytes: &[u8], mut pos: usize, count: &mut u64) -> usize {
    while let Some(&b) = bytes.get(pos) {
        match b {
            b'\n' => *count += 1,
            b'\r' => *count += u64::from(bytes.get(pos + 1) != Some(&b'\n')),
            _ => break,
        }
        pos += 1;
    }
    pos
}

/// Splits the unquoted line at `bytes[pos..]` into fields at `delimiter`,
/// as the csv crate splits it: `fields` receives each field's offsets; the
/// line's end (a `\n` or `\r`, or the end of the bytes) is returned.
#[inline]
pub(crate) fn split_line(
    bytes: &[u8],
    pos: usize,
    delimiter: u8,
    fields: &mut Vec<(usize, usize)>,
) -> usize {
    split_line_reading(bytes, pos, delimiter, fields, |_, _| None)
}

/// [`split_line`], offering each field to `read` first: `read(f, pos)`
/// is called where field f starts and returns where the field ends if it
/// read the whole field (the byte there must be the delimiter, `\n`, `\r`
/// or the end of `bytes`, as [`next_stop`] would have found), None to
/// have its end found as usual.
#[inline(always)]
pub(crate) fn split_line_reading(
    bytes: &[u8],
    mut pos: usize,
    delimiter: u8,
    fields: &mut Vec<(usize, usize)>,
    mut read: impl FnMut(usize, usize) -> Option<usize>,
) -> usize {
    fields.clear();
    let mut from = pos;
    loop {
        pos = match read(fields.len(), pos) {
            Some(end) => end,
            None => next_stop(bytes, pos, delimiter),
        };
        match bytes.get(pos) {
            Some(&b) if b == delimiter => {
                fields.push((from, pos));
                pos += 1;
                from = pos;
            }
            _ => break,
        }
    }
    fields.push((from, pos));
    pos
}

/// The first position at or after `pos` that holds `delimiter`, `\n` or
/// `\r`; the length of `bytes` if none does.
///
/// # Formula
/// Eight bytes x at a time: a byte of x equal to c is a zero byte of
/// y = x XOR (c in every byte), and (y − 0x01…01) AND NOT y AND 0x80…80
/// flags every zero byte of y at its top bit; bytes above a zero byte may
/// be flagged falsely (the borrow), never bytes below it, so the lowest
/// flag of the three tests together is the first match (the zero-byte test
/// of Hacker's Delight, Warren 2012, §6-1).
#[inline(always)]
pub(crate) fn next_stop(bytes: &[u8], mut pos: usize, delimiter: u8) -> usize {
    const ONES: u64 = 0x0101_0101_0101_0101;
    const TOPS: u64 = 0x8080_8080_8080_8080;
    let zeros = |y: u64| y.wrapping_sub(ONES) & !y & TOPS;
    let (d, n, r) = (ONES * u64::from(delimiter), ONES * 0x0A, ONES * 0x0D);
    while let Some(chunk) = bytes.get(pos..pos + 8) {
        let mut word = [0u8; 8];
        word.copy_from_slice(chunk);
        let x = u64::from_le_bytes(word);
        let found = zeros(x ^ d) | zeros(x ^ n) | zeros(x ^ r);
        if found != 0 {
            return pos + (found.trailing_zeros() / 8) as usize;
        }
        pos += 8;
    }
    while let Some(&b) = bytes.get(pos) {
        if b == delimiter || b == b'\n' || b == b'\r' {
            break;
        }
        pos += 1;
    }
    pos
}

/// The file to read and where its data lie.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Layout<'a> {
    /// The file (read by position: its cursor is not used).
    pub file: &'a File,
    /// Its length in bytes.
    pub len: u64,
    /// The offset of the first byte after the header.
    pub data_start: u64,
    /// The line `data_start` lies on (1-based, `\n` bytes counted).
    pub first_line: u64,
    /// Bytes per piece (≥ 1).
    pub size: u64,
}

impl Layout<'_> {
    /// The number of pieces.
    fn pieces(&self) -> u64 {
        self.len.div_ceil(self.size.max(1))
    }
}

/// The bytes of a file around one piece, in a buffer reused across pieces.
struct PieceReader<'a> {
    file: &'a File,
    len: u64,
    /// Bytes per piece.
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

/// What a caller's reader made of one piece.
pub(crate) enum Outcome<S, X> {
    /// Its sink, and the number of `\n` bytes in the piece.
    Done {
        /// What the piece gave.
        sink: S,
        /// Its `\n` bytes.
        newlines: u64,
    },
    /// The reading stops here, for the reason `X`.
    Stop(X),
}

/// Why a reading in pieces stopped before the end.
pub(crate) enum Halt<X> {
    /// Reading the piece's bytes failed.
    Io(std::io::Error),
    /// The caller's reader stopped at it.
    Piece(X),
}

/// The piece at which the reading stopped: its file offsets, the line it
/// starts on (every piece before it merged) and why.
pub(crate) struct Stopped<X> {
    /// File offset of its first byte.
    pub start: u64,
    /// File offset after its last byte.
    pub end: u64,
    /// The line its first byte lies on.
    pub line: u64,
    /// Why it stopped.
    pub why: Halt<X>,
}

/// A piece read and waiting to be merged.
enum Read<S, X> {
    Done { sink: S, newlines: u64 },
    Stop(Stopped<X>),
}

/// What the threads share: the next piece to start and to merge, the pieces
/// waiting to be merged, and whether a thread is merging.
struct Shared<S, X> {
    next_take: u64,
    next_merge: u64,
    pending: BTreeMap<u64, Read<S, X>>,
    stop: Option<Stopped<X>>,
    /// The line the piece `next_merge` starts on.
    line: u64,
    /// A thread is merging (outside the lock): the others leave the pieces
    /// they finish to it.
    merging: bool,
}

impl<S, X> Shared<S, X> {
    /// Takes the pieces that are next in file order, each with the line it
    /// starts on, for the caller to merge (in that order); a piece that
    /// stopped the reading ends the run, records the stop and drops every
    /// piece after it.
    fn take_ready(&mut self) -> Vec<(S, u64)> {
        let mut ready = Vec::new();
        while self.stop.is_none() {
            let Some(piece) = self.pending.remove(&self.next_merge) else {
                break;
            };
            match piece {
                Read::Done { sink, newlines } => {
                    ready.push((sink, self.line));
                    self.line += newlines;
                    self.next_merge += 1;
                }
                Read::Stop(mut stopped) => {
                    stopped.line = self.line;
                    self.stop = Some(stopped);
                }
            }
        }
        if self.stop.is_some() {
            self.pending.clear();
        }
        ready
    }
}

/// Reads the data of `layout` in pieces on all of rayon's threads: each
/// thread makes its state with `worker` and hands each piece's bytes to
/// `read`; the sinks go to `merge` in file order, each with the line its
/// piece starts on. Returns where the reading stopped, if a piece stopped it
/// (or could not be read); None when every piece was merged.
pub(crate) fn read_in_pieces<W, S: Send, X: Send, M: FnMut(S, u64) + Send>(
    layout: &Layout<'_>,
    worker: impl Fn() -> W + Sync,
    read: impl Fn(&mut W, &[u8]) -> Outcome<S, X> + Sync,
    merge: &mut M,
) -> Option<Stopped<X>> {
    let threads = rayon::current_num_threads().max(1);
    let ahead = (AHEAD_PER_THREAD * threads) as u64;
    let shared = Mutex::new(Shared {
        next_take: 0,
        next_merge: 0,
        pending: BTreeMap::new(),
        stop: None,
        line: layout.first_line,
        merging: false,
    });
    // Held only by the thread that is merging (one at a time, by
    // `Shared::merging`): the merge runs outside the shared lock, so the
    // other threads go on taking and reading pieces meanwhile.
    let merge = Mutex::new(merge);
    let turn = Condvar::new();
    rayon::scope(|s| {
        for _ in 0..threads {
            s.spawn(|_| {
                let mut reader = PieceReader {
                    file: layout.file,
                    len: layout.len,
                    size: layout.size.max(1),
                    buf: Vec::new(),
                    at: 0,
                };
                let mut state = worker();
                let take = || next_piece(&shared, &turn, layout.pieces(), ahead);
                while let Some(j) = take() {
                    let piece = read_piece(layout, j, &mut reader, &mut state, &read);
                    let lock = || shared.lock().unwrap_or_else(PoisonError::into_inner);
                    let mut g = lock();
                    g.pending.insert(j, piece);
                    if g.merging {
                        continue;
                    }
                    g.merging = true;
                    // Merge what is ready, then look again (a piece the
                    // others finished meanwhile was left to this thread).
                    loop {
                        let ready = g.take_ready();
                        if ready.is_empty() {
                            g.merging = false;
                            break;
                        }
                        drop(g);
                        turn.notify_all();
                        let mut m = merge.lock().unwrap_or_else(PoisonError::into_inner);
                        for (sink, line) in ready {
                            (*m)(sink, line);
                        }
                        drop(m);
                        g = lock();
                    }
                    drop(g);
                    turn.notify_all();
                }
            });
        }
    });
    let shared = shared.into_inner().unwrap_or_else(PoisonError::into_inner);
    shared.stop
}

/// The next piece for a thread to read, waiting while it would run too far
/// ahead of the merging; None when the pieces ran out or the reading stopped.
fn next_piece<S, X>(
    shared: &Mutex<Shared<S, X>>,
    turn: &Condvar,
    pieces: u64,
    ahead: u64,
) -> Option<u64> {
    let mut g = shared.lock().unwrap_or_else(PoisonError::into_inner);
    loop {
        if g.stop.is_some() || g.next_take >= pieces {
            return None;
        }
        if g.next_take < g.next_merge + ahead {
            g.next_take += 1;
            return Some(g.next_take - 1);
        }
        g = turn.wait(g).unwrap_or_else(PoisonError::into_inner);
    }
}

/// Loads piece `j` and hands its bytes to `read`.
fn read_piece<W, S, X>(
    layout: &Layout<'_>,
    j: u64,
    reader: &mut PieceReader<'_>,
    state: &mut W,
    read: &impl Fn(&mut W, &[u8]) -> Outcome<S, X>,
) -> Read<S, X> {
    let stopped = |start, end, why| {
        Read::Stop(Stopped {
            start,
            end,
            line: 0,
            why,
        })
    };
    let (start, end) = match reader.piece(j, layout.data_start) {
        Ok(r) => r,
        Err(e) => return stopped(0, 0, Halt::Io(e)),
    };
    match read(state, reader.bytes(start, end)) {
        Outcome::Done { sink, newlines } => Read::Done { sink, newlines },
        Outcome::Stop(x) => stopped(start, end, Halt::Piece(x)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The split in eight-byte steps is the byte-by-byte split, for every
    /// line of up to 20 bytes drawn from a few bytes and both delimiters.
    #[test]
    fn lines_split_as_byte_by_byte() {
        let alphabet = [b'a', b',', b';', b'\n', b'\r', 0xff, 0x80, b' '];
        let mut fields = Vec::new();
        let mut seed = 0x9E37_79B9_7F4A_7C15u64;
        for len in 0..=20usize {
            for _ in 0..400 {
                let bytes: Vec<u8> = (0..len)
                    .map(|_| {
                        seed ^= seed << 13;
                        seed ^= seed >> 7;
                        seed ^= seed << 17;
                        alphabet[(seed % 8) as usize]
                    })
                    .collect();
                for delimiter in [b',', b';'] {
                    let mut want = Vec::new();
                    let (mut from, mut end) = (0, len);
                    for (i, &b) in bytes.iter().enumerate() {
                        if b == b'\n' || b == b'\r' {
                            end = i;
                            break;
                        }
                        if b == delimiter {
                            want.push((from, i));
                            from = i + 1;
                        }
                    }
                    want.push((from, end));
                    assert_eq!(split_line(&bytes, 0, delimiter, &mut fields), end);
                    assert_eq!(fields, want, "{bytes:?}");
                }
            }
        }
    }
}
