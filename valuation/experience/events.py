"""Readers for the deaths file and the other-exits file of an experience analysis.

Both files are read by the member files' reader (:func:`valuation.members.readers.read_text_frame`: CSV in
any encoding and delimiter an :class:`~valuation.members.readers.InputFormat` names, XLSX, Parquet; every
column as text), headers trimmed and matched case-insensitively, then the basis's column mapping (their
header -> ours) applied. Rows are numbered as in the member data: the header is row 1, so the first data
row is row 2. Dates go through the member files' date parser (:func:`valuation.members.parse.parse_date`):
the basis's ``date_format``, then ISO ``YYYY-MM-DD``; a date outside 1850-2200 is not a date.
"""

from __future__ import annotations

from pathlib import Path
from typing import Literal

import polars as pl

from valuation.errors import DataError
from valuation.members.parse import to_date
from valuation.members.readers import DEFAULT_FORMAT, InputFormat, read_text_frame

EventKind = Literal["deaths", "exits"]

#: Required and optional columns of each file (our names).
REQUIRED: dict[str, tuple[str, ...]] = {
    "deaths": ("member_id", "date_of_death"),
    "exits": ("member_id", "exit_date"),
}
OPTIONAL: dict[str, tuple[str, ...]] = {
    "deaths": ("pension_at_death",),
    "exits": ("reason",),
}
DATE_COLUMN: dict[str, str] = {"deaths": "date_of_death", "exits": "exit_date"}


_KINDS = (".csv", ".txt", ".parquet", ".xlsx")


def parse_dates(values: pl.Expr, date_format: str | None) -> pl.Expr:
    """Text -> Date by the member files' date parser (:func:`valuation.members.parse.to_date`), after
    trimming spaces: ``date_format`` where given, then ISO ``YYYY-MM-DD``; null where none fits."""
    return to_date(values.str.strip_chars(), date_format)


def read_events(
    path: str | Path,
    kind: EventKind,
    *,
    date_format: str | None = None,
    column_map: dict[str, str] | None = None,
    fmt: InputFormat = DEFAULT_FORMAT,
) -> pl.DataFrame:
    """Read a deaths or exits file into typed columns (see :func:`read_events_with_headers`)."""
    return read_events_with_headers(path, kind, date_format=date_format, column_map=column_map, fmt=fmt)[0]


def read_events_with_headers(
    path: str | Path,
    kind: EventKind,
    *,
    date_format: str | None = None,
    column_map: dict[str, str] | None = None,
    fmt: InputFormat = DEFAULT_FORMAT,
) -> tuple[pl.DataFrame, dict[str, str]]:
    """Read a deaths or exits file into typed columns, keeping the raw text of every checked value.

    Parameters
    ----------
    path
        CSV, XLSX or Parquet file.
    kind
        ``"deaths"`` (member_id, date_of_death, optional pension_at_death [currency p.a.]) or ``"exits"``
        (member_id, exit_date, optional reason).
    date_format
        ``strftime`` pattern accepted besides ISO dates (the basis mapping's date format).
    column_map
        Their header -> our column name (the basis mapping's columns), compared case-insensitively.
    fmt
        The CSV delimiter and encoding, or the XLSX sheet, where they are not the usual ones (as for a
        member file).

    Returns
    -------
    (polars.DataFrame, dict)
        The frame: ``row`` (file row, header = 1), ``member_id`` (text, trimmed, null when blank),
        ``date_text``, ``date`` (Date or null), and for deaths ``pension_text``, ``pension_at_death``
        (f64 or null), for exits ``reason`` (text). The dict: our column name -> the file's header as
        written, for the columns the file has (exceptions name it in ``file_column``).

    Raises
    ------
    DataError
        The file is missing, unreadable (as :func:`~valuation.members.readers.read_text_frame` says why),
        of an unknown type, or lacks a required column.
    """
    path = Path(path)
    if not path.is_file():
        raise DataError(f"{kind} file not found", file=path, fix=f"give the path of the {kind} file")
    if path.stat().st_size == 0:
        raise DataError(
            f"{kind} file is empty", file=path,
            fix=f"give a header row ({', '.join(REQUIRED[kind] + OPTIONAL[kind])}) and one row a record",
        )
    if path.suffix.lower() not in _KINDS:
        raise DataError(f"unknown file type '{path.suffix.lower()}'", file=path,
                        fix="give a .csv, .xlsx or .parquet file")
    df = read_text_frame(path, fmt)
    lookup = {k.strip().lower(): v.strip().lower() for k, v in (column_map or {}).items()}
    renames: dict[str, str] = {}
    for col in df.columns:
        key = col.strip().lower()
        renames[col] = lookup.get(key, key)
    seen: dict[str, str] = {}
    for original, ours in renames.items():
        if ours in seen:
            raise DataError(
                f"two columns map to '{ours}' ('{seen[ours]}' and '{original}')",
                file=path,
                column=original,
                fix="keep one of them, or change [mapping.columns] in the basis",
            )
        seen[ours] = original
    df = df.rename(renames)
    headers = {ours: original.replace("\ufeff", "") for ours, original in seen.items()}
    for col in REQUIRED[kind]:
        if col not in df.columns:
            if len(seen) == 1 and (";" in next(iter(seen.values())) or "\t" in next(iter(seen.values()))):
                raise DataError(
                    "the columns are not separated by commas (one header reads "
                    f"'{next(iter(seen.values()))}')",
                    file=path,
                    fix="save the file as CSV with commas between columns",
                )
            raise DataError(
                f"required column '{col}' is missing (found: {', '.join(seen.values()) or 'none'})",
                file=path,
                column=col,
                fix=f"add a '{col}' column (headers are matched ignoring case), or map your header to it "
                "under [mapping.columns] in the basis",
            )
    date_col = DATE_COLUMN[kind]
    ident = pl.col("member_id").str.strip_chars()
    out = df.with_row_index("row", offset=2).select(
        pl.col("row").cast(pl.Int64),
        pl.when(ident == "").then(None).otherwise(ident).alias("member_id"),
        pl.col(date_col).alias("date_text"),
        parse_dates(pl.col(date_col), date_format).alias("date"),
        *(
            [
                (pl.col("pension_at_death") if "pension_at_death" in df.columns else pl.lit(None, pl.String))
                .str.strip_chars()
                .alias("pension_text")
            ]
            if kind == "deaths"
            else [(pl.col("reason") if "reason" in df.columns else pl.lit(None, pl.String)).alias("reason")]
        ),
    )
    if kind == "deaths":
        amount = pl.col("pension_text").str.replace_all(",", "").cast(pl.Float64, strict=False)
        # inf, nan and 1e400 are no amounts: null, so the check lists them and the record's pension is used
        out = out.with_columns(pl.when(amount.is_finite()).then(amount).otherwise(None).alias("pension_at_death"))
    return out, headers
