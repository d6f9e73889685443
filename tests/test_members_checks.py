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
    ({**GOOD_PENSIONER, "status": "retired"}, "status", "unknown status code (expected one of pensioner", "excluded"),
    ({**GOOD_PENSIONER, "status": None}, "status", "status is missing", "excluded"),
    ({**GOOD_PENSIONER, "sex": "U"}, "sex", "unknown sex code (expected one of M, F)", "excluded"),
    ({**GOOD_PENSIONER, "sex": None}, "sex", "sex is missing", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": None}, "date_of_birth", "date of birth is missing", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": "1950-02-30"}, "date_of_birth", "not a valid date (expected an ISO date", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": "2025-04-01"}, "date_of_birth", "after the valuation date 2025-03-31", "excluded"),
    ({**GOOD_PENSIONER, "date_of_birth": "1904-03-30"}, "date_of_birth",
     "age is beyond the mortality table's closing age for this status and sex", "excluded",
     "age 121; closing age 120"),
    ({**GOOD_PENSIONER, "sex": "M", "date_of_birth": "1906-03-30"}, "date_of_birth",
     "age is beyond the mortality table's closing age for this status and sex", "excluded",
     "age 119; closing age 118"),  # +2 rating for male pensioners
    ({**GOOD_PENSIONER, "pension": "6,000", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "not a number (expected a pension amount", "excluded"),
    ({**GOOD_PENSIONER, "pension": "-6000", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "negative value", "excluded"),
    ({**GOOD_PENSIONER, "pension_pre2005": "x"}, "pension_pre2005", "not a number", "excluded"),
    ({**GOOD_PENSIONER, "pension_post2005": "-1"}, "pension_post2005", "negative value", "excluded"),
    ({**GOOD_PENSIONER, "pension_post2005": "2000.02"}, "pension",
     "pension_<tranche> columns do not sum to the pension (expected equal within 0.01)", "excluded",
     "tranches 6000.02; pension 6000.00"),
    ({**GOOD_PENSIONER, "pension": None, "pension_pre2005": None, "pension_post2005": None}, "pension",
     "no pension (a pensioner, dependant or deferred member needs a pension above 0)", "excluded"),
    ({**GOOD_PENSIONER, "status": "dependant", "pension": "0", "pension_pre2005": None, "pension_post2005": None},
     "pension", "no pension (a pensioner, dependant or deferred member needs a pension above 0)", "excluded"),
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
     "spouse's age is beyond the spouse mortality table's closing age", "excluded",
     "spouse's age 125; closing age 120"),
    ({**GOOD_PENSIONER, "guarantee_end": "soon"}, "guarantee_end", "not a valid date", "excluded"),
    ({**GOOD_PENSIONER, "pension": "60000", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "unusually large pension (above 50,000.00)", "warning"),
    ({**GOOD_PENSIONER, "pension": "52", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "tiny pension (below 100.00)", "warning"),
    ({**GOOD_PENSIONER, "date_of_birth": "1923-01-01"}, "date_of_birth",
     "member over 100: please confirm the date of birth", "warning", "age 102"),
    # Plausibility checks (limits from [thresholds]; defaults stated in the README, common practice).
    ({**GOOD_PENSIONER, "pension": "inf", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "not a finite number: infinite, NaN or too large", "excluded"),
    ({**GOOD_PENSIONER, "pension": "1e400", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "not a finite number: infinite, NaN or too large", "excluded"),  # beyond a double's 1.8e308 (IEEE 754)
    ({**GOOD_ACTIVE, "salary": "NaN"}, "salary", "not a finite number: infinite, NaN or too large", "excluded"),
    ({**GOOD_PENSIONER, "pension": "2e9", "pension_pre2005": None, "pension_post2005": None}, "pension",
     "pension above 1,000,000,000, beyond any plausible amount (the thresholds.max_pension limit)", "excluded",
     "2000000000.00"),
    ({**GOOD_ACTIVE, "salary": "5e9"}, "salary",
     "salary above 1,000,000,000, beyond any plausible amount (the thresholds.max_salary limit)", "excluded"),
    ({**GOOD_ACTIVE, "salary": "600000"}, "salary", "unusually large salary (above 500,000.00): please confirm",
     "warning"),
    # born 1980-01-15: exact age 45.2 at 2025-03-31, so at most 30.2 years of service after age 15
    ({**GOOD_ACTIVE, "service_years": "31"}, "service_years",
     "service_years longer than the member's age allows (more than age less 15, the thresholds.min_working_age)",
     "excluded", "service 31.0; age 45.2"),
    ({**GOOD_ACTIVE, "retirement_age": "45"}, "retirement_age",
     "retirement age below the member's current age: valued as retiring at the valuation date", "warning",
     "retirement age 45.0; age 45.2"),
    ({**GOOD_ACTIVE, "status": "deferred", "pension": "1000", "date_of_birth": "1955-01-01"}, "retirement_age",
     "retirement age below the member's current age: valued as retiring at the valuation date", "warning",
     "retirement age 65.0 (the basis's); age 70.2"),
    ({**GOOD_PENSIONER, "spouse_date_of_birth": "2015-06-01"}, "spouse_date_of_birth",
     "spouse younger than 16 at the valuation date (the thresholds.min_spouse_age): not a plausible partner",
     "excluded", "spouse's age 9.8"),
    ({**GOOD_PENSIONER, "spouse_date_of_birth": "1990-06-01"}, "spouse_date_of_birth",
     "member and spouse ages differ by more than 30 years (the thresholds.max_spouse_age_gap)", "warning",
     "age 74.8; spouse's age 34.8"),
    ({**GOOD_PENSIONER, "status": "dependant", "date_of_birth": "2005-01-01", "pension_end_age": "18"},
     "pension_end_age", "dependant's pension_end_age already reached: the pension has stopped", "excluded",
     "end age 18.0; age 20.2"),
]


@pytest.mark.parametrize("case", CASES, ids=[f"{k}-{c[2][:40]}" for k, c in enumerate(CASES)])
def test_each_problem_is_reported(tmp_path: Path, case: tuple) -> None:
    """Each case: (record, column, reason fragment, severity[, value when it is not the cell as written])."""
    record, column, reason, severity = case[:4]
    md = read_members(write_csv(tmp_path / "m.csv", [COMPANION, record]), BASIS)
    hits = md.exceptions.filter(pl.col("reason").str.contains(reason, literal=True))
    assert hits.height == 1, md.exceptions.to_dicts()
    hit = hits.row(0, named=True)
    assert hit["row"] == 3  # header = row 1, COMPANION = row 2
    assert hit["column"] == column and hit["severity"] == severity
    assert hit["file_column"] == column  # the file's headers are ours: no mapping applies
    assert hit["file"].endswith("m.csv")
    assert hit["value"] == (case[4] if len(case) > 4 else record.get(column))
    assert md.read == 2 and md.read == md.valued + md.excluded
    assert md.excluded == (1 if severity == "excluded" else 0)


def test_duplicates_exclude_every_copy(tmp_path: Path) -> None:
    rows = [GOOD_ACTIVE, GOOD_PENSIONER, {**GOOD_PENSIONER, "pension": "1.0", "pension_pre2005": None,
                                          "pension_post2005": None}]
    md = read_members(write_csv(tmp_path / "m.csv", rows), BASIS)
    dup = md.exceptions.filter(pl.col("column") == "member_id")
    assert dup["row"].to_list() == [3, 4]
    assert set(dup["reason"]) == {"member_id appears more than once; every copy is excluded: ask the "
                                  "administrator which record is right"}
    assert dup["value"].to_list() == ["2 copies: rows 3, 4"] * 2
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


def test_retirement_age_warning_states_what_the_valuation_does(tmp_path: Path) -> None:
    """The warning says a member past the retirement age is valued as retiring at the valuation date: a
    deferred member aged 70 with retirement age 60 or 69 is valued exactly as a pensioner of the same age,
    sex and pension (the engine starts the pension at max(retirement age - age, 0), engine/project.py)."""
    from valuation.engine.run import value_members

    rows = [{"member_id": k, "status": s, "sex": "F", "date_of_birth": "1955-01-01", "pension": "1000",
             "retirement_age": nra} for k, s, nra in (("D1", "deferred", "60"), ("D2", "deferred", "69"),
                                                       ("P1", "pensioner", None))]
    md = read_members(write_csv(tmp_path / "m.csv", rows), BASIS)
    assert BASIS.mortality_key("deferred", "F") == BASIS.mortality_key("pensioner", "F")
    assert md.exceptions.filter(pl.col("column") == "retirement_age")["row"].to_list() == [2, 3]
    value = dict(value_members(BASIS, md, sensitivities=False).members.select("member_id", "liability").iter_rows())
    assert value["D1"] == pytest.approx(value["P1"], rel=1e-12)
    assert value["D2"] == pytest.approx(value["P1"], rel=1e-12)
