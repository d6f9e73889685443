"""Turn the text columns of a member file into typed values with polars expressions (no row loops).

Every parsed column ``c`` is added as ``c__v`` beside the raw text ``c`` so that a rejected value can be
reported exactly as it was written.
"""

from __future__ import annotations

from datetime import date

import polars as pl

from valuation.basis.mapping import ColumnMapping
from valuation.members.schema import SEXES, STATUSES

#: Dates outside this range are treated as impossible (e.g. a two-digit year read as year 60).
EARLIEST = date(1850, 1, 1)
LATEST = date(2200, 12, 31)


def parsed(col: str) -> str:
    """Name of the parsed twin of a raw column."""
    return f"{col}__v"


def clean_text(cols: list[str]) -> list[pl.Expr]:
    """Trim spaces; an empty cell becomes null."""
    return [
        pl.col(c).str.strip_chars().replace("", None).alias(c)  # type: ignore[arg-type]
        for c in cols
    ]


def code_lookup(codes: dict[str, str], ours: tuple[str, ...]) -> dict[str, str]:
    """Case-insensitive code table: their codes plus our own codes (lower-cased keys)."""
    table = {c.lower(): c for c in ours}
    table.update({k.strip().lower(): v for k, v in codes.items()})
    return table


def parse_code(col: str, table: dict[str, str]) -> pl.Expr:
    """Recode a text column through ``table``; unknown codes give null."""
    return (
        pl.col(col)
        .str.to_lowercase()
        .replace_strict(list(table), list(table.values()), default=None, return_dtype=pl.String)
        .alias(parsed(col))
    )


def _date_tries(col: str, fmt: str | None) -> list[pl.Expr]:
    tries = [pl.col(col).str.strptime(pl.Date, f, strict=False) for f in dict.fromkeys((fmt, "%Y-%m-%d")) if f]
    tries.append(pl.col(col).str.strptime(pl.Datetime, "%Y-%m-%d %H:%M:%S", strict=False).dt.date())
    return tries


def parse_dates(df: pl.DataFrame, cols: list[str], fmt: str | None) -> pl.DataFrame:
    """Parse date columns: the mapping's format, then ISO ``YYYY-MM-DD``, then ``YYYY-MM-DD HH:MM:SS``
    (the text of an Excel date cell). Anything else, or a date outside 1850-2200, gives null.

    Later formats are only tried for a column where the first one left values unparsed.
    """
    out = []
    for c in cols:
        tries = _date_tries(c, fmt)
        first = df.select(tries[0].alias("d"), pl.col(c).is_not_null().alias("given"))
        if first.filter(pl.col("given") & pl.col("d").is_null()).height == 0:
            tries = tries[:1]
        value = pl.coalesce(tries) if len(tries) > 1 else tries[0]
        out.append(pl.when(value.is_between(pl.lit(EARLIEST), pl.lit(LATEST))).then(value).otherwise(None)
                   .alias(parsed(c)))
    return df.with_columns(out)


def parse_number(col: str) -> pl.Expr:
    """Parse a decimal number; text, NaN and infinities give null."""
    value = pl.col(col).cast(pl.Float64, strict=False)
    return pl.when(value.is_finite()).then(value).otherwise(None).alias(parsed(col))


def parse_all(
    df: pl.DataFrame, mapping: ColumnMapping, date_cols: list[str], num_cols: list[str]
) -> pl.DataFrame:
    """Add the parsed twin of every column of ours (``member_id`` stays text, trimmed)."""
    df = df.with_columns(
        pl.col("member_id").alias(parsed("member_id")),
        parse_code("status", code_lookup(mapping.status_codes, STATUSES)),
        parse_code("sex", code_lookup(mapping.sex_codes, SEXES)),
        *(parse_number(c) for c in num_cols),
    )
    return parse_dates(df, date_cols, mapping.date_format)
