#!/usr/bin/env python3
"""Write the spreadsheet fixtures of issue 15 from their CSV originals.

Usage: python spreadsheets.py        (from anywhere; writes next to the CSVs)

Each workbook is written twice, as .xlsx by openpyxl 3.1.5 and as .ods by
odfpy 1.4.1 (pinned in requirements.txt), so pondus's reader is tested on
files made by general-purpose libraries rather than by itself. Cells that
parse as numbers are stored as numbers, except where a fixture stores a
number as text on purpose; everything else (labels, "< .05") is text; empty
CSV cells stay empty.

Workbooks (all data invented):
- tests/data/routes/smd-routes.{xlsx,ods}: sheet "extraction" = smd-routes.csv
  (treat_n of the first row stored as text), sheet "typos" = the same with
  three bad cells (D4 "abc", J5 "2,41" and K6 "#N/A"-like text "n.a.") for
  the cell-address messages.
- data-examples/classroom-extraction.{xlsx,ods}: sheet "extraction" (the
  tutorial's invented extraction sheet), after a first sheet "read me".
- tests/data/routes/choir-sites.{xlsx,ods}: sheet "sites" = data-examples/choir-sites.csv.
- tests/data/routes/planned-values.{xlsx,ods}: sheet "values", a header and
  eight planned moderator values in column A.
"""
import csv
import os

import openpyxl
from odf.opendocument import OpenDocumentSpreadsheet
from odf.table import Table, TableCell, TableRow
from odf.text import P

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


def write_xlsx(path, sheets):
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows, as_text in sheets:
        ws = wb.create_sheet(name)
        for i, row in enumerate(rows, start=1):
            for j, text in enumerate(row, start=1):
                if text == "":
                    continue
                x = as_number(text)
                if x is None or (i, j) in as_text:
                    ws.cell(row=i, column=j, value=text)
                else:
                    ws.cell(row=i, column=j, value=x)
    wb.save(os.path.join(ROOT, path))


def write_ods(path, sheets):
    doc = OpenDocumentSpreadsheet()
    for name, rows, as_text in sheets:
        table = Table(name=name)
        for i, row in enumerate(rows, start=1):
            tr = TableRow()
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


def main():
    smd = read_csv("tests/data/routes/smd-routes.csv")
    typos = [list(r) for r in smd]
    typos[3][3] = "abc"      # D4: treat_se of row 3 (a t row; the cell is read as a number)
    typos[4][9] = "2,41"     # J5: t with a decimal comma
    typos[5][10] = "n.a."    # K6: f, a missing mark pondus does not know
    # (row, column) 1-based cells stored as text although they hold a number.
    both("tests/data/routes/smd-routes", [
        ("extraction", smd, {(2, 5)}),
        ("typos", typos, set()),
    ])
    readme = [["INVENTED data for the pondus tutorial; the extraction is on the next sheet."]]
    both("data-examples/classroom-extraction", [
        ("read me", readme, set()),
        ("extraction", read_csv("data-examples/classroom-extraction.csv"), set()),
    ])
    both("tests/data/routes/choir-sites", [("sites", read_csv("data-examples/choir-sites.csv"), set())])
    values = [["planned_minutes"]] + [[str(v)] for v in (10, 20, 30, 40, 50, 60, 15, 45)]
    both("tests/data/routes/planned-values", [("values", values, set())])


if __name__ == "__main__":
    main()
