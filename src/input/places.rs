//! How messages name the rows and cells of a table: by line and column in
//! a CSV file, by sheet and cell address in a spreadsheet.

use super::{sheet, SheetOrigin};

/// How messages name a row or a cell of a table: by line and column in a
/// CSV file (`line 14, column 'dose'`), by sheet and address in a
/// spreadsheet (`cell extraction!D14 (column 'dose')`, `extraction row 14`).
/// Line numbers are the file's lines for CSV and the sheet's own row
/// numbers for a spreadsheet ([`super::Table::lines`]).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Places {
    pub(super) sheet: Option<SheetOrigin>,
    pub(super) headers: Vec<String>,
    /// Whether the table is a Parquet file's (rows numbered 1, 2, ...).
    pub(super) parquet: bool,
}

impl Places {
    /// Places of a CSV table (lines and column names).
    pub fn csv() -> Self {
        Places::default()
    }

    /// A row: `line 14`, `extraction row 14` in a spreadsheet, `row 14` in
    /// a Parquet file.
    pub fn row(&self, line: u64) -> String {
        match &self.sheet {
            Some(s) => format!("{} row {line}", sheet::quoted_name(&s.name)),
            None if self.parquet => format!("row {line}"),
            None => format!("line {line}"),
        }
    }

    /// A cell: `line 14, column 'dose'`, or `cell extraction!D14 (column
    /// 'dose')` in a spreadsheet (the row's place when the header is not
    /// one of the table's).
    pub fn cell(&self, line: u64, header: &str) -> String {
        match &self.sheet {
            Some(s) => match self.headers.iter().position(|h| h == header) {
                Some(i) => format!(
                    "cell {} (column '{header}')",
                    sheet::cell_address(&s.name, s.first_column + i as u32, line)
                ),
                None => format!("{}, column '{header}'", self.row(line)),
            },
            None => format!("{}, column '{header}'", self.row(line)),
        }
    }

    /// A cell of a column the message already names: `line 14`, or
    /// `cell extraction!D14` in a spreadsheet.
    pub fn at(&self, line: u64, header: &str) -> String {
        match (&self.sheet, self.headers.iter().position(|h| h == header)) {
            (Some(s), Some(i)) => format!(
                "cell {}",
                sheet::cell_address(&s.name, s.first_column + i as u32, line)
            ),
            _ => self.row(line),
        }
    }

    /// Whether the table is a spreadsheet's.
    pub fn is_sheet(&self) -> bool {
        self.sheet.is_some()
    }
}
