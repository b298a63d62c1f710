"""Cells safe to open in a spreadsheet: the one place every CSV and XLSX export goes through.

A spreadsheet program reads a cell whose text starts with "=", "+", "-" or "@" as a formula, and a leading
tab or carriage return can hide such a start; a tag, fluid name, note or technician's name typed that way
would then run when the export is opened (OWASP, "CSV Injection"; the list of characters and the
apostrophe prefix are common practice). Such a text cell is written with a leading apostrophe, which every
spreadsheet shows as text. A cell that is a plain number ("-1.5", "+2", "-3e-4") is left alone, so a
negative number stays a number; numbers that are already numbers (int, float) are never touched.

The importer undoes the prefix (``restore``) so that an export imports back exactly. To keep that exact
for every text, a text that itself starts with an apostrophe followed by one of those characters or by
another apostrophe is prefixed too: ``restore(neutralise(s)) == s`` for every string s.

Pure: strings in, strings out, plus thin writers (csv, pandas/openpyxl) that apply it to every cell.
"""
from __future__ import annotations

import csv
import io
import re
from typing import Iterable, Mapping

import pandas as pd

FORMULA_LEADS = ("=", "+", "-", "@", "\t", "\r")
PREFIX = "'"
XLSX_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"  # the media type of an .xlsx answer
_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")


def _is_plain_number(text: str) -> bool:
    return _PLAIN_NUMBER.fullmatch(text) is not None


def neutralise(value):
    """The value as it may be written to a spreadsheet cell (see the module docstring)."""
    if not isinstance(value, str) or not value:
        return value
    if value[0] in FORMULA_LEADS:
        return value if _is_plain_number(value) else PREFIX + value
    if value[0] == PREFIX and len(value) > 1 and (value[1] in FORMULA_LEADS or value[1] == PREFIX):
        return PREFIX + value  # so that restore() gives it back unchanged
    return value


def restore(text: str) -> str:
    """Undo ``neutralise`` on a text cell read back from a CSV or XLSX file."""
    if isinstance(text, str) and len(text) > 1 and text[0] == PREFIX and (text[1] in FORMULA_LEADS or text[1] == PREFIX):
        return text[1:]
    return text


def neutralise_row(values: Iterable) -> list:
    return [neutralise(value) for value in values]


def neutralise_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of the frame with every text cell and every column name neutralised; numbers untouched."""
    out = frame.copy()
    for column in out.columns:
        if out[column].dtype == object or pd.api.types.is_string_dtype(out[column].dtype):
            out[column] = out[column].map(neutralise)
    out.columns = [neutralise(c) for c in out.columns]
    return out


# Writers: every export uses one of these ---------------------------------------------------------------------
def csv_text(rows: Iterable[Iterable], lineterminator: str = "\r\n") -> str:
    """Rows (the first being the header) as CSV text, every cell neutralised."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator=lineterminator)
    for row in rows:
        writer.writerow(neutralise_row(row))
    return buffer.getvalue()


def frame_csv_text(frame: pd.DataFrame, lineterminator: str = "\r\n") -> str:
    """A DataFrame as CSV text (no index), every text cell neutralised."""
    return neutralise_frame(frame).to_csv(index=False, lineterminator=lineterminator)


def frames_xlsx_bytes(sheets: Mapping[str, pd.DataFrame]) -> bytes:
    """{sheet name: DataFrame} as an .xlsx workbook (no index), every text cell neutralised; numbers are
    written as numbers."""
    buffer = io.BytesIO()
    with pd.ExcelWriter(buffer, engine="openpyxl") as writer:
        for name, frame in sheets.items():
            neutralise_frame(frame).to_excel(writer, index=False, sheet_name=name)
    return buffer.getvalue()
