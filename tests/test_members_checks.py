"""Every record-level problem of member data: the record is listed with row, column, value and reason.

The rules checked are the package's stated rules (valuation/members/checks.py): duplicate ids exclude every
copy (common practice: ask the administrator); tranches must sum to the pension within a cent; a life is
beyond its table past the table's closing age less the age rating. The bundled SULT closes at age 120
(closing rule q_120 = 1, stated in valuation/mortality/bundled.py).
"""

from __future__ import annotations

from pathlib import Path

import polars as pl
import pytest

from valuation.basis import load_basis
from valuation.members import read_members, write_exceptions

DATA = Path(__file__).parent / "data" / "members"
BASIS = load_basis(DATA / "basis.toml")  # valuation date 2025-03-31, SULT, pensioner M rated +2

HEADER = ["member_id", "status", "sex", "date_of_birth", "pension", "pension_pre2005", "pension_post2005",
          "salary", "service_years", "retirement_age", "spouse_date_of_birth", "spouse_fraction",
          "guarantee_end", "pension_end_age"]
GOOD_PENSIONER = {"member_id": "OK1", "status": "pensioner", "sex": "F", "date_of_birth": "1950-06-01",
                  "pension": "6000.00", "pension_pre2005": "4000.00", "pension_post2005": "2000.00"}
GOOD_ACTIVE = {"member_id": "OK2", "status": "active", "sex": "M", "date_of_birth": "1980-01-15",
               "salary": "35000", "service_years": "12.5"}
COMPANION = {**GOOD_ACTIVE, "member_id": "C0"}  # a clean record in row 2 beside each case


def write_csv(path: Path, rows: list[dict[str, str]]) -> Path:
    pl.DataFrame([{h: r.get(h) for h in HEADER} for r in rows], schema={h: pl.String for h in HEADER}).write_csv(path)
    return path


CASES = [
    # (record, column, reason fragment, severity)
    ({**GOOD_PENSIONER, "member_id": None}, "member_id", "member_id is missing", "excluded"),
    ({**GOOD_PENSIONER, "status": "retired"}, "status", "unknown status code (expected one of active", "excluded"),
    ({**GOOD_PENSIONER, "status": None}, "status", "status is missing", "excluded"),
    ({**GOOD_PENSIONER, "sex": "U"}, "sex", "unknown sex code (expected one of M, F)", "excluded"),
    ({**GOOD_PENSIONER, "sex": None}, "sex", "sex is missing", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": None}, "date_of_birth", "date of birth is missing", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": "1950-02-30"}, "date_of_birth", "not a valid date (expected an ISO date", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": "2025-04-01"}, "date_of_birth", "after the valuation date 2025-03-31", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": "1904-03-30"}, "date_of_birth",
     "age 121 is beyond the mortality table's closing age 120", "excluded"),
    ({**GOOD_PENSIONER, "sex": "M", "date_of_birth": "1906-03-30"}, "date_of_birth",
     "age 119 is beyond the mortality table's closing age 118", "excluded"),  # +2 rating for male pensioners
    ({**GOOD_PENSIONER, "pension": "6,000", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "not a number (expected a pension amount", "excluded"),
    ({**GOOD_PENSIONER, "pension": "-6000", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "negative value", "excluded"),
    ({**GOOD_PENSIONER, "pension_pre2005": "x"}, "pension_pre2005", "not a number", "excluded"),
    ({**GOOD_PENSIONER, "pension_post2005": "-1"}, "pension_post2005", "negative value", "excluded"),
    ({**GOOD_PENSIONER, "pension_post2005": "2000.02"}, "pension",
     "tranches sum to 6000.02 but pension is 6000.0 (expected equal within 0.01)", "excluded"),
    ({**GOOD_PENSIONER, "pension": None, "pension_pre2005": None, "pension_post2005": None}, "pension",
     "pensioner with no pension", "excluded"),
    ({**GOOD_PENSIONER, "status": "dependant", "pension": "0", "pension_pre2005": None, "pension_post2005": None},
     "pension", "dependant with no pension", "excluded"),
    ({**GOOD_ACTIVE, "salary": None}, "salary", "active member with no salary", "excluded"),
    ({**GOOD_ACTIVE, "salary": "abc"}, "salary", "not a number (expected a salary", "excluded"),
    ({**GOOD_ACTIVE, "service_years": None}, "service_years", "active member with no service_years", "excluded"),
    ({**GOOD_ACTIVE, "service_years": "-2"}, "service_years", "negative value", "excluded"),
    ({**GOOD_ACTIVE, "retirement_age": "95"}, "retirement_age", "between 40 and 80", "excluded"),
    ({**GOOD_PENSIONER, "spouse_fraction": "2"}, "spouse_fraction", "between 0 and 1", "excluded"),
    ({**GOOD_PENSIONER, "pension_end_age": "abc"}, "pension_end_age", "not a number", "excluded"),
    ({**GOOD_PENSIONER, "spouse_date_of_birth": "31/12/1950"}, "spouse_date_of_birth", "not a valid date", "excluded"),
    ({**GOOD_PENSIONER, "spouse_date_of_birth": "2026-01-01"}, "spouse_date_of_birth",
     "spouse's date of birth is after the valuation date", "excluded"),
    ({**GOOD_PENSIONER, "spouse_date_of_birth": "1900-01-01"}, "spouse_date_of_birth",
     "spouse's age 125 is beyond the spouse mortality table's closing age 120", "excluded"),
    ({**GOOD_PENSIONER, "guarantee_end": "soon"}, "guarantee_end", "not a valid date", "excluded"),
    ({**GOOD_PENSIONER, "pension": "60000", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "unusually large pension (above 50,000.00)", "warning"),
    ({**GOOD_PENSIONER, "pension": "52", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "tiny pension (below 100.00)", "warning"),
    ({**GOOD_PENSIONER, "date_of_birth": "1923-01-01"}, "date_of_birth", "member aged 102 is over 100", "warning"),
]


@pytest.mark.parametrize(("record", "column", "reason", "severity"), CASES, ids=[c[2][:40] for c in CASES])
def test_each_problem_is_reported(tmp_path: Path, record: dict[str, str], column: str, reason: str,
                                  severity: str) -> None:
    md = read_members(write_csv(tmp_path / "m.csv", [COMPANION, record]), BASIS)
    hits = md.exceptions.filter(pl.col("reason").str.contains(reason, literal=True))
    assert hits.height == 1, md.exceptions.to_dicts()
    hit = hits.row(0, named=True)
    assert hit["row"] == 3  # header = row 1, COMPANION = row 2
    assert hit["column"] == column and hit["severity"] == severity
    assert hit["file_column"] == column  # the file's headers are ours: no mapping applies
    assert hit["file"].endswith("m.csv")
    raw = record.get(column)
    assert hit["value"] == raw or column == "pension"  # value as written (tranche check shows the pension)
    assert md.read == 2 and md.read == md.valued + md.excluded
    assert md.excluded == (1 if severity == "excluded" else 0)


def test_duplicates_exclude_every_copy(tmp_path: Path) -> None:
    rows = [GOOD_ACTIVE, GOOD_PENSIONER, {**GOOD_PENSIONER, "pension": "1.0", "pension_pre2005": None,
                                          "pension_post2005": None}]
    md = read_members(write_csv(tmp_path / "m.csv", rows), BASIS)
    dup = md.exceptions.filter(pl.col("column") == "member_id")
    assert dup["row"].to_list() == [3, 4]
    assert dup["reason"][0].startswith("member_id appears 2 times (rows 3, 4); every copy is excluded")
    assert md.valued == 1 and md.excluded == 2
    # the second copy's tiny pension is listed too: every problem is listed, the record counted once
    assert md.exceptions.filter(pl.col("row") == 4).height == 2


def test_several_problems_one_record(tmp_path: Path) -> None:
    bad = {**GOOD_PENSIONER, "sex": "Q", "date_of_birth": "never", "guarantee_end": "x"}
    md = read_members(write_csv(tmp_path / "m.csv", [bad]), BASIS)
    assert md.exceptions["column"].to_list() == ["sex", "date_of_birth", "guarantee_end"]
    assert (md.read, md.valued, md.excluded) == (1, 0, 1)


def test_formula_like_text_stays_literal(tmp_path: Path) -> None:
    rows = [{**GOOD_ACTIVE, "member_id": "=1+1"}, {**GOOD_PENSIONER, "member_id": "@SUM(A1)", "sex": "+cmd"}]
    md = read_members(write_csv(tmp_path / "m.csv", rows), BASIS)
    assert md.records["member_id"].to_list() == ["=1+1"]
    assert md.exceptions.row(0, named=True)["member_id"] == "@SUM(A1)"
    assert md.exceptions.row(0, named=True)["value"] == "+cmd"
    out = write_exceptions(md, tmp_path / "exceptions.csv")
    text = out.read_text(encoding="utf-8")
    assert "@SUM(A1)" in text and "+cmd" in text
    assert pl.read_csv(out, infer_schema=False)["member_id"].to_list() == ["@SUM(A1)"]
