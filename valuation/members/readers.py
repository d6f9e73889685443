"""Read a member file (CSV, XLSX or Parquet) as text, and map its headers onto our columns.

Everything is read as text first so nothing is lost or reinterpreted: leading zeros stay, and values
beginning with ``=``, ``+``, ``-`` or ``@`` stay literal strings (they are never evaluated). Parsing into
numbers and dates happens afterwards, in :mod:`valuation.members.parse`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Literal

import polars as pl

from valuation.basis.mapping import ColumnMapping
from valuation.errors import DataError

FileKind = Literal["csv", "xlsx", "parquet"]
_KINDS: dict[str, FileKind] = {".csv": "csv", ".txt": "csv", ".xlsx": "xlsx", ".parquet": "parquet"}


def file_kind(path: Path) -> FileKind:
    """The reader for a file, from its extension (``.csv``/``.txt``, ``.xlsx``, ``.parquet``)."""
    kind = _KINDS.get(path.suffix.lower())
    if kind is None:
        raise DataError(
            f"unknown file type '{path.suffix}'", file=path,
            fix="save the member data as .csv, .xlsx or .parquet",
        )
    return kind


def read_text_frame(path: str | Path) -> pl.DataFrame:
    """All columns of a member file as text (``pl.String``), headers as written.

    CSV is read as UTF-8 (a byte-order mark is dropped); XLSX reads the first sheet with the header in its
    first row; Parquet columns of other types are cast to text (dates become ISO ``YYYY-MM-DD``).
    """
    p = Path(path)
    kind = file_kind(p)
    if not p.is_file():
        raise DataError("member data file not found", file=p, fix="check the path and file name")
    try:
        if kind == "csv":
            df = pl.read_csv(p, infer_schema=False, encoding="utf8")
        elif kind == "xlsx":
            df = pl.read_excel(p, sheet_id=1, infer_schema_length=0)
        else:
            df = pl.read_parquet(p)
    except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
        raise DataError(
            f"cannot read the file as {kind.upper()}: {exc}", file=p,
            fix=f"check that it is a valid {kind.upper()} file (UTF-8 text for CSV)",
        ) from exc
    return df.with_columns(pl.all().cast(pl.String))


def _norm(header: str) -> str:
    return header.replace("\ufeff", "").strip().lower()


def map_headers(df: pl.DataFrame, mapping: ColumnMapping, path: Path) -> pl.DataFrame:
    """Rename the file's headers to ours: trimmed, case-insensitive, through ``mapping.columns``.

    Headers that are neither mapped nor ours are kept (trimmed, lower case); two headers landing on the
    same column name are a fatal error.
    """
    lookup = {_norm(k): v for k, v in mapping.columns.items()}
    renamed: dict[str, str] = {}
    origin: dict[str, str] = {}
    for col in df.columns:
        target = lookup.get(_norm(col), _norm(col))
        if target in origin:
            raise DataError(
                f"headers '{origin[target]}' and '{col}' both give column '{target}'",
                file=path, column=col, fix="remove or rename one of them, or change [mapping.columns]",
            )
        origin[target] = col
        renamed[col] = target
    return df.rename(renamed)
