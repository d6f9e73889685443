"""Streaming valuation: value a member file chunk by chunk, in flat memory.

:func:`value_file_streaming` gives the same results as ``value_members(basis, read_members(path, basis))``
but never holds more than one chunk of the member file. Reading and validating are
:func:`valuation.members.iter_checked` with a small chunk (the whole-file duplicate-id pass first, then
each chunk checked by the same rules and messages, row numbers the file's); this module only values the
chunks with a :class:`~valuation.engine.run.RunAccumulator` and sends the per-member results to a Parquet
file instead of memory.
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import polars as pl
import pyarrow as pa
import pyarrow.parquet as pq

from valuation.engine.results import ValuationResult
from valuation.engine.run import DEFAULT_CHUNK, Progress, RunAccumulator, input_hashes
from valuation.members.data import CheckedFrame, MemberData, file_duplicates, iter_checked
from valuation.members.readers import DEFAULT_FORMAT, InputFormat, file_kind


class ParquetMemberSink:
    """Appends per-member result frames to one Parquet file (``pyarrow.parquet.ParquetWriter``).

    Call the sink with each frame, then :meth:`close`. A run with no valued member writes a file with no
    columns and no rows.
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self.rows = 0
        self._writer: pq.ParquetWriter | None = None
        self._schema: pa.Schema | None = None

    def __call__(self, members: pl.DataFrame) -> None:
        table = members.to_arrow()
        if self._writer is None:
            self._schema = table.schema
            self._writer = pq.ParquetWriter(self.path, table.schema)
        elif table.schema != self._schema:
            table = table.cast(self._schema)
        self._writer.write_table(table)
        self.rows += members.height

    def close(self) -> None:
        if self._writer is None:
            pq.write_table(pa.table({}), self.path)
        else:
            self._writer.close()
            self._writer = None


def _discard(members: pl.DataFrame) -> None:
    """Member sink that keeps nothing (streaming without a per-member results file)."""


def value_file_streaming(
    basis: Any,
    members_path: str | Path,
    *,
    chunk_rows: int = DEFAULT_CHUNK,
    member_results_path: str | Path | None = None,
    sensitivities: bool = True,
    progress: Progress | None = None,
    fmt: InputFormat = DEFAULT_FORMAT,
) -> ValuationResult:
    """Value a scheme's member file on ``basis`` without holding the whole file in memory.

    Parameters
    ----------
    basis : Basis
        The assumptions basis (from ``load_basis``).
    members_path : str or Path
        The member file. CSV and Parquet are read ``chunk_rows`` records at a time; an XLSX file (small by
        nature) is read whole with :func:`~valuation.members.read_members` and valued in chunks.
    chunk_rows : int
        Records read, validated and valued at a time [records]. Memory grows with this, not with the file.
    member_results_path : str or Path, optional
        Parquet file that receives one row a valued member (the columns of ``ValuationResult.members``),
        written chunk by chunk. Without it the per-member rows are not kept.
    sensitivities : bool
        Value the basis's sensitivity scenarios too.
    progress : callable, optional
        Called as ``progress(stage, done, total)`` with stage ``"checking ids"`` then ``"valuing"``
        (chunks done of the expected number).
    fmt : InputFormat, optional
        The CSV delimiter and encoding, or the XLSX sheet, where they are not the usual ones.

    Returns
    -------
    ValuationResult
        The same summary, liabilities, cash flows, sensitivities, expected deaths and exceptions as
        ``value_members(basis, read_members(members_path, basis))``, except that ``members`` is an
        **empty frame**: the per-member rows are in ``extra["members_path"]`` (the Parquet file, or
        ``None`` when ``member_results_path`` was not given). Duplicated ids are found across the whole
        file, so every copy is excluded with the same reason and row list as ``read_members`` gives.

    Raises
    ------
    DataError
        As :func:`~valuation.members.read_members`: a missing or unreadable file, an unknown extension, a
        required column absent, or a ``pension_<name>`` column naming an undeclared tranche.

    References
    ----------
    IAS 19 *Employee Benefits*, paras 67-69, 145 and 147, as in :mod:`valuation.engine.run` (streaming
    changes how records are read, never how they are valued).
    """
    if isinstance(basis, (str, Path)):
        raise TypeError("value_file_streaming takes the loaded basis first: value_file_streaming(basis, members_path)")
    started = datetime.now(timezone.utc)
    t0 = time.perf_counter()
    p = Path(members_path)
    kind = file_kind(p)
    sink = ParquetMemberSink(member_results_path) if member_results_path is not None else None
    acc = RunAccumulator(basis, sensitivities=sensitivities, member_sink=sink if sink is not None else _discard)
    counts: list[pl.DataFrame] = []
    exceptions: list[pl.DataFrame] = []
    ignored: list[str] = []
    try:
        if kind == "xlsx":  # a workbook is read whole (one chunk), and valued in chunks below
            chunks: Iterator[CheckedFrame] = iter_checked(p, basis, fmt)
            n_chunks = None
        else:
            if progress:
                progress("checking ids", 0, 1)
            dups, n_records = file_duplicates(p, basis, fmt)
            if progress:
                progress("checking ids", 1, 1)
            chunks = iter_checked(p, basis, fmt, chunk_rows=chunk_rows, duplicates=dups)
            n_chunks = max(1, -(-n_records // chunk_rows)) if n_records is not None else None
        done = 0
        for checked in chunks:
            counts.append(checked.counts)
            exceptions.append(checked.exceptions)
            ignored = checked.ignored_columns
            for off in range(0, checked.records.height, chunk_rows):
                if progress:
                    progress("valuing", done, max(n_chunks or 0, done + 1))
                acc.add(checked.records.slice(off, chunk_rows))
                done += 1
        if progress:
            progress("valuing", done, done)
    finally:
        if sink is not None:
            sink.close()
    data = MemberData.without_records(p, exceptions=exceptions, counts=counts, ignored_columns=ignored)
    result = acc.finish(
        read=data.read, valued=data.valued, excluded=data.excluded, counts=data.counts_by_status(),
        exceptions=data.exceptions, inputs=input_hashes([p, basis.source_path]), started=started,
        run_seconds=time.perf_counter() - t0,
        settings={"sensitivities": sensitivities, "q_multiplier": 1.0, "chunk_size": chunk_rows,
                  "streaming": True},
        ignored_columns=ignored,
    )
    result.extra["members_path"] = str(sink.path) if sink is not None else None
    return result
