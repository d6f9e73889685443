"""Validate one frame of member records (a whole file, or one chunk of it) as one lazy polars plan.

The plan maps nothing and reads nothing: it takes the file's columns under our names (after
:func:`~valuation.members.readers.map_headers`), parses them (:mod:`valuation.members.parse`), adds the
helper columns the checks need (duplicate ids, ages, closing ages, the tranche split), and evaluates every
check's mask (:mod:`valuation.members.checks`) in the same pass. One collect gives the frame with its masks;
the valued records, the counts by status and the exceptions are then derived from it together
(``polars.collect_all``), the exceptions from the few rows that fail a check.

Row numbers are those of a spreadsheet view of the file: the header is row 1, so the first data row is
row 2 (for Parquet, which has no header row, the same numbering is used: first record = row 2).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date
from functools import lru_cache
from pathlib import Path
from typing import overload

import numpy as np
import polars as pl

from valuation.basis.model import Basis
from valuation.errors import DataError
from valuation.members.checks import Check, build_checks
from valuation.members.parse import (
    EARLIEST,
    LATEST,
    clean_text,
    code_lookup,
    parse_date,
    parse_number,
    parsed,
    to_float,
)
from valuation.members.readers import as_written
from valuation.members.schema import (
    DATE_COLUMNS,
    GROUP_OF_STATUS,
    NUMERIC_COLUMNS,
    REQUIRED,
    SEXES,
    STATUSES,
    known_columns,
    tranche_column,
)
from valuation.survival import AgeConvention, age_at
from valuation.vocabulary import Sex

#: The columns of every exceptions frame, member and experience alike: the file, its row (header = row 1),
#: the member_id as written, our column, the file's header as written, the value as written (or the
#: record's figures), the reason (a template) and the severity (``excluded`` or ``warning``).
EXCEPTION_SCHEMA: dict[str, type[pl.DataType]] = {
    "file": pl.String, "row": pl.Int64, "member_id": pl.String, "column": pl.String,
    "file_column": pl.String, "value": pl.String, "reason": pl.String, "severity": pl.String,
}
UNKNOWN_STATUS = "(unknown status)"
#: File row of a file's first record (the header is row 1).
FIRST_ROW = 2
#: Reason of the warning listing a column the valuation does not use.
IGNORED_COLUMN = "column not used by the valuation (not one of ours and not mapped in the basis)"


def empty_exceptions() -> pl.DataFrame:
    """An exceptions frame with no rows (:data:`EXCEPTION_SCHEMA`)."""
    return pl.DataFrame(schema=EXCEPTION_SCHEMA)


@dataclass
class CheckedFrame:
    """One frame of member records after validation (a whole file, or one chunk of it).

    ``records`` and ``exceptions`` are as in :class:`~valuation.members.data.MemberData`; ``counts`` has
    one row a status label (``status, read, valued, excluded``, in no particular order);
    ``ignored_columns`` lists the file's headers (as written) that are not ours.
    """

    records: pl.DataFrame
    exceptions: pl.DataFrame
    counts: pl.DataFrame
    read: int
    ignored_columns: list[str]


def fmt_text(fmt: str | None) -> str:
    """The date formats accepted, in words (quoted in the reasons of date checks)."""
    return f"a date as {fmt} or ISO YYYY-MM-DD" if fmt else "an ISO date YYYY-MM-DD"


def _closing(basis: Basis, status_k: pl.Expr, sex_k: pl.Expr) -> tuple[pl.Expr, pl.Expr]:
    """The mortality table's closing age for the member (by status and sex) and for a known spouse (the
    spouse table of the opposite sex), looked up by the positions of the status and sex codes in
    :data:`STATUSES` and :data:`SEXES`; null where a code is unknown."""
    opposite: dict[Sex, Sex] = {"M": "F", "F": "M"}
    own = pl.Series([basis.closing_age(GROUP_OF_STATUS[st], s) for st in STATUSES for s in SEXES], dtype=pl.Int64)
    spouse = pl.Series([basis.closing_age("spouse", opposite[s]) for s in SEXES], dtype=pl.Int64)
    return pl.lit(own).gather(status_k * len(SEXES) + sex_k), pl.lit(spouse).gather(sex_k)


#: Every date the parser lets through (:data:`~valuation.members.parse.EARLIEST` to ``LATEST``), as days.
_FIRST_DAY = np.datetime64(EARLIEST, "D")
_ALL_DAYS = np.arange(_FIRST_DAY, np.datetime64(LATEST, "D") + 1, dtype="datetime64[D]")


@lru_cache(maxsize=8)
def _age_table(at: date, convention: AgeConvention) -> pl.Series:
    """:func:`valuation.survival.age_at` of every date the parser accepts (about 128,000 dates) [years]."""
    with np.errstate(invalid="ignore"):
        return pl.Series(age_at(_ALL_DAYS, at, convention), dtype=pl.Float64)


def _age_expr(col: str, basis: Basis, convention: AgeConvention) -> pl.Expr:
    """Age [years] at the valuation date of the dates in parsed column ``col``, by
    :func:`valuation.survival.age_at` (the engine's age calendar); null where the date is.

    The ages of every date the parser accepts are computed once (:func:`_age_table`) and looked up by
    day, so a million members cost a gather, not a million calendar sums.
    """
    first = int(_FIRST_DAY.astype(np.int64))
    return pl.lit(_age_table(basis.valuation_date, convention)).gather(pl.col(parsed(col)).cast(pl.Int64) - first)


def _ages(col: str, basis: Basis, prefix: str) -> list[pl.Expr]:
    """``<prefix>exact_age`` [years] and ``<prefix>age``: the age in whole years under the basis's
    convention (the floor of the exact age for ``exact`` and ``last_birthday``)."""
    exact = _age_expr(col, basis, "exact")
    conv = exact if basis.age_convention in ("exact", "last_birthday") else _age_expr(col, basis, basis.age_convention)
    return [exact.alias(f"{prefix}exact_age"), conv.floor().alias(f"{prefix}age")]


@overload
def duplicate_ids(ids: pl.DataFrame) -> pl.DataFrame: ...
@overload
def duplicate_ids(ids: pl.LazyFrame) -> pl.LazyFrame: ...
def duplicate_ids(ids: pl.DataFrame | pl.LazyFrame) -> pl.DataFrame | pl.LazyFrame:
    """The member ids that appear more than once, from the ``row`` and trimmed ``member_id`` of a whole file.

    Returns one row an id: ``member_id``, ``_dup_n`` (copies) and ``_dup_rows`` (the first ten rows, then
    ``...``), the text the duplicate check reports. Empty ids are not duplicates (they have their own check).
    A lazy frame gives a lazy frame. The copies are found by sorting the ids and comparing neighbours.
    """
    same = pl.col("member_id").is_not_null() & (
        (pl.col("member_id") == pl.col("member_id").shift(1)) | (pl.col("member_id") == pl.col("member_id").shift(-1))
    ).fill_null(False)
    return (
        ids.select("row", "member_id").sort("member_id").filter(same)
        .group_by("member_id")
        .agg(_dup_n=pl.len().cast(pl.Int64), _dup_rows=pl.col("row").sort().head(10).cast(pl.String).str.join(", "))
        .with_columns(_dup_rows=pl.when(pl.col("_dup_n") > 10).then(pl.col("_dup_rows") + ", ...")
                      .otherwise(pl.col("_dup_rows")))
    )


def _recode(col: str, written: pl.Series, table: dict[str, str], ours: tuple[str, ...]) -> tuple[pl.Expr, pl.Expr]:
    """Recode a text column through ``table`` (lower-cased codes -> ours; unknown codes give null): the
    code, and its position in ``ours``.

    ``written`` holds the column's distinct values: each is looked up once, and the records take their
    code by position (a gather), not by hashing a million strings.
    """
    written = written.drop_nulls()
    if written.is_empty():
        return pl.lit(None, dtype=pl.String).alias(parsed(col)), pl.lit(None, dtype=pl.Int64)
    codes = [table.get(k) for k in written.str.to_lowercase()]
    where = pl.col(col).cast(pl.Enum(written)).to_physical()
    return (pl.lit(pl.Series(codes, dtype=pl.String)).gather(where).alias(parsed(col)),
            pl.lit(pl.Series([None if c is None else ours.index(c) for c in codes], dtype=pl.Int64)).gather(where))


def _repeated(ids: pl.Series) -> pl.Series:
    """The distinct ids written more than once: sorted (unless they already are, as an administrator's
    extract often is) and compared with their neighbours."""
    s = ids.drop_nulls()
    if not s.is_sorted():
        s = s.sort()
    return s.filter((s == s.shift(1)).fill_null(False) | (s == s.shift(-1)).fill_null(False)).unique()


def _typed(dtype: pl.DataType, column: str) -> bool:
    """Keep a column in its own type rather than as text: a 64-bit float or an integer column of ours
    that holds numbers, or a date column of ours that holds dates (a Parquet file's typed columns).

    Parsing such a column gives exactly what parsing its text would (a double's text is its shortest
    round-trip form; a date's text is ISO), so only rows that fail a check need the text, for ``value``.
    32-bit floats are read as text: their text is not the double they widen to.
    """
    if column in NUMERIC_COLUMNS or column.startswith("pension_"):
        return dtype == pl.Float64 or dtype.is_integer()
    if column in DATE_COLUMNS:
        return dtype == pl.Date
    return False


def _source(raw: pl.DataFrame, wanted: list[str]) -> tuple[list[pl.Expr], dict[str, bool]]:
    """Our columns as the checks read them: text trimmed (empty -> null), typed columns as they are, a
    column the file lacks as nulls."""
    exprs: list[pl.Expr] = []
    typed: dict[str, bool] = {}
    for c in wanted:
        if c not in raw.columns:
            exprs.append(pl.lit(None, dtype=pl.String).alias(c))
            typed[c] = False
        elif _typed(raw.schema[c], c):
            exprs.append(pl.col(c))
            typed[c] = True
        else:
            text = pl.col(c) if raw.schema[c] == pl.String else pl.col(c).cast(pl.String)
            exprs.append(clean_text([c], text)[0])
            typed[c] = False
    return exprs, typed


def _required(raw: pl.DataFrame, basis: Basis, path: Path, file_columns: dict[str, str]) -> None:
    missing = [c for c in REQUIRED if c not in raw.columns]
    if not missing:
        return
    mapped = ", ".join(f"'{k}' -> {v}" for k, v in basis.mapping.columns.items()) or "none"
    written = ", ".join(f"'{file_columns.get(c, c)}'" for c in raw.columns) or "none"
    fix = "add the column, or map the administrator's header to it under [mapping.columns] in the basis"
    if raw.width == 1 and any(sep in file_columns.get(raw.columns[0], raw.columns[0]) for sep in ";\t|"):
        fix = "save the file with commas between values (the header row looks separated by another character)"
    raise DataError(
        f"required column(s) {', '.join(missing)} not found (headers in the file: {written}; "
        f"mapping in the basis: {mapped})",
        file=path, row=1, column=missing[0], fix=fix,
    )


def _plan(
    raw: pl.DataFrame, basis: Basis, tranche_cols: list[str], first_row: int, duplicates: pl.DataFrame | None,
    checks: list[Check], blank: list[bool],
) -> pl.LazyFrame:
    """Parsed columns, helper columns and one boolean column ``_m<k>`` a check, plus ``_excluded`` and
    ``_failed``."""
    wanted = [*REQUIRED, *DATE_COLUMNS[1:], *NUMERIC_COLUMNS, *tranche_cols]
    source, typed = _source(raw, wanted)
    m = basis.mapping
    held = raw.lazy().select(source).with_row_index("row", offset=first_row).with_columns(
        pl.col("row").cast(pl.Int64), *(to_float(c) for c in [*NUMERIC_COLUMNS, *tranche_cols]),
    ).filter(~pl.Series(blank, dtype=pl.Boolean)).collect()  # held once: both passes below read it
    # the distinct codes, and the ids written more than once: short lists, found before the main pass
    repeated = _repeated(held.get_column("member_id")) if duplicates is None else duplicates.get_column("member_id")
    status, status_k = _recode("status", held.get_column("status").unique(), code_lookup(m.status_codes, STATUSES),
                               STATUSES)
    sex, sex_k = _recode("sex", held.get_column("sex").unique(), code_lookup(m.sex_codes, SEXES), SEXES)
    closing, sp_closing = _closing(basis, status_k, sex_k)
    lf = held.lazy().with_columns(
        pl.col("member_id").alias(parsed("member_id")), status, sex, status_k.alias("_status_k"),
        *(parse_number(c) for c in [*NUMERIC_COLUMNS, *tranche_cols]),
        *(parse_date(c, m.date_format, typed=typed[c]) for c in DATE_COLUMNS),
        pl.col("member_id").is_in(repeated.implode()).alias("_dup"),
        closing.alias("_closing"), sp_closing.alias("_sp_closing"),
    )
    tr = [pl.col(parsed(c)) for c in tranche_cols]
    given = pl.any_horizontal([pl.col(c).is_not_null() for c in tranche_cols]) if tranche_cols else pl.lit(False)
    lf = lf.with_columns(_tr_given=given, _tr_sum=pl.sum_horizontal(tr) if tr else pl.lit(0.0)).with_columns(
        _pension=pl.when(pl.col(parsed("pension")).is_null() & pl.col("_tr_given"))
        .then(pl.col("_tr_sum")).otherwise(pl.col(parsed("pension"))),
    )
    lf = lf.with_columns(*_ages("date_of_birth", basis, "_"), *_ages("spouse_date_of_birth", basis, "_sp_"))
    excluded = [f"_m{k}" for k, c in enumerate(checks) if c.severity == "excluded"]
    return lf.with_columns(c.mask.fill_null(False).alias(f"_m{k}") for k, c in enumerate(checks)).with_columns(
        _excluded=pl.any_horizontal(excluded) if excluded else pl.lit(False),
        _failed=pl.any_horizontal([f"_m{k}" for k in range(len(checks))]) if checks else pl.lit(False),
    )


def _in_file(reason: pl.Expr | str, column: str, header: str) -> pl.Expr:
    """The reason, led by the file's own header where it is spelt differently from our column name."""
    text = pl.lit(reason) if isinstance(reason, str) else reason
    return text if header == column else pl.concat_str(pl.lit(f"column '{header}': "), text.cast(pl.String))


def _exceptions(
    failed: pl.DataFrame, checks: list[Check], path: Path, file_columns: dict[str, str],
) -> pl.LazyFrame:
    """Every problem found, one row each (:data:`EXCEPTION_SCHEMA`), sorted by row then check order.

    ``failed`` holds the rows where some check's mask is true. ``file_columns`` gives the file's header
    for each of our columns present in the file; a column the file lacks is named by our name too.
    """
    if failed.height == 0:
        return empty_exceptions().lazy()
    fired = failed.select(pl.col(f"_m{k}").any() for k in range(len(checks))).row(0)
    parts = [
        failed.lazy().filter(pl.col(f"_m{k}")).select(
            pl.lit(str(path)).alias("file"),
            pl.col("row"),
            pl.col("member_id"),
            pl.lit(c.column).alias("column"),
            pl.lit(file_columns.get(c.column, c.column)).alias("file_column"),
            (c.value if c.value is not None else pl.col(c.column)).cast(pl.String).alias("value"),
            _in_file(c.reason, c.column, file_columns.get(c.column, c.column)).cast(pl.String).alias("reason"),
            pl.lit(c.severity).alias("severity"),
            pl.lit(k).alias("_order"),
        )
        for k, c in enumerate(checks) if fired[k]
    ]
    if not parts:
        return empty_exceptions().lazy()
    return pl.concat(parts).sort(["row", "_order"]).drop("_order").cast(EXCEPTION_SCHEMA)  # type: ignore[arg-type]


#: Reason of the warning row for a row of the file with every cell empty (not a record).
BLANK_ROW = "blank row: every cell is empty, so it is not counted as a record"


def blank_rows(raw: pl.DataFrame) -> list[bool]:
    """For each row of ``raw``, whether every cell is empty (null, or text of spaces only): a blank line of
    a CSV file, or a row of commas, which spreadsheets leave at the end of an export."""
    if raw.width == 0:
        return [False] * raw.height
    empty = [pl.col(c).is_null() | (pl.col(c).str.strip_chars() == "") if t == pl.String else pl.col(c).is_null()
             for c, t in raw.schema.items()]
    return raw.select(pl.all_horizontal(empty).alias("b")).get_column("b").to_list()


def blank_row_warnings(path: Path, rows: list[int]) -> pl.DataFrame:
    """One warning row of the exceptions frame for each blank row (member_id and column empty)."""
    n = len(rows)
    return pl.DataFrame(
        {"file": [str(path)] * n, "row": rows, "member_id": [None] * n, "column": [None] * n,
         "file_column": [None] * n, "value": [None] * n, "reason": [BLANK_ROW] * n, "severity": ["warning"] * n},
        schema=EXCEPTION_SCHEMA,
    )


def ignored_column_rows(path: Path, headers: list[str]) -> pl.DataFrame:
    """One warning row of the exceptions frame for each ignored column (row and member_id empty)."""
    return pl.DataFrame(
        {"file": [str(path)] * len(headers), "row": [None] * len(headers), "member_id": [None] * len(headers),
         "column": headers, "file_column": headers, "value": [None] * len(headers),
         "reason": [IGNORED_COLUMN] * len(headers), "severity": ["warning"] * len(headers)},
        schema=EXCEPTION_SCHEMA,
    )


def _records(lf: pl.LazyFrame, basis: Basis, tranche_cols: list[str], all_tranches: list[str]) -> pl.LazyFrame:
    v = parsed
    pension = pl.col("_pension").fill_null(0.0)
    default = tranche_column(basis.default_tranche)
    cols = []
    for t in all_tranches:
        given = pl.col(v(t)).fill_null(0.0) if t in tranche_cols else pl.lit(0.0)
        fallback = pension if t == default else pl.lit(0.0)
        cols.append(pl.when(pl.col("_tr_given")).then(given).otherwise(fallback).alias(t))
    return lf.filter(~pl.col("_excluded")).select(
        pl.col("row"),
        pl.col("member_id"),
        pl.col(v("status")).alias("status"),
        pl.col(v("sex")).alias("sex"),
        pl.col(v("date_of_birth")).alias("date_of_birth"),
        pension.alias("pension"),
        *cols,
        pl.col(v("salary")).fill_null(0.0).alias("salary"),
        pl.col(v("service_years")).fill_null(0.0).alias("service_years"),
        pl.col(v("retirement_age")).fill_null(basis.retirement_age).alias("retirement_age"),
        pl.col(v("spouse_date_of_birth")).alias("spouse_date_of_birth"),
        pl.col(v("spouse_fraction")).fill_null(basis.spouse.fraction).alias("spouse_fraction"),
        pl.col(v("guarantee_end")).alias("guarantee_end"),
        pl.col(v("pension_end_age")).alias("pension_end_age"),
    )


def _file_columns(raw: pl.DataFrame, headers: Sequence[str] | None) -> dict[str, str]:
    """Our column name -> the file's header as written, for every column of ``raw``."""
    if headers is None:
        return {c: c for c in raw.columns}
    written = tuple(as_written(h) for h in headers)
    if len(written) != raw.width:
        raise ValueError(f"{len(written)} headers given for a frame of {raw.width} columns")
    return dict(zip(raw.columns, written, strict=True))


def member_checks(basis: Basis, tranche_cols: list[str]) -> list[Check]:
    """The record-level checks for a file with these tranche columns, on ``basis``."""
    m = basis.mapping
    return build_checks(
        tranche_cols=tranche_cols, fmt_text=fmt_text(m.date_format),
        valuation_date=basis.valuation_date, thresholds=basis.thresholds,
        retirement_age=basis.retirement_age, status_codes=", ".join([*m.status_codes, *STATUSES]),
        sex_codes=", ".join([*m.sex_codes, *SEXES]),
    )


def validate_frame(
    raw: pl.DataFrame, basis: Basis, path: Path, *, first_row: int = FIRST_ROW, duplicates: pl.DataFrame | None = None,
    headers: Sequence[str] | None = None,
) -> CheckedFrame:
    """Validate member records held under our column names (after :func:`map_headers`).

    Parameters
    ----------
    raw : polars.DataFrame
        The file's columns, headers already mapped to ours: text, or (from a Parquet file) 64-bit float,
        integer and date columns in their own types, which give the same results as their text.
    basis : Basis
        The assumptions basis (valuation date, tranches, closing ages, thresholds, mapping codes).
    path : Path
        The member file, named in exceptions and errors.
    first_row : int
        File row number of ``raw``'s first record (2 for a whole file: the header is row 1). The frame
        whose first row is 2 (the whole file, or its first chunk) also lists each ignored column once, as
        a warning row with no row number (:data:`IGNORED_COLUMN`); it never counts a record as excluded.
    duplicates : polars.DataFrame, optional
        Duplicate ids of the whole file (:func:`duplicate_ids`) when ``raw`` is one chunk of it; by
        default duplicates are found within ``raw``.
    headers : sequence of str, optional
        The file's headers as written, one for each column of ``raw`` in order (the columns of the
        frame before :func:`~valuation.members.readers.map_headers`); by default ``raw``'s own names.
        Exceptions name them in ``file_column`` (and in the reason where they differ from ours), and a
        missing required column lists them.

    Raises
    ------
    DataError
        A required column is absent, or a ``pension_<name>`` column names a tranche the basis does not
        declare.
    """
    all_tranches = [tranche_column(t) for t in basis.tranches]
    ours = known_columns(list(basis.tranches))
    file_columns = _file_columns(raw, headers)
    stray = [c for c in raw.columns if c.startswith("pension_") and c not in ours]
    if stray:
        header = file_columns[stray[0]]
        read_as = "" if header == stray[0] else f" (read as {stray[0]})"
        raise DataError(
            f"column '{header}'{read_as} names a tranche the basis does not declare (declared: "
            f"{', '.join(basis.tranches)})", file=path, column=header,
            fix="declare the tranche under [tranches] in the basis, or rename the column",
        )
    _required(raw, basis, path, file_columns)
    tranche_cols = [c for c in all_tranches if c in raw.columns]
    ignored = [file_columns[c] for c in raw.columns if c not in ours]
    checks = member_checks(basis, tranche_cols)
    blank = blank_rows(raw)
    df = _plan(raw, basis, tranche_cols, first_row, duplicates, checks, blank).collect()
    failed = df[df.get_column("_failed").arg_true()]  # a gather: few rows fail
    # every copy of a repeated id fails, so the failing rows give the copies unless the whole file's are given
    dups = duplicate_ids(failed.filter(pl.col("_dup"))) if duplicates is None else duplicates
    failed = failed.join(dups, on="member_id", how="left", maintain_order="left")
    labels = pl.Series([*STATUSES, UNKNOWN_STATUS], dtype=pl.String)
    records, counts, exceptions = pl.collect_all([
        _records(df.lazy(), basis, tranche_cols, all_tranches),
        df.lazy().group_by(pl.col("_status_k").fill_null(len(STATUSES)))  # by position: no strings hashed
        .agg(read=pl.len(), valued=(~pl.col("_excluded")).sum(), excluded=pl.col("_excluded").sum())
        .select(pl.lit(labels).gather(pl.col("_status_k")).alias("status"),
                pl.col("read", "valued", "excluded").cast(pl.Int64)),
        _exceptions(failed, checks, path, file_columns),
    ])
    if first_row == FIRST_ROW:
        exceptions = pl.concat([ignored_column_rows(path, ignored), exceptions])
    if any(blank):
        rows = [first_row + k for k, b in enumerate(blank) if b]
        exceptions = pl.concat([exceptions, blank_row_warnings(path, rows)]).sort("row", nulls_last=False,
                                                                                  maintain_order=True)
    return CheckedFrame(records=records, exceptions=exceptions, counts=counts, read=df.height,
                        ignored_columns=ignored)


def sum_counts(parts: list[pl.DataFrame]) -> pl.DataFrame:
    """Add up ``CheckedFrame.counts`` of several chunks, one row a status in reporting order."""
    counts = pl.concat(parts).group_by("status").agg(pl.col("read", "valued", "excluded").sum())
    order = {s: k for k, s in enumerate([*STATUSES, UNKNOWN_STATUS])}
    return counts.sort(pl.col("status").replace_strict(order, return_dtype=pl.Int64))
