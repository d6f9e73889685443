"""Read a member file (CSV, XLSX or Parquet) as text, and map its headers onto our columns.

Everything is read as text first so nothing is lost or reinterpreted: leading zeros stay, and values
beginning with ``=``, ``+``, ``-`` or ``@`` stay literal strings (they are never evaluated). Parsing into
numbers and dates happens afterwards, in :mod:`valuation.members.parse`.

:func:`read_text_frame` reads a whole file; :func:`iter_text_frames` reads CSV and Parquet files in chunks
of a fixed number of records, so a very large file never has to be held in memory at once.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import Literal

import polars as pl
import pyarrow.parquet as pq

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
    p, kind = _existing(path)
    try:
        if kind == "csv":
            df = pl.read_csv(p, infer_schema=False, encoding="utf8")
        elif kind == "xlsx":
            df = pl.read_excel(p, sheet_id=1, infer_schema_length=0)
        else:
            df = pl.read_parquet(p)
    except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
        raise _unreadable(p, kind, exc) from exc
    return df.with_columns(pl.all().cast(pl.String))


def _norm(header: str) -> str:
    return header.replace("\ufeff", "").strip().lower()


def _unreadable(p: Path, kind: FileKind, exc: Exception) -> DataError:
    return DataError(
        f"cannot read the file as {kind.upper()}: {exc}", file=p,
        fix=f"check that it is a valid {kind.upper()} file (UTF-8 text for CSV)",
    )


def _existing(path: str | Path) -> tuple[Path, FileKind]:
    p = Path(path)
    kind = file_kind(p)
    if not p.is_file():
        raise DataError("member data file not found", file=p, fix="check the path and file name")
    return p, kind


def read_header(path: str | Path) -> list[str]:
    """The column headers of a CSV or Parquet member file, as written, without reading its records."""
    p, kind = _existing(path)
    try:
        if kind == "csv":
            return pl.scan_csv(p, infer_schema=False, encoding="utf8").collect_schema().names()
        if kind == "parquet":
            return list(pq.ParquetFile(p).schema_arrow.names)
    except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
        raise _unreadable(p, kind, exc) from exc
    raise DataError("reading the header alone needs a CSV or Parquet file", file=p,
                    fix="read an XLSX file whole with read_text_frame")


def scan_column(path: str | Path, column: str) -> pl.DataFrame:
    """One column of a CSV or Parquet member file, as text, header as written (a narrow full read)."""
    p, kind = _existing(path)
    try:
        if kind == "csv":
            lf = pl.scan_csv(p, infer_schema=False, encoding="utf8")
        else:
            lf = pl.scan_parquet(p)
        return lf.select(pl.col(column).cast(pl.String)).collect()
    except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
        raise _unreadable(p, kind, exc) from exc


def _rebatch(batches: Iterable[pl.DataFrame], size: int) -> Iterator[pl.DataFrame]:
    """Regroup frames into frames of exactly ``size`` rows (the last may be shorter)."""
    buf: list[pl.DataFrame] = []
    held = 0
    for b in batches:
        buf.append(b)
        held += b.height
        while held >= size:
            whole = pl.concat(buf) if len(buf) > 1 else buf[0]
            yield whole.slice(0, size)
            rest = whole.slice(size)
            buf, held = ([rest], rest.height) if rest.height else ([], 0)
    if held:
        yield pl.concat(buf) if len(buf) > 1 else buf[0]


def iter_text_frames(path: str | Path, chunk_rows: int) -> Iterator[pl.DataFrame]:
    """The records of a CSV or Parquet member file as text frames of ``chunk_rows`` records each.

    Each frame is what :func:`read_text_frame` returns for the same records (headers as written, every
    column ``pl.String``); only one chunk is held at a time. A file with no records yields nothing.
    """
    if chunk_rows < 1:
        raise ValueError(f"chunk_rows must be 1 or more, got {chunk_rows}")
    p, kind = _existing(path)
    try:
        if kind == "csv":
            lf = pl.scan_csv(p, infer_schema=False, encoding="utf8")
            batches: Iterable[pl.DataFrame] = lf.collect_batches(chunk_size=chunk_rows)
        elif kind == "parquet":
            pf = pq.ParquetFile(p)
            batches = (pl.DataFrame(pl.from_arrow(b)) for b in pf.iter_batches(batch_size=chunk_rows))
        else:
            raise DataError("reading in chunks needs a CSV or Parquet file", file=p,
                            fix="read an XLSX file whole with read_text_frame")
        for frame in _rebatch(batches, chunk_rows):
            yield frame.with_columns(pl.all().cast(pl.String))
    except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
        raise _unreadable(p, kind, exc) from exc


def header_targets(columns: list[str], mapping: ColumnMapping, path: Path) -> dict[str, str]:
    """Our column name for each of the file's headers: trimmed, case-insensitive, through ``mapping.columns``.

    Headers that are neither mapped nor ours keep their trimmed, lower-case name; two headers landing on
    the same column name are a fatal error.
    """
    lookup = {_norm(k): v for k, v in mapping.columns.items()}
    renamed: dict[str, str] = {}
    origin: dict[str, str] = {}
    for col in columns:
        target = lookup.get(_norm(col), _norm(col))
        if target in origin:
            raise DataError(
                f"headers '{origin[target]}' and '{col}' both give column '{target}'",
                file=path, column=col, fix="remove or rename one of them, or change [mapping.columns]",
            )
        origin[target] = col
        renamed[col] = target
    return renamed


def as_written(header: str) -> str:
    """A header exactly as the file spells it (a UTF-8 byte-order mark, which no one sees, removed)."""
    return header.replace("\ufeff", "")


def map_headers(df: pl.DataFrame, mapping: ColumnMapping, path: Path) -> pl.DataFrame:
    """Rename the file's headers to ours (see :func:`header_targets`).

    Pass ``df.columns`` (the headers as written) to validation beside the result, so that messages can
    name the administrator's own header beside ours.
    """
    return df.rename(header_targets(df.columns, mapping, path))
