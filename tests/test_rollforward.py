"""Roll-forward (valuation/engine/rollforward.py, pipeline.rollforward) against the policy-value recursion:
with the assumptions unchanged and experience exactly as expected, the liability rolled forward a year
equals the full valuation at the new date of the expected survivors, (V_0 - B)(1 + i) = p V_1 for a pension
in payment (Dickson, Hardy & Waters, AMLCR, ch. 7; Bowers et al., ch. 8)."""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import numpy as np
import polars as pl
import pytest

from tests.engine_helpers import members, sult_toml, write_basis
from valuation.engine.project import Valuer
from valuation.pipeline import months_between, rollforward, value_scheme
from valuation.survival import age_at

ROOT = Path(__file__).resolve().parents[1]
T0, T1 = dt.date(2025, 1, 1), dt.date(2026, 1, 1)


def _basis(tmp_path: Path, on: dt.date, name: str):
    # SULT with 1 % a year constant improvement (generational), monthly in advance, fixed 2 % increases on
    # the valuation date's anniversary, a flat 5 %; no spouses (proportion married 0)
    text = sult_toml(valuation_date=on.isoformat(), frequency=12, improvement='{ kind = "constant", rate = 0.01 }',
                     increase='kind = "fixed", rate = 0.02')
    return write_basis(tmp_path, text, name)


def _pensioners() -> list[dict]:
    # birthdays from March to December, so that no 29 February falls in the birthday-years either side of
    # the two dates: the exact age a year later is the exact age now plus one
    rng = np.random.default_rng(7)
    out = []
    for _ in range(40):
        dob = dt.date(int(rng.integers(1935, 1962)), int(rng.integers(3, 13)), int(rng.integers(1, 29)))
        out.append({"status": "pensioner", "sex": "MF"[int(rng.integers(0, 2))], "date_of_birth": dob,
                    "pension": float(rng.uniform(2_000, 30_000))})
    return out


def test_rolled_forward_liability_is_the_full_valuation_of_the_expected_survivors(tmp_path):
    b0, b1 = _basis(tmp_path, T0, "b0.toml"), _basis(tmp_path, T1, "b1.toml")
    start = members(_pensioners())
    run = rollforward(b0, start, to=T1, new_basis=b1)
    # the expected survivors a year on: each pension after its one increase (2 %), weighted by the chance of
    # surviving the year on the same survival (UDD between ages, the member's cohort row)
    valuer = Valuer(b0)
    x0 = np.asarray(age_at(np.asarray(start["date_of_birth"].to_numpy(), dtype="datetime64[D]"),
                           np.datetime64(T0, "D"), "exact"), dtype=float)
    rows = valuer.bc.rows("pensioner", start["sex"].to_numpy().astype(str), x0)
    p = valuer.bc.l(rows, x0 + 1.0) / valuer.bc.l(rows, x0)
    survivors = start.with_columns((pl.col("pension") * 1.02 * pl.Series(p)).alias("pension")).with_columns(
        pl.col("pension").alias("pension_main"))
    full = value_scheme(b1, survivors, sensitivities=False).total_liability
    assert run.rolled.liability == pytest.approx(full, rel=1e-10)
    assert run.rolled.service_cost == 0.0 and run.rolled.financial_assumptions == pytest.approx(0.0, abs=1e-6)
    # the recursion in its own terms: (V_0 - B v^{1/2}...) is the sum of the lines
    r = run.rolled
    assert r.opening - r.benefits_expected + r.interest + r.service_cost + r.financial_assumptions == pytest.approx(
        r.liability, rel=1e-12)
    assert run.notes == []


def test_the_demo_rolls_forward_with_every_line_stated(tmp_path):
    """The demo a year on, on the 2026 basis (discount 5.2 % for 4.8 %, inflation 2.8 % for 3.0 %): higher
    discount and lower inflation lower the liability (common practice: both move it the same way); the
    lines add up; the folder holds the figures, the caution and the manifest."""
    run = rollforward(ROOT / "assumptions" / "demo_basis.toml", ROOT / "member_data_demo" / "members.csv",
                      to=dt.date(2026, 3, 31), new_basis=ROOT / "assumptions" / "demo_basis_2026.toml",
                      out=tmp_path / "rf")
    r = run.rolled
    assert r.months == 12 and r.financial_assumptions < 0 and r.service_cost > 0 and r.benefits_expected > 0
    assert sum(v for _, v in r.lines()[:-1]) == pytest.approx(r.liability, rel=1e-12)
    saved = json.loads((tmp_path / "rf" / "rollforward.json").read_text(encoding="utf-8"))
    assert saved["approximate"] is True and "not a valuation" in saved["caution"]
    assert saved["liability"] == pytest.approx(r.liability, rel=1e-15)
    assert run.notes == [], "the 2026 demo basis changes only financial assumptions"


@pytest.mark.parametrize("start,end,months", [(dt.date(2025, 3, 31), dt.date(2025, 9, 30), 6),
                                              (dt.date(2025, 1, 15), dt.date(2026, 1, 15), 12),
                                              (dt.date(2025, 1, 31), dt.date(2025, 2, 28), 1)])
def test_whole_months_on_the_payment_grid(start, end, months):
    assert months_between(start, end) == months


@pytest.mark.parametrize("end,said", [(dt.date(2025, 4, 29), "whole number of months"),
                                      (dt.date(2025, 3, 31), "not after the valuation date"),
                                      (dt.date(2024, 3, 31), "not after the valuation date")])
def test_a_date_off_the_grid_is_refused(end, said):
    from valuation.errors import DataError

    with pytest.raises(DataError, match=said):
        months_between(dt.date(2025, 3, 31), end)


def test_a_new_basis_that_changes_more_than_finance_is_said_so(tmp_path):
    b0 = _basis(tmp_path, T0, "b0.toml")
    text = sult_toml(valuation_date=T1.isoformat(), frequency=12, improvement='{ kind = "constant", rate = 0.01 }',
                     increase='kind = "fixed", rate = 0.03')
    b1 = write_basis(tmp_path, text, "b1.toml")
    said: list[str] = []
    run = rollforward(b0, members(_pensioners()[:3]), to=T1, new_basis=b1, warn=said.append)
    assert said and "tranches" in said[0] and run.notes == said


def test_new_salary_growth_and_inflation_are_projected(tmp_path):
    """A new basis with another salary growth and inflation changes the actives' and the inflation-linked
    payments, so the financial line moves; with only the discount rate changed, the re-projection is skipped
    and the line is the re-discounting alone (both checked against a revaluation at the old date)."""
    import tomllib

    demo = ROOT / "assumptions" / "demo_basis.toml"
    text = (ROOT / "assumptions" / "demo_basis_2026.toml").read_text(encoding="utf-8")
    assert tomllib.loads(text)["salary"]["growth"] == 0.035
    faster = text.replace("growth = 0.035", "growth = 0.045")
    (tmp_path / "faster.toml").write_text(faster, encoding="utf-8")
    members_file = ROOT / "member_data_demo" / "members.csv"
    base = rollforward(demo, members_file, to=dt.date(2026, 3, 31), new_basis=ROOT / "assumptions" / "demo_basis_2026.toml")
    more = rollforward(demo, members_file, to=dt.date(2026, 3, 31), new_basis=tmp_path / "faster.toml")
    assert more.rolled.liability > base.rolled.liability  # higher salary growth, higher final-salary benefits
    assert more.rolled.interest == pytest.approx(base.rolled.interest, rel=1e-12)  # on the old assumptions
