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
#: currency units with thousands separators (pensions keep pence), with the basis's ISO 4217 code in front
#: (:func:`money_format`); rates and ratios are stored as fractions (0.048, 1.07) and shown as percentages
#: by the ``%`` code, which multiplies by 100.
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
_CODE = re.compile(r"[A-Z]{3}")


def money_format(code: str | None, pence: bool = False) -> str:
    """The number format of an amount: ``[$GBP] #,##0`` (shown ``GBP 358,032,135``; ``[$...]`` is the
    format code's currency-symbol element, ECMA-376 Part 1, 18.8.31, from memory, which Excel and
    LibreOffice show as written); without a currency, or for anything but three capital letters, the
    plain ``#,##0``. ``pence`` keeps two decimals."""
    plain = MONEY_2DP if pence else MONEY
    return f"[${code}] {plain}" if code and _CODE.fullmatch(code) else plain

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


HEADER_ALIGN = Alignment(wrap_text=True, vertical="bottom")
#: Height of a header row [points]: two lines of the default 11 pt font, for headers that wrap.
HEADER_HEIGHT = 30


def header(ws: Worksheet, row: int, left: int, labels: list[str]) -> None:
    """A header row: white bold text on the brand colour, wrapped on two lines where it is long."""
    for j, label in enumerate(labels):
        c = put(ws, row, left + j, label)
        c.font = HEADER_FONT
        c.fill = HEADER_FILL
        c.alignment = HEADER_ALIGN
    if any(len(str(label)) > 14 for label in labels):
        ws.row_dimensions[row].height = HEADER_HEIGHT


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
            if _is_header(cell):  # headers wrap: they ask for a width of their longest word, 16 at most
                longest = max((len(w) for w in str(v).split()), default=0)
                widths[cell.column] = max(widths.get(cell.column, 0), min(16, max(longest, len(str(v)) // 2)) + 2)
                continue
            if isinstance(v, (date, datetime)):
                text = "0000-00-00"
            elif isinstance(v, float):
                text = f"{v:,.2f}"
            elif isinstance(v, int) and not isinstance(v, bool):
                text = f"{v:,}"
            else:
                text = str(v)
            fmt_code = str(cell.number_format or "")
            if not isinstance(v, str) and fmt_code.startswith("[$"):  # the currency code shown in front
                text = fmt_code[2:fmt_code.index("]")] + " " + text
            widths[cell.column] = max(widths.get(cell.column, 0), len(text) + 2)
    for col, width in widths.items():
        ws.column_dimensions[get_column_letter(col)].width = max(minimum, min(maximum, width))


def _is_header(cell: Cell) -> bool:
    """A header cell (known by its fill)."""
    return bool(cell.fill is not None and cell.fill.fgColor is not None and cell.fill.fgColor.rgb
                in (HEADER_FILL.fgColor.rgb, "00" + str(HEADER_FILL.fgColor.rgb)[-6:]))


def wrapped_height(text: str, width: float, line: float = 15.0) -> float:
    """The height [points] a wrapped text of the default font needs in a cell ``width`` characters wide
    (spreadsheets do not grow a row for wrapped text in merged cells, and Excel not on opening a file)."""
    lines = 0
    for para in str(text).split("\n"):
        lines += max(1, -(-len(para) * 10 // max(1, int(width * 11))))  # ~1.1 characters of text a column unit
    return line * lines


def print_setup(ws: Worksheet, *, landscape: bool = False, header_row: int | None = None,
                last_row: int | None = None, last_col: int | None = None) -> None:
    """Print settings of a sheet: A4, ``landscape`` or portrait, fitted to one page wide (as many tall as
    needed), the header row repeated on every page, the sheet name and page number in the footer, and the
    print area ``A1`` to (``last_row``, ``last_col``) (the used range when not given).

    Office Open XML page setup (ECMA-376 Part 1, 18.3.1.63 pageSetup with fitToWidth / fitToHeight, and the
    sheet property fitToPage; from memory); the print titles and area are the defined names
    ``_xlnm.Print_Titles`` / ``_xlnm.Print_Area``.
    """
    ws.page_setup.orientation = "landscape" if landscape else "portrait"
    ws.page_setup.paperSize = ws.PAPERSIZE_A4
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.page_margins.left = ws.page_margins.right = 0.5
    ws.page_margins.top, ws.page_margins.bottom = 0.6, 0.7
    ws.print_options.gridLines = False
    ws.oddFooter.center.text = "&A, page &P of &N"
    if header_row:
        ws.print_title_rows = f"{header_row}:{header_row}"
    rows = last_row or ws.max_row
    cols = last_col or ws.max_column
    ws.print_area = f"A1:{get_column_letter(max(1, cols))}{max(1, rows)}"


def _is_prose(cell: Cell) -> bool:
    """A title or note cell (known by its font)."""
    f = cell.font
    return bool((f.b and f.sz == TITLE_FONT.sz) or (f.i and f.color is not None and f.color.rgb == NOTE_FONT.color.rgb))
