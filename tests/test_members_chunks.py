"""One reader: a member file read as validated chunks of any size gives what the whole file gives, a
Parquet file's typed columns give what their text gives, and the deaths and exits files go through the same
reader and date parser.

References: the whole-file read (``read_members``), whose rules and messages are checked against the
stated validation rules in test_members_*.py; "the value as written" rule (an exception shows the text of
the cell: common practice in valuation data audits); RFC 4180 section 2 (a CSV record per line, the
header's field count); Windows-1252 encodes e-acute as the single byte 0xE9 (the code page's published
table). Row numbers are a spreadsheet's (header = row 1).
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import polars as pl
import pytest
from polars.testing import assert_frame_equal

from valuation.basis import load_basis
from valuation.experience.events import read_events
from valuation.members import InputFormat, iter_checked, read_members, synth_scheme, write_scheme
from valuation.members.data import sum_counts

ROOT = Path(__file__).resolve().parents[1]
BASIS = load_basis(ROOT / "assumptions" / "demo_basis.toml")


def _dirty(n: int, seed: int) -> pl.DataFrame:
    df = synth_scheme(n, seed=seed, valuation_date=BASIS.valuation_date, dirty=0.2)
    ids = df["member_id"].to_list()
    for p in (3, n // 2, n - 1):  # one id three times, in different chunks
        ids[p] = ids[1]
    return df.with_columns(pl.Series("member_id", ids, dtype=pl.String))


@pytest.mark.parametrize("ext", ["csv", "parquet"])
@pytest.mark.parametrize("size", [1, 7, 64, 1000])
def test_chunks_of_any_size_give_the_whole_file(ext: str, size: int, tmp_path: Path) -> None:
    path = write_scheme(_dirty(150, seed=21), tmp_path / f"m.{ext}")
    whole = read_members(path, BASIS)
    parts = list(iter_checked(path, BASIS, chunk_rows=size))
    assert len(parts) == -(-150 // size)
    assert_frame_equal(pl.concat([c.records for c in parts]), whole.records)
    assert_frame_equal(pl.concat([c.exceptions for c in parts]), whole.exceptions)  # same rows, order, text
    assert_frame_equal(sum_counts([c.counts for c in parts]), whole.counts_by_status().head(-1))
    assert sum(c.read for c in parts) == whole.read == whole.valued + whole.excluded
    dup = whole.exceptions.filter(pl.col("reason").str.starts_with("member_id appears more than once")
                                  & (pl.col("member_id") == whole.exceptions.filter(pl.col("row") == 3)["member_id"][0]))
    assert dup["row"].to_list() == [3, 5, 77, 151] and set(dup["value"]) == {"4 copies: rows 3, 5, 77, 151"}


def test_typed_parquet_columns_read_as_their_text(tmp_path: Path) -> None:
    """Float, integer and date columns give the records and exceptions their text gives (values as written)."""
    df = synth_scheme(60, seed=22, valuation_date=BASIS.valuation_date).with_columns(
        pl.Series("pension", [float("nan"), float("inf"), -5.0, 1e300, -0.0, None, 0.1, 1e-7] + [1000.0] * 52),
        pl.Series("service_years", [3, None, -2, 10**12] + [5] * 56, dtype=pl.Int64),
        pl.Series("spouse_fraction", [0.5, 1.25] + [0.5] * 58, dtype=pl.Float32),  # read as text
        pl.Series("spouse_date_of_birth", [date(1849, 12, 31), date(2201, 1, 1), date(1850, 1, 1), None]
                  + [date(1960, 2, 29)] * 56),
        pl.Series("extra", list(range(60)), dtype=pl.Int16),
    )
    typed = write_scheme(df, tmp_path / "typed.parquet")
    as_text = write_scheme(df.with_columns(pl.all().cast(pl.String)), tmp_path / "text.parquet")
    a, b = read_members(typed, BASIS), read_members(as_text, BASIS)
    assert_frame_equal(a.records, b.records)
    assert_frame_equal(a.exceptions.drop("file"), b.exceptions.drop("file"))
    values = a.exceptions.filter(pl.col("column") == "pension")["value"].to_list()
    assert "NaN" in values and "inf" in values and "-5.0" in values  # the text of the cell
    assert a.ignored_columns == ["extra"]


def test_deaths_file_through_the_member_reader(tmp_path: Path) -> None:
    """A deaths file in Windows-1252 with ';' between values reads with the member files' format options;
    its dates go through the member files' parser (day/month/year or ISO; outside 1850-2200 is no date)."""
    path = tmp_path / "deaths.csv"
    path.write_bytes("Member_ID;Date_Of_Death;Note\nP\xe9001;10/05/2022;x\nP002;2022-06-01;y\nP003;01/01/1700;z\n"
                     .encode("cp1252"))
    df = read_events(path, "deaths", date_format="%d/%m/%Y", fmt=InputFormat(delimiter=";", encoding="cp1252"))
    assert df["member_id"].to_list() == ["P\u00e9001", "P002", "P003"]
    assert df["date"].to_list() == [date(2022, 5, 10), date(2022, 6, 1), None]
    assert df["row"].to_list() == [2, 3, 4]


@pytest.mark.parametrize("fmt", [None, "%d/%m/%Y", "%Y%m%d", "%d.%m.%Y", "%d %b %Y", "%m-%d-%Y"])
def test_one_date_parser_first_format_that_fits(fmt: str | None) -> None:
    """The basis's format, then ISO, then an Excel date-time's text; the first that fits, within 1850-2200.

    Reference: Python's ``datetime.strptime`` on the same zero-padded texts (the C standard's strftime
    directives), tried in the stated order.
    """
    from datetime import datetime

    from valuation.members.parse import to_date

    texts = ["2021-03-04", "04/03/2021", "20210304", "04.03.2021", "04 Mar 2021", "03-04-2021",
             "2021-03-04 00:00:00", "1849-12-31", "2201-01-01", "31/02/2021", "not a date", None]

    def reference(t: str | None) -> date | None:
        for f in [f for f in dict.fromkeys((fmt, "%Y-%m-%d")) if f] + ["%Y-%m-%d %H:%M:%S"]:
            try:
                d = datetime.strptime(t or "", f).date()
            except ValueError:
                continue
            return d if date(1850, 1, 1) <= d <= date(2200, 12, 31) else None
        return None

    got = pl.DataFrame({"t": texts}, schema={"t": pl.String}).select(to_date(pl.col("t"), fmt)).to_series().to_list()
    assert got == [reference(t) for t in texts]
