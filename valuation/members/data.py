"""Read and validate one scheme's member file: the valued records plus every problem found.

Row numbers are those of a spreadsheet view of the file: the header is row 1, so the first data row is
row 2 (for Parquet, which has no header row, the same numbering is used: first record = row 2).
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, TypeAlias

import polars as pl

from valuation.basis.model import Basis

if TYPE_CHECKING:
    import pandas as pd
from valuation.members.parse import clean_text
from valuation.members.readers import (
    DEFAULT_FORMAT,
    InputFormat,
    file_kind,
    header_targets,
    iter_text_frames,
    map_headers,
    read_header,
    read_text_frame,
    scan_column,
)
from valuation.members.validate import (
    EXCEPTION_SCHEMA,
    FIRST_ROW,
    IGNORED_COLUMN,
    UNKNOWN_STATUS,
    CheckedFrame,
    duplicate_ids,
    empty_exceptions,
    ignored_column_rows,
    sum_counts,
    validate_frame,
)

__all__ = ["EXCEPTION_SCHEMA", "FIRST_ROW", "IGNORED_COLUMN", "UNKNOWN_STATUS", "CheckedFrame", "MemberData", "MemberFrame",
           "MemberInput",
           "duplicate_ids", "empty_exceptions", "file_duplicates", "ignored_column_rows", "iter_checked",
           "members_from_frame", "read_members", "sum_counts", "validate_frame", "write_exceptions"]


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

    @classmethod
    def without_records(
        cls, path: str | Path, *, exceptions: list[pl.DataFrame], counts: list[pl.DataFrame],
        ignored_columns: list[str],
    ) -> MemberData:
        """The exceptions and counts of a file whose chunks were valued as they were read (streaming):
        ``records`` is empty; read, valued and excluded are the chunks' counts added up."""
        total = sum_counts(counts)
        read, valued = int(total.get_column("read").sum()), int(total.get_column("valued").sum())
        return cls(path=Path(path), records=pl.DataFrame(), exceptions=pl.concat(exceptions), read=read,
                   valued=valued, excluded=read - valued, ignored_columns=ignored_columns, _status_counts=total)

    def subset(self, member_ids: pl.Series) -> MemberData:
        """The valued records of these members only (their exceptions left with the whole file's), counted
        as read = valued; for valuing a group of the members on its own."""
        records = self.records.filter(pl.col("member_id").is_in(member_ids.implode()))
        counts = records.group_by("status").agg(pl.len().cast(pl.Int64).alias("read")).with_columns(
            pl.col("read").alias("valued"), pl.lit(0, dtype=pl.Int64).alias("excluded"))
        return MemberData(path=self.path, records=records, exceptions=self.exceptions.head(0), read=records.height,
                          valued=records.height, excluded=0, ignored_columns=list(self.ignored_columns),
                          _status_counts=sum_counts([counts]), digest=self.digest)

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


def _from_checked(p: Path, parts: list[CheckedFrame], digest: str | None = None) -> MemberData:
    """The member data of a file from its validated chunks (records and exceptions in file order)."""
    records = parts[0].records if len(parts) == 1 else pl.concat([c.records for c in parts])
    exceptions = parts[0].exceptions if len(parts) == 1 else pl.concat([c.exceptions for c in parts])
    read = sum(c.read for c in parts)
    return MemberData(
        path=p, records=records, exceptions=exceptions, read=read, valued=records.height,
        excluded=read - records.height, ignored_columns=parts[0].ignored_columns,
        _status_counts=sum_counts([c.counts for c in parts]), digest=digest,
    )


def file_duplicates(
    path: str | Path, basis: Basis, fmt: InputFormat = DEFAULT_FORMAT,
) -> tuple[pl.DataFrame, int | None]:
    """Duplicated member ids of a whole CSV or Parquet file, from its ``member_id`` column alone.

    Returns the :func:`~valuation.members.validate.duplicate_ids` frame and the number of records, or an
    empty frame and ``None`` when the file has no ``member_id`` column (validating the first chunk then
    reports the missing column).
    """
    p = Path(path)
    targets = header_targets(read_header(p, fmt), basis.mapping, p)
    source = next((k for k, v in targets.items() if v == "member_id"), None)
    if source is None:
        return duplicate_ids(pl.DataFrame(schema={"row": pl.Int64, "member_id": pl.String})), None
    ids = (
        scan_column(p, source, fmt)
        .rename({source: "member_id"})
        .with_columns(clean_text(["member_id"]))
        .with_row_index("row", offset=FIRST_ROW)
        .with_columns(pl.col("row").cast(pl.Int64))
    )
    return duplicate_ids(ids), ids.height


def iter_checked(
    path: str | Path, basis: Basis, fmt: InputFormat = DEFAULT_FORMAT, *, chunk_rows: int | None = None,
    duplicates: pl.DataFrame | None = None,
) -> Iterator[CheckedFrame]:
    """A member file as validated chunks of ``chunk_rows`` records (the whole file as one chunk by default).

    Every chunk is checked by the same rules and gives the same exceptions as the whole file would: row
    numbers are the file's (header = row 1), and duplicated ids are found across the whole file first
    (:func:`file_duplicates`, a pass over the ``member_id`` column alone) unless ``duplicates`` gives them.
    Only one chunk is held in memory at a time. An XLSX workbook (small by nature) is always one chunk.
    A file with no records gives one empty chunk (so a missing required column is still reported).

    Raises
    ------
    DataError
        As :func:`read_members`, from the chunk where the problem is met (a missing column, the first).
    """
    p = Path(path)
    if chunk_rows is None or file_kind(p) == "xlsx":
        text = read_text_frame(p, fmt, keep_types=True)
        yield validate_frame(map_headers(text, basis.mapping, p), basis, p, headers=text.columns)
        return
    if duplicates is None:
        duplicates, _ = file_duplicates(p, basis, fmt)
    first = FIRST_ROW
    for text in iter_text_frames(p, chunk_rows, fmt, keep_types=True):
        checked = validate_frame(map_headers(text, basis.mapping, p), basis, p, first_row=first,
                                 duplicates=duplicates, headers=text.columns)
        first += text.height
        yield checked
    if first == FIRST_ROW:  # no records: validate the header alone (missing columns are still fatal)
        header = pl.DataFrame(schema={c: pl.String for c in read_header(p, fmt)})
        yield validate_frame(map_headers(header, basis.mapping, p), basis, p, duplicates=duplicates,
                             headers=header.columns)


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
    return _from_checked(p, list(iter_checked(p, basis, fmt)))


#: Member records held in memory: a polars or a pandas data frame.
MemberFrame: TypeAlias = "pl.DataFrame | pd.DataFrame"
#: What the pipeline values: a member file, a data frame, or records already read and checked.
MemberInput: TypeAlias = "str | Path | pl.DataFrame | pd.DataFrame | MemberData"


def members_from_frame(frame: MemberFrame, basis: Basis, *, name: str = "(data frame)") -> MemberData:
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
    return _from_checked(p, [checked], digest)


def write_exceptions(md: MemberData, path: str | Path) -> Path:
    """Write ``md.exceptions`` to a CSV file (values kept as text, exactly as they were read)."""
    p = Path(path)
    md.exceptions.write_csv(p)
    return p
