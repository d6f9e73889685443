"""Turn the text columns of a member file into typed values with polars expressions (no row loops).

Every parsed column ``c`` is added as ``c__v`` beside the raw text ``c`` so that a rejected value can be
reported exactly as it was written.
"""

from __future__ import annotations

from datetime import date

import polars as pl

#: Dates outside this range are treated as impossible (e.g. a two-digit year read as year 60).
EARLIEST = date(1850, 1, 1)
LATEST = date(2200, 12, 31)


def parsed(col: str) -> str:
    """Name of the parsed twin of a raw column."""
    return f"{col}__v"


def clean_text(cols: list[str], text: pl.Expr | None = None) -> list[pl.Expr]:
    """Trim spaces; an empty cell becomes null. ``text`` stands for the (single) column's text where it is
    not the column itself (e.g. a cast)."""
    return [
        (pl.col(c) if text is None else text).str.strip_chars().replace("", None).alias(c)  # type: ignore[arg-type]
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


#: Characters that, outside a ``%`` directive, a date format requires literally in the text.
_SEPARATORS = "-/.:,"


def _required_literals(fmt: str) -> set[str]:
    """The separator characters a text must contain to parse under ``strftime`` pattern ``fmt``."""
    out: set[str] = set()
    k = 0
    while k < len(fmt):
        if fmt[k] == "%":
            k += 1
            while k < len(fmt) and fmt[k] in "-_0^#.:123456789":  # flags, widths, %.f, %:z
                k += 1
            k += 1  # the directive's letter (or the second % of %%)
            continue
        if fmt[k] in _SEPARATORS:
            out.add(fmt[k])
        k += 1
    return out


def _strptime(text: pl.Expr, fmt: str, dtype: type[pl.Date] | type[pl.Datetime]) -> pl.Expr:
    """``text`` parsed by ``fmt``, null where it does not fit. Text lacking one of the format's separators
    cannot fit, so it is left out before parsing (a cheap search, not a failed parse, for each value)."""
    needed = sorted(_required_literals(fmt))
    if needed:
        text = pl.when(pl.all_horizontal([text.str.contains(c, literal=True) for c in needed])).then(text)
    return text.str.strptime(dtype, fmt, strict=False)


def to_date(text: pl.Expr, fmt: str | None, *, typed: bool = False) -> pl.Expr:
    """Parse dates: the mapping's format ``fmt``, then ISO ``YYYY-MM-DD``, then ``YYYY-MM-DD HH:MM:SS``
    (the text of an Excel date cell), the first that fits. Anything else, or a date outside 1850-2200,
    gives null. This is the one date parser of every input file (member data, deaths, exits).

    ``typed`` says ``text`` already holds dates (a Parquet date column): only the range applies.
    """
    if typed:
        value = text
    else:
        tries = [_strptime(text, f, pl.Date) for f in dict.fromkeys((fmt, "%Y-%m-%d")) if f]
        tries.append(_strptime(text, "%Y-%m-%d %H:%M:%S", pl.Datetime).dt.date())
        value = pl.coalesce(tries)
    return pl.when(value.is_between(pl.lit(EARLIEST), pl.lit(LATEST))).then(value).otherwise(None)


def parse_date(col: str, fmt: str | None, *, typed: bool = False) -> pl.Expr:
    """The parsed twin of date column ``col`` (:func:`to_date`)."""
    return to_date(pl.col(col), fmt, typed=typed).alias(parsed(col))


def as_float(col: str) -> str:
    """Name of a raw column read as a double, finite or not (``inf``, ``NaN``, ``1e400``), null where it is
    not a number: the column :func:`parse_number` and the number checks read."""
    return f"{col}__f"


def to_float(col: str) -> pl.Expr:
    """The column :func:`as_float` names."""
    return pl.col(col).cast(pl.Float64, strict=False).alias(as_float(col))


def parse_number(col: str) -> pl.Expr:
    """Parse a decimal number (from the :func:`as_float` column); text, NaN and infinities give null."""
    value = pl.col(as_float(col))
    return pl.when(value.is_finite()).then(value).otherwise(None).alias(parsed(col))
