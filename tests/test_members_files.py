"""Member files that cannot be read end in a message that says where and why, never a library's own text.

Sources: UTF-8 is RFC 3629 (a byte 0xE9 alone is not valid UTF-8; in ISO 8859-1 / Windows-1252 it is
e-acute); UTF-16 byte-order marks FF FE / FE FF are in the Unicode Standard, section 23.8; the CSV rules
(a quoted field ends with a quote, a quote inside one is doubled, records have the header's field count)
are RFC 4180, section 2. Row numbers are a spreadsheet's (header = row 1), the package's stated rule.
"""

from __future__ import annotations

import os
from pathlib import Path

import openpyxl
import polars as pl
import pytest

from valuation.basis import load_basis
from valuation.cli import main
from valuation.errors import DataError
from valuation.members import read_members, synth_scheme, write_scheme
from valuation.members.data import validate_frame
from valuation.members.readers import iter_text_frames, map_headers, read_header
from valuation.members.validate import BLANK_ROW

DATA = Path(__file__).parent / "data" / "members"
BASIS = load_basis(DATA / "basis.toml")
HEADER = "member_id,status,sex,date_of_birth,pension\n"
GOOD = "A1,pensioner,F,1950-06-01,6000\n"
#: Words of library messages and parameters that must never reach a user.
LEAKS = ("Schema", "truncate_ragged_lines", "_duplicated_", "__UNNAMED__", "utf-8 sequence", "ComputeError",
         "calamine", "Traceback", "infer_schema", "column_1")


def error_of(path: Path) -> DataError:
    with pytest.raises(DataError) as info:
        read_members(path, BASIS)
    for word in LEAKS:
        assert word not in str(info.value), str(info.value)
    assert str(info.value).count("(fix:") == 1
    return info.value


def test_not_utf8_names_the_line_of_the_first_bad_byte(tmp_path: Path) -> None:
    path = tmp_path / "m.csv"
    path.write_bytes((HEADER + GOOD + "A2,pensioner,F,1950-06-01,6000\nA3,d\xe9ferred,M,1960-01-01,10\n")
                     .encode("latin-1"))
    e = error_of(path)
    assert e.file == str(path)
    assert e.reason == ("the file is not UTF-8 text: line 4 holds the byte 0xE9, which UTF-8 does not allow (the "
                        "file was probably saved as Latin-1 or Windows-1252)")
    assert e.fix.startswith("save the file as UTF-8 text (in Excel: Save As, file type 'CSV UTF-8 (Comma "
                            "delimited)')")
    assert "--encoding" in e.fix


def test_not_utf8_found_past_the_first_read_block(tmp_path: Path) -> None:
    """The bad byte is counted across the 1 MiB blocks the file is scanned in."""
    path = tmp_path / "m.csv"
    body = "".join(f"A{k},pensioner,F,1950-06-01,6000\n" for k in range(40_000))
    path.write_bytes(HEADER.encode() + body.encode() + "B,pensioner,F,1950-06-01,6\xa30\n".encode("latin-1"))
    assert "line 40002 holds the byte 0xA3" in error_of(path).reason


def test_utf16_file_is_refused_not_misread(tmp_path: Path) -> None:
    """Excel's 'Unicode Text' is UTF-16 with a byte-order mark; read as UTF-8 it would be garbage."""
    path = tmp_path / "m.csv"
    path.write_bytes((HEADER + GOOD).encode("utf-16"))
    assert error_of(path).reason == "the file is UTF-16 text, not UTF-8"


@pytest.mark.parametrize(
    ("text", "reason"),
    [
        (HEADER + GOOD + "A2,pensioner,F,1950-06-01,6,000\n",
         "row 3 has 6 values but the header names 5 columns"),
        (HEADER + GOOD + 'A2,"pensioner,F,1950-06-01,6000\nA3,active,M,1980-01-01,0\n',
         "row 3 has a double quote out of place"),
        ("", "the file is empty"),
        ("\n" + HEADER + GOOD, "line 1 is empty"),
    ],
)
def test_broken_csv_says_which_row(tmp_path: Path, text: str, reason: str) -> None:
    path = tmp_path / "m.csv"
    path.write_text(text, encoding="utf-8")
    assert error_of(path).reason.startswith(reason)


def test_lines_ended_by_a_carriage_return_alone(tmp_path: Path) -> None:
    """Classic Mac OS text ends lines with CR alone; read as CSV it would be one long header."""
    path = tmp_path / "m.csv"
    path.write_bytes((HEADER + GOOD).replace("\n", "\r").encode())
    assert error_of(path).reason == "the lines of the file end with a carriage return alone (an old Mac text format)"


def test_ragged_row_found_while_streaming(tmp_path: Path) -> None:
    """The chunked reader gives the same message as the whole-file reader."""
    path = tmp_path / "m.csv"
    path.write_text(HEADER + GOOD * 50 + "A2,pensioner,F,1950-06-01,6,000\n", encoding="utf-8")
    with pytest.raises(DataError, match="row 52 has 6 values but the header names 5 columns"):
        list(iter_text_frames(path, 10))


def test_the_same_header_twice_is_refused(tmp_path: Path) -> None:
    """A repeated header would otherwise be renamed silently by the reader (pension -> pension_duplicated_0)."""
    path = tmp_path / "m.csv"
    path.write_text("member_id,status,sex,date_of_birth,pension,pension\nA1,pensioner,F,1950-06-01,1,2\n",
                    encoding="utf-8")
    e = error_of(path)
    assert (e.row, e.column) == (1, "pension")
    assert e.reason == "the header row names 'pension' twice (columns 5 and 6)"
    wb = openpyxl.Workbook()
    for row in [["member_id", "status", "sex", "date_of_birth", "sex"], ["A1", "pensioner", "F", "1950-06-01", "F"]]:
        wb.active.append(row)
    wb.save(tmp_path / "m.xlsx")
    assert error_of(tmp_path / "m.xlsx").reason == "the header row names 'sex' twice (columns 3 and 5)"


def test_blank_headers_are_named_by_position_and_ignored(tmp_path: Path) -> None:
    path = tmp_path / "m.csv"
    path.write_text("member_id,status,,sex,date_of_birth,pension,\n" "A1,pensioner,x,F,1950-06-01,6000,\n",
                    encoding="utf-8")
    md = read_members(path, BASIS)
    assert md.ignored_columns == ["(no header, column 3)", "(no header, column 7)"]
    assert md.valued == 1
    assert read_header(path)[2] == "(no header, column 3)"


def test_workbook_problems(tmp_path: Path) -> None:
    (tmp_path / "bad.xlsx").write_bytes(b"this is not a zip archive")
    e = error_of(tmp_path / "bad.xlsx")
    assert e.reason.startswith("cannot be read as an XLSX workbook (it may be damaged, protected by a password")
    openpyxl.Workbook().save(tmp_path / "empty.xlsx")
    assert error_of(tmp_path / "empty.xlsx").reason == "the first sheet is empty"


def test_workbook_rows_keep_the_sheet_numbering(tmp_path: Path) -> None:
    """An empty row inside the data keeps the rows below it at their sheet row numbers; empty rows after the
    data (formatting only) are not records."""
    wb = openpyxl.Workbook()
    rows = [["member_id", "status", "sex", "date_of_birth", "pension"], ["A1", "pensioner", "F", "1950-06-01", 6000],
            [None] * 5, ["A3", "pensioner", "Q", "1950-06-01", 6000], [None] * 5, [None] * 5]
    for r in rows:
        wb.active.append(r)
    wb.active.cell(row=9, column=2).number_format = "0.00"  # a formatted but empty cell further down
    wb.save(tmp_path / "m.xlsx")
    md = read_members(tmp_path / "m.xlsx", BASIS)
    assert md.read == 2  # rows 2 and 4; the empty row 3 is no record, and is listed as a blank row
    assert md.exceptions.filter(pl.col("value") == "Q")["row"].to_list() == [4]
    blank = md.exceptions.filter(pl.col("row") == 3)
    assert blank["reason"].to_list() == [BLANK_ROW] and blank["severity"].to_list() == ["warning"]


def test_blank_lines_and_rows_of_commas_are_not_records(tmp_path: Path) -> None:
    """RFC 4180 allows no empty records; spreadsheets export trailing rows of commas. Neither is a member
    record (common practice): they are listed as warnings, not counted as read or excluded."""
    path = tmp_path / "m.csv"
    path.write_text("member_id,status,sex,date_of_birth,pension\nA1,pensioner,F,1950-06-01,6000\n\n,,,,\n"
                    "A2,pensioner,M,1951-06-01,5000\n , , , , \n")
    md = read_members(path, BASIS)
    assert (md.read, md.valued, md.excluded) == (2, 2, 0)
    assert md.exceptions.filter(pl.col("reason") == BLANK_ROW)["row"].to_list() == [3, 4, 6]


def test_a_folder_is_not_a_member_file(tmp_path: Path) -> None:
    (tmp_path / "m.csv").mkdir()
    assert error_of(tmp_path / "m.csv").reason == "is a folder, not a member data file"


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="file permissions do not bind the root user")
def test_unreadable_file(tmp_path: Path) -> None:
    path = tmp_path / "m.csv"
    path.write_text(HEADER + GOOD, encoding="utf-8")
    path.chmod(0)
    try:
        assert error_of(path).reason == "cannot be opened (permission denied)"
    finally:
        path.chmod(0o600)


def test_cli_exits_3_with_the_message(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "m.csv"
    path.write_bytes((HEADER + "A3,d\xe9ferred,M,1960-01-01,10\n").encode("latin-1"))
    assert main(["check", str(DATA / "basis.toml"), str(path)]) == 3
    err = capsys.readouterr().err
    assert "line 2 holds the byte 0xE9" in err and "Traceback" not in err


# ---------------------------------------------------------------- reasons are templates


def test_same_problem_same_reason_whatever_the_figures(tmp_path: Path) -> None:
    """Grouping the exceptions by reason gives one line a kind of problem: the record's figures are in the
    value column (issue: a summary by reason must not grow with the number of records)."""
    base = {"member_id": None, "status": "pensioner", "sex": "F", "date_of_birth": "1950-06-01", "pension": "6000",
            "pension_pre2005": None, "pension_post2005": None, "spouse_date_of_birth": None}
    rows = []
    for k in range(6):
        rows += [
            {**base, "pension_pre2005": f"{1000 + k}.17", "pension_post2005": "2000"},  # tranches do not add up
            {**base, "date_of_birth": f"190{k}-01-01"},  # beyond the closing age, various ages
            {**base, "date_of_birth": f"192{k}-01-01"},  # over 100, various ages
            {**base, "spouse_date_of_birth": f"201{k}-01-01"},  # spouse under 16
        ]
    rows += [{**base, "member_id": "D"}] * 2 + [{**base, "member_id": "E"}] * 3  # duplicates, 2 and 3 copies
    for k, r in enumerate(rows):
        r["member_id"] = r["member_id"] or f"M{k}"
    path = tmp_path / "m.csv"
    pl.DataFrame(rows, schema={c: pl.String for c in base}).write_csv(path)
    ex = read_members(path, BASIS).exceptions
    assert ex.group_by("reason").len().height == 5
    # 5 duplicates; ages 121-125 beyond the closing age 120 (born 1900-1904; 1905 is age 120); 6 tranche
    # splits; 6 spouses under 16; 12 members over 100 (born 1900-1905 and 1920-1925)
    assert ex.group_by("column", "reason").len()["len"].sort().to_list() == [5, 5, 6, 6, 12]


def test_ignored_column_listed_once_when_streaming(tmp_path: Path) -> None:
    """The chunked reader lists an ignored column once (with the first chunk), as the whole-file reader does."""
    frame = synth_scheme(120, seed=4, valuation_date=BASIS.valuation_date).with_columns(pl.lit("n").alias("Notes"))
    path = write_scheme(frame, tmp_path / "m.csv")
    memory = read_members(path, BASIS).exceptions
    parts, first = [], 2  # each chunk validated with its first file row, as the streaming valuation does
    for text in iter_text_frames(path, 25):
        mapped = map_headers(text, BASIS.mapping, path)
        parts.append(validate_frame(mapped, BASIS, path, first_row=first, headers=text.columns).exceptions)
        first += text.height
    stream = pl.concat(parts)
    assert len(parts) == 5 and stream.filter(pl.col("column") == "Notes").height == 1
    assert stream.equals(memory)
