//! Reading Parquet files (`.parquet`) column by column with the Apache
//! Arrow project's `parquet` crate (its low-level column readers; no Arrow
//! arrays are built).
//!
//! Each cell becomes the text a CSV export would hold, so numbers stored as
//! text, missing marks and every message behave as in CSV: integers and
//! decimals exactly (a decimal's unscaled integer with its point put back),
//! floats in their shortest round-trip form, booleans as `1`/`0`, text as
//! is, and a null as an empty cell (missing). Dates, times, timestamps,
//! binary columns and nested columns are refused, naming the column and its
//! type. Rows are numbered 1, 2, ... within the file (messages say
//! `row 14`), and are read in batches of at most [`BATCH_ROWS`] per column,
//! so memory is bounded by a batch and the page being decoded in each needed
//! column (at most that column's chunk of one row group), not by the file.

use super::{find_header, format_error, ColumnRequest, Table};
use crate::error::{Error, Result};
use parquet::basic::{Compression, ConvertedType, LogicalType, Type as Physical};
use parquet::column::reader::ColumnReader;
use parquet::file::reader::{ChunkReader, FileReader, SerializedFileReader};
use parquet::schema::types::ColumnDescPtr;

/// Rows read per column at a time.
pub const BATCH_ROWS: usize = 8192;

/// Whether the source's name ends in `.parquet` (ignoring case).
pub fn is_parquet(source: &str) -> bool {
    std::path::Path::new(source)
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("parquet"))
}

/// How a column's values become cell text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Bool,
    Int32,
    UInt32,
    Int64,
    UInt64,
    /// A decimal with this many digits after the point.
    Decimal(i32),
    Float,
    Double,
    Text,
}

/// An opened Parquet file: its top-level column names and footer.
pub struct ParquetFile<R: ChunkReader + 'static> {
    source: String,
    reader: SerializedFileReader<R>,
    headers: Vec<String>,
    /// The leaf column of each top-level column (None for a nested one).
    leaves: Vec<Option<usize>>,
}

/// The message for a file the crate cannot read.
fn unreadable(source: &str, what: impl std::fmt::Display) -> Error {
    format_error(
        source,
        format!(
            "cannot be read as Parquet ({what}); check that the file was written completely \
             (a copy that was cut short loses its footer), or export the data again as \
             Parquet or CSV"
        ),
    )
}

/// Runs `f`, turning a panic inside the Parquet crate (a malformed file it
/// does not guard against) into the unreadable-file message.
fn guarded<T>(source: &str, f: impl FnOnce() -> Result<T>) -> Result<T> {
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(f))
        .unwrap_or_else(|_| Err(unreadable(source, "its contents are malformed")))
}

impl<R: ChunkReader + 'static> ParquetFile<R> {
    /// Opens the file from its reader (a `File` or the bytes in memory).
    ///
    /// # Errors
    /// [`Error::Format`] when the bytes are not a readable Parquet file.
    pub fn open(source: &str, chunks: R) -> Result<Self> {
        guarded(source, || {
            let reader = SerializedFileReader::new(chunks).map_err(|e| unreadable(source, e))?;
            let schema = reader.metadata().file_metadata().schema_descr();
            let fields = schema.root_schema().get_fields();
            let headers: Vec<String> = fields.iter().map(|f| f.name().trim().to_string()).collect();
            let mut leaves = vec![None; fields.len()];
            for leaf in 0..schema.num_columns() {
                let root = schema.get_column_root_idx(leaf);
                if fields[root].is_primitive() {
                    leaves[root] = Some(leaf);
                }
            }
            Ok(ParquetFile {
                source: source.to_string(),
                reader,
                headers,
                leaves,
            })
        })
    }

    /// The top-level column names, trimmed.
    pub fn headers(&self) -> &[String] {
        &self.headers
    }

    /// The number of rows the footer declares.
    pub fn rows(&self) -> u64 {
        u64::try_from(self.reader.metadata().file_metadata().num_rows()).unwrap_or(0)
    }

    /// The position of column `wanted` among the headers (exact, else a
    /// unique case-insensitive match), as for CSV.
    pub fn find(&self, wanted: &str) -> Option<usize> {
        find_header(&self.headers, wanted)
    }

    /// Starts reading the columns at header positions `columns`.
    ///
    /// # Errors
    /// [`Error::Format`] naming a column whose type cannot be read as
    /// numbers or text (nested, binary, dates and times).
    pub fn batches(self, columns: &[usize]) -> Result<Batches<R>> {
        let schema = self.reader.metadata().file_metadata().schema_descr_ptr();
        let mut cols = Vec::with_capacity(columns.len());
        for &c in columns {
            let name = &self.headers[c];
            let Some(leaf) = self.leaves[c] else {
                return Err(refused(
                    &self.source,
                    name,
                    "nested (a struct, list or map)",
                ));
            };
            let descr = schema.column(leaf);
            let kind = kind_of(&descr).map_err(|t| refused(&self.source, name, &t))?;
            cols.push((leaf, (kind, descr.max_def_level())));
        }
        self.check_codecs(&cols)?;
        Ok(Batches {
            file: self,
            cols,
            group: 0,
            readers: Vec::new(),
            left_in_group: 0,
            rows: 0,
            defs: Vec::new(),
        })
    }
}

impl<R: ChunkReader + 'static> ParquetFile<R> {
    /// Refuses, before any row is read, a needed column chunk compressed
    /// with a codec this build does not decompress (only Snappy and
    /// uncompressed pages are read: see Cargo.toml).
    fn check_codecs(&self, cols: &[(usize, (Kind, i16))]) -> Result<()> {
        let meta = self.reader.metadata();
        for rg in meta.row_groups() {
            for &(leaf, _) in cols {
                let name = match rg.column(leaf).compression() {
                    Compression::UNCOMPRESSED | Compression::SNAPPY => continue,
                    Compression::GZIP(_) => "gzip",
                    Compression::LZO => "LZO",
                    Compression::BROTLI(_) => "Brotli",
                    Compression::LZ4 | Compression::LZ4_RAW => "LZ4",
                    Compression::ZSTD(_) => "zstd",
                };
                let column = rg.column(leaf).column_descr().name().to_string();
                return Err(format_error(
                    &self.source,
                    format!(
                        "column '{column}' is compressed with {name}, which pondus does not \
                         decompress; write the file with Snappy compression (the usual default: \
                         pyarrow compression='snappy', DuckDB COMPRESSION snappy, Spark \
                         spark.sql.parquet.compression.codec=snappy) or uncompressed"
                    ),
                ));
            }
        }
        Ok(())
    }
}

/// The refusal of a column of an unsupported type.
fn refused(source: &str, column: &str, what: &str) -> Error {
    format_error(
        source,
        format!(
            "column '{column}' has the Parquet type {what}, which pondus does not read; \
             store it as numbers (integer, decimal or floating point), text or true/false"
        ),
    )
}

/// How a leaf column's values are read, or the type's name when refused.
fn kind_of(d: &ColumnDescPtr) -> std::result::Result<Kind, String> {
    if d.max_rep_level() > 0 || d.path().parts().len() > 1 {
        return Err("nested (a struct, list or map)".into());
    }
    let physical = d.physical_type();
    match d.logical_type_ref() {
        Some(LogicalType::Date) => return Err("date".into()),
        Some(LogicalType::Time(_)) => return Err("time".into()),
        Some(LogicalType::Timestamp(_)) => return Err("timestamp".into()),
        Some(LogicalType::Float16) => return Err("16-bit float".into()),
        Some(LogicalType::Uuid) => return Err("UUID".into()),
        _ => {}
    }
    let conv = d.converted_type();
    let kind = match (physical, conv) {
        (_, ConvertedType::DECIMAL) => Kind::Decimal(d.type_scale()),
        (_, ConvertedType::DATE) => return Err("date".into()),
        (
            _,
            ConvertedType::TIME_MILLIS
            | ConvertedType::TIME_MICROS
            | ConvertedType::TIMESTAMP_MILLIS
            | ConvertedType::TIMESTAMP_MICROS,
        ) => return Err("time or timestamp".into()),
        (_, ConvertedType::INTERVAL) => return Err("interval".into()),
        (Physical::BOOLEAN, _) => Kind::Bool,
        (
            Physical::INT32,
            ConvertedType::UINT_8 | ConvertedType::UINT_16 | ConvertedType::UINT_32,
        ) => Kind::UInt32,
        (Physical::INT32, _) => Kind::Int32,
        (Physical::INT64, ConvertedType::UINT_64) => Kind::UInt64,
        (Physical::INT64, _) => Kind::Int64,
        (Physical::INT96, _) => return Err("INT96 (a timestamp)".into()),
        (Physical::FLOAT, _) => Kind::Float,
        (Physical::DOUBLE, _) => Kind::Double,
        (Physical::BYTE_ARRAY, ConvertedType::UTF8 | ConvertedType::ENUM | ConvertedType::JSON) => {
            Kind::Text
        }
        (Physical::BYTE_ARRAY, _) => return Err("binary (bytes not marked as text)".into()),
        (Physical::FIXED_LEN_BYTE_ARRAY, _) => return Err("fixed-length binary".into()),
    };
    if let Kind::Decimal(scale) = kind {
        let bytes_ok = physical != Physical::FIXED_LEN_BYTE_ARRAY || d.type_length() <= 16;
        if !(0..=38).contains(&scale) || d.type_precision() > 38 || !bytes_ok {
            return Err("decimal wider than 38 digits".into());
        }
    }
    Ok(kind)
}

/// One batch of rows: each requested column's cells as text, back to back.
#[derive(Debug, Default)]
pub struct Batch {
    /// The 1-based row number (within the file) of the batch's first row.
    pub first_row: u64,
    /// Rows in the batch.
    pub len: usize,
    columns: Vec<Cells>,
}

#[derive(Debug, Default)]
struct Cells {
    text: Vec<u8>,
    ends: Vec<usize>,
}

impl Cells {
    fn clear(&mut self) {
        self.text.clear();
        self.ends.clear();
    }

    fn end(&mut self) {
        self.ends.push(self.text.len());
    }
}

impl Batch {
    /// The cell of requested column `column` in row `row` of the batch
    /// (empty for a null).
    pub fn cell(&self, column: usize, row: usize) -> &[u8] {
        let c = &self.columns[column];
        let start = if row == 0 { 0 } else { c.ends[row - 1] };
        &c.text[start..c.ends[row]]
    }
}

/// Reads the requested columns batch by batch, row group by row group.
pub struct Batches<R: ChunkReader + 'static> {
    file: ParquetFile<R>,
    cols: Vec<(usize, (Kind, i16))>,
    group: usize,
    readers: Vec<ColumnReader>,
    left_in_group: u64,
    rows: u64,
    defs: Vec<i16>,
}

impl<R: ChunkReader + 'static> Batches<R> {
    /// Reads the next batch into `batch`; false when every row was read.
    ///
    /// # Errors
    /// [`Error::Format`] when a page cannot be decoded (a damaged file), or
    /// the columns of a row group disagree on their length.
    pub fn next(&mut self, batch: &mut Batch) -> Result<bool> {
        let source = self.file.source.clone();
        guarded(&source, || self.next_inner(batch))
    }

    fn next_inner(&mut self, batch: &mut Batch) -> Result<bool> {
        let source = self.file.source.clone();
        while self.left_in_group == 0 {
            if self.group >= self.file.reader.num_row_groups() {
                return Ok(false);
            }
            let rg = self
                .file
                .reader
                .get_row_group(self.group)
                .map_err(|e| unreadable(&source, e))?;
            self.left_in_group = u64::try_from(rg.metadata().num_rows()).unwrap_or(0);
            self.readers.clear();
            for &(leaf, _) in &self.cols {
                self.readers.push(
                    rg.get_column_reader(leaf)
                        .map_err(|e| unreadable(&source, e))?,
                );
            }
            self.group += 1;
        }
        let want = self.left_in_group.min(BATCH_ROWS as u64) as usize;
        batch.columns.resize_with(self.cols.len(), Cells::default);
        for (k, reader) in self.readers.iter_mut().enumerate() {
            let cells = &mut batch.columns[k];
            cells.clear();
            let got = read_cells(reader, self.cols[k].1, want, &mut self.defs, cells)
                .map_err(|e| unreadable(&source, e))?;
            if got != want {
                return Err(unreadable(
                    &source,
                    format!(
                        "column '{}' of row group {} ends after {} of its {} rows",
                        self.file.headers[self.cols_header(k)],
                        self.group,
                        got,
                        want
                    ),
                ));
            }
        }
        batch.first_row = self.rows + 1;
        batch.len = want;
        self.rows += want as u64;
        self.left_in_group -= want as u64;
        Ok(true)
    }

    /// The header position of requested column `k`.
    fn cols_header(&self, k: usize) -> usize {
        let leaf = self.cols[k].0;
        self.file
            .leaves
            .iter()
            .position(|l| *l == Some(leaf))
            .unwrap_or(0)
    }
}

/// Reads up to `want` rows of one column into `cells`; returns the rows read.
fn read_cells(
    reader: &mut ColumnReader,
    (kind, max_def): (Kind, i16),
    want: usize,
    defs: &mut Vec<i16>,
    cells: &mut Cells,
) -> parquet::errors::Result<usize> {
    use std::io::Write;
    macro_rules! typed {
        ($r:expr, $write:expr) => {{
            let mut values = Vec::with_capacity(want);
            defs.clear();
            let mut got = 0;
            while got < want {
                let (n, _, _) = $r.read_records(want - got, Some(defs), None, &mut values)?;
                if n == 0 {
                    break;
                }
                got += n;
            }
            let mut it = values.iter();
            for i in 0..got {
                let present = max_def == 0 || defs.get(i).is_some_and(|&d| d == max_def);
                if present {
                    if let Some(v) = it.next() {
                        #[allow(clippy::redundant_closure_call)]
                        $write(&mut cells.text, v);
                    }
                }
                cells.end();
            }
            Ok(got)
        }};
    }
    let w = |t: &mut Vec<u8>, s: std::fmt::Arguments<'_>| {
        let _ = t.write_fmt(s);
    };
    match (reader, kind) {
        (ColumnReader::BoolColumnReader(r), _) => typed!(r, |t: &mut Vec<u8>, v: &bool| t
            .push(if *v { b'1' } else { b'0' })),
        (ColumnReader::Int32ColumnReader(r), Kind::Decimal(s)) => {
            typed!(r, |t: &mut Vec<u8>, v: &i32| decimal_text(
                t,
                i128::from(*v),
                s
            ))
        }
        (ColumnReader::Int32ColumnReader(r), Kind::UInt32) => {
            typed!(r, |t: &mut Vec<u8>, v: &i32| w(
                t,
                format_args!("{}", *v as u32)
            ))
        }
        (ColumnReader::Int32ColumnReader(r), _) => {
            typed!(r, |t: &mut Vec<u8>, v: &i32| w(t, format_args!("{v}")))
        }
        (ColumnReader::Int64ColumnReader(r), Kind::Decimal(s)) => {
            typed!(r, |t: &mut Vec<u8>, v: &i64| decimal_text(
                t,
                i128::from(*v),
                s
            ))
        }
        (ColumnReader::Int64ColumnReader(r), Kind::UInt64) => {
            typed!(r, |t: &mut Vec<u8>, v: &i64| w(
                t,
                format_args!("{}", *v as u64)
            ))
        }
        (ColumnReader::Int64ColumnReader(r), _) => {
            typed!(r, |t: &mut Vec<u8>, v: &i64| w(t, format_args!("{v}")))
        }
        (ColumnReader::FloatColumnReader(r), _) => {
            typed!(r, |t: &mut Vec<u8>, v: &f32| w(t, format_args!("{v}")))
        }
        (ColumnReader::DoubleColumnReader(r), _) => {
            typed!(r, |t: &mut Vec<u8>, v: &f64| w(t, format_args!("{v}")))
        }
        (ColumnReader::ByteArrayColumnReader(r), Kind::Decimal(s)) => {
            typed!(r, |t: &mut Vec<u8>, v: &parquet::data_type::ByteArray| {
                decimal_text(t, be_integer(v.data()), s)
            })
        }
        (ColumnReader::ByteArrayColumnReader(r), _) => {
            typed!(r, |t: &mut Vec<u8>, v: &parquet::data_type::ByteArray| t
                .extend_from_slice(v.data()))
        }
        (ColumnReader::FixedLenByteArrayColumnReader(r), Kind::Decimal(s)) => typed!(
            r,
            |t: &mut Vec<u8>, v: &parquet::data_type::FixedLenByteArray| decimal_text(
                t,
                be_integer(v.data()),
                s
            )
        ),
        _ => Err(parquet::errors::ParquetError::General(
            "a column type pondus does not read".into(),
        )),
    }
}

/// A big-endian two's-complement integer of at most 16 bytes (a decimal's
/// unscaled value as Parquet stores it in a byte array).
fn be_integer(bytes: &[u8]) -> i128 {
    let bytes = &bytes[bytes.len().saturating_sub(16)..];
    let negative = bytes.first().is_some_and(|b| b & 0x80 != 0);
    let mut v: i128 = if negative { -1 } else { 0 };
    for &b in bytes {
        v = (v << 8) | i128::from(b);
    }
    v
}

/// Writes `unscaled × 10^−scale` as decimal text (`-12345`, scale 2 →
/// `-123.45`; scale 3 on `5` → `0.005`): exact, as a CSV export writes it.
fn decimal_text(t: &mut Vec<u8>, unscaled: i128, scale: i32) {
    let digits = unscaled.unsigned_abs().to_string();
    if unscaled < 0 {
        t.push(b'-');
    }
    let scale = usize::try_from(scale).unwrap_or(0);
    if scale == 0 {
        t.extend_from_slice(digits.as_bytes());
    } else if digits.len() > scale {
        let (int, frac) = digits.split_at(digits.len() - scale);
        t.extend_from_slice(int.as_bytes());
        t.push(b'.');
        t.extend_from_slice(frac.as_bytes());
    } else {
        t.extend_from_slice(b"0.");
        t.extend(std::iter::repeat_n(b'0', scale - digits.len()));
        t.extend_from_slice(digits.as_bytes());
    }
}

/// Reads the requested columns of the Parquet file in `bytes` into a
/// table, as [`super::parse_table`] does for CSV; `lines` holds the 1-based
/// row numbers. A row whose requested cells are all null counts as blank,
/// as an empty CSV line does.
///
/// # Errors
/// [`Error::Format`] for bytes that are not a readable Parquet file, a
/// column of a type pondus does not read, text that is not UTF-8, or a
/// file without rows; [`Error::MissingColumn`] when a required column is
/// absent.
pub fn parse_parquet(source: &str, bytes: &[u8], requests: &[ColumnRequest]) -> Result<Table> {
    let file = ParquetFile::open(source, bytes::Bytes::copy_from_slice(bytes))?;
    let headers = file.headers().to_vec();
    let indices = super::match_requests(source, &headers, requests)?;
    // Each distinct column is read once; `slot` maps a request to it.
    let mut wanted: Vec<usize> = indices.iter().flatten().copied().collect();
    wanted.sort_unstable();
    wanted.dedup();
    let slot: Vec<Option<usize>> = indices
        .iter()
        .map(|ix| ix.and_then(|i| wanted.iter().position(|&w| w == i)))
        .collect();
    let mut columns = super::empty_columns(&headers, &indices);
    let mut lines = Vec::new();
    let mut blank_rows = 0;
    if wanted.is_empty() {
        // Only the header was asked for: every row counts, none is read.
        lines = (1..=file.rows()).collect();
    }
    let mut batches = file.batches(&wanted)?;
    let mut batch = Batch::default();
    while !wanted.is_empty() && batches.next(&mut batch)? {
        for r in 0..batch.len {
            let row = batch.first_row + r as u64;
            if (0..wanted.len()).all(|k| batch.cell(k, r).trim_ascii().is_empty()) {
                blank_rows += 1;
                continue;
            }
            for (col, s) in columns.iter_mut().zip(&slot) {
                if let (Some(col), Some(k)) = (col.as_mut(), s) {
                    let text = std::str::from_utf8(batch.cell(*k, r)).map_err(|_| {
                        format_error(
                            source,
                            format!(
                                "row {row}, column '{}' is not valid UTF-8 text; write the \
                                 text as UTF-8",
                                col.header
                            ),
                        )
                    })?;
                    col.push(text.trim());
                }
            }
            lines.push(row);
        }
    }
    if lines.is_empty() {
        return Err(format_error(
            source,
            "the file has columns but no rows with values; add one row per study",
        ));
    }
    Ok(Table {
        source: source.to_string(),
        delimiter: super::PARQUET,
        headers,
        columns,
        lines,
        blank_rows,
        sheet: None,
        decimal: super::DecimalChoice::POINT,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dec(v: i128, s: i32) -> String {
        let mut t = Vec::new();
        decimal_text(&mut t, v, s);
        String::from_utf8(t).unwrap()
    }

    #[test]
    fn decimals_are_written_exactly() {
        assert_eq!(dec(-12345, 2), "-123.45");
        assert_eq!(dec(5, 3), "0.005");
        assert_eq!(dec(0, 2), "0.00");
        assert_eq!(dec(123, 0), "123");
        assert_eq!(dec(-1, 1), "-0.1");
    }

    #[test]
    fn big_endian_integers() {
        assert_eq!(be_integer(&[0x00, 0x01]), 1);
        assert_eq!(be_integer(&[0xFF, 0xFE]), -2);
        assert_eq!(be_integer(&[0x30, 0x39]), 12345);
        assert_eq!(be_integer(&[]), 0);
    }

    #[test]
    fn extensions() {
        assert!(is_parquet("a/b.parquet"));
        assert!(is_parquet("B.PARQUET"));
        assert!(!is_parquet("a.csv"));
        assert!(!is_parquet("parquet"));
    }

    #[test]
    fn not_parquet() {
        let e = ParquetFile::open("a.parquet", bytes::Bytes::from_static(b"site,x\n1,2\n"))
            .err()
            .unwrap()
            .to_string();
        assert!(e.contains("cannot be read as Parquet"), "{e}");
    }
}
