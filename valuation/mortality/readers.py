"""Readers for mortality tables: CSV and XLSX grids (ages in rows) and XTbML, with validation.

CSV / XLSX layout: a header row, then one row per integer age. The first column holds the age; each
further column is one table (or one sex), headed by its name. XLSX files are read from the first sheet
unless ``sheet`` is given.

XTbML files (the SOA's XML standard for actuarial tables: ultimate, select-and-ultimate and period
tables) are read by :mod:`valuation.mortality.xtbml`, which describes the layouts it accepts.

References
----------
.. [XTbML] Society of Actuaries, *XTbML: Extensible Table Markup Language* (adopted by ACORD, 2002).
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed., 2013,
   sections 3.2 and 3.7-3.9 (life tables; select and ultimate tables).
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import numpy as np
import polars as pl

from valuation.csvtext import csv_problem, utf16_problem
from valuation.errors import TableError
from valuation.mortality.table import MortalityTable

Closing = Literal["require", "set_last_to_one"]

CSV_SUFFIXES = (".csv", ".txt")
XLSX_SUFFIXES = (".xlsx", ".xlsm")
XTBML_SUFFIXES = (".xml", ".xtbml")


# --------------------------------------------------------------------------------------------------
# Grids: first column an integer key (age), one numeric column per header
# --------------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Grid:
    """A numeric grid read from CSV or XLSX: integer keys in the first column, one column per header."""

    file: str
    key_name: str
    keys: np.ndarray  # int64, contiguous ascending
    columns: tuple[str, ...]
    values: np.ndarray  # float64, shape (len(keys), len(columns))
    first_row: int  # file row (1-based) of the first data row


def _raw_csv(path: Path) -> list[tuple[int, list[str]]]:
    try:
        with path.open("rb") as raw:
            found = utf16_problem(raw.read(4096))
        if found is None:
            with path.open(newline="", encoding="utf-8-sig") as fh:
                return [(i, [c.strip() for c in r]) for i, r in enumerate(csv.reader(fh), start=1)]
    except (UnicodeDecodeError, csv.Error, OSError) as exc:
        found = csv_problem(path)
        if found is None:
            raise TableError("cannot be read as CSV", file=path,
                             fix="open it in a spreadsheet program and save it again as 'CSV UTF-8'") from exc
    raise TableError(found.reason, file=path, fix=found.fix)


def _raw_xlsx(path: Path, sheet: str | None) -> list[tuple[int, list[str]]]:
    import openpyxl

    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises several unrelated types for a broken file
        raise TableError(
            "cannot be read as an XLSX workbook (it may be damaged, protected by a password, or not an XLSX "
            "file)", file=path, fix="open it in Excel and save it again as .xlsx, or save the table as CSV UTF-8",
        ) from exc
    try:
        if sheet is not None and sheet not in wb.sheetnames:
            raise TableError(
                f"no sheet named '{sheet}'", file=path, fix=f"use one of {', '.join(wb.sheetnames)}"
            )
        ws = wb[sheet] if sheet is not None else wb.worksheets[0]
        out = []
        for i, r in enumerate(ws.iter_rows(values_only=True), start=1):
            out.append((i, ["" if c is None else str(c).strip() for c in r]))
        return out
    finally:
        wb.close()


def _numbers(cells: list[str]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Parse strings to float64 in one vectorised pass: (values, missing mask, non-numeric mask)."""
    s = pl.Series(cells, dtype=pl.String)
    num = s.cast(pl.Float64, strict=False)
    missing = (s == "").to_numpy() | np.isnan(num.fill_null(0.0).to_numpy())
    bad = num.is_null().to_numpy() & ~missing
    return num.fill_null(np.nan).to_numpy().astype(np.float64), missing, bad


def read_grid(path: str | Path, *, sheet: str | None = None, key: str = "age") -> Grid:
    """Read a CSV or XLSX grid: a header row, the first column integer ``key`` values, numbers elsewhere.

    Raises :class:`TableError` naming the file, row, column and ``key`` value for a missing or
    non-numeric cell, a non-integer or missing key, or keys that are not contiguous and ascending.
    """
    p = Path(path)
    if not p.is_file():
        raise TableError("file not found", file=p, fix="check the path in the basis")
    suffix = p.suffix.lower()
    if suffix in XLSX_SUFFIXES:
        raw = _raw_xlsx(p, sheet)
    elif suffix in CSV_SUFFIXES:
        raw = _raw_csv(p)
    else:
        raise TableError(f"cannot read a '{suffix}' file as a grid", file=p, fix="use .csv or .xlsx")
    raw = [(i, r) for i, r in raw if any(r)]
    if len(raw) < 2:
        raise TableError("needs a header row and at least one data row", file=p)
    (header_row, header), body = raw[0], raw[1:]
    while header and not header[-1]:
        header = header[:-1]
    width = len(header)
    if width < 2:
        raise TableError(
            f"needs a {key} column and at least one rate column", file=p, row=header_row,
            fix=f"first column {key}, then one column per table",
        )
    names = header[1:]
    for j, n in enumerate(names, start=2):
        if not n:
            raise TableError(f"column {j} has no header", file=p, row=header_row)
    dup = next((n for n in names if names.count(n) > 1), None)
    if dup is not None:
        first, second = (j for j, n in enumerate(header, start=1) if n == dup)
        raise TableError(f"the header row names '{dup}' twice (columns {first} and {second})", file=p,
                         row=header_row, column=dup, fix="give each table column its own header")
    for i, r in body:
        if any(r[width:]):
            raise TableError(
                f"row {i} has {len(r) - [bool(c) for c in reversed(r)].index(True)} values but the header "
                f"names {width} columns", file=p, row=i,
                fix="remove the extra values, or add a header for the extra column",
            )
    rows = np.array([i for i, _ in body])
    cells = [(r + [""] * width)[:width] for _, r in body]
    cols = list(zip(*cells, strict=True))

    kv, kmiss, kbad = _numbers(list(cols[0]))
    nonint = ~kmiss & ~kbad & (kv != np.round(kv))
    for mask, what in ((kmiss, "missing"), (kbad | nonint, "not a whole number")):
        if mask.any():
            k = int(np.argmax(mask))
            raise TableError(
                f"{key} {what} ('{cols[0][k]}'); the first column must hold whole-number {key}s",
                file=p, row=int(rows[k]), column=header[0],
            )
    keys = kv.astype(np.int64)
    step = np.diff(keys)
    if (step != 1).any():
        k = int(np.argmax(step != 1)) + 1
        raise TableError(
            f"{key} {keys[k]} follows {key} {keys[k - 1]}; {key}s must be contiguous and ascending",
            file=p, row=int(rows[k]), column=header[0], fix=f"one row per {key}, no gaps or repeats",
        )

    values = np.empty((len(keys), len(names)), dtype=np.float64)
    for j, name in enumerate(names, start=1):
        v, miss, bad = _numbers(list(cols[j]))
        for mask, what in ((miss, "missing value"), (bad, "non-numeric value")):
            if mask.any():
                k = int(np.argmax(mask))
                shown = f" '{cols[j][k]}'" if what.startswith("non") else ""
                raise TableError(
                    f"{what}{shown} at {key} {keys[k]}; expected a number",
                    file=p, row=int(rows[k]), column=name,
                )
        values[:, j - 1] = v
    return Grid(str(p), header[0], keys, tuple(names), values, int(rows[0]))


# --------------------------------------------------------------------------------------------------
# Validation
# --------------------------------------------------------------------------------------------------


def validate_table(table: MortalityTable, *, file: str, first_row: int | None = None) -> None:
    """Check a table: no missing q, every q within [0, 1], q = 1 at the closing (last) age.

    Contiguous ages are guaranteed by the array layout and checked by the readers. ``first_row`` is
    the file row of ``min_age`` (CSV / XLSX) so that the message can give the row as well.

    Raises
    ------
    TableError
        Naming ``file``, the age and the table name as the column.
    """

    def row(k: int) -> int | None:
        return None if first_row is None else first_row + k

    q = table.qx
    nan = np.isnan(q)
    if nan.any():
        k = int(np.argmax(nan))
        raise TableError(
            f"missing value at age {table.min_age + k}", file=file, row=row(k), column=table.name
        )
    out = (q < 0.0) | (q > 1.0)
    if out.any():
        k = int(np.argmax(out))
        raise TableError(
            f"q = {q[k]:g} at age {table.min_age + k} is outside [0, 1]",
            file=file, row=row(k), column=table.name, fix="rates must be probabilities, not per mille",
        )
    if q[-1] != 1.0:
        k = q.size - 1
        raise TableError(
            f"no closing age: q = {q[-1]:g} at the last age {table.max_age}; expected q = 1",
            file=file, row=row(k), column=table.name,
            fix=f"add a row after age {table.max_age} for the closing age, with q = 1 (no life survives it), or "
                'set closing = "at_last_age" in the basis\'s mortality entry to close the table at its last age',
        )
    s = table.select_qx
    if s is not None:
        bad = np.isnan(s) | (s < 0.0) | (s > 1.0)
        if bad.any():
            k, d = (int(v) for v in np.unravel_index(int(np.argmax(bad)), s.shape))
            raise TableError(
                f"select q = {s[k, d]:g} at selection age {table.min_age + k}, duration {d} is missing "
                "or outside [0, 1]", file=file, column=f"{table.name} (select)",
            )


def _close(qx: np.ndarray, closing: Closing) -> np.ndarray:
    if closing not in ("require", "set_last_to_one"):
        raise ValueError(f"closing must be 'require' or 'set_last_to_one', not '{closing}'")
    qx = np.array(qx, dtype=np.float64)
    if closing == "set_last_to_one":
        qx[-1] = 1.0  # stated closing rule: the last age given becomes the closing age
    return qx


# --------------------------------------------------------------------------------------------------
# Public entry points
# --------------------------------------------------------------------------------------------------


def load_tables(
    path: str | Path,
    *,
    closing: Closing = "require",
    base_year: int | None = None,
    sheet: str | None = None,
) -> dict[str, MortalityTable]:
    """Read every table in a CSV, XLSX or XTbML file, validated.

    Parameters
    ----------
    path : str or Path
        ``.csv`` / ``.txt``, ``.xlsx`` / ``.xlsm`` or ``.xml`` / ``.xtbml``.
    closing : {"require", "set_last_to_one"}
        ``"require"``: the last age must have q = 1. ``"set_last_to_one"``: the last age in the file is
        made the closing age by setting its q to 1 (stated closing rule).
    base_year : int, optional
        Calendar year the rates describe [year], for improvement.
    sheet : str, optional
        XLSX sheet name (default: the first sheet).

    Returns
    -------
    dict
        Table name (column header, or XTbML TableName) -> :class:`MortalityTable`.

    References
    ----------
    [XTbML]; [DHW] section 3.2.
    """
    p = Path(path)
    if not p.is_file():
        raise TableError("file not found", file=p, fix="check the table path in the basis")
    suffix = p.suffix.lower()
    if suffix in XTBML_SUFFIXES:
        from valuation.mortality.xtbml import mortality_tables, read_xtbml

        _close(np.ones(1), closing)  # the closing rule is checked before the file is read
        return mortality_tables(read_xtbml(p), closing=closing, base_year=base_year)
    if suffix not in CSV_SUFFIXES + XLSX_SUFFIXES:
        raise TableError(
            f"unknown table format '{suffix}'", file=p, fix="use .csv, .xlsx or XTbML (.xml)"
        )
    grid = read_grid(p, sheet=sheet, key="age")
    out = {}
    for j, col in enumerate(grid.columns):
        table = MortalityTable(
            col, int(grid.keys[0]), _close(grid.values[:, j], closing), base_year=base_year,
            source=f"{'XLSX' if suffix in XLSX_SUFFIXES else 'CSV'} file {p.name}, column '{col}'",
        )
        validate_table(table, file=str(p), first_row=grid.first_row)
        out[col] = table
    return out


def load_table(path: str | Path, name: str | None = None, **kw: Any) -> MortalityTable:
    """Read one table from a file; ``name`` picks a column (CSV/XLSX) or table (XTbML).

    Without ``name`` the file must hold exactly one table. Keywords go to :func:`load_tables`. From an
    XTbML file only the named table is read and checked, so one table of a file can be used even when
    another table of the same file cannot.
    """
    p = Path(path)
    if name is not None and p.suffix.lower() in XTBML_SUFFIXES and p.is_file():
        from valuation.mortality.xtbml import mortality_tables, read_xtbml

        closing = kw.get("closing", "require")
        _close(np.ones(1), closing)
        return mortality_tables(read_xtbml(p), closing=closing, base_year=kw.get("base_year"), only=name)[name]
    tables = load_tables(path, **kw)
    if name is None:
        if len(tables) != 1:
            raise TableError(
                f"holds {len(tables)} tables; say which one", file=path,
                fix=f"give a table name: one of {', '.join(tables)}",
            )
        return next(iter(tables.values()))
    if name not in tables:
        raise TableError(
            f"no table named '{name}'", file=path, column=name, fix=f"use one of {', '.join(tables)}"
        )
    return tables[name]
