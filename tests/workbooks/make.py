#!/usr/bin/env python3
"""Workbooks for emend's tests, written by independent writers from PyPI at the versions pinned
in .ci/run: openpyxl (.xlsx), odfpy (.ods), msoffcrypto-tool (a password-protected .xlsx, the
ECMA-376 agile encryption) and xlwt (an old binary .xls). Usage: make.py OUT_DIR.

Each file is small and deterministic in content (the zip timestamps may differ per run, which
is why the tests compare cells, never these files' bytes with anything but their own stored copy).
"""
import datetime
import sys
from pathlib import Path

from openpyxl import Workbook
from openpyxl.comments import Comment

out = Path(sys.argv[1])
out.mkdir(parents=True, exist_ok=True)

ROWS = [
    ("site_id", "site", "visited", "ph", "flow_ok", "count", "ratio"),
    ("MC01", "Mill Creek", datetime.date(2024, 10, 3), 7.1, True, 12, None),
    ("MC02", "Mill Craek", datetime.date(2024, 10, 4), 0.1, False, 3, None),
    ("OB01", "Otter Brook", datetime.datetime(2024, 10, 5, 14, 30), 71.0, True, 0, None),
    ("OB02", "Otter Brook", datetime.date(2024, 10, 6), None, True, 8, None),
]
# The cached values a spreadsheet program would have stored beside the formulas in column G
# (openpyxl writes formulas without cached values, so the tests that need cached values use
# the CSV twin below and the formula-note check, not the values).


def samples():
    wb = Workbook()
    ws = wb.active
    ws.title = "Samples"
    for r in ROWS:
        ws.append(list(r))
    for i in range(2, 6):
        ws.cell(row=i, column=7, value=f"=F{i}/2")
    ws["B3"].comment = Comment("typo? check the field sheet", "Field lead")
    ws.row_dimensions[5].hidden = True
    ws.column_dimensions["F"].hidden = True
    ws2 = wb.create_sheet("Sites")
    ws2.append(["site_id", "river"])
    ws2.append(["MC01", "Mill"])
    ws2.append(["OB01", "Otter"])
    ws3 = wb.create_sheet("Notes page")
    ws3.append(["note"])
    ws3.append(["collected by volunteers"])
    wb.save(out / "samples.xlsx")


def plain():
    # The same cells as plain.csv, so the version hashes must agree.
    wb = Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append(["site_id", "ph", "ok", "visited"])
    ws.append(["MC01", 7.1, True, datetime.date(2024, 10, 3)])
    ws.append(["MC02", 7, False, datetime.date(2024, 10, 4)])
    ws.append(["MC03", 0.25, True, datetime.datetime(2024, 10, 4, 18, 0)])
    wb.save(out / "plain.xlsx")
    (out / "plain.csv").write_text(
        "site_id,ph,ok,visited\n"
        "MC01,7.1,true,2024-10-03\n"
        "MC02,7,false,2024-10-04\n"
        "MC03,0.25,true,2024-10-04T18:00:00\n"
    )


def titled():
    wb = Workbook()
    ws = wb.active
    ws.title = "Report"
    ws["A1"] = "River watch: October samples"
    ws.append([])
    ws.append(["site_id", "ph"])
    ws.append(["MC01", 7.1])
    ws.append(["MC02", 6.9])
    wb.save(out / "titled.xlsx")


def merged_header():
    wb = Workbook()
    ws = wb.active
    ws.title = "Two rows"
    ws.append(["site", "reading", None])
    ws.append(["site_id", "ph", "temp"])
    ws.append(["MC01", 7.1, 11.5])
    ws.merge_cells("B1:C1")
    wb.save(out / "merged.xlsx")


def empty_sheet():
    wb = Workbook()
    wb.active.title = "Blank"
    wb.save(out / "empty.xlsx")


def ods():
    from odf.opendocument import OpenDocumentSpreadsheet
    from odf.table import Table, TableRow, TableCell
    from odf.text import P

    doc = OpenDocumentSpreadsheet()
    table = Table(name="Samples")
    rows = [
        [("string", "site_id"), ("string", "ph"), ("string", "visited"), ("string", "ok")],
        [("string", "MC01"), ("float", "7.1"), ("date", "2024-10-03"), ("boolean", "true")],
        [("string", "MC02"), ("float", "7"), ("date", "2024-10-04"), ("boolean", "false")],
    ]
    for row in rows:
        tr = TableRow()
        for kind, value in row:
            if kind == "string":
                cell = TableCell(valuetype="string")
            elif kind == "float":
                cell = TableCell(valuetype="float", value=value)
            elif kind == "date":
                cell = TableCell(valuetype="date", datevalue=value)
            else:
                cell = TableCell(valuetype="boolean", booleanvalue=value)
            cell.addElement(P(text=value))
            tr.addElement(cell)
        table.addElement(tr)
    doc.spreadsheet.addElement(table)
    doc.save(str(out / "samples.ods"))


def encrypted():
    from msoffcrypto.format.ooxml import OOXMLFile

    with open(out / "plain.xlsx", "rb") as f, open(out / "locked.xlsx", "wb") as o:
        OOXMLFile(f).encrypt("river", o)


def old_binary():
    import xlwt

    wb = xlwt.Workbook()
    ws = wb.add_sheet("Samples")
    ws.write(0, 0, "site_id")
    ws.write(1, 0, "MC01")
    wb.save(str(out / "old.xls"))


def review():
    # A reviewer's answers, typed into a workbook.
    wb = Workbook()
    ws = wb.active
    ws.title = "answers"
    ws.append(["row", "column", "action", "value", "why"])
    ws.append(["MC02", "site", "set", "Mill Creek", "the field sheet spells it Mill Creek"])
    ws.append(["OB01", "ph", "keep", None, "lab confirms 71 (a spring)"])
    wb.save(out / "review.xlsx")


samples()
plain()
encrypted()
old_binary()
review()
titled()
merged_header()
empty_sheet()
ods()
