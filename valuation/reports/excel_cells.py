"""Cell-level helpers for the workbook: safe text, number formats, frames written as Excel tables.

Text that comes from member data or the basis is always written as a literal string: a value that starts
with ``=``, ``+``, ``-`` or ``@`` would otherwise be taken for a formula by openpyxl (and by Excel when
the cell is edited), so such cells get ``data_type = "s"`` (written as an inline string) and the
quote-prefix style (OWASP, "CSV Injection", on formula-like text in spreadsheets).
"""

from __future__ import annotations

import math
import re
from datetime import date, datetime
from typing import Any

import polars as pl
from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE, Cell
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.table import Table, TableStyleInfo
from openpyxl.worksheet.worksheet import Worksheet

#: Number formats (Excel format codes; ECMA-376 Part 1, 18.8.31 numFmts, from memory). Money is whole
#: currency units with thousands separators (pensions keep pence); rates and ratios are stored as
#: fractions (0.048, 1.07) and shown as percentages by the ``%`` code, which multiplies by 100.
MONEY = "#,##0"
MONEY_2DP = "#,##0.00"
RATE = "0.00%"
RATIO = "0.0%"
YEARS = "0.00"
FACTOR = "0.0000"
PROBABILITY = "0.000000"
COUNT = "#,##0"
LIVES = "#,##0.00"
#: ISO 8601 calendar date, the same in every locale (the built-in date format 14 follows the reader's locale).
DATE = "yyyy-mm-dd"

_ISO_DATE = re.compile(r"\d{4}-\d{2}-\d{2}")

#: Header row of every list sheet (title in row 1, note in row 2); panes freeze below it.
HEAD = 3

#: Characters that make a spreadsheet take text for a formula.
FORMULA_START = ("=", "+", "-", "@")
#: Longest text Excel keeps in a cell.
MAX_TEXT = 32_767

HEADER_FONT = Font(bold=True, color="FFFFFF")
HEADER_FILL = PatternFill("solid", fgColor="2F5D62")
TITLE_FONT = Font(bold=True, size=14, color="2F5D62")
NOTE_FONT = Font(italic=True, color="555555")
WARN_FONT = Font(bold=True, color="7A3E00")
WARN_FILL = PatternFill("solid", fgColor="FCE8D5")
WRAP = Alignment(wrap_text=True, vertical="top")

_TABLE_STYLE = TableStyleInfo(name="TableStyleLight9", showRowStripes=True)


def clean_value(value: Any) -> Any:
    """A value openpyxl can store: NaN/inf become empty, text loses control characters and is cut to
    Excel's limit, other scalars pass through."""
    if value is None or isinstance(value, (bool, int, date, datetime)):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, str):
        return ILLEGAL_CHARACTERS_RE.sub("\ufffd", value)[:MAX_TEXT]
    return ILLEGAL_CHARACTERS_RE.sub("\ufffd", str(value))[:MAX_TEXT]


def as_date(value: Any) -> Any:
    """An ISO 8601 date text (``2025-03-31``) as a :class:`datetime.date`; anything else unchanged."""
    if isinstance(value, str) and _ISO_DATE.fullmatch(value):
        try:
            return date.fromisoformat(value)
        except ValueError:
            return value
    return value


def put(ws: Worksheet, row: int, column: int, value: Any, number_format: str | None = None) -> Cell:
    """Write one value; text is always literal text, never a formula."""
    cell = ws.cell(row=row, column=column)
    value = clean_value(value)
    cell.value = value
    if isinstance(value, str):
        cell.data_type = "s"
        if value.startswith(FORMULA_START):
            cell.quotePrefix = True
    elif isinstance(value, (date, datetime)):
        cell.number_format = number_format or DATE
    elif number_format and value is not None:
        cell.number_format = number_format
    return cell


def title(ws: Worksheet, text: str, row: int = 1) -> None:
    put(ws, row, 1, text).font = TITLE_FONT


def note(ws: Worksheet, row: int, text: str, column: int = 1) -> None:
    put(ws, row, column, text).font = NOTE_FONT


def header(ws: Worksheet, row: int, left: int, labels: list[str]) -> None:
    for j, label in enumerate(labels):
        c = put(ws, row, left + j, label)
        c.font = HEADER_FONT
        c.fill = HEADER_FILL


def key_values(ws: Worksheet, top: int, rows: list[tuple[str, Any, str | None]], left: int = 1) -> int:
    """Write (label, value, number format) rows from ``top``; returns the next free row."""
    for i, (label, value, number_format) in enumerate(rows):
        put(ws, top + i, left, label).font = Font(bold=True)
        put(ws, top + i, left + 1, value, number_format)
    return top + len(rows)


_NAME_BAD = re.compile(r"[^A-Za-z0-9_]")


def write_frame(
    ws: Worksheet,
    frame: pl.DataFrame,
    *,
    top: int = 1,
    left: int = 1,
    formats: dict[str, str] | None = None,
    labels: dict[str, str] | None = None,
    table: str | None = None,
) -> int:
    """Write ``frame`` with a header row at ``top``; returns the last row written.

    ``formats`` maps a column to its number format; ``labels`` renames headers. With ``table`` (a name
    unique in the workbook) a non-empty frame becomes an Excel table, which gives filter buttons and
    banded rows.
    """
    formats = formats or {}
    labels = labels or {}
    heads = [labels.get(c, c) for c in frame.columns]
    header(ws, top, left, heads)
    col_formats = [formats.get(c) for c in frame.columns]
    for i, values in enumerate(frame.iter_rows(), start=top + 1):
        for j, value in enumerate(values):
            put(ws, i, left + j, value, col_formats[j])
    last = top + frame.height
    if table and frame.height and frame.width:
        add_table(ws, table, f"{get_column_letter(left)}{top}:{get_column_letter(left + frame.width - 1)}{last}")
    return last


def add_table(ws: Worksheet, name: str, ref: str) -> None:
    """Make the range ``ref`` (header row first) an Excel table called ``name`` (unique in the workbook)."""
    tab = Table(displayName=_NAME_BAD.sub("_", name), ref=ref)
    tab.tableStyleInfo = _TABLE_STYLE
    ws.add_table(tab)


def fit_widths(ws: Worksheet, from_row: int = 1, minimum: int = 8, maximum: int = 60, sample: int = 300) -> None:
    """Column widths from the longest text among ``sample`` rows from ``from_row``; titles above it, and
    titles and notes anywhere (written by :func:`title` and :func:`note`), are left to overflow."""
    widths: dict[int, int] = {}
    for row in ws.iter_rows(min_row=from_row, max_row=min(ws.max_row, from_row + sample)):
        for cell in row:
            if cell.value is None or _is_prose(cell):
                continue
            v = cell.value
            if isinstance(v, (date, datetime)):
                text = "0000-00-00"
            elif isinstance(v, float):
                text = f"{v:,.2f}"
            elif isinstance(v, int) and not isinstance(v, bool):
                text = f"{v:,}"
            else:
                text = str(v)
            widths[cell.column] = max(widths.get(cell.column, 0), len(text) + 2)
    for col, width in widths.items():
        ws.column_dimensions[get_column_letter(col)].width = max(minimum, min(maximum, width))


def _is_prose(cell: Cell) -> bool:
    """A title or note cell (known by its font)."""
    f = cell.font
    return bool((f.b and f.sz == TITLE_FONT.sz) or (f.i and f.color is not None and f.color.rgb == NOTE_FONT.color.rgb))
