//! Reading a CSV table in pieces: a first pass over the bytes checks what
//! must be known before any row is read (the encoding, an empty file, a
//! quote left open, the delimiter), a second pass parses the rows as they
//! stream through. A file on disk is never held whole in memory; bytes
//! already in memory take the same path, so both give the same tables and
//! the same messages.

use super::{detect_delimiter, format_error, is_utf16, separator_text};
use crate::error::{Error, Result};
use std::collections::VecDeque;
use std::io::Read;

/// How many bytes the first pass reads at a time, and the size of the CSV
/// parser's buffer.
const PIECE: usize = 1 << 16;

/// What the first pass learnt about the bytes.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Head {
    /// Bytes to skip before the parser starts: a UTF-8 byte-order mark and
    /// the text of a `sep=X` first line (its line break is kept, so line
    /// numbers stay those of the file).
    pub skip: usize,
    /// The delimiter: named by `sep=X`, else detected from the header line.
    pub delimiter: u8,
}

/// The first pass over `input`: refuses UTF-16 text, an empty file and a
/// quote that is never closed (in that order, as the messages of
/// [`super::parse_table`] say), and finds the delimiter.
///
/// # Errors
/// [`Error::Format`] for those files; [`Error::Io`] when reading fails.
pub(crate) fn first_pass<R: Read>(source: &str, mut input: R) -> Result<Head> {
    let mut buf = vec![0u8; PIECE];
    let mut got = fill(source, &mut input, &mut buf)?;
    let bom = buf[..got].starts_with(b"\xEF\xBB\xBF");
    let start = if bom { 3 } else { 0 };
    if is_utf16(&buf[start..got]) {
        return Err(format_error(
            source,
            "this file is UTF-16 (two bytes per character); save it as UTF-8 (in a spreadsheet, \
             choose CSV UTF-8) and run again",
        ));
    }
    // A `sep=X` line is at most 6 bytes and so lies within the first piece.
    let sep = separator_text(&buf[start..got]);
    let mut scan = Scan::default();
    let mut blank = buf[start..got].iter().all(|b| b.is_ascii_whitespace());
    scan.feed(&buf[start + sep.map_or(0, |(_, end)| end)..got]);
    while got > 0 {
        got = fill(source, &mut input, &mut buf)?;
        blank &= buf[..got].iter().all(|b| b.is_ascii_whitespace());
        scan.feed(&buf[..got]);
    }
    if blank {
        return Err(format_error(
            source,
            "the file is empty; it needs a header row and one row per study",
        ));
    }
    if let Some(line) = scan.open_at {
        return Err(format_error(
            source,
            format!(
                "line {line}: a value opened with '\"' is never closed, so the rest of the file \
                 would be read as part of it; add the closing '\"' (a '\"' inside a quoted \
                 value is written twice: \"\")"
            ),
        ));
    }
    Ok(Head {
        skip: start + sep.map_or(0, |(_, end)| end),
        delimiter: sep.map_or_else(|| scan.delimiter(), |(d, _)| d),
    })
}

/// Reads until `buf` is full or the input ends; the number of bytes read.
fn fill<R: Read>(source: &str, input: &mut R, buf: &mut [u8]) -> Result<usize> {
    let mut got = 0;
    while got < buf.len() {
        match input.read(&mut buf[got..]) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(io_error(source, e)),
        }
    }
    Ok(got)
}

/// An I/O error while reading `source`.
pub(crate) fn io_error(source: &str, e: std::io::Error) -> Error {
    Error::Io {
        path: source.to_string(),
        action: "reading",
        source: e,
    }
}

/// The quote count and the header line, piece by piece: the streamed
/// forms of [`super::unclosed_quote`] and [`detect_delimiter`].
#[derive(Debug)]
struct Scan {
    /// The line on which the quote now open was opened.
    open_at: Option<u64>,
    line: u64,
    /// Whether the last byte fed was a `\r` (a `\n` right after it ends
    /// the same line).
    after_cr: bool,
    /// The header line (up to its first line break outside quotes).
    header: Vec<u8>,
    header_done: bool,
    quoted: bool,
}

impl Default for Scan {
    fn default() -> Self {
        Scan {
            open_at: None,
            line: 1,
            after_cr: false,
            header: Vec::new(),
            header_done: false,
            quoted: false,
        }
    }
}

impl Scan {
    fn feed(&mut self, bytes: &[u8]) {
        if !self.header_done {
            for &b in bytes {
                if !self.quoted && (b == b'\n' || b == b'\r') {
                    self.header_done = true;
                    break;
                }
                if b == b'"' {
                    self.quoted = !self.quoted;
                }
                self.header.push(b);
            }
        }
        for &b in bytes {
            match b {
                b'"' => {
                    self.open_at = if self.open_at.is_some() {
                        None
                    } else {
                        Some(self.line)
                    }
                }
                b'\n' if self.after_cr => {}
                b'\n' | b'\r' => self.line += 1,
                _ => {}
            }
            self.after_cr = b == b'\r';
        }
    }

    fn delimiter(&self) -> u8 {
        detect_delimiter(&self.header)
    }
}

/// A reader that notes the byte offsets of the line breaks it passes on,
/// so that a record's line number can be found from the byte offset the
/// CSV parser gives (the parser's own line count skips blank lines and
/// miscounts CRLF files). Offsets are dropped once the parser is beyond
/// them: memory stays within the parser's look-ahead.
pub(crate) struct LineCounter<R> {
    inner: R,
    offset: u64,
    /// Offsets of line-break bytes not yet counted, shifted left by one;
    /// the low bit is 1 for `\n`, 0 for `\r`.
    breaks: VecDeque<u64>,
    line: u64,
}

impl<R> LineCounter<R> {
    /// Counts the lines of `inner`, whose first byte is on line 1.
    pub(crate) fn new(inner: R) -> Self {
        Self::starting_at(inner, 1)
    }

    /// Counts the lines of `inner`, whose first byte is on line `line`.
    pub(crate) fn starting_at(inner: R, line: u64) -> Self {
        LineCounter {
            inner,
            offset: 0,
            breaks: VecDeque::new(),
            line,
        }
    }

    /// The 1-based line of a record that the parser says starts at byte
    /// `offset`: the line breaks before it are counted, and so are those
    /// right at `offset` (the parser's offset points at the line breaks
    /// of blank lines before the record). A break is a `\n`, or a `\r` not
    /// followed by `\n` (the byte after a counted `\r` has been read: the
    /// parser has read the record that starts after it).
    pub(crate) fn line_at(&mut self, offset: u64) -> u64 {
        let mut end = offset;
        while let Some(&b) = self.breaks.front() {
            let at = b >> 1;
            if at > end {
                break;
            }
            if at == end {
                end += 1;
            }
            let newline = b & 1 == 1;
            let crlf = !newline && self.breaks.get(1) == Some(&(((at + 1) << 1) | 1));
            self.line += u64::from(newline || !crlf);
            self.breaks.pop_front();
        }
        self.line
    }
}

impl<R: Read> Read for LineCounter<R> {
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

/// The CSV parser over `input` once the first pass's `head.skip` bytes are
/// skipped, counting lines.
///
/// # Errors
/// [`Error::Io`] when the bytes to skip cannot be read.
pub(crate) fn parser<R: Read>(
    source: &str,
    mut input: R,
    head: Head,
) -> Result<csv::Reader<LineCounter<R>>> {
    let mut skipped = [0u8; 16];
    let n = fill(source, &mut input, &mut skipped[..head.skip])?;
    debug_assert_eq!(n, head.skip, "the first pass saw these bytes");
    Ok(csv::ReaderBuilder::new()
        .delimiter(head.delimiter)
        .has_headers(true)
        .flexible(true)
        .buffer_capacity(PIECE)
        .from_reader(LineCounter::new(input)))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The streamed scan agrees with the in-memory checks, whatever the
    /// size of the pieces.
    #[test]
    fn scan_in_pieces_matches_the_whole() {
        let cases: [&[u8]; 5] = [
            b"a;b\n1;2\n",
            b"\"x\ny\";b,c\n1,2\n",
            b"a,b\n\"open,2\n3,4\n",
            b"a\tb\r\n1\t2\r\n",
            b"a,\"b\"\"c\",d\n\"1\n2\",3,4\n",
        ];
        for bytes in cases {
            for size in [1, 2, 3, 7, 100] {
                let mut scan = Scan::default();
                for piece in bytes.chunks(size) {
                    scan.feed(piece);
                }
                assert_eq!(scan.open_at, super::super::unclosed_quote(bytes));
                assert_eq!(scan.delimiter(), detect_delimiter(bytes));
            }
        }
    }

    #[test]
    fn lines_of_blank_and_crlf_rows() {
        let bytes = b"a,b\r\n1,2\r\n\r\n\n3,4\n";
        let mut r = csv::ReaderBuilder::new()
            .flexible(true)
            .buffer_capacity(4)
            .from_reader(LineCounter::new(&bytes[..]));
        let mut rec = csv::ByteRecord::new();
        let mut lines = Vec::new();
        while r.read_byte_record(&mut rec).unwrap() {
            let at = rec.position().unwrap().byte();
            lines.push(r.get_mut().line_at(at));
        }
        assert_eq!(lines, [2, 5]);
    }
}
