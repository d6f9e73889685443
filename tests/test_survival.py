"""Survival: exact ages, cohort l_x, tp_x under UDD and constant force, joint and last survivor.

Sources: DHW = Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed.
(eq. 2.29 Makeham survival; section 3.3 fractional ages; Appendix D, the SULT; chapter 9 joint lives);
BGHJN = Bowers et al., *Actuarial Mathematics*, 2nd ed. (section 3.6 fractional ages, 3.7 De Moivre's law).
"""

from __future__ import annotations

from datetime import date, timedelta

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.oracles import joint_life, last_survivor, tpx
from valuation.errors import TableError
from valuation.mortality.laws import SULT_LAW, Makeham
from valuation.survival import age_at, cohort_lx, exact_age, lx_at


def law_q_row(law: Makeham, start: int = 20, closing: int = 120) -> np.ndarray:
    """q by integer age 0..closing from a law; zero below ``start`` (ages never used), 1 at closing."""
    q = np.zeros(closing + 1)
    q[start:] = law.qx(np.arange(start, closing + 1))
    q[closing] = 1.0
    return q[None, :]


SULT_Q = law_q_row(SULT_LAW)


# ---------------------------------------------------------------- exact ages


def _reference_exact_age(dob: date, at: date) -> float:
    """Scalar reference with the Python standard library's date arithmetic.

    Birthday in a common year for 29 February: 1 March (the rule stated in exact_age's docstring).
    """

    def birthday(year: int) -> date:
        try:
            return dob.replace(year=year)
        except ValueError:  # 29 February in a common year
            return date(year, 3, 1)

    years = at.year - dob.year - (1 if birthday(at.year) > at else 0)
    last, nxt = birthday(dob.year + years), birthday(dob.year + years + 1)
    return years + (at - last).days / (nxt - last).days


@pytest.mark.parametrize(
    ("dob", "at", "expected"),
    [
        # 29 February birthday: last birthday 1 March 2023, next 29 February 2024 (365 days), 364 days on
        ("2000-02-29", "2024-02-28", 23 + 364 / 365),
        ("2000-02-29", "2024-02-29", 24.0),
        ("2000-02-29", "2023-03-01", 23.0),
        ("2000-02-29", "2023-02-28", 22 + 364 / 365),  # 1 March 2022 -> 28 February 2023
        # ordinary birthday whose birthday-year spans 29 February 2024 (366 days), 258 days on
        ("1960-06-15", "2024-02-28", 63 + 258 / 366),
        ("1960-06-15", "2024-06-15", 64.0),
        ("1960-06-15", "2024-06-14", 63 + 365 / 366),
    ],
)
def test_exact_age_worked_dates(dob: str, at: str, expected: float) -> None:
    """Worked dates by hand counting (calendar arithmetic), 29 February birthdays included."""
    got = exact_age(np.array([dob], dtype="datetime64[D]"), np.datetime64(at))
    assert got[0] == pytest.approx(expected, abs=1e-12)


def test_exact_age_accepts_date_and_nat() -> None:
    got = exact_age(np.array(["1960-06-15", "NaT"], dtype="datetime64[D]"), date(2024, 6, 15))
    assert got[0] == 64.0
    assert np.isnan(got[1])


@settings(max_examples=60, deadline=None)
@given(
    st.dates(min_value=date(1900, 1, 1), max_value=date(2010, 12, 31)),
    st.integers(min_value=0, max_value=40_000),
)
def test_exact_age_matches_stdlib_reference(dob: date, days: int) -> None:
    """Vectorised numpy result against a scalar implementation on Python's datetime (standard library)."""
    at = dob + timedelta(days=days)
    got = exact_age(np.array([dob], dtype="datetime64[D]"), at)[0]
    assert got == pytest.approx(_reference_exact_age(dob, at), abs=1e-12)


def test_age_conventions() -> None:
    """Age last birthday = completed years; nearest birthday rounds a half-way life up (common practice)."""
    dob = np.array(["1960-06-15", "1960-12-20", "2003-03-01"], dtype="datetime64[D]")
    at = np.datetime64("2024-02-28")
    # exact ages: 63.705 (nearer 64), 63.19 (nearer 63), and 2003-03-01 + 183 days below
    assert age_at(dob, at, "last_birthday").tolist() == [63.0, 63.0, 20.0]
    assert age_at(dob, at, "nearest_birthday").tolist() == [64.0, 63.0, 21.0]
    # exactly half-way: 2003-03-01 to 2004-03-01 has 366 days; 183 days on is 2003-08-31
    half = age_at(np.array(["2003-03-01"], dtype="datetime64[D]"), np.datetime64("2003-08-31"), "exact")
    assert half[0] == 0.5
    assert age_at(np.array(["2003-03-01"], dtype="datetime64[D]"), np.datetime64("2003-08-31"),
                  "nearest_birthday")[0] == 1.0
    with pytest.raises(ValueError, match="convention"):
        age_at(dob, at, "age_next")  # type: ignore[arg-type]


# ---------------------------------------------------------------- l_x and tp_x at integer ages


def test_cohort_lx_matches_makeham_closed_form() -> None:
    """l_x / l_20 = S(20, x - 20) from Makeham's closed form, DHW eq. 2.29, at every integer age."""
    lx = cohort_lx(SULT_Q)[0]
    ages = np.arange(20, 120)
    expected = SULT_LAW.tpx(20.0, ages - 20.0)
    np.testing.assert_allclose(lx[ages] / lx[20], expected, rtol=1e-12)
    assert lx[0] == 1.0 and lx[-1] == 0.0


def test_cohort_lx_reproduces_published_sult() -> None:
    """DHW Appendix D (SULT, radix l_20 = 100,000): l_60 = 96,634.1, l_65 = 94,579.7, l_70 = 91,082.4."""
    lx = cohort_lx(SULT_Q)[0]
    radix = 100_000 / lx[20]
    for age, printed in [(60, 96_634.1), (65, 94_579.7), (70, 91_082.4)]:
        assert lx[age] * radix == pytest.approx(printed, abs=0.05)  # printed to 1 decimal


@pytest.mark.parametrize("fractional", ["udd", "constant_force"])
def test_tpx_exact_at_integer_ages(fractional: str) -> None:
    """Both fractional assumptions reproduce the law at integer ages and whole-year times (DHW eq. 2.29)."""
    x0 = np.array([20.0, 45.0, 65.0, 90.0])
    t = np.arange(0.0, 31.0)
    got = tpx(SULT_Q, np.zeros(4, dtype=int), x0, t, fractional)
    expected = SULT_LAW.tpx(x0[:, None], t[None, :])
    np.testing.assert_allclose(got, expected, rtol=1e-11, atol=1e-300)


def test_lx_udd_within_interpolation_error_bound() -> None:
    """UDD is linear interpolation of l (BGHJN 3.6); its error is at most max|l''| / 8 over the year.

    l'' = l (mu^2 - mu') with mu' = B c^y ln c for Makeham (DHW eq. 2.28-2.29); the bound is the standard
    error bound of linear interpolation (any numerical analysis text).
    """
    q = SULT_Q
    lx = cohort_lx(q)
    law = SULT_LAW
    ages = np.linspace(20.0, 109.99, 2000)
    got = lx_at(lx, q, 0, ages, "udd")
    true_l = law.tpx(20.0, ages - 20.0) * lx[0, 20]
    grid = np.floor(ages)[:, None] + np.linspace(0.0, 1.0, 41)[None, :]
    mu = law.force(grid)
    l_grid = law.tpx(20.0, grid - 20.0) * lx[0, 20]
    second = np.abs(l_grid * (mu**2 - law.B * law.c**grid * np.log(law.c)))
    bound = second.max(axis=1) / 8.0
    assert np.all(np.abs(got - true_l) <= bound * (1 + 1e-9) + 1e-15)
    assert np.abs(got - true_l).max() > 0  # the check is not vacuous: UDD is not exact for Makeham


def test_lx_constant_force_within_log_interpolation_error_bound() -> None:
    """Constant force is linear interpolation of ln l (BGHJN 3.6); the error in ln l is at most
    max|mu'| / 8 = B c^(j+1) ln c / 8 over the year of age j (Makeham, DHW eq. 2.28)."""
    q = SULT_Q
    lx = cohort_lx(q)
    law = SULT_LAW
    ages = np.linspace(20.0, 109.99, 2000)
    got = lx_at(lx, q, 0, ages, "constant_force")
    true_l = law.tpx(20.0, ages - 20.0) * lx[0, 20]
    bound = law.B * law.c ** (np.floor(ages) + 1) * np.log(law.c) / 8.0
    assert np.all(np.abs(np.log(got) - np.log(true_l)) <= bound * (1 + 1e-9) + 1e-13)


def test_constant_force_exact_for_a_constant_force() -> None:
    """With mu constant (Makeham with B = 0) tp_x = exp(-mu t) at every t (DHW eq. 2.29 with B = 0);
    constant-force interpolation is then exact, UDD is not."""
    law = Makeham(A=0.03, B=0.0, c=1.1)
    q = law_q_row(law, start=0)
    t = np.linspace(0.0, 40.0, 161) + 0.3
    got = tpx(q, [0, 0], [30.0, 52.7], t, "constant_force")
    np.testing.assert_allclose(got, np.exp(-0.03 * t)[None, :].repeat(2, axis=0), rtol=1e-12)
    udd = tpx(q, [0], [52.7], t, "udd")
    assert np.abs(udd[0] - np.exp(-0.03 * t)).max() > 1e-6


def test_udd_exact_for_de_moivre() -> None:
    """De Moivre's law l_x = omega - x (BGHJN 3.7): q_x = 1 / (omega - x), UDD is exact,
    tp_x = (omega - x - t) / (omega - x)."""
    omega = 100
    ages = np.arange(omega)
    q = (1.0 / (omega - ages))[None, :]
    x0 = np.array([0.0, 33.4, 70.25, 99.5])
    t = np.linspace(0.0, 110.0, 441)
    got = tpx(q, np.zeros(4, dtype=int), x0, t, "udd")
    expected = np.clip((omega - x0[:, None] - t[None, :]) / (omega - x0[:, None]), 0.0, 1.0)
    np.testing.assert_allclose(got, expected, atol=1e-12)


def test_tpx_edges() -> None:
    """t = 0 gives 1; beyond the closing age gives 0; a life at the closing age has 0 for t > 0."""
    got = tpx(SULT_Q, [0, 0], [65.0, 120.0], [0.0, 56.0, 200.0])
    assert got[0, 0] == 1.0 and got[0, 2] == 0.0 and got[0, 1] == 0.0
    assert got[1, 1] == 0.0 and got[1, 2] == 0.0
    # a missing age (NaN, e.g. from a missing date of birth) gives NaN, not a wrong table lookup
    lx = cohort_lx(SULT_Q)
    assert np.isnan(lx_at(lx, SULT_Q, [0, 0], [np.nan, 65.0])).tolist() == [True, False]


def test_tpx_rows_select_their_cohort() -> None:
    """Two cohort rows: the second with q halved (not the closing q); each life uses its own row."""
    q2 = SULT_Q.copy()
    q2[0, :-1] *= 0.5
    q = np.vstack([SULT_Q, q2])
    got = tpx(q, [0, 1], [70.0, 70.0], [10.0])
    # 10p_70 on each row by the product of (1 - q) (DHW section 3.2)
    assert got[0, 0] == pytest.approx(np.prod(1 - SULT_Q[0, 70:80]), rel=1e-12)
    assert got[1, 0] == pytest.approx(np.prod(1 - q2[0, 70:80]), rel=1e-12)


def test_joint_and_last_survivor() -> None:
    """Independent lives: tp_xy = tp_x tp_y and tp_{xy-bar} = tp_x + tp_y - tp_xy (DHW chapter 9)."""
    t = np.arange(0.0, 40.0)
    tp_x = tpx(SULT_Q, [0], [65.0], t)[0]
    tp_y = tpx(SULT_Q, [0], [62.0], t)[0]
    assert np.allclose(joint_life(tp_x, tp_y), tp_x * tp_y)
    ls = last_survivor(tp_x, tp_y)
    # last survivor = 1 - (1 - tp_x)(1 - tp_y): both must have died for it to fail
    np.testing.assert_allclose(ls, 1 - (1 - tp_x) * (1 - tp_y), atol=4e-15)


def test_bad_q_rows_raise_table_error_naming_age() -> None:
    bad = SULT_Q.copy()
    bad[0, 70] = 1.2
    with pytest.raises(TableError, match=r"row 0, column 'q\[70\]': q at age 70 is 1.2"):
        tpx(bad, [0], [65.0], [1.0])
    open_table = SULT_Q.copy()
    open_table[0, -1] = 0.6
    with pytest.raises(TableError, match="closing age 120 is 0.6; expected 1.0"):
        cohort_lx(open_table)
