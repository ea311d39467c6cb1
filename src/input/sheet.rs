//! Reading a table from a spreadsheet (`.xlsx`, `.xlsm`, `.xls`, `.ods`)
//! with calamine. The first non-empty row of the sheet's used range is the
//! header; each cell becomes the text a CSV export would hold (numbers in
//! their shortest round-trip form), so numbers stored as text, empty cells
//! and the missing marks behave exactly as in CSV. Row numbers are the
//! sheet's own, and messages name cells as `sheet!D14`.

use super::{format_error, ColumnRequest, SheetOrigin, Table};
use crate::error::Result;
use calamine::{open_workbook_auto_from_rs, Data, Reader};
use std::io::Cursor;

/// File name endings read as spreadsheets (compared ignoring case).
pub const EXTENSIONS: [&str; 4] = ["xlsx", "xlsm", "xls", "ods"];

/// Whether the source's name ends in a spreadsheet extension.
pub fn is_spreadsheet(source: &str) -> bool {
    std::path::Path::new(source)
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| EXTENSIONS.iter().any(|x| e.eq_ignore_ascii_case(x)))
}

/// The spreadsheet column letters of 0-based column `col` (0 → A, 26 → AA).
pub fn column_letters(col: u32) -> String {
    let mut n = col as u64 + 1;
    let mut out = Vec::new();
    while n > 0 {
        let r = ((n - 1) % 26) as u8;
        out.push(b'A' + r);
        n = (n - 1) / 26;
    }
    out.reverse();
    String::from_utf8(out).unwrap_or_default()
}

/// A sheet's name as written in a cell address: as is when it is letters,
/// digits and `_` only, otherwise in single quotes with inner quotes
/// doubled (`'read me'`, `'Bob''s'`), as spreadsheet programs write it.
pub fn quoted_name(name: &str) -> String {
    if !name.is_empty() && name.chars().all(|c| c.is_alphanumeric() || c == '_') {
        name.to_string()
    } else {
        format!("'{}'", name.replace('\'', "''"))
    }
}

/// The address of the cell in 0-based column `col` and 1-based sheet row
/// `row` of sheet `name`: `extraction!D14`, `'bad dose'!AB3`. The one place
/// cell addresses are written.
pub fn cell_address(name: &str, col: u32, row: u64) -> String {
    format!("{}!{}{row}", quoted_name(name), column_letters(col))
}

/// A cell as the text a CSV export would hold.
fn cell_text(d: &Data) -> String {
    match d {
        Data::Empty => String::new(),
        Data::String(s) => s.clone(),
        Data::Float(f) => format!("{f}"),
        Data::Int(i) => i.to_string(),
        Data::Bool(b) => if *b { "TRUE" } else { "FALSE" }.to_string(),
        Data::DateTime(t) => format!("{}", t.as_f64()),
        Data::DateTimeIso(s) | Data::DurationIso(s) => s.clone(),
        Data::Error(e) => e.to_string(),
    }
}

/// Opens the workbook in `bytes` and reads sheet `sheet` (matched exactly,
/// else ignoring case; the first sheet when None): its name and used range.
///
/// # Errors
/// [`Error::Format`] when the bytes are not a workbook calamine can read,
/// the sheet does not exist (the message lists the sheets) or cannot be read.
fn open_sheet(
    source: &str,
    bytes: &[u8],
    sheet: Option<&str>,
) -> Result<(String, calamine::Range<Data>)> {
    let mut book = open_workbook_auto_from_rs(Cursor::new(bytes)).map_err(|e| {
        format_error(
            source,
            format!("cannot be read as a spreadsheet ({e}); save it as .xlsx, .ods or CSV"),
        )
    })?;
    let names = book.sheet_names();
    let name = match sheet {
        Some(s) => names
            .iter()
            .find(|n| n.as_str() == s)
            .or_else(|| names.iter().find(|n| n.eq_ignore_ascii_case(s)))
            .cloned()
            .ok_or_else(|| {
                format_error(
                    source,
                    format!(
                        "has no sheet named '{s}'; its sheets are: {} (choose one with {})",
                        names.join(", "),
                        crate::support::flag::Flag::Sheet
                    ),
                )
            })?,
        None => names
            .first()
            .cloned()
            .ok_or_else(|| format_error(source, "the workbook has no sheets"))?,
    };
    let range = book
        .worksheet_range(&name)
        .map_err(|e| format_error(source, format!("sheet '{name}' cannot be read: {e}")))?;
    Ok((name, range))
}

/// Reads sheet `sheet` (the first when None) of the workbook in `bytes` and
/// keeps the requested columns.
///
/// # Errors
/// [`Error::Format`](crate::error::Error::Format) when the bytes are not a workbook calamine can read,
/// the sheet does not exist (the message lists the sheets), or the sheet
/// has no header or no data rows; [`Error::MissingColumn`](crate::error::Error::MissingColumn) when a required
/// column is absent.
pub fn parse_sheet(
    source: &str,
    bytes: &[u8],
    requests: &[ColumnRequest],
    sheet: Option<&str>,
) -> Result<Table> {
    let (name, range) = open_sheet(source, bytes, sheet)?;
    let Some((row0, col0)) = range.start() else {
        return Err(format_error(
            source,
            format!("sheet '{name}' is empty; it needs a header row and one row per study"),
        ));
    };
    let mut rows = range.rows();
    let header_row = rows.next().unwrap_or(&[]);
    let headers: Vec<String> = header_row
        .iter()
        .map(|d| cell_text(d).trim().to_string())
        .collect();
    let indices = super::match_requests(source, &headers, requests)?;
    let mut columns = super::empty_columns(&headers, &indices);
    let mut lines = Vec::new();
    let mut blank_rows = 0;
    for (k, row) in rows.enumerate() {
        let texts: Vec<String> = row.iter().map(cell_text).collect();
        if texts.iter().all(|t| t.trim().is_empty()) {
            blank_rows += 1;
            continue;
        }
        for (col, ix) in columns.iter_mut().zip(&indices) {
            if let (Some(col), Some(i)) = (col.as_mut(), ix) {
                col.push(texts.get(*i).map_or("", |t| t.trim()));
            }
        }
        // Sheet rows are 1-based; the header is row row0 + 1.
        lines.push(u64::from(row0) + 2 + k as u64);
    }
    if lines.is_empty() {
        return Err(format_error(
            source,
            format!("sheet '{name}' has a header row but no data rows; add one row per study"),
        ));
    }
    Ok(Table {
        source: source.to_string(),
        delimiter: 0,
        headers,
        columns,
        lines,
        blank_rows,
        sheet: Some(SheetOrigin {
            name,
            first_column: col0,
        }),
        decimal: super::DecimalChoice::POINT,
    })
}

/// The non-empty cells of the first column of sheet `sheet` (the first
/// sheet when None), each with its address (`values!A3`) and its text as a
/// CSV export would hold it; used for `plan --moderator-values`.
///
/// # Errors
/// As [`parse_sheet`] for an unreadable workbook or an unknown sheet.
pub fn first_column(
    source: &str,
    bytes: &[u8],
    sheet: Option<&str>,
) -> Result<Vec<(String, String)>> {
    // A one-row sheet has no data rows for parse_sheet; read the cells directly.
    let (name, range) = open_sheet(source, bytes, sheet)?;
    let Some((row0, col0)) = range.start() else {
        return Ok(Vec::new());
    };
    Ok(range
        .rows()
        .enumerate()
        .filter_map(|(k, row)| {
            let text = row.first().map(cell_text).unwrap_or_default();
            let text = text.trim().to_string();
            (!text.is_empty()).then(|| {
                (
                    cell_address(&name, col0, u64::from(row0) + 1 + k as u64),
                    text,
                )
            })
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn letters() {
        assert_eq!(column_letters(0), "A");
        assert_eq!(column_letters(3), "D");
        assert_eq!(column_letters(25), "Z");
        assert_eq!(column_letters(26), "AA");
        assert_eq!(column_letters(27), "AB");
        assert_eq!(column_letters(701), "ZZ");
        assert_eq!(column_letters(702), "AAA");
    }

    #[test]
    fn addresses() {
        assert_eq!(cell_address("extraction", 3, 14), "extraction!D14");
        assert_eq!(cell_address("extraction", 27, 18), "extraction!AB18");
        assert_eq!(cell_address("bad dose", 0, 2), "'bad dose'!A2");
        assert_eq!(cell_address("Bob's", 701, 1), "'Bob''s'!ZZ1");
        assert_eq!(quoted_name("Tabelle_1"), "Tabelle_1");
    }

    #[test]
    fn places_with_a_header_off_the_first_row_and_column() {
        // A table whose header is in row 3 starting at column B: its first
        // data row is sheet row 4 and its 27th column is AB.
        let mut headers: Vec<String> = (0..27).map(|i| format!("h{i}")).collect();
        headers[26] = "ctrl_events".into();
        let table = Table {
            source: "w.xlsx".into(),
            delimiter: 0,
            headers,
            columns: Vec::new(),
            lines: vec![4, 5],
            blank_rows: 0,
            decimal: crate::input::DecimalChoice {
                mark: crate::input::number::DecimalMark::Point,
                how: crate::input::DecimalHow::Default,
            },
            sheet: Some(crate::input::SheetOrigin {
                name: "shifted".into(),
                first_column: 1,
            }),
        };
        let places = table.places();
        assert_eq!(
            places.cell(5, "ctrl_events"),
            "cell shifted!AB5 (column 'ctrl_events')"
        );
        assert_eq!(places.cell(4, "h0"), "cell shifted!B4 (column 'h0')");
        assert_eq!(places.row(4), "shifted row 4");
        let csv = crate::input::Places::csv();
        assert_eq!(csv.cell(5, "dose"), "line 5, column 'dose'");
        assert_eq!(csv.row(5), "line 5");
    }

    #[test]
    fn extensions() {
        assert!(is_spreadsheet("x/extraction.XLSX"));
        assert!(is_spreadsheet("a.ods"));
        assert!(!is_spreadsheet("a.csv"));
        assert!(!is_spreadsheet("xlsx"));
    }

    #[test]
    fn not_a_workbook() {
        let e = parse_sheet("a.xlsx", b"study,r\n", &[], None)
            .unwrap_err()
            .to_string();
        assert!(e.contains("cannot be read as a spreadsheet"), "{e}");
    }

    #[test]
    fn shortest_number_text() {
        assert_eq!(cell_text(&Data::Float(0.1)), "0.1");
        assert_eq!(cell_text(&Data::Float(3.0)), "3");
        assert_eq!(cell_text(&Data::Int(12)), "12");
        assert_eq!(cell_text(&Data::Empty), "");
    }
}
