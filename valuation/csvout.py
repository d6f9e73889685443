"""CSV files that people open in spreadsheets: text cells are made formula-safe.

A member id or a reason text such as ``=HYPERLINK("http://x", "click")`` would run as a formula when a
CSV file is opened in a spreadsheet. Every CSV the tool writes goes through :func:`write_csv`; Parquet
files keep the text exactly as read.
"""

from __future__ import annotations

from pathlib import Path

import polars as pl

#: First characters that make a spreadsheet read a cell as a formula (OWASP, "CSV Injection").
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_PATTERN = r"^[=+\-@\t\r]"


def formula_safe(df: pl.DataFrame) -> pl.DataFrame:
    """Text cells that a spreadsheet would read as a formula, prefixed with a single quote.

    Applies to text columns only (numbers stay numbers). A cell starting with ``=``, ``+``, ``-``, ``@``,
    a tab or a carriage return gets a leading ``'``, so that ``=HYPERLINK(...)`` shows as text.

    References
    ----------
    OWASP Foundation, "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection): prepend a single
    quote to cells beginning with ``=``, ``+``, ``-``, ``@``, tab or carriage return.
    """
    text = [c for c, t in df.schema.items() if t == pl.String]
    if not text:
        return df
    return df.with_columns(
        pl.when(pl.col(c).str.contains(_PATTERN)).then(pl.lit("'") + pl.col(c)).otherwise(pl.col(c)).alias(c)
        for c in text
    )


def write_csv(df: pl.DataFrame, path: str | Path) -> None:
    """Write ``df`` as CSV (UTF-8, header row) with text cells made formula-safe (:func:`formula_safe`)."""
    formula_safe(df).write_csv(path)


__all__ = ["FORMULA_START", "formula_safe", "write_csv"]
