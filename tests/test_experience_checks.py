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
from valuation.experience.events import read_events

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
    deaths = read_events(DATA / "deaths_bad.csv", "deaths", date_format="%d/%m/%Y")
    exits = read_events(DATA / "exits_bad.csv", "exits", date_format="%d/%m/%Y")
    return analyse_records(
        _records(),
        deaths,
        exits,
        lookup_for(LawRates()),
        PERIOD,
        excluded_ids=pl.Series(["X999"]),
        files={"members": "start.csv", "deaths": "deaths_bad.csv", "exits": "exits_bad.csv"},
        date_format="%d/%m/%Y",
    )


def _exc(result, file: str, row: int) -> list[dict]:  # noqa: ANN001
    return result.exceptions.filter((pl.col("file") == file) & (pl.col("row") == row)).to_dicts()


@pytest.mark.parametrize(
    ("row", "column", "severity", "text"),
    [
        (
            3,
            "member_id",
            "excluded",
            "death for unknown member 'NOPE1': not in the start membership (start.csv)",
        ),
        (
            4,
            "date_of_death",
            "excluded",
            "death on 2024-05-01 is outside the period (2021-03-31 to 2024-03-31)",
        ),
        (5, "date_of_death", "excluded", "death on 2020-12-01 is on or before the period start 2021-03-31"),
        (
            7,
            "date_of_death",
            "excluded",
            "second death record for member 'P004' (row 6 on 2022-06-15 is kept)",
        ),
        (
            8,
            "date_of_death",
            "excluded",
            "death on 2023-02-01 is after the member's exit on 2022-12-31 (exits_bad.csv row 2)",
        ),
        (
            9,
            "date_of_death",
            "excluded",
            "date_of_death '31/02/2022' is not a date (expected YYYY-MM-DD or %d/%m/%Y)",
        ),
        (10, "member_id", "excluded", "death row has no member_id"),
        (
            11,
            "member_id",
            "excluded",
            "death for member 'X999' who was excluded from the start membership (start.csv",
        ),
        (
            12,
            "pension_at_death",
            "warning",
            "pension_at_death 'abc' is not a number >= 0: the record's pension is used",
        ),
        (13, "date_of_death", "excluded", "death on 2021-03-31 is on or before the period start 2021-03-31"),
    ],
)
def test_each_death_problem_is_reported(result, row: int, column: str, severity: str, text: str) -> None:  # noqa: ANN001
    rows = _exc(result, "deaths_bad.csv", row)
    assert len(rows) == 1, rows
    assert rows[0]["column"] == column
    assert rows[0]["severity"] == severity
    assert text in rows[0]["reason"]


@pytest.mark.parametrize(
    ("row", "column", "text"),
    [
        (
            3,
            "exit_date",
            "exit on 2023-01-01 is on or after the member's death on 2022-05-10 (deaths_bad.csv row 2)",
        ),
        (4, "member_id", "exit for unknown member 'NOPE2'"),
        (5, "exit_date", "exit_date 'notadate' is not a date"),
    ],
)
def test_each_exit_problem_is_reported(result, row: int, column: str, text: str) -> None:  # noqa: ANN001
    rows = _exc(result, "exits_bad.csv", row)
    assert len(rows) == 1, rows
    assert rows[0]["column"] == column and rows[0]["severity"] == "excluded"
    assert text in rows[0]["reason"]


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
