"""Why a CSV file cannot be read, in words a user can act on.

The CSV readers (polars for member data, the standard library for tables and curves) report problems in
their own terms. These helpers look at the file's bytes themselves, only once a reader has refused it (or,
for the cheap checks, when the header is read), and say what is wrong and where: the line of the first
byte that is not UTF-8, a file saved as UTF-16, the first row with more values than the header, a quoted
value that is never closed, an empty file.

Rows are numbered as a spreadsheet shows them (the header is row 1); where a quoted value runs over
several lines the file's line number is given as well.
"""

from __future__ import annotations

import codecs
import csv
from dataclasses import dataclass
from pathlib import Path

#: What to do about a file that is not UTF-8 text.
UTF8_FIX = ("save the file as UTF-8 text (in Excel: Save As, file type 'CSV UTF-8 (Comma delimited)'), or name "
            "its encoding with --encoding (for example --encoding cp1252)")

_UTF16_BOMS = (codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)
_CHUNK = 1 << 20  # [bytes] read at a time when scanning a file


def transcode_to_utf8(source: Path, target: Path, encoding: str) -> CsvProblem | None:
    """Write ``source`` (text in ``encoding``) to ``target`` as UTF-8, in chunks; a problem if it cannot be read.

    The problem names the line of the first byte that ``encoding`` does not allow.
    """
    decoder = codecs.getincrementaldecoder(encoding)()
    line = 1
    with source.open("rb") as src, target.open("w", encoding="utf-8", newline="") as out:
        while True:
            chunk = src.read(_CHUNK)
            final = not chunk
            pending = decoder.getstate()[0]
            try:
                out.write(decoder.decode(chunk, final=final))
            except UnicodeDecodeError as exc:
                data = pending + chunk
                at = line + data.count(b"\n", 0, exc.start)
                return CsvProblem(
                    f"line {at} holds the byte 0x{data[exc.start]:02X}, which is not {encoding} text",
                    "give the file's real encoding with --encoding (for example utf-8, cp1252 or latin-1)", row=at)
            line += chunk.count(b"\n")
            if final:
                return None


@dataclass(frozen=True)
class CsvProblem:
    """What is wrong with a CSV file: ``reason`` (no file name), the ``row`` where known, and the ``fix``."""

    reason: str
    fix: str
    row: int | None = None


def utf16_problem(head: bytes) -> CsvProblem | None:
    """A problem if the file's first bytes show UTF-16 text (a byte-order mark, or NUL bytes in the header)."""
    if head.startswith(_UTF16_BOMS) or b"\x00" in head.split(b"\n", 1)[0]:
        return CsvProblem("the file is UTF-16 text, not UTF-8", UTF8_FIX)
    return None


def head_problem(head: bytes) -> CsvProblem | None:
    """A problem seen in the file's first bytes: UTF-16 text, or lines ended by a carriage return alone."""
    found = utf16_problem(head)
    if found is None and b"\r" in head and b"\n" not in head:
        found = CsvProblem(
            "the lines of the file end with a carriage return alone (an old Mac text format)",
            "save the file again as 'CSV UTF-8 (Comma delimited)', which ends lines the usual way",
        )
    return found


def first_non_utf8(path: Path, encoding: str = "utf-8") -> tuple[int, int] | None:
    """Line number (from 1) and value of the first byte of ``path`` that is not valid in ``encoding``
    (UTF-8 unless said), or ``None``.

    Reads the file in chunks with an incremental decoder, so memory stays small for any file size.
    """
    decoder = codecs.getincrementaldecoder(encoding)()
    line = 1
    with path.open("rb") as fh:
        while True:
            chunk = fh.read(_CHUNK)
            final = not chunk
            pending = decoder.getstate()[0]
            try:
                decoder.decode(chunk, final=final)
            except UnicodeDecodeError as exc:
                data = pending + chunk
                return line + data.count(b"\n", 0, exc.start), data[exc.start]
            line += chunk.count(b"\n")
            if final:
                return None


def encoding_problem(path: Path) -> CsvProblem | None:
    """A problem if the file is not UTF-8 text: UTF-16, or the line of its first byte that is not UTF-8."""
    with path.open("rb") as fh:
        head = fh.read(4096)
    found = head_problem(head)
    if found is not None:
        return found
    bad = first_non_utf8(path)
    if bad is None:
        return None
    line, byte = bad
    return CsvProblem(
        f"the file is not UTF-8 text: line {line} holds the byte 0x{byte:02X}, which UTF-8 does not allow "
        "(the file was probably saved as Latin-1 or Windows-1252)", UTF8_FIX, row=line,
    )


def header_fields(path: Path, delimiter: str = ",") -> list[str] | None:
    """The header row's fields as written (quotes removed, a byte-order mark dropped); ``None`` if empty.

    Raises ``UnicodeDecodeError`` if the header is not UTF-8 and ``csv.Error`` if its quoting is broken.
    """
    with path.open(newline="", encoding="utf-8-sig") as fh:
        return next(csv.reader(fh, strict=True, delimiter=delimiter), None)


def structure_problem(path: Path, delimiter: str = ",") -> CsvProblem | None:
    """The first record with more values than the header, or broken quoting; else ``None``.

    Fewer values than the header are allowed (the missing ones are empty). Reads the whole file once.
    """
    width = None
    row, last_line = 0, 0
    with path.open(newline="", encoding="utf-8-sig") as fh:
        reader = csv.reader(fh, strict=True, delimiter=delimiter)
        try:
            for row, fields in enumerate(reader, start=1):
                if width is None:
                    width = len(fields)
                elif len(fields) > width:
                    at = "" if reader.line_num == row else f" (line {reader.line_num} of the file)"
                    return CsvProblem(
                        f"row {row}{at} has {len(fields)} values but the header names {width} columns",
                        "remove the extra values (often a comma inside an amount or a name: put such values "
                        "in double quotes), or add a header for the extra column", row=row,
                    )
                last_line = reader.line_num
        except csv.Error:
            at = "" if last_line == row else f" (starting at line {last_line + 1} of the file)"
            return CsvProblem(
                f"row {row + 1}{at} has a double quote out of place: a value that starts with a double quote "
                "must end with one, and a double quote inside it must be written twice",
                "correct the quotes in that row", row=row + 1,
            )
    if width is None:
        return CsvProblem("the file is empty", "give a header row naming the columns, then one row a record")
    if width == 0:
        return CsvProblem("line 1 is empty", "put the header row (the column names) on the first line", row=1)
    return None


def csv_problem(path: Path, delimiter: str = ",") -> CsvProblem | None:
    """What is wrong with a CSV file a reader refused: access, encoding, then structure; ``None`` if none."""
    try:
        if path.stat().st_size == 0:
            return CsvProblem("the file is empty", "give a header row naming the columns, then one row a record")
        return encoding_problem(path) or structure_problem(path, delimiter)
    except OSError as exc:
        return CsvProblem(f"cannot be opened ({(exc.strerror or 'not allowed').lower()})",
                          "check that the file can be read by the user running the valuation")
