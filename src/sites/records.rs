//! Where a pass's records come from: CSV rows through the line-break
//! counter ([`crate::input::LineCounter`]), or a Parquet file's rows batch
//! by batch.

use super::read::{next_record, RowReader};
use crate::error::Result;
use crate::input::parquet as parquet_input;
use std::io::Read;

/// A source of records for a pass: CSV rows, or a Parquet file's rows.
pub(super) trait Records {
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
    /// The word for a place in messages: "line" or "row".
    fn word(&self) -> &'static str;
}

/// CSV rows through the line-break counter.
pub(super) struct CsvRecords<R: Read> {
    pub(super) source: String,
    pub(super) reader: RowReader<R>,
    pub(super) headers: Vec<String>,
    pub(super) delimiter: u8,
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
    fn word(&self) -> &'static str {
        "line"
    }
}

/// A Parquet file's rows, batch by batch ([`crate::input::parquet`]).
pub(super) struct ParquetRecords {
    headers: Vec<String>,
    file: Option<parquet_input::ParquetFile<std::fs::File>>,
    batches: Option<parquet_input::Batches<std::fs::File>>,
    batch: parquet_input::Batch,
    at: usize,
    width: usize,
}

impl ParquetRecords {
    /// The rows of an opened Parquet file.
    pub(super) fn new(file: parquet_input::ParquetFile<std::fs::File>) -> Self {
        ParquetRecords {
            headers: file.headers().to_vec(),
            file: Some(file),
            batches: None,
            batch: parquet_input::Batch::default(),
            at: 0,
            width: 0,
        }
    }
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
    fn word(&self) -> &'static str {
        "row"
    }
}
