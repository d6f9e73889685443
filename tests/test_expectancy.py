"""Life expectancy: complete and curtate, UDD and constant force, from whole and fractional ages.

Sources: DHW = Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed.
(section 2.6 expectation of life; eq. 2.29 Makeham survival; section 3.3 fractional ages); scipy.integrate.quad
as an independent numerical integral.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad

from tests.oracles import curtate_expectancy, tpx
from valuation.expectancy import complete_expectancy
from valuation.mortality.laws import SULT_LAW, Makeham
from valuation.survival import cohort_lx, lx_at


def law_q_row(law: Makeham, start: int = 0, closing: int = 120) -> np.ndarray:
    q = np.zeros(closing + 1)
    q[start:] = law.qx(np.arange(start, closing + 1))
    q[closing] = 1.0
    return q[None, :]


SULT_Q = law_q_row(SULT_LAW, start=20)
GOMPERTZ = Makeham(A=0.0, B=5.0e-5, c=1.1)  # illustrative Gompertz parameters (our own choice)
GOMPERTZ_Q = law_q_row(GOMPERTZ)


def test_udd_complete_is_curtate_plus_half_at_whole_ages() -> None:
    """Under UDD with the table closing with q = 1 at a whole age, e°_x = e_x + 1/2 exactly at whole
    ages (DHW section 3.3: integral of linear l over each year is the trapezium)."""
    x = np.array([20.0, 45.0, 65.0, 100.0, 119.0])
    rows = np.zeros(x.size, dtype=int)
    np.testing.assert_allclose(
        complete_expectancy(SULT_Q, rows, x, "udd"), curtate_expectancy(SULT_Q, rows, x, "udd") + 0.5,
        rtol=1e-12,
    )


def test_curtate_is_sum_of_kpx_from_fractional_age() -> None:
    """e_x = sum_{k>=1} kp_x (DHW section 2.6), from fractional ages, under each assumption."""
    x = np.array([47.3, 65.0, 88.9])
    rows = np.zeros(3, dtype=int)
    k = np.arange(1.0, 122.0)
    for fractional in ("udd", "constant_force"):
        expected = tpx(SULT_Q, rows, x, k, fractional).sum(axis=1)
        got = curtate_expectancy(SULT_Q, rows, x, fractional)  # type: ignore[arg-type]
        np.testing.assert_allclose(got, expected, rtol=1e-12)


@pytest.mark.parametrize("fractional", ["udd", "constant_force"])
@pytest.mark.parametrize("x0", [30.0, 64.4, 87.75, 119.5])
def test_complete_expectancy_equals_quad_of_interpolated_survival(fractional: str, x0: float) -> None:
    """The closed forms ((l_j + l_{j+1})/2 under UDD, l_j (p_j - 1)/ln p_j under a constant force) equal
    scipy.integrate.quad of the interpolated l, integrated year of age by year of age."""
    q = GOMPERTZ_Q
    lx = cohort_lx(q)
    # l is positive up to age 121 under UDD (q_120 = 1 spreads the last deaths over age 120 to 121)
    breaks = np.concatenate([[x0], np.arange(np.floor(x0) + 1, 122.0)])
    total = sum(
        quad(lambda y: float(lx_at(lx, q, 0, y, fractional)), a, b, epsabs=1e-13, epsrel=1e-12)[0]  # type: ignore[arg-type]
        for a, b in zip(breaks[:-1], breaks[1:], strict=True)
    )
    expected = total / float(lx_at(lx, q, 0, x0, fractional))  # type: ignore[arg-type]
    got = complete_expectancy(q, [0], [x0], fractional)[0]  # type: ignore[arg-type]
    assert got == pytest.approx(expected, rel=1e-10)


@pytest.mark.parametrize("x0", [40.0, 65.0, 65.5, 90.2])
def test_constant_force_complete_against_gompertz_closed_form(x0: float) -> None:
    """Gompertz table: e°_x0 under constant force against quad of the law's own tp_x (DHW eq. 2.29,
    A = 0). They differ only by the fractional-age approximation. Linear interpolation of ln l errs by
    at most b(y) = max|mu'| / 8 = B c^(j+1) ln c / 8 in the year of age j (interpolation error bound),
    so tp errs by at most tp (exp(b(x0 + t) + b(x0)) - 1); the bound integrates that."""
    law = GOMPERTZ

    def b(y: float) -> float:
        return law.B * law.c ** (np.floor(y) + 1) * np.log(law.c) / 8

    opts = {"epsabs": 1e-12, "limit": 200}
    exact = quad(lambda t: float(law.tpx(x0, t)), 0.0, 120.0 - x0, **opts)[0]
    # b steps at whole ages: integrate year of age by year of age
    breaks = np.concatenate([[0.0], np.arange(np.floor(x0) + 1, 121.0) - x0])
    bound = sum(
        quad(lambda t: float(law.tpx(x0, t)) * np.expm1(b(x0 + t) + b(x0)), lo, hi, **opts)[0]
        for lo, hi in zip(breaks[:-1], breaks[1:], strict=True)
    )
    got = complete_expectancy(GOMPERTZ_Q, [0], [x0], "constant_force")[0]
    assert abs(got - exact) <= bound
    assert got < exact  # ln l is concave, so log-linear interpolation lies below the true l


def test_constant_force_table_closed_form() -> None:
    """Constant force mu with closing age 120: e°_x = (1 - exp(-mu (120 - x))) / mu (DHW section 2.6
    with tp_x = exp(-mu t)); the constant-force assumption is exact here."""
    mu = 0.04
    q = law_q_row(Makeham(A=mu, B=0.0, c=1.1))
    x = np.array([0.0, 30.25, 77.5, 119.9])
    expected = (1 - np.exp(-mu * (120.0 - x))) / mu
    np.testing.assert_allclose(complete_expectancy(q, np.zeros(4, dtype=int), x, "constant_force"), expected,
                               rtol=1e-12)


def test_edges_and_period_row() -> None:
    """A life at the closing age 120 (q = 1) dies within the year: e° = 1/2 under UDD, 0 under a
    constant force (p = 0); past it, 0. A 1-D period row works as one row."""
    np.testing.assert_array_equal(complete_expectancy(SULT_Q, [0, 0], [120.0, 130.0]), [0.5, 0.0])
    np.testing.assert_array_equal(complete_expectancy(SULT_Q, [0], [120.0], "constant_force"), [0.0])
    assert curtate_expectancy(SULT_Q[0], [0], [65.0])[0] == pytest.approx(
        curtate_expectancy(SULT_Q, [0], [65.0])[0], rel=1e-12
    )
    # cohort rows with lighter future mortality give a longer expectancy than the period row
    lighter = SULT_Q.copy()
    lighter[0, :-1] *= 0.9
    rows = np.vstack([SULT_Q, lighter])
    e = complete_expectancy(rows, [0, 1], [65.0, 65.0])
    assert e[1] > e[0]
