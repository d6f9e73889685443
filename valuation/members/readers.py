"""Read a member file (CSV, XLSX or Parquet) as text, and map its headers onto our columns.

Everything is read as text first so nothing is lost or reinterpreted: leading zeros stay, and values
beginning with ``=``, ``+``, ``-`` or ``@`` stay literal strings (they are never evaluated). Parsing into
numbers and dates happens afterwards, in :mod:`valuation.members.parse`.

:func:`read_text_frame` reads a whole file; :func:`iter_text_frames` reads CSV and Parquet files in chunks
of a fixed number of records, so a very large file never has to be held in memory at once.
"""

from __future__ import annotations

import codecs
import csv
import difflib
import tempfile
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

import polars as pl
import pyarrow as pa
import pyarrow.parquet as pq

from valuation.basis.mapping import ColumnMapping
from valuation.csvtext import CsvProblem, csv_problem, head_problem, header_fields, transcode_to_utf8
from valuation.errors import DataError
from valuation.members.schema import OUR_COLUMNS, TRANCHE_PREFIX

FileKind = Literal["csv", "xlsx", "parquet"]
_KINDS: dict[str, FileKind] = {".csv": "csv", ".txt": "csv", ".xlsx": "xlsx", ".parquet": "parquet"}

@dataclass(frozen=True)
class InputFormat:
    """How a member file is written, where it is not the usual form.

    Attributes
    ----------
    delimiter : str
        The one character between values in a CSV file (``,`` by default; ``;`` and tab are common).
    encoding : str
        The CSV file's text encoding (``utf-8`` by default; a byte-order mark is dropped). Any encoding
        Python knows (``cp1252``, ``latin-1``, ``utf-16``...) is read by converting the file to UTF-8 first.
    sheet : str or None
        The worksheet of an XLSX file to read, by name (default: the first sheet).
    """

    delimiter: str = ","
    encoding: str = "utf-8"
    sheet: str | None = None

    @property
    def is_utf8(self) -> bool:
        return codecs.lookup(self.encoding).name == "utf-8" or self.encoding.lower().replace("_", "-") == "utf-8-sig"

    def check(self, kind: FileKind, path: Path) -> None:
        """Raise if a setting does not apply to this kind of file or is not a usable value."""
        if len(self.delimiter) != 1 or self.delimiter in "\"\r\n":
            raise DataError(f"the delimiter must be one character other than a quote or a line end, not "
                            f"'{self.delimiter}'", file=path, fix="for example --delimiter ';' or --delimiter tab")
        try:
            codecs.lookup(self.encoding)
        except LookupError:
            raise DataError(f"'{self.encoding}' is not a known text encoding", file=path,
                            fix="for example --encoding utf-8, cp1252 or latin-1") from None
        if kind != "csv" and (self.delimiter != "," or not self.is_utf8):
            raise DataError(f"a delimiter or an encoding applies to CSV files, and this is a {kind.upper()} file",
                            file=path, fix="leave out --delimiter and --encoding")
        if kind != "xlsx" and self.sheet is not None:
            raise DataError(f"a sheet applies to XLSX workbooks, and this is a {kind.upper()} file", file=path,
                            fix="leave out --sheet")


#: The usual form: comma-separated UTF-8, the first sheet of a workbook.
DEFAULT_FORMAT = InputFormat()


@contextmanager
def _utf8_source(p: Path, fmt: InputFormat) -> Iterator[Path]:
    """``p`` itself when it is UTF-8, else a temporary UTF-8 copy (removed afterwards)."""
    if fmt.is_utf8:
        yield p
        return
    with tempfile.TemporaryDirectory(prefix="valuation-utf8-") as folder:
        copy = Path(folder) / p.name
        problem = transcode_to_utf8(p, copy, fmt.encoding)
        if problem is not None:
            raise DataError(problem.reason, file=p, fix=problem.fix)
        yield copy


#: What to do when a CSV file cannot be read and nothing more precise was found.
_CSV_FIX = "open the file in a spreadsheet program and save it again as 'CSV UTF-8 (Comma delimited)'"


def file_kind(path: Path) -> FileKind:
    """The reader for a file, from its extension (``.csv``/``.txt``, ``.xlsx``, ``.parquet``)."""
    kind = _KINDS.get(path.suffix.lower())
    if kind is None:
        shown = f"'{path.suffix}'" if path.suffix else "(no extension)"
        raise DataError(
            f"unknown file type {shown}", file=path,
            fix="save the member data as .csv, .xlsx or .parquet",
        )
    return kind


def blank_header(position: int) -> str:
    """The name given to a column whose header cell is empty: ``(no header, column 7)`` (columns from 1)."""
    return f"(no header, column {position})"


def display_headers(written: Sequence[str | None], path: Path) -> list[str]:
    """The file's headers as written, an empty one named by :func:`blank_header`; each must be unique.

    Raises
    ------
    DataError
        Two columns carry the same header (the reader would otherwise rename one silently).
    """
    out: list[str] = []
    seen: dict[str, int] = {}
    for k, h in enumerate(written, start=1):
        text = as_written("" if h is None else str(h))
        if not text.strip():
            out.append(blank_header(k))
            continue
        if text in seen:
            raise DataError(
                f"the header row names '{text}' twice (columns {seen[text]} and {k})", file=path, row=1,
                column=text, fix="rename or remove one of the two columns",
            )
        seen[text] = k
        out.append(text)
    return out


def _csv_headers(p: Path, src: Path | None = None, delimiter: str = ",") -> list[str]:
    """The display headers of a CSV file (see :func:`display_headers`), read by us, not by polars.

    ``src`` is the file to read (a UTF-8 copy of ``p``, or ``p`` itself); messages name ``p``.
    """
    src = src or p
    with src.open("rb") as fh:
        head = fh.read(4096)
    problem = head_problem(head)
    fields = None
    if problem is None:
        try:
            fields = header_fields(src, delimiter)
        except (UnicodeDecodeError, csv.Error):
            problem = csv_problem(src, delimiter)
        else:
            if fields is None:
                problem = CsvProblem("the file is empty",
                                     "give a header row naming the columns, then one row a record")
            elif not fields:
                problem = CsvProblem("line 1 is empty", "put the header row (the column names) on the first line")
    if problem is not None or fields is None:
        raise _csv_unreadable(p, problem)
    _delimiter_hint(fields, delimiter, p)
    return display_headers(fields, p)


def _delimiter_hint(fields: list[str], delimiter: str, p: Path) -> None:
    """A header row read as one column that holds another usual delimiter: the file uses that one."""
    if len(fields) != 1:
        return
    for other, name in ((";", "';'"), ("\t", "tab"), ("|", "'|'"), (",", "','")):
        if other != delimiter and fields[0].count(other) >= 2:
            shown = "a tab" if other == "\t" else f"'{other}'"
            raise DataError(f"the header row reads as one column; the values seem to be separated by {shown}, "
                            f"not '{delimiter}'", file=p, row=1, fix=f"add --delimiter {name}")


def _csv_unreadable(p: Path, problem: CsvProblem | None = None, src: Path | None = None,
                    delimiter: str = ",") -> DataError:
    """The error for a CSV file that cannot be read, saying where and why when that can be found."""
    if problem is None:
        problem = csv_problem(src or p, delimiter)
    if problem is None:
        return DataError("cannot be read as CSV", file=p, fix=_CSV_FIX)
    return DataError(problem.reason, file=p, fix=problem.fix)


def _named(df: pl.DataFrame, headers: list[str]) -> pl.DataFrame:
    """``df`` with its columns named by ``headers`` (by position; polars renames duplicates and blanks)."""
    if df.width == len(headers) and df.columns != headers:
        df.columns = headers
    return df


def _read_xlsx(p: Path, sheet: str | None = None) -> pl.DataFrame:
    """A sheet of a workbook (the first, or ``sheet`` by name) as text, header in its first row; trailing
    empty rows dropped.

    Empty rows inside the data are kept (as records with every cell empty) so that row numbers stay
    those of the sheet.
    """
    if sheet is not None:
        _check_sheet(p, sheet)
    which: dict[str, object] = {"sheet_name": sheet} if sheet is not None else {"sheet_id": 1}
    try:
        grid = pl.read_excel(p, has_header=False, infer_schema_length=0, drop_empty_rows=False,  # type: ignore[call-overload]
                             drop_empty_cols=False, raise_if_empty=False, **which)
    except Exception as exc:  # the workbook engine raises types of its own for a damaged or protected file
        raise DataError(
            "cannot be read as an XLSX workbook (it may be damaged, protected by a password, or not an "
            "XLSX file)", file=p, fix="open it in Excel and save it again as .xlsx, or save it as CSV UTF-8",
        ) from exc
    if grid.height == 0:
        raise DataError(f"the sheet '{sheet}' is empty" if sheet else "the first sheet is empty", file=p,
                        fix="put the header row (column names) in row 1 of the first sheet, records below it")
    grid = grid.with_columns(pl.all().cast(pl.String))
    headers = display_headers(list(grid.row(0)), p)
    body = grid.slice(1)
    filled = body.select(pl.any_horizontal(pl.all().is_not_null()).alias("f")).get_column("f")
    rows = filled.arg_true()
    keep = int(rows[-1]) + 1 if rows.len() else 0
    return _named(body.head(keep), headers)


def _check_sheet(p: Path, sheet: str) -> None:
    """Raise unless the workbook has a sheet named ``sheet``; the message lists the sheets it has."""
    import fastexcel

    try:
        names = fastexcel.read_excel(str(p)).sheet_names
    except Exception as exc:  # the workbook engine raises types of its own for a damaged file
        raise DataError("cannot be read as an XLSX workbook (it may be damaged, protected by a password, or not "
                        "an XLSX file)", file=p, fix="open it in Excel and save it again as .xlsx") from exc
    if sheet not in names:
        close = difflib.get_close_matches(sheet, names, n=1)
        hint = f" (did you mean '{close[0]}'?)" if close else ""
        listed = ", ".join("'" + n + "'" for n in names)
        raise DataError(f"the workbook has no sheet named '{sheet}'{hint}; its sheets: {listed}", file=p,
                        fix="give one of those names with --sheet")


def _as_text(df: pl.DataFrame, keep_types: bool) -> pl.DataFrame:
    """Every column cast to text, or (``keep_types``) every column but the 64-bit float, integer and date
    ones, which validation reads in their own types. A date-time column (as pandas writes dates) is read
    as its calendar date, in its own time zone where it has one."""
    if any(isinstance(t, pl.Datetime) for t in df.schema.values()):
        df = df.with_columns(pl.col(pl.Datetime).dt.date())
    if not keep_types:
        return df.with_columns(pl.all().cast(pl.String))
    kept = [c for c, t in df.schema.items() if t == pl.Float64 or t == pl.Date or t.is_integer()]
    return df.with_columns(pl.exclude(kept).cast(pl.String)) if len(kept) < df.width else df


def read_text_frame(path: str | Path, fmt: InputFormat = DEFAULT_FORMAT, *, keep_types: bool = False) -> pl.DataFrame:
    """All columns of a member file as text (``pl.String``), headers as written.

    CSV is read as UTF-8 (a byte-order mark is dropped); XLSX reads the first sheet with the header in its
    first row; Parquet columns of other types are cast to text (dates become ISO ``YYYY-MM-DD``), or with
    ``keep_types`` a Parquet file's 64-bit float, integer and date columns keep their types (validation
    parses them as it would their text, and writes the text only for a value it reports). A column
    whose header is empty is named ``(no header, column N)``.

    Raises
    ------
    DataError
        The file is missing or unreadable (not UTF-8, a row with more values than the header, broken
        quoting, a damaged workbook...), or two columns carry the same header; the message says where.
    """
    p, kind = _existing(path)
    fmt.check(kind, p)
    if kind == "csv":
        with _utf8_source(p, fmt) as src:
            headers = _csv_headers(p, src, fmt.delimiter)
            try:
                df = pl.read_csv(src, infer_schema=False, encoding="utf8", separator=fmt.delimiter)
            except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
                raise _csv_unreadable(p, src=src, delimiter=fmt.delimiter) from exc
            if df.width != len(headers):
                raise _csv_unreadable(p, src=src, delimiter=fmt.delimiter)
        df = _named(df, headers)
    elif kind == "xlsx":
        df = _read_xlsx(p, fmt.sheet)
    else:
        try:
            df = pl.read_parquet(p)
        except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
            raise _parquet_unreadable(p) from exc
    try:
        return _as_text(df, keep_types)
    except pl.exceptions.PolarsError as exc:
        raise _parquet_unreadable(p) from exc


def _norm(header: str) -> str:
    return header.replace("\ufeff", "").strip().lower()


def _parquet_unreadable(p: Path) -> DataError:
    return DataError(
        "cannot be read as a Parquet file of records (it may be damaged, not Parquet, or hold "
        "columns that are not plain values)", file=p,
        fix="write the data again as Parquet with one plain column a field, or save it as CSV UTF-8",
    )


def _existing(path: str | Path) -> tuple[Path, FileKind]:
    p = Path(path)
    kind = file_kind(p)
    if p.is_dir():
        raise DataError("is a folder, not a member data file", file=p,
                        fix="give the path of the member file itself (.csv, .xlsx or .parquet)")
    if not p.is_file():
        raise DataError("member data file not found", file=p, fix="check the path and file name")
    try:
        with p.open("rb"):
            pass
    except OSError as exc:
        reason = (exc.strerror or "").lower() or "not allowed"
        raise DataError(f"cannot be opened ({reason})", file=p,
                        fix="check that the file can be read by the user running the valuation") from exc
    return p, kind


def read_header(path: str | Path, fmt: InputFormat = DEFAULT_FORMAT) -> list[str]:
    """The column headers of a CSV or Parquet member file, as written, without reading its records.

    Headers are named as :func:`read_text_frame` names them (an empty header as ``(no header, column N)``).
    """
    p, kind = _existing(path)
    fmt.check(kind, p)
    if kind == "csv":
        with _utf8_source(p, fmt) as src:
            return _csv_headers(p, src, fmt.delimiter)
    if kind == "parquet":
        try:
            return display_headers(list(pq.ParquetFile(p).schema_arrow.names), p)
        except (OSError, ValueError, pa.ArrowException) as exc:
            raise _parquet_unreadable(p) from exc
    raise DataError("reading the header alone needs a CSV or Parquet file", file=p,
                    fix="save the member data as CSV or Parquet to read it in chunks")


def scan_column(path: str | Path, column: str, fmt: InputFormat = DEFAULT_FORMAT) -> pl.DataFrame:
    """One column of a CSV or Parquet member file, as text, header as written (a narrow full read).

    ``column`` is a header as :func:`read_header` gives it.
    """
    p, kind = _existing(path)
    position = read_header(p, fmt).index(column)
    with _utf8_source(p, fmt) as src:
        try:
            lf = (pl.scan_csv(src, infer_schema=False, encoding="utf8", separator=fmt.delimiter) if kind == "csv"
                  else pl.scan_parquet(p))
            return lf.select(pl.nth(position).cast(pl.String).alias(column)).collect()
        except (pl.exceptions.PolarsError, OSError, ValueError) as exc:
            raise (_csv_unreadable(p, src=src, delimiter=fmt.delimiter) if kind == "csv"
                   else _parquet_unreadable(p)) from exc


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


def iter_text_frames(
    path: str | Path, chunk_rows: int, fmt: InputFormat = DEFAULT_FORMAT, *, keep_types: bool = False,
) -> Iterator[pl.DataFrame]:
    """The records of a CSV or Parquet member file as text frames of ``chunk_rows`` records each.

    Each frame is what :func:`read_text_frame` returns for the same records (headers as written, every
    column ``pl.String``, or with ``keep_types`` as :func:`read_text_frame` keeps them); only one chunk is
    held at a time. A file with no records yields nothing.
    """
    if chunk_rows < 1:
        raise ValueError(f"chunk_rows must be 1 or more, got {chunk_rows}")
    p, kind = _existing(path)
    if kind == "xlsx":
        raise DataError("reading in chunks needs a CSV or Parquet file", file=p,
                        fix="save the member data as CSV or Parquet to read it in chunks")
    headers = read_header(p, fmt)
    with _utf8_source(p, fmt) as src:
        try:
            if kind == "csv":
                lf = pl.scan_csv(src, infer_schema=False, encoding="utf8", separator=fmt.delimiter)
                batches: Iterable[pl.DataFrame] = lf.collect_batches(chunk_size=chunk_rows)
            else:
                pf = pq.ParquetFile(p)
                batches = (pl.DataFrame(pl.from_arrow(b)) for b in pf.iter_batches(batch_size=chunk_rows))
            for frame in _rebatch(batches, chunk_rows):
                if frame.width != len(headers):
                    raise (_csv_unreadable(p, src=src, delimiter=fmt.delimiter) if kind == "csv"
                           else _parquet_unreadable(p))
                yield _as_text(_named(frame, headers), keep_types)
        except (pl.exceptions.PolarsError, OSError, ValueError, pa.ArrowException) as exc:
            raise (_csv_unreadable(p, src=src, delimiter=fmt.delimiter) if kind == "csv"
                   else _parquet_unreadable(p)) from exc


def header_targets(columns: list[str], mapping: ColumnMapping, path: Path) -> dict[str, str]:
    """Our column name for each of the file's headers: trimmed, case-insensitive, through ``mapping.columns``.

    Headers that are ours (or ``pension_...``) once trimmed and lower-cased take that name; headers that
    are neither mapped nor ours keep their name as written. Two headers landing on the same column name
    are a fatal error, and so is a header named in ``mapping.columns`` that the file does not have when
    no other header gives that column (it would otherwise be silently left out of the valuation). A file
    that uses our own name for a mapped column is read as it is.
    """
    lookup = {_norm(k): v for k, v in mapping.columns.items()}
    renamed: dict[str, str] = {}
    origin: dict[str, str] = {}
    for col in columns:
        n = _norm(col)
        target = lookup.get(n) or (n if n in OUR_COLUMNS or n.startswith(TRANCHE_PREFIX) else col)
        if target in origin:
            raise DataError(
                f"headers '{origin[target]}' and '{col}' both give column '{target}'",
                file=path, row=1, column=col,
                fix="remove or rename one of them, or change [mapping.columns] in the basis",
            )
        origin[target] = col
        renamed[col] = target
    present = {_norm(c) for c in columns}
    for header, ours in mapping.columns.items():
        if _norm(header) not in present and ours not in origin:
            raise _mapped_header_missing(header, ours, columns, path)
    return renamed


def _mapped_header_missing(header: str, ours: str, columns: list[str], path: Path) -> DataError:
    """The error for a header named in ``[mapping.columns]`` that is not in the file."""
    by_norm = {_norm(c): c for c in columns}
    close = difflib.get_close_matches(_norm(header), list(by_norm), n=3, cutoff=0.6)
    if close:
        near = "closest headers in the file: " + ", ".join(f"'{by_norm[c]}'" for c in close)
    else:
        listed = [f"'{c}'" for c in columns[:30]] + (["..."] if len(columns) > 30 else [])
        near = "no header in the file is close; headers in the file: " + (", ".join(listed) or "none")
    return DataError(
        f"header '{header}' (mapped to {ours} under [mapping.columns] in the basis) is not in the file ({near})",
        file=path, row=1, column=header,
        fix=f"correct the header '{header}' under [mapping.columns] in the basis to the file's spelling, or "
            "remove that line if the file has no such column",
    )


def as_written(header: str) -> str:
    """A header exactly as the file spells it (a UTF-8 byte-order mark, which no one sees, removed)."""
    return header.replace("\ufeff", "")


def map_headers(df: pl.DataFrame, mapping: ColumnMapping, path: Path) -> pl.DataFrame:
    """Rename the file's headers to ours (see :func:`header_targets`).

    Pass ``df.columns`` (the headers as written) to validation beside the result, so that messages can
    name the administrator's own header beside ours.
    """
    return df.rename(header_targets(df.columns, mapping, path))
