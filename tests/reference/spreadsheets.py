#!/usr/bin/env python3
"""Write the spreadsheet fixtures of issue 15 from their CSV originals.

Usage: python spreadsheets.py        (from anywhere; writes next to the CSVs)

Each workbook is written as .xlsx and .xlsm by openpyxl 3.1.5, as .ods by
odfpy 1.4.1 and (the fixtures of tests/data/routes/ only) as .xls by xlwt
1.3.0 (all pinned in requirements.txt), so pondus's reader is tested on
files made by general-purpose libraries rather than by itself. openpyxl
writes a workbook without macros with the .xlsx content type whatever the
file is called, so the .xlsm is that workbook with its [Content_Types].xml
entry changed to the macro-enabled type (Python's zipfile), as a
macro-enabled workbook without macros is saved by a spreadsheet program.
xlwt writes the BIFF8 format that .xls files hold. Cells that
parse as numbers are stored as numbers, except where a fixture stores a
number as text on purpose; everything else (labels, "< .05") is text; empty
CSV cells stay empty.

Workbooks (all data invented):
- tests/data/routes/smd-routes.{xlsx,xlsm,xls,ods}: sheet "extraction" =
  smd-routes.csv (treat_n of the first row stored as text), sheet "typos" =
  the same with three bad cells (D4 "abc", J5 "2,41" and K6 "#N/A"-like
  text "n.a.") for the cell-address messages, sheet "shifted" = the same
  table placed from B3 (rows 1-2 and column A empty) with one bad cell in
  its last column, ctrl_events of study O (AB18: "2 5"), to check
  addresses past Z and with the header off row 1.
- tests/data/routes/cells.{xlsx,xlsm,xls,ods}: sheet "cells" = cells.csv,
  with B's effect and C's se (" 0.18 ", blanks kept) stored as text and the
  missing marks (NA, ".", "-", N/A) and the empty cell as in the CSV; sheet
  "bad dose" = the same with the moderator cell of study K typed "2.5O"
  (letter O, D12) for the moderator message.
- data-examples/classroom-extraction.{xlsx,ods}: sheet "extraction" (the
  tutorial's invented extraction sheet), after a first sheet "read me".
- tests/data/routes/choir-sites.{xlsx,ods}: sheet "sites" = data-examples/choir-sites.csv;
  sheet "repeated", the same with the id of A3 repeated in A4.
- tests/data/routes/planned-values.{xlsx,ods}: sheet "values", a header and
  eight planned moderator values in column A; sheet "typo", the same with A5
  typed "4O".
"""
import csv
import io
import os
import zipfile

import openpyxl
from odf.opendocument import OpenDocumentSpreadsheet
from odf.table import Table, TableCell, TableRow
from odf.text import P
import xlwt

ROOT = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))


def read_csv(rel):
    with open(os.path.join(ROOT, rel), encoding="utf-8", newline="") as f:
        return [row for row in csv.reader(f)]


def as_number(text):
    try:
        x = float(text)
    except ValueError:
        return None
    return int(x) if x.is_integer() and "." not in text and "e" not in text.lower() else x


def sheet_parts(sheet):
    """(name, rows, cells stored as text, (row, column) offset) of a sheet."""
    name, rows, as_text = sheet[:3]
    offset = sheet[3] if len(sheet) > 3 else (0, 0)
    return name, rows, as_text, offset


def write_xlsx(path, sheets, macro_enabled=False):
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for sheet in sheets:
        name, rows, as_text, (di, dj) = sheet_parts(sheet)
        ws = wb.create_sheet(name)
        for i, row in enumerate(rows, start=1):
            for j, text in enumerate(row, start=1):
                if text == "":
                    continue
                x = as_number(text)
                value = text if x is None or (i, j) in as_text else x
                ws.cell(row=i + di, column=j + dj, value=value)
    if not macro_enabled:
        wb.save(os.path.join(ROOT, path))
        return
    buf = io.BytesIO()
    wb.save(buf)
    plain = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"
    macro = "application/vnd.ms-excel.sheet.macroEnabled.main+xml"
    with zipfile.ZipFile(io.BytesIO(buf.getvalue())) as src, zipfile.ZipFile(
        os.path.join(ROOT, path), "w", zipfile.ZIP_DEFLATED
    ) as dst:
        for item in src.infolist():
            data = src.read(item.filename)
            if item.filename == "[Content_Types].xml":
                text = data.decode("utf-8")
                assert plain in text
                data = text.replace(plain, macro).encode("utf-8")
            dst.writestr(item, data)


def write_xls(path, sheets):
    book = xlwt.Workbook(encoding="utf-8")
    for sheet in sheets:
        name, rows, as_text, (di, dj) = sheet_parts(sheet)
        ws = book.add_sheet(name)
        for i, row in enumerate(rows, start=1):
            for j, text in enumerate(row, start=1):
                if text == "":
                    continue
                x = as_number(text)
                value = text if x is None or (i, j) in as_text else x
                ws.write(i - 1 + di, j - 1 + dj, value)
    book.save(os.path.join(ROOT, path))


def write_ods(path, sheets):
    doc = OpenDocumentSpreadsheet()
    for sheet in sheets:
        name, rows, as_text, (di, dj) = sheet_parts(sheet)
        table = Table(name=name)
        for _ in range(di):
            table.addElement(TableRow())
        for i, row in enumerate(rows, start=1):
            tr = TableRow()
            for _ in range(dj):
                tr.addElement(TableCell())
            for j, text in enumerate(row, start=1):
                x = as_number(text)
                if text == "":
                    cell = TableCell()
                elif x is None or (i, j) in as_text:
                    cell = TableCell(valuetype="string")
                    cell.addElement(P(text=text))
                else:
                    cell = TableCell(valuetype="float", value=repr(float(x)) if isinstance(x, float) else str(x))
                    cell.addElement(P(text=text))
                tr.addElement(cell)
            table.addElement(tr)
        doc.spreadsheet.addElement(table)
    doc.save(os.path.join(ROOT, path))


def both(stem, sheets):
    write_xlsx(stem + ".xlsx", sheets)
    write_ods(stem + ".ods", sheets)
    print("wrote", stem + ".xlsx", stem + ".ods")


def every_format(stem, sheets):
    both(stem, sheets)
    write_xlsx(stem + ".xlsm", sheets, macro_enabled=True)
    write_xls(stem + ".xls", sheets)
    print("wrote", stem + ".xlsm", stem + ".xls")


def main():
    smd = read_csv("tests/data/routes/smd-routes.csv")
    typos = [list(r) for r in smd]
    typos[3][3] = "abc"      # D4: treat_se of row 3 (a t row; the cell is read as a number)
    typos[4][9] = "2,41"     # J5: t with a decimal comma
    typos[5][10] = "n.a."    # K6: f, a missing mark pondus does not know
    # (row, column) 1-based cells stored as text although they hold a number.
    shifted = [list(r) for r in smd]
    shifted[15][26] = "2 5"  # ctrl_events of study O: AB18 once shifted to B3
    every_format("tests/data/routes/smd-routes", [
        ("extraction", smd, {(2, 5)}),
        ("typos", typos, set()),
        ("shifted", shifted, set(), (2, 1)),
    ])
    cells = read_csv("tests/data/routes/cells.csv")
    assert cells[3][2] == " 0.18 " and cells[11][3] == "2.5"
    bad_dose = [list(r) for r in cells]
    bad_dose[11][3] = "2.5O"  # D12: dose of study K with a letter O
    every_format("tests/data/routes/cells", [
        ("cells", cells, {(3, 2), (4, 3)}),
        ("bad dose", bad_dose, set()),
    ])
    readme = [["INVENTED data for the pondus tutorial; the extraction is on the next sheet."]]
    both("data-examples/classroom-extraction", [
        ("read me", readme, set()),
        ("extraction", read_csv("data-examples/classroom-extraction.csv"), set()),
    ])
    sites = read_csv("data-examples/choir-sites.csv")
    repeated = [list(r) for r in sites]
    repeated[3][0] = repeated[2][0]  # A4 repeats the id of A3
    both("tests/data/routes/choir-sites", [("sites", sites, set()), ("repeated", repeated, set())])
    values = [["planned_minutes"]] + [[str(v)] for v in (10, 20, 30, 40, 50, 60, 15, 45)]
    typo = [list(r) for r in values]
    typo[4][0] = "4O"  # A5: 40 typed with a letter O
    both("tests/data/routes/planned-values", [("values", values, set()), ("typo", typo, set())])


if __name__ == "__main__":
    main()
