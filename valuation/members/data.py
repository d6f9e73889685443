"""Read and validate one scheme's member file: the valued records plus every problem found.

Row numbers are those of a spreadsheet view of the file: the header is row 1, so the first data row is
row 2 (for Parquet, which has no header row, the same numbering is used: first record = row 2).
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import polars as pl

from valuation.basis.model import Basis
from valuation.errors import DataError
from valuation.members.checks import build_checks
from valuation.members.parse import clean_text, parse_all, parsed
from valuation.members.readers import DEFAULT_FORMAT, InputFormat, as_written, map_headers, read_text_frame
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
from valuation.survival import age_at
from valuation.vocabulary import Group

EXCEPTION_SCHEMA: dict[str, type[pl.DataType]] = {
    "file": pl.String, "row": pl.Int64, "member_id": pl.String, "column": pl.String,
    "file_column": pl.String, "value": pl.String, "reason": pl.String, "severity": pl.String,
}
UNKNOWN_STATUS = "(unknown status)"
#: File row of a file's first record (the header is row 1).
FIRST_ROW = 2


@dataclass
class MemberData:
    """Valued member records, the exceptions found, and the reconciliation counts.

    ``records`` holds the valued records, typed (see :func:`read_members`); ``exceptions`` lists every
    problem (file, row, member_id, column (ours), file_column (the header as written in the file), value
    as written, reason, severity ``excluded``/``warning``) sorted by row. ``read = valued + excluded`` always holds.
    """

    path: Path
    records: pl.DataFrame
    exceptions: pl.DataFrame
    read: int
    valued: int
    excluded: int
    ignored_columns: list[str] = field(default_factory=list)
    _status_counts: pl.DataFrame | None = None
    #: SHA-256 of the records as given, for records that came from a data frame rather than a file.
    digest: str | None = None

    def counts_by_status(self) -> pl.DataFrame:
        """Records read, valued and excluded by status, with a ``total`` row last.

        A record whose status code is unknown is counted under ``(unknown status)``.
        """
        assert self._status_counts is not None
        c = self._status_counts
        total = c.select(pl.lit("total").alias("status"), pl.col("read", "valued", "excluded").sum())
        return pl.concat([c, total])

    def reconciliation_text(self) -> str:
        """Plain-text reconciliation, e.g. ``records read 3,012 = valued 2,998 + excluded 14``, then by status."""
        lines = [f"records read {self.read:,} = valued {self.valued:,} + excluded {self.excluded:,}"]
        for r in self.counts_by_status().filter(pl.col("status") != "total").iter_rows(named=True):
            lines.append(f"  {r['status']}: read {r['read']:,} = valued {r['valued']:,} + excluded {r['excluded']:,}")
        return "\n".join(lines)


def _fmt_text(fmt: str | None) -> str:
    return f"a date as {fmt} or ISO YYYY-MM-DD" if fmt else "an ISO date YYYY-MM-DD"


def _closing_expr(basis: Basis, status: pl.Expr, sex: pl.Expr, group: Group | None) -> pl.Expr:
    """Closing age by (status, sex), or by sex alone for a fixed ``group`` (used for spouses)."""
    out: pl.Expr = pl.lit(None, dtype=pl.Int64)
    for s in SEXES:
        for st in STATUSES:
            g: Group = GROUP_OF_STATUS[st] if group is None else group
            cond = ((status == st) & (sex == s)) if group is None else (sex == s)
            out = pl.when(cond).then(pl.lit(basis.closing_age(g, s))).otherwise(out)
    return out


def _ages(d: pl.Series, basis: Basis) -> tuple[np.ndarray, np.ndarray]:
    """Age in whole years under the basis's convention, and exact age [years], at the valuation date."""
    dob = d.to_numpy().astype("datetime64[D]")
    with np.errstate(invalid="ignore"):
        exact = age_at(dob, basis.valuation_date, "exact")
        if basis.age_convention in ("exact", "last_birthday"):
            return np.floor(exact), exact
        return np.floor(age_at(dob, basis.valuation_date, basis.age_convention)), exact


def duplicate_ids(ids: pl.DataFrame) -> pl.DataFrame:
    """The member ids that appear more than once, from the ``row`` and trimmed ``member_id`` of a whole file.

    Returns one row an id: ``member_id``, ``_dup_n`` (copies) and ``_dup_rows`` (the first ten rows, then
    ``...``), the text the duplicate check reports. Empty ids are not duplicates (they have their own check).
    """
    return (
        ids.filter(pl.col("member_id").is_duplicated() & pl.col("member_id").is_not_null())
        .group_by("member_id")
        .agg(_dup_n=pl.len().cast(pl.Int64), _dup_rows=pl.col("row").sort().head(10).cast(pl.String).str.join(", "))
        .with_columns(_dup_rows=pl.when(pl.col("_dup_n") > 10).then(pl.col("_dup_rows") + ", ...")
                      .otherwise(pl.col("_dup_rows")))
    )


def _prepare(
    df: pl.DataFrame, basis: Basis, path: Path, tranche_cols: list[str], first_row: int,
    duplicates: pl.DataFrame | None, file_columns: dict[str, str],
) -> pl.DataFrame:
    missing = [c for c in REQUIRED if c not in df.columns]
    if missing:
        mapped = ", ".join(f"'{k}' -> {v}" for k, v in basis.mapping.columns.items()) or "none"
        written = ", ".join(f"'{file_columns.get(c, c)}'" for c in df.columns) or "none"
        fix = "add the column, or map the administrator's header to it under [mapping.columns] in the basis"
        if df.width == 1 and any(sep in file_columns.get(df.columns[0], df.columns[0]) for sep in ";\t|"):
            fix = ("save the file with commas between values (the header row looks separated by another "
                   "character)")
        raise DataError(
            f"required column(s) {', '.join(missing)} not found (headers in the file: {written}; "
            f"mapping in the basis: {mapped})",
            file=path, row=1, column=missing[0], fix=fix,
        )
    wanted = [*REQUIRED, *DATE_COLUMNS[1:], *NUMERIC_COLUMNS, *tranche_cols]
    df = df.with_columns(pl.lit(None, dtype=pl.String).alias(c) for c in wanted if c not in df.columns)
    df = df.select(wanted).with_row_index("row", offset=first_row).with_columns(pl.col("row").cast(pl.Int64))
    df = df.with_columns(clean_text(wanted))
    df = parse_all(df, basis.mapping, list(DATE_COLUMNS), [*NUMERIC_COLUMNS, *tranche_cols])
    tr = [pl.col(parsed(c)) for c in tranche_cols]
    given = pl.any_horizontal([pl.col(c).is_not_null() for c in tranche_cols]) if tranche_cols else pl.lit(False)
    df = df.with_columns(
        _tr_given=given,
        _tr_sum=pl.sum_horizontal(tr) if tr else pl.lit(0.0),
    ).with_columns(
        _pension=pl.when(pl.col(parsed("pension")).is_null() & pl.col("_tr_given"))
        .then(pl.col("_tr_sum")).otherwise(pl.col(parsed("pension"))),
    )
    dups = duplicate_ids(df.select("row", "member_id")) if duplicates is None else duplicates
    df = df.join(dups, on="member_id", how="left", maintain_order="left").with_columns(
        pl.col("_dup_n").fill_null(1)
    )
    conv, exact = _ages(df.get_column(parsed("date_of_birth")), basis)
    sp_conv, sp_exact = _ages(df.get_column(parsed("spouse_date_of_birth")), basis)
    opposite = pl.col(parsed("sex")).replace_strict({"M": "F", "F": "M"}, default=None)
    return df.with_columns(
        _age=pl.Series(conv).fill_nan(None),
        _exact_age=pl.Series(exact).fill_nan(None),
        _sp_age=pl.Series(sp_conv).fill_nan(None),
        _sp_exact_age=pl.Series(sp_exact).fill_nan(None),
        _closing=_closing_expr(basis, pl.col(parsed("status")), pl.col(parsed("sex")), None),
        _sp_closing=_closing_expr(basis, pl.col(parsed("status")), opposite, "spouse"),
    )


def _in_file(reason: pl.Expr | str, column: str, header: str) -> pl.Expr:
    """The reason, led by the file's own header where it is spelt differently from our column name."""
    text = pl.lit(reason) if isinstance(reason, str) else reason
    return text if header == column else pl.concat_str(pl.lit(f"column '{header}': "), text.cast(pl.String))


def _exceptions(
    df: pl.DataFrame, basis: Basis, path: Path, tranche_cols: list[str], file_columns: dict[str, str],
) -> pl.DataFrame:
    """Every problem found, one row each (:data:`EXCEPTION_SCHEMA`).

    ``file_columns`` gives the file's header for each of our columns present in the file; a column the
    file lacks is named by our name in ``file_column`` too.
    """
    m = basis.mapping
    status_codes = ", ".join([*m.status_codes, *STATUSES])
    sex_codes = ", ".join([*m.sex_codes, *SEXES])
    checks = build_checks(
        tranche_cols=tranche_cols, fmt_text=_fmt_text(m.date_format),
        valuation_date=basis.valuation_date, thresholds=basis.thresholds,
        retirement_age=basis.retirement_age, status_codes=status_codes, sex_codes=sex_codes,
    )
    parts = [
        df.filter(c.mask.fill_null(False)).select(
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
        for k, c in enumerate(checks)
    ]
    out = pl.concat(parts)
    return out.sort(["row", "_order"]).drop("_order").cast(EXCEPTION_SCHEMA)  # type: ignore[arg-type]


#: Reason of the warning listing a column the valuation does not use.
IGNORED_COLUMN = "column not used by the valuation (not one of ours and not mapped in the basis)"


def ignored_column_rows(path: Path, headers: list[str]) -> pl.DataFrame:
    """One warning row of the exceptions frame for each ignored column (row and member_id empty)."""
    return pl.DataFrame(
        {"file": [str(path)] * len(headers), "row": [None] * len(headers), "member_id": [None] * len(headers),
         "column": headers, "file_column": headers, "value": [None] * len(headers),
         "reason": [IGNORED_COLUMN] * len(headers), "severity": ["warning"] * len(headers)},
        schema=EXCEPTION_SCHEMA,
    )


def _records(df: pl.DataFrame, basis: Basis, tranche_cols: list[str], all_tranches: list[str]) -> pl.DataFrame:
    v = parsed
    pension = pl.col("_pension").fill_null(0.0)
    default = tranche_column(basis.default_tranche)
    cols = []
    for t in all_tranches:
        given = pl.col(v(t)).fill_null(0.0) if t in tranche_cols else pl.lit(0.0)
        fallback = pension if t == default else pl.lit(0.0)
        cols.append(pl.when(pl.col("_tr_given")).then(given).otherwise(fallback).alias(t))
    return df.select(
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


@dataclass
class CheckedFrame:
    """One frame of member records after validation (a whole file, or one chunk of it).

    ``records`` and ``exceptions`` are as in :class:`MemberData`; ``counts`` has one row a status label
    (``status, read, valued, excluded``, in no particular order); ``ignored_columns`` lists the file's
    headers (as written) that are not ours.
    """

    records: pl.DataFrame
    exceptions: pl.DataFrame
    counts: pl.DataFrame
    read: int
    ignored_columns: list[str]


def validate_frame(
    raw: pl.DataFrame, basis: Basis, path: Path, *, first_row: int = FIRST_ROW, duplicates: pl.DataFrame | None = None,
    headers: Sequence[str] | None = None,
) -> CheckedFrame:
    """Validate member records held as text under our column names (after :func:`map_headers`).

    Parameters
    ----------
    raw : polars.DataFrame
        Text columns, headers already mapped to ours.
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
    tranche_cols = [c for c in all_tranches if c in raw.columns]
    ignored = [file_columns[c] for c in raw.columns if c not in ours]
    df = _prepare(raw, basis, path, tranche_cols, first_row, duplicates, file_columns)
    exceptions = _exceptions(df, basis, path, tranche_cols, file_columns)
    if first_row == FIRST_ROW:
        exceptions = pl.concat([ignored_column_rows(path, ignored), exceptions])
    bad_rows = exceptions.filter(pl.col("severity") == "excluded").get_column("row").unique()
    df = df.with_columns(_excluded=pl.col("row").is_in(bad_rows.implode()))
    records = _records(df.filter(~pl.col("_excluded")), basis, tranche_cols, all_tranches)
    status_label = pl.col(parsed("status")).fill_null(UNKNOWN_STATUS)
    counts = (
        df.group_by(status_label.alias("status"))
        .agg(read=pl.len(), valued=(~pl.col("_excluded")).sum(), excluded=pl.col("_excluded").sum())
        .with_columns(pl.col("read", "valued", "excluded").cast(pl.Int64))
    )
    return CheckedFrame(records=records, exceptions=exceptions, counts=counts, read=df.height,
                        ignored_columns=ignored)


def sum_counts(parts: list[pl.DataFrame]) -> pl.DataFrame:
    """Add up ``CheckedFrame.counts`` of several chunks, one row a status in reporting order."""
    counts = pl.concat(parts).group_by("status").agg(pl.col("read", "valued", "excluded").sum())
    order = {s: k for k, s in enumerate([*STATUSES, UNKNOWN_STATUS])}
    return counts.sort(pl.col("status").replace_strict(order, return_dtype=pl.Int64))


def read_members(path: str | Path, basis: Basis, fmt: InputFormat = DEFAULT_FORMAT) -> MemberData:
    """Read one scheme's member file (CSV, XLSX or Parquet) and validate every record.

    Parameters
    ----------
    path : str or Path
        The member file. Headers are matched case-insensitively after trimming, through the basis's
        ``[mapping]`` (column names, status and sex codes, date format).
    basis : Basis
        The assumptions basis: valuation date, tranches, mortality tables (closing ages), thresholds.
    fmt : InputFormat, optional
        The CSV delimiter and encoding, or the XLSX sheet, where they are not the usual ones.

    Returns
    -------
    MemberData
        ``records`` (valued records, one row each: row, member_id, status, sex, date_of_birth, pension,
        ``pension_<tranche>`` for every tranche of the basis, salary, service_years, retirement_age,
        spouse_date_of_birth, spouse_fraction, guarantee_end, pension_end_age). Filling rules: an empty
        pension is 0 for actives, or the sum of the tranches where those are given; a record without a
        tranche split puts its whole pension in ``basis.default_tranche``, and a record with a split
        has 0 in the tranches it leaves empty; salary and service_years are 0 where empty (they are
        required of actives); retirement_age and spouse_fraction come from the basis where empty.

    Raises
    ------
    DataError
        The file is missing or unreadable, its extension is unknown, a required column is absent, or a
        ``pension_<name>`` column names a tranche the basis does not declare.
    """
    p = Path(path)
    text = read_text_frame(p, fmt)
    checked = validate_frame(map_headers(text, basis.mapping, p), basis, p, headers=text.columns)
    return MemberData(
        path=p, records=checked.records, exceptions=checked.exceptions, read=checked.read,
        valued=checked.records.height, excluded=checked.read - checked.records.height,
        ignored_columns=checked.ignored_columns, _status_counts=sum_counts([checked.counts]),
    )


def members_from_frame(frame: Any, basis: Basis, *, name: str = "(data frame)") -> MemberData:
    """Validate member records held in a polars or pandas data frame, as :func:`read_members` does a file.

    Columns are matched and mapped as a file's headers are. Every value is read as text first (dates and
    date-times become ISO dates, numbers their decimal text), then parsed and checked by the same rules.
    ``name`` stands for the file in exceptions and messages; rows are numbered as in a file whose header
    is row 1 (the frame's first record is row 2).

    Raises
    ------
    TypeError
        ``frame`` is neither a polars nor a pandas data frame.
    DataError
        As :func:`read_members`: a required column is absent, a mapped header is missing...
    """
    if isinstance(frame, pl.DataFrame):
        df = frame
    elif type(frame).__module__.split(".")[0] == "pandas" and type(frame).__name__ == "DataFrame":
        df = pl.from_pandas(frame)
    else:
        raise TypeError(f"members must be a file path, a polars or a pandas DataFrame, not {type(frame).__name__}")
    df = df.with_columns(pl.col(pl.Datetime).dt.date())
    text = df.with_columns(pl.all().cast(pl.String))
    text.columns = [str(c) for c in text.columns]
    p = Path(name)
    checked = validate_frame(map_headers(text, basis.mapping, p), basis, p, headers=text.columns)
    digest = hashlib.sha256(text.write_csv().encode("utf-8")).hexdigest()
    return MemberData(
        path=p, records=checked.records, exceptions=checked.exceptions, read=checked.read,
        valued=checked.records.height, excluded=checked.read - checked.records.height,
        ignored_columns=checked.ignored_columns, _status_counts=sum_counts([checked.counts]), digest=digest,
    )


def write_exceptions(md: MemberData, path: str | Path) -> Path:
    """Write ``md.exceptions`` to a CSV file (values kept as text, exactly as they were read)."""
    p = Path(path)
    md.exceptions.write_csv(p)
    return p
