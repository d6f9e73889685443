"""Every data problem in the deaths and exits files becomes an exception with a message naming the file,
row, column and what was expected; counts reconcile (read = counted + excluded). Fixture rows are
described in tests/data/experience/README.md. The rules are common practice in mortality investigations.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import polars as pl
import pytest

from valuation.errors import DataError
from valuation.experience import ExperienceSettings, analyse_records
from valuation.experience.events import read_events, read_events_with_headers

from .test_experience_analysis import LawRates, lookup_for

DATA = Path(__file__).parent / "data" / "experience"
PERIOD = ExperienceSettings(period_start=date(2021, 3, 31), period_end=date(2024, 3, 31))


def _records() -> pl.DataFrame:
    ids = [f"P00{i}" for i in range(1, 9)]
    return pl.DataFrame(
        {
            "row": list(range(2, 10)),
            "member_id": ids,
            "status": ["pensioner"] * 8,
            "sex": ["F", "M"] * 4,
            "date_of_birth": [date(1950, 1, 1)] * 8,
            "pension": [1000.0] * 8,
        }
    )


@pytest.fixture(scope="module")
def result():  # noqa: ANN201
    deaths, deaths_headers = read_events_with_headers(DATA / "deaths_bad.csv", "deaths", date_format="%d/%m/%Y")
    exits, exits_headers = read_events_with_headers(DATA / "exits_bad.csv", "exits", date_format="%d/%m/%Y")
    return analyse_records(
        _records(),
        deaths,
        exits,
        lookup_for(LawRates()),
        PERIOD,
        excluded_ids=pl.Series(["X999"]),
        files={"members": "start.csv", "deaths": "deaths_bad.csv", "exits": "exits_bad.csv"},
        date_format="%d/%m/%Y",
        headers={"deaths": deaths_headers, "exits": exits_headers},
    )


def _exc(result, file: str, row: int) -> list[dict]:  # noqa: ANN001
    return result.exceptions.filter((pl.col("file") == file) & (pl.col("row") == row)).to_dicts()


#: One reason per kind of problem: the same text for every row with that problem (a template); the
#: row's own value, and the record it clashes with, are in the value column.
DEATH_REASONS = {
    "unknown": "death for a member not in the start membership (start.csv): not counted",
    "after": "death after the period end 2024-03-31 (period 2021-03-31 to 2024-03-31): not counted",
    "before": "death on or before the period start 2021-03-31: the member should not be in the start "
    "membership; not counted",
    "second": "second death record for the same member (the earliest is kept, the first row on a tie): "
    "not counted",
    "after_exit": "death after the member's exit: the member had left observation; not counted",
    "bad_date": "Date_Of_Death is not a date (expected YYYY-MM-DD or the basis date format %d/%m/%Y): "
    "not counted",
    "no_id": "death row has no Member_ID: not counted",
    "excluded": "death for a member who was excluded from the start membership (start.csv); see its "
    "exceptions: not counted",
    "pension": "Pension_At_Death is not a number >= 0: the record's pension is used",
}


@pytest.mark.parametrize(
    ("row", "column", "file_column", "severity", "reason", "value"),
    [
        (3, "member_id", "Member_ID ", "excluded", "unknown", "NOPE1"),
        (4, "date_of_death", " Date_Of_Death", "excluded", "after", "2024-05-01"),
        (5, "date_of_death", " Date_Of_Death", "excluded", "before", "2020-12-01"),
        (7, "date_of_death", " Date_Of_Death", "excluded", "second", "2023-01-01; kept: row 6 on 2022-06-15"),
        (8, "date_of_death", " Date_Of_Death", "excluded", "after_exit",
         "2023-02-01; exit on 2022-12-31 (exits_bad.csv row 2)"),
        (9, "date_of_death", " Date_Of_Death", "excluded", "bad_date", "31/02/2022"),
        (10, "member_id", "Member_ID ", "excluded", "no_id", ""),
        (11, "member_id", "Member_ID ", "excluded", "excluded", "X999"),
        (12, "pension_at_death", "Pension_At_Death", "warning", "pension", "abc"),
        (13, "date_of_death", " Date_Of_Death", "excluded", "before", "2021-03-31"),
    ],
)
def test_each_death_problem_is_reported(  # noqa: PLR0913
    result, row: int, column: str, file_column: str, severity: str, reason: str, value: str  # noqa: ANN001
) -> None:
    """Fixture headers are in mixed case with stray spaces (tests/data/experience/README.md): the
    exception names our column and the file's header as written."""
    rows = _exc(result, "deaths_bad.csv", row)
    assert len(rows) == 1, rows
    assert (rows[0]["column"], rows[0]["file_column"]) == (column, file_column)
    assert rows[0]["severity"] == severity
    assert rows[0]["reason"] == DEATH_REASONS[reason]
    assert rows[0]["value"] == value


@pytest.mark.parametrize(
    ("row", "column", "reason", "value"),
    [
        (3, "exit_date", "exit on or after the member's death: the death ends observation; exit ignored",
         "2023-01-01; death on 2022-05-10 (deaths_bad.csv row 2)"),
        (4, "member_id", "exit for a member not in the start membership (start.csv): not counted", "NOPE2"),
        (5, "exit_date", "EXIT_DATE is not a date (expected YYYY-MM-DD or the basis date format %d/%m/%Y): "
         "not counted", "notadate"),
    ],
)
def test_each_exit_problem_is_reported(result, row: int, column: str, reason: str, value: str) -> None:  # noqa: ANN001
    rows = _exc(result, "exits_bad.csv", row)
    assert len(rows) == 1, rows
    assert rows[0]["column"] == column and rows[0]["severity"] == "excluded"
    assert rows[0]["file_column"] == column.upper()
    assert (rows[0]["reason"], rows[0]["value"]) == (reason, value)


def test_reasons_group_one_line_per_kind_of_problem(result) -> None:  # noqa: ANN001
    """Counting the exceptions by reason gives one line per kind of problem, however many rows have it:
    the before-the-period-start problem occurs on two rows (5 and 13) with different dates."""
    deaths = result.exceptions.filter(pl.col("file") == "deaths_bad.csv")
    by_reason = deaths.group_by("reason").agg(pl.col("row").sort()).sort("reason")
    assert by_reason.height == len(DEATH_REASONS)
    assert dict(zip(by_reason["reason"], by_reason["row"].to_list(), strict=True))[DEATH_REASONS["before"]] == [5, 13]
    assert result.exceptions.columns == [
        "file", "row", "member_id", "column", "file_column", "value", "reason", "severity"
    ]


def test_counts_reconcile_and_valid_rows_are_counted(result) -> None:  # noqa: ANN001
    counts = result.summary["records"]
    assert counts["deaths"] == {
        "read": 12,
        "counted": 3,
        "excluded": 9,
        "in_cells": 3,
        "left_out_at_closing_age": 0,
        "no_amounts_weight": 0,
    }
    assert counts["exits"] == {"read": 4, "applied": 1, "excluded": 3}
    excluded_rows = result.exceptions.filter(
        (pl.col("file") == "deaths_bad.csv") & (pl.col("severity") == "excluded")
    )["row"].n_unique()
    assert excluded_rows == counts["deaths"]["excluded"]
    o = result.overall()
    assert o["actual_lives"] == 3  # rows 2, 6 (day/month/year date) and 12
    assert o["actual_amounts"] == 1200 + 1000 + 1000  # row 12's bad pension falls back to the record's


def test_exits_stop_exposure(result) -> None:  # noqa: ANN001
    cells = result.cells.group_by("member_id").agg(pl.col("exposure").sum()).sort("member_id")
    got = dict(zip(cells["member_id"], cells["exposure"], strict=True))
    # P005 exits 31 Dec 2022: 1 Apr 2021 to 31 Dec 2022 = 275 + 365 = 640 days (hand count)
    assert got["P005"] == pytest.approx(640 / 365.25, rel=1e-12)
    # P001 dies 10 May 2022 (its later exit is ignored): 365 + 30 + 10 = 405 days
    assert got["P001"] == pytest.approx(405 / 365.25, rel=1e-12)


def test_missing_file_and_missing_column_raise_data_error(tmp_path: Path) -> None:
    with pytest.raises(DataError, match="deaths file not found") as info:
        read_events(tmp_path / "nope.csv", "deaths")
    assert "nope.csv" in str(info.value)
    bad = tmp_path / "d.csv"
    bad.write_text("member_id,when\nA,2022-01-01\n")
    with pytest.raises(DataError) as info:
        read_events(bad, "deaths")
    msg = str(info.value)
    assert (
        "d.csv" in msg
        and "column 'date_of_death'" in msg
        and "required column 'date_of_death' is missing" in msg
    )
    other = tmp_path / "d.json"
    other.write_text("{}")
    with pytest.raises(DataError, match="unknown file type '.json'"):
        read_events(other, "exits")


def test_column_mapping_and_duplicate_mapped_columns(tmp_path: Path) -> None:
    f = tmp_path / "d.csv"
    f.write_text("Ref,Died\nP001,10/05/2022\n")
    df = read_events(
        f, "deaths", date_format="%d/%m/%Y", column_map={"REF": "member_id", "died": "date_of_death"}
    )
    assert df["member_id"].to_list() == ["P001"] and df["date"].to_list() == [date(2022, 5, 10)]
    assert df["row"].to_list() == [2]  # header is row 1
    g = tmp_path / "e.csv"
    g.write_text("Ref,member_id,Died\nP001,P001,2022-05-10\n")
    with pytest.raises(DataError, match="two columns map to 'member_id'"):
        read_events(g, "deaths", column_map={"ref": "member_id", "died": "date_of_death"})


@pytest.mark.parametrize(
    ("name", "content", "text", "fix"),
    [
        ("empty.csv", b"", "deaths file is empty", "give a header row (member_id, date_of_death"),
        # read by the member files' reader: the line of the first byte UTF-8 does not allow is named
        ("latin.csv", "member_id,date_of_death\n\u00e9,2022-01-01\n".encode("latin-1"),
         "is not UTF-8 text: line 2 holds the byte 0xE9", "save the file as UTF-8 text"),
        ("semi.csv", b"member_id;date_of_death\nP1;2022-01-01\n", "the columns are not separated by commas "
         "(one header reads 'member_id;date_of_death')", "save the file as CSV with commas"),
        ("bad.parquet", b"\x00\x01 not parquet", "cannot be read as a Parquet file", "save it as CSV UTF-8"),
    ],
)
def test_unreadable_event_files_say_what_to_do(tmp_path: Path, name: str, content: bytes, text: str,
                                               fix: str) -> None:
    """A file that cannot be used is a message naming the file and the fix, with no library internals."""
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises(DataError) as info:
        read_events(path, "deaths")
    msg = str(info.value)
    assert msg.startswith(str(path)) and text in msg and fix in msg
    assert msg.count("(fix:") == 1 and "Error" not in msg and "polars" not in msg.lower()


def test_a_pension_at_death_that_is_not_finite_is_listed_and_not_used(tmp_path) -> None:
    """1e400 overflows a double to infinity (IEEE 754): it is no amount, so the record's pension is used and
    the row is listed, rather than turning A/E by amounts into NaN."""
    from datetime import date

    from valuation.experience.events import read_events

    path = tmp_path / "deaths.csv"
    path.write_text("member_id,date_of_death,pension_at_death\nA1,2023-01-01,1e400\nA2,2023-02-01,inf\n")
    df = read_events(path, "deaths")
    assert df["pension_at_death"].to_list() == [None, None]
    assert date(2023, 1, 1) in df["date"].to_list()
