"""Member files in other forms: another delimiter, another text encoding, a named worksheet.

The encodings are those of Python's codec registry (Python Standard Library, ``codecs``: cp1252 is the
Windows Western European code page, in which 0x81 is undefined). Delimited text with a delimiter other than
the comma is common practice for spreadsheets saved in locales that use the comma as decimal mark.
"""

from __future__ import annotations

from pathlib import Path

import openpyxl
import pytest

from valuation.basis import load_basis
from valuation.cli import main
from valuation.errors import DataError
from valuation.members import read_members
from valuation.members.readers import InputFormat

ROOT = Path(__file__).resolve().parents[1]
BASIS_PATH = ROOT / "assumptions" / "demo_basis.toml"
MEMBERS = ROOT / "member_data_demo" / "members.csv"


@pytest.fixture(scope="module")
def basis():
    return load_basis(BASIS_PATH)


def _rows(n: int = 25) -> list[str]:
    return MEMBERS.read_text(encoding="utf-8").splitlines()[: n + 1]


def test_semicolon_cp1252_file_reads_as_the_comma_utf8_file(tmp_path, basis):
    rows = _rows()
    plain = tmp_path / "plain.csv"
    plain.write_text("\n".join(rows) + "\n", encoding="utf-8")
    other = tmp_path / "other.csv"
    other.write_text("\n".join(r.replace(",", ";") for r in rows) + "\n", encoding="cp1252")
    a = read_members(plain, basis)
    b = read_members(other, basis, InputFormat(delimiter=";", encoding="cp1252"))
    assert a.records.equals(b.records)
    assert a.read == b.read == 25


def test_accented_text_survives_the_encoding(tmp_path, basis):
    rows = _rows(3)
    rows[1] = "Zoë-1" + rows[1][rows[1].index(","):]
    path = tmp_path / "acc.csv"
    path.write_text("\n".join(rows) + "\n", encoding="cp1252")
    data = read_members(path, basis, InputFormat(encoding="cp1252"))
    assert "Zoë-1" in data.records["member_id"].to_list()


def test_undecodable_byte_is_named_by_line(tmp_path, basis):
    rows = _rows(5)
    path = tmp_path / "bad.csv"
    path.write_bytes(("\n".join(rows[:4]) + "\n").encode("cp1252") + b"X\x81Y" + ("\n".join(rows[4:]) + "\n").encode())
    with pytest.raises(DataError) as info:
        read_members(path, basis, InputFormat(encoding="cp1252"))
    assert "line 5" in info.value.reason and "0x81" in info.value.reason
    assert "--encoding" in info.value.fix


def test_wrong_delimiter_is_recognised(tmp_path, basis):
    path = tmp_path / "semi.csv"
    path.write_text("\n".join(r.replace(",", ";") for r in _rows(3)) + "\n", encoding="utf-8")
    with pytest.raises(DataError) as info:
        read_members(path, basis)
    assert "';'" in info.value.reason and info.value.fix == "add --delimiter ';'"


def test_tab_delimiter_from_the_command_line(tmp_path, capsys):
    path = tmp_path / "tab.csv"
    path.write_text("\n".join(r.replace(",", "\t") for r in _rows(10)) + "\n", encoding="utf-8")
    assert main(["check", str(BASIS_PATH), str(path), "--delimiter", "tab"]) == 0
    assert "records read 10 = valued 10" in capsys.readouterr().out


def test_named_sheet_of_a_workbook(tmp_path, basis, capsys):
    wb = openpyxl.Workbook()
    wb.active.title = "Notes"
    wb.active["A1"] = "not the member data"
    ws = wb.create_sheet("Members")
    for row in _rows(12):
        ws.append(row.split(","))
    path = tmp_path / "m.xlsx"
    wb.save(path)
    data = read_members(path, basis, InputFormat(sheet="Members"))
    assert data.read == 12
    with pytest.raises(DataError) as info:
        read_members(path, basis, InputFormat(sheet="members "))
    assert "'Notes', 'Members'" in info.value.reason and "did you mean 'Members'" in info.value.reason
    assert main(["check", str(BASIS_PATH), str(path), "--sheet", "Members", "-q"]) == 0


def test_a_format_setting_that_does_not_apply_is_an_error(basis):
    """A setting given but not used is an error, never ignored."""
    with pytest.raises(DataError) as info:
        read_members(MEMBERS, basis, InputFormat(sheet="Members"))
    assert "--sheet" in info.value.fix
    with pytest.raises(DataError) as info:
        InputFormat(delimiter=";").check("parquet", Path("m.parquet"))
    assert "--delimiter" in info.value.fix


def test_bad_delimiter_option_is_a_usage_error(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["check", str(BASIS_PATH), str(MEMBERS), "--delimiter", ";;"])
    assert exc.value.code == 2
    assert "one character" in capsys.readouterr().err


def test_parquet_date_times_are_read_as_dates(tmp_path, basis):
    """pandas and many tools write dates to Parquet as date-times at midnight (Apache Parquet's TIMESTAMP
    logical type): they are the same dates as the file's text, with or without a time zone."""
    import polars as pl

    text = pl.read_csv(MEMBERS, infer_schema=False).head(25)
    fmt = basis.mapping.date_format
    plain = read_members(_write(tmp_path / "text.parquet", text), basis)
    for tz in (None, "UTC"):
        as_dt = text.with_columns(pl.col("DOB").str.strptime(pl.Datetime, fmt))
        if tz:
            as_dt = as_dt.with_columns(pl.col("DOB").dt.replace_time_zone(tz))
        data = read_members(_write(tmp_path / f"dt{tz}.parquet", as_dt), basis)
        assert data.records.equals(plain.records)


def _write(path, frame):
    frame.write_parquet(path)
    return path
