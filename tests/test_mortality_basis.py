"""MortalityBasis: percentage of table, age rating, generational improvement, cohort and period rows.

Sources: the SOA Mortality Improvement Scale MP-2014 report (generational projection) (q(x, y) = q(x, b) prod (1 - i(x, s)); constant r gives
q(x, b)(1 - r)^(y - b) exactly; SOA MP-2014 report); percentage-of-table and age rating (set forward =
heavier) are common practice; the force over a year of age under Makeham's law,
-ln p_x = A + B c^x (c - 1) / ln c, is [DHW] Dickson, Hardy & Waters, AMLCR 2nd ed., eq. (2.29) with t = 1.
"""

from __future__ import annotations

import numpy as np
import pytest

from valuation.errors import TableError
from valuation.mortality import (
    ConstantImprovement,
    MortalityBasis,
    MortalityTable,
    NoImprovement,
    bundled_table,
)

DEMO_M = bundled_table("DEMO_M")
SULT = bundled_table("SULT")


def test_percentage_and_age_rating():
    """Common practice: 90 % of table multiplies q; rating +2 reads the table two years older."""
    ages = np.arange(0, 118)
    b = MortalityBasis(DEMO_M, percentage=0.9, age_rating=2)
    np.testing.assert_allclose(b.q(ages, 2020), 0.9 * DEMO_M.qx[ages + 2], rtol=1e-12)
    neg = MortalityBasis(SULT, age_rating=-1)
    assert neg.q(60, 2000) == SULT.qx[59 - 20]
    assert MortalityBasis(SULT, q_multiplier=0.8).q(60, 2000) == pytest.approx(0.8 * SULT.qx[40], rel=1e-12)


def test_constant_improvement_matches_closed_form():
    """Constant improvement (SOA MP-2014 report, generational form): q(x, y) = q(x, b)(1 - r)^(y - b), forwards and backwards from b = 2020."""
    b = MortalityBasis(DEMO_M, improvement=ConstantImprovement(0.015))
    ages = np.arange(20, 100)[:, None]
    years = np.arange(2000, 2071)[None, :]
    expected = DEMO_M.qx[ages] * 0.985 ** (years - 2020.0)
    np.testing.assert_allclose(b.q(ages, years), np.minimum(expected, 1.0), rtol=1e-12)


def test_improvement_uses_actual_age_not_rated_age():
    """Improvement applies at the member's actual age x; the rating only moves the table lookup."""
    from valuation.mortality import AgeImprovement

    imp = AgeImprovement(ages=[60, 61, 62], rates=[0.01, 0.02, 0.03])
    b = MortalityBasis(DEMO_M, age_rating=1, improvement=imp)
    assert b.q(60, 2022) == pytest.approx(DEMO_M.qx[61] * 0.99**2, rel=1e-12)


def test_cap_at_one_and_closing_age():
    # Backcasting with strong improvement pushes q above 1 at old ages: capped (stated rule).
    b = MortalityBasis(DEMO_M, improvement=ConstantImprovement(0.3))
    assert b.q(110, 1950) == 1.0
    # 50 % of table still closes at age 120 (stated rule: the closing age stays closed).
    half = MortalityBasis(DEMO_M, percentage=0.5)
    assert half.q(120, 2020) == 1.0 and half.q(119, 2020) == pytest.approx(0.5 * DEMO_M.qx[119])
    assert half.q(130, 2020) == 1.0
    assert MortalityBasis(DEMO_M, age_rating=-3).q(120, 2020) == 1.0


def test_base_year_rules():
    with pytest.raises(TableError, match="no base year"):
        MortalityBasis(SULT, improvement=ConstantImprovement(0.01))
    b = MortalityBasis(SULT, improvement=ConstantImprovement(0.01), base_year=2010)
    assert b.q(60, 2012) == pytest.approx(SULT.qx[40] * 0.99**2, rel=1e-12)
    assert MortalityBasis(DEMO_M).base_year == 2020
    assert MortalityBasis(DEMO_M, base_year=2015, improvement=ConstantImprovement(0.01)).q(60, 2015) == DEMO_M.qx[60]
    assert MortalityBasis(SULT).q(60, 1900) == SULT.qx[40]  # static table: year ignored
    with pytest.raises(TableError, match="percentage"):
        MortalityBasis(SULT, percentage=-0.1)


def test_cohort_q_rows_follow_the_cohort():
    b = MortalityBasis(DEMO_M, improvement=ConstantImprovement(0.01))
    cohorts = np.arange(1900, 2100)
    c = b.cohort_q(cohorts)
    assert c.shape == (200, 121)
    assert np.all(c[:, 120] == 1.0)
    r, j = 55, 70
    assert c[r, j] == pytest.approx(DEMO_M.qx[j] * 0.99 ** (cohorts[r] + j - 2020), rel=1e-12)
    # Ages below the table's first age take q at the first age (SULT starts at 20): stated rule.
    s = MortalityBasis(SULT).cohort_q([1960], max_age=100)
    assert s.shape == (1, 101) and np.all(s[0, :20] == SULT.qx[0]) and s[0, 100] == 1.0


def test_period_q_and_mu():
    b = MortalityBasis(DEMO_M, improvement=ConstantImprovement(0.02))
    p = b.period_q(2030)
    assert p.shape == (121,) and p[120] == 1.0
    np.testing.assert_allclose(p[:120], DEMO_M.qx[:120] * 0.98**10, rtol=1e-12)
    # [DHW] eq. (2.29), t = 1: under Makeham's law -ln(1 - q_x) = A + B c^x (c - 1) / ln c.
    A, B, C = 0.00022, 2.7e-6, 1.124  # SULT parameters, DHW Appendix D
    x = np.arange(20, 110)
    mu = MortalityBasis(SULT).mu(x, 2000)
    np.testing.assert_allclose(mu, A + B * C**x * (C - 1.0) / np.log(C), rtol=1e-10)
    assert np.isinf(MortalityBasis(SULT).mu(120, 2000))


def test_default_improvement_is_none():
    t = MortalityTable("T", 0, [0.1, 1.0])
    b = MortalityBasis(t)
    assert isinstance(b.improvement, NoImprovement) and b.base_year is None
    np.testing.assert_array_equal(b.q([[0], [1]], [2000, 2100]), [[0.1, 0.1], [1.0, 1.0]])
