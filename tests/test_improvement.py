"""Improvement scales and generational projection factors.

Sources: the SOA Mortality Improvement Scale MP-2014 report (generational projection) — generational projection
q(x, y) = q(x, b) prod_{s=b+1..y} (1 - i(x, s)) from the SOA *Mortality Improvement Scale MP-2014
Report* (2014) and US 26 CFR 1.430(h)(3)-1; with a constant rate r it is exactly q(x, b)(1 - r)^(y - b).
Convergence shapes are the formulas stated in improvement.py (linear; cubic taper (1-u)^2(1+2u)).
Fixture rates in tests/data/mortality/improvement_2d.csv are invented.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import openpyxl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from valuation.errors import BasisError, TableError
from valuation.mortality import (
    AgeImprovement,
    ConstantImprovement,
    ConvergenceScale,
    NoImprovement,
    TwoDimensionalScale,
    load_improvement_table,
)

DATA = Path(__file__).parent / "data" / "mortality"


def test_constant_improvement_is_power_of_one_minus_r():
    """Constant improvement (SOA MP-2014 report, generational form): constant r gives F = (1 - r)^(y - b) forwards, and its inverse backwards."""
    s = ConstantImprovement(0.015)
    years = np.arange(1990, 2061)
    got = s.cumulative_factor(np.full(years.shape, 65), 2020, years)
    np.testing.assert_allclose(got, 0.985 ** (years - 2020.0), rtol=1e-12)
    assert s.cumulative_factor(65, 2020, 2020) == 1.0
    # by hand: two years at 1.5 % -> 0.985^2 = 0.970225
    assert s.cumulative_factor(40, 2020, 2022) == pytest.approx(0.970225, rel=1e-12)


def test_no_improvement_and_rates_by_age():
    assert np.all(NoImprovement().cumulative_factor(np.arange(10), 2000, 2050) == 1.0)
    s = AgeImprovement(ages=[60, 61, 62], rates=[0.01, 0.02, 0.03])
    # Ages outside the given range take the nearest age's rate (stated rule).
    np.testing.assert_array_equal(s.rates(np.array([50, 60, 61, 62, 90]), 2030), [0.01, 0.01, 0.02, 0.03, 0.03])
    assert s.cumulative_factor(61, 2020, 2023) == pytest.approx(0.98**3, rel=1e-12)  # by hand


def test_two_dimensional_lookup_from_file():
    """Rates read back from improvement_2d.csv; factor 2020 -> 2023 is the product of the three
    columns for the age (by hand: age 61: 0.979 * 0.981 * 0.983)."""
    s = load_improvement_table(DATA / "improvement_2d.csv")
    assert s.min_age == 60 and list(s.years) == [2021, 2022, 2023]
    np.testing.assert_array_equal(s.rates(np.array([60, 61, 62]), np.array([2021, 2022, 2023])), [0.020, 0.019, 0.018])
    assert s.cumulative_factor(61, 2020, 2023) == pytest.approx(0.979 * 0.981 * 0.983, rel=1e-12)
    # Nearest age outside the table; first year's rates before the first year (stated rules).
    assert s.rates(30, 2022) == 0.018 and s.rates(99, 2022) == 0.020
    assert s.rates(62, 1990) == 0.022


@pytest.mark.parametrize(
    "rule, expected_2030",
    [("hold_last", 0.017), ("long_term", 0.012), ("zero", 0.0)],  # age 61: last column 0.017
)
def test_two_dimensional_after_last_year(rule, expected_2030):
    s = load_improvement_table(DATA / "improvement_2d.csv", after_last_year=rule, long_term_rate=0.012)
    assert s.rates(61, 2030) == pytest.approx(expected_2030, rel=1e-12, abs=1e-15)
    assert s.rates(61, 2023) == 0.017  # the last year itself is in the table
    f = s.cumulative_factor(61, 2023, 2026)
    assert f == pytest.approx((1 - expected_2030) ** 3, rel=1e-12)


def test_two_dimensional_from_xlsx(tmp_path):
    wb = openpyxl.Workbook()
    for r in [["age", 2021, 2022, 2023], [60, 0.020, 0.018, 0.016], [61, 0.021, 0.019, 0.017],
              [62, 0.022, 0.020, 0.018]]:
        wb.active.append(r)
    wb.save(tmp_path / "imp.xlsx")
    a = load_improvement_table(tmp_path / "imp.xlsx")
    b = load_improvement_table(DATA / "improvement_2d.csv")
    np.testing.assert_array_equal(a.rate_values, b.rate_values)


@pytest.mark.parametrize(
    "text, words",
    [
        ("age,2021,x\n60,0.01,0.01", "column header 'x' is not a calendar year"),
        ("age,2021,2023\n60,0.01,0.01", "year 2023 follows year 2021"),
        ("age,2021,2022\n60,0.01,1.5", "rate 1.5 at age 60 is not strictly between -1 and 1"),
        ("age,2021,2022\n60,0.01,\n61,0.01,0.01", "missing value at age 60"),
    ],
)
def test_improvement_table_errors_name_file_and_column(tmp_path, text, words):
    path = tmp_path / "imp.csv"
    path.write_text(text + "\n")
    with pytest.raises(TableError) as e:
        load_improvement_table(path)
    assert "imp.csv" in str(e.value) and words in str(e.value) and "column '" in str(e.value)


@pytest.mark.parametrize("shape", ["linear", "smooth"])
def test_convergence_reaches_long_term_rate(shape):
    s = ConvergenceScale([60, 61], [0.03, 0.04], long_term_rate=0.015, start_year=2020,
                         convergence_years=20, shape=shape)
    np.testing.assert_allclose(s.rates([60, 61], 2020), [0.03, 0.04], rtol=1e-12)  # initial at the start
    np.testing.assert_allclose(s.rates([60, 61], 2015), [0.03, 0.04], rtol=1e-12)  # before the start
    np.testing.assert_allclose(s.rates([60, 61], 2040), [0.015, 0.015], rtol=1e-12)  # long-term at the end
    np.testing.assert_allclose(s.rates([60, 61], 2070), [0.015, 0.015], rtol=1e-12)
    # Midway both shapes give weight 1/2 (linear: 1 - 1/2; cubic: (1/2)^2 * 2 = 1/2), by hand.
    assert s.rates(60, 2030) == pytest.approx(0.0225, rel=1e-12)


def test_convergence_shapes_by_hand():
    kw = dict(initial_ages=[60], initial_rates=[0.03], long_term_rate=0.01, start_year=2020, convergence_years=4)
    lin, smo = ConvergenceScale(**kw, shape="linear"), ConvergenceScale(**kw, shape="smooth")
    # u = 1/4: linear w = 3/4; cubic w = (3/4)^2 (1 + 1/2) = 27/32.
    assert lin.rates(60, 2021) == pytest.approx(0.01 + 0.02 * 0.75, rel=1e-12)
    assert smo.rates(60, 2021) == pytest.approx(0.01 + 0.02 * 27 / 32, rel=1e-12)
    # Zero slope at the end of the smooth taper: w'(u) = -6u(1 - u) = 0 at u = 1.
    h = 1e-6
    w = smo.weight
    assert (w(2024 - h) - w(2024)) / h == pytest.approx(0.0, abs=1e-5)
    assert (lin.weight(2024 - h) - lin.weight(2024)) / h == pytest.approx(0.25, rel=1e-6)


def test_with_long_term_rate():
    assert isinstance(NoImprovement().with_long_term_rate(0.01), ConstantImprovement)
    assert ConstantImprovement(0.02).with_long_term_rate(0.01).rate == 0.01
    c = ConvergenceScale([60], [0.03], 0.015, 2020, 10).with_long_term_rate(0.02)
    assert c.rates(60, 2040) == 0.02 and c.rates(60, 2020) == 0.03
    t = load_improvement_table(DATA / "improvement_2d.csv").with_long_term_rate(0.005)
    assert t.rates(60, 2050) == 0.005 and t.rates(60, 2021) == 0.020
    with pytest.raises(BasisError, match="no long-term rate"):
        AgeImprovement([60], [0.01]).with_long_term_rate(0.01)


def test_bad_parameters_raise_basis_error():
    with pytest.raises(BasisError, match="strictly between -1 and 1"):
        ConstantImprovement(1.0)
    with pytest.raises(BasisError, match="at least 1 year"):
        ConvergenceScale([60], [0.03], 0.015, 2020, 0)
    with pytest.raises(BasisError, match='"linear" or "smooth"'):
        ConvergenceScale([60], [0.03], 0.015, 2020, 10, shape="cubic")  # type: ignore[arg-type]
    with pytest.raises(BasisError, match="after_last_year"):
        TwoDimensionalScale(60, [2021], [[0.01]], after_last_year="extend")  # type: ignore[arg-type]


def test_grid_is_cached_and_widened():
    s = ConvergenceScale([60], [0.03], 0.015, 2020, 10, shape="smooth")
    s.cumulative_factor(np.arange(20, 100), 2020, 2050)
    first = s._grid
    s.cumulative_factor(70, 2020, 2040)  # inside: reused
    assert s._grid is first
    s.cumulative_factor(70, 2020, 2100)  # outside: rebuilt to the union
    assert s._grid[2] <= 2020 and s._grid[3] >= 2100


@settings(max_examples=40, deadline=None)
@given(
    age=st.integers(0, 120),
    b=st.integers(1950, 2050),
    m=st.integers(1950, 2050),
    y=st.integers(1950, 2050),
)
def test_factor_chain_and_inverse(age, b, m, y):
    """F(b -> y) = F(b -> m) F(m -> y) and F(b -> y) F(y -> b) = 1, from the definition of the product."""
    s = ConvergenceScale(np.arange(50, 91), np.linspace(0.03, 0.0, 41), 0.012, 2015, 15, shape="smooth")
    f = s.cumulative_factor
    assert f(age, b, y) == pytest.approx(f(age, b, m) * f(age, m, y), rel=1e-12)
    assert f(age, b, y) * f(age, y, b) == pytest.approx(1.0, rel=1e-12)
    expected = np.prod(1.0 - s.rates(age, np.arange(b + 1, y + 1))) if y >= b else 1.0 / np.prod(
        1.0 - s.rates(age, np.arange(y + 1, b + 1)))
    assert f(age, b, y) == pytest.approx(expected, rel=1e-12)
