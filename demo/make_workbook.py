#!/usr/bin/env python3
"""Write field_samples.xlsx: the October extract (field_samples.csv) as the workbook the
programme's survey platform would send, with openpyxl (pip install openpyxl==3.1.5).

A cell becomes a number when openpyxl writes it back as exactly the CSV's text, a date when it
is an ISO 8601 date, and text otherwise, so the workbook's cells are the CSV's and the two
extracts have the same version hash. The same input gives the same bytes: the document's dates
and every zip entry's time are fixed. Run from this folder: python3 make_workbook.py
"""
import csv
import datetime
import io
import re
import zipfile

from openpyxl import Workbook

FIXED = datetime.datetime(2025, 11, 1, 9, 0, 0)


def cell(text):
    if re.fullmatch(r"\d{4}-\d{2}-\d{2}", text):
        return datetime.date.fromisoformat(text)
    if re.fullmatch(r"-?(0|[1-9]\d*)(\.\d*[1-9])?", text):
        number = float(text)
        if "%.15g" % number == text:
            return int(text) if "." not in text else number
    return text


wb = Workbook()
ws = wb.active
ws.title = "October"
with open("field_samples.csv", newline="", encoding="utf-8") as f:
    for i, row in enumerate(csv.reader(f)):
        ws.append(row if i == 0 else [None if v == "" else cell(v) for v in row])
for r in ws.iter_rows(min_row=2):
    for c in r:
        if isinstance(c.value, datetime.date):
            c.number_format = "yyyy-mm-dd"
wb.properties.created = FIXED
wb.properties.modified = FIXED
raw = io.BytesIO()
wb.save(raw)

# openpyxl stamps each zip entry with the time of the run: rewrite them with a fixed one.
with zipfile.ZipFile(raw) as src, zipfile.ZipFile("field_samples.xlsx", "w") as dst:
    for info in src.infolist():
        data = src.read(info.filename)
        if info.filename == "docProps/core.xml":
            data = re.sub(rb"<dcterms:modified[^>]*>[^<]*<", b'<dcterms:modified xsi:type="dcterms:W3CDTF">2025-11-01T09:00:00Z<', data)
        fixed = zipfile.ZipInfo(info.filename, date_time=(2025, 11, 1, 9, 0, 0))
        fixed.compress_type = zipfile.ZIP_DEFLATED
        dst.writestr(fixed, data)
