"""The conventions the README's "Conventions" table states, each pinned here or in the test it names.

Sources: the defaults are the project's own stated choices (README, "Conventions"), each a common practice
of the trade; the life expectancy definitions are those of Dickson, Hardy & Waters, *Actuarial Mathematics
for Life Contingent Risks* (2nd ed., 2013), section 2.6 (complete expectation of life; under a uniform
distribution of deaths within each year of age, e_x = curtate e_x + 1/2), with cohort rates projected
generationally, q(x, y) = q_base(x) * prod_{s=b+1..y} (1 - i), as in the SOA improvement scale reports.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from valuation.basis import load_basis
from valuation.engine.run import life_expectancies
from valuation.mortality.bundled import bundled_table

MINIMAL = """
name = "t"
valuation_date = 2025-03-31
[discount]
rate = 0.05
[inflation]
rate = 0.02
[mortality.default.M]
table = "SULT"
{extra}
[mortality.default.F]
table = "SULT"
"""


def _basis(tmp_path: Path, extra: str = ""):
    path = tmp_path / "basis.toml"
    path.write_text(MINIMAL.format(extra=extra), encoding="utf-8")
    return load_basis(path)


def test_defaults_when_sections_are_omitted(tmp_path):
    """README "Conventions", defaults: every line of the table's first block."""
    b = _basis(tmp_path)
    assert (b.payment.frequency, b.payment.timing) == (12, "advance")  # monthly in advance
    assert b.payment.increase_date is None and b.payment.first_increase == "full"  # anniversaries, full
    assert b.conventions.fractional_age == "udd" and b.conventions.age_convention == "exact"
    assert b.spouse.proportion_married == {"M": 0.0, "F": 0.0}  # no spouse assumed
    assert b.spouse.fraction == 0.0 and b.spouse.age_difference == 3.0
    assert b.spouse.pre_retirement_active == "accrued_to_death"
    assert b.benefits.retirement_age == 65.0 and b.benefits.accrual_rate == pytest.approx(1 / 60, rel=1e-15)
    assert b.benefits.design == "final_salary" and b.benefits.death_in_service_lump_sum == 0.0
    assert b.salary.growth == 0.0
    assert (b.commutation.proportion, b.commutation.factor) == (0.0, 0.0)
    assert b.withdrawal_spec is None
    assert b.thresholds.max_excluded_share == 0.05


def _complete_udd(q: np.ndarray) -> float:
    """Complete expectation of life from one-year q's, under UDD: sum of k p_x for k >= 1, plus 1/2."""
    survival = np.cumprod(1.0 - q)
    return float(survival.sum() + 0.5)


def test_life_expectancy_definitions_by_hand(tmp_path):
    """Cohort at 65 for a life aged 65 now and for one aged 45 now, and period at 65 on the valuation
    year's rates, against a hand computation on the SULT with 1 % a year constant improvement from 2020."""
    b = _basis(tmp_path, 'base_year = 2020\nimprovement = { kind = "constant", rate = 0.01 }')
    le = {(r["sex"], r["age_now"], r["basis"]): r["years"] for r in life_expectancies(b).iter_rows(named=True)}
    sult = bundled_table("SULT")
    ages = np.arange(65, 121)
    q_base = np.asarray(sult.qx[ages - sult.min_age], dtype=float)

    def projected(year0: int) -> np.ndarray:  # q(65 + k, year0 + k), q = 1 at the closing age
        q = q_base * (1 - 0.01) ** (year0 + np.arange(ages.size) - 2020)
        q[-1] = 1.0
        return q

    assert le[("M", 65, "cohort")] == pytest.approx(_complete_udd(projected(2025)), rel=1e-9)
    assert le[("M", 45, "cohort")] == pytest.approx(_complete_udd(projected(2045)), rel=1e-9)
    period = q_base * (1 - 0.01) ** (2025 - 2020)
    period[-1] = 1.0
    assert le[("M", 65, "period")] == pytest.approx(_complete_udd(period), rel=1e-9)
