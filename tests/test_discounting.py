"""Discounting: spot curves, present values, durations and the single equivalent discount rate.

Sources: Kellison, *The Theory of Interest*, 3rd ed. (chapters 3-4 annuities-certain and increasing
annuities; chapter 10 spot and forward rates; chapter 11 Macaulay and modified duration); IAS 19 para 83.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.oracles import annuity_certain
from valuation.discounting import (
    RateCurve,
    effective_duration,
    macaulay_duration,
    modified_duration,
    present_value,
    single_equivalent_rate,
)
from valuation.errors import BasisError

CURVE = RateCurve.from_spot([1.0, 5.0, 10.0, 20.0], [0.030, 0.038, 0.042, 0.045])


def test_flat_curve_discount_factors() -> None:
    """v(t) = (1 + i)^-t (Kellison chapter 1)."""
    t = np.array([0.0, 0.5, 1.0, 10.0, 37.25])
    np.testing.assert_allclose(RateCurve.flat(0.05).discount_factors(t), 1.05**-t, rtol=1e-12)
    assert RateCurve.flat(0.05).is_flat


def test_spot_interpolation_and_flat_spot_extrapolation() -> None:
    """Linear in spot rate between terms; flat spot before the first and after the last term (the rule
    stated in RateCurve's docstring)."""
    s = CURVE.spot([0.25, 1.0, 3.0, 7.5, 20.0, 60.0])
    np.testing.assert_allclose(s, [0.030, 0.030, 0.034, 0.040, 0.045, 0.045], atol=1e-14)
    assert not CURVE.is_flat


def test_flat_forward_extrapolation() -> None:
    """Beyond the last term the one-year forward rate stays at the forward over the last interval:
    (1 + f)^(t2 - t1) = (1 + s2)^t2 / (1 + s1)^t1 (Kellison chapter 10, forward rates from spot rates)."""
    curve = RateCurve.from_spot([1.0, 5.0, 10.0, 20.0], [0.030, 0.038, 0.042, 0.045],
                                extrapolation="flat_forward")
    f = (1.045**20 / 1.042**10) ** (1 / 10) - 1
    growth = curve.growth_factors(np.array([20.0, 21.0, 35.5, 60.0]))
    np.testing.assert_allclose(growth[1:] / growth[0], (1 + f) ** (np.array([21.0, 35.5, 60.0]) - 20.0),
                               rtol=1e-12)
    # inside the given terms the two extrapolation options agree
    inside = np.linspace(0.1, 20.0, 50)
    np.testing.assert_allclose(curve.spot(inside), CURVE.spot(inside), atol=1e-14)


def test_growth_is_reciprocal_of_discount_and_shift_is_parallel() -> None:
    t = np.linspace(0.0, 50.0, 101)
    np.testing.assert_allclose(CURVE.growth_factors(t) * CURVE.discount_factors(t), 1.0, rtol=1e-12)
    np.testing.assert_allclose(CURVE.shifted(0.0025).spot(t), CURVE.spot(t) + 0.0025, atol=1e-14)


def test_present_value_of_level_annuity_matches_closed_form() -> None:
    """PV of 1 a year in arrears for 20 years at 4% = (1 - v^20) / i (Kellison chapter 3)."""
    t = np.arange(1.0, 21.0)
    pv = present_value(np.ones(20), t, RateCurve.flat(0.04))
    assert pv == pytest.approx(float(annuity_certain(20, 0.04, 1, "arrears")), rel=1e-12)
    assert pv == pytest.approx((1 - 1.04**-20) / 0.04, rel=1e-12)
    # a stack of cash-flow vectors gives one PV each
    two = present_value(np.vstack([np.ones(20), 2 * np.ones(20)]), t, RateCurve.flat(0.04))
    np.testing.assert_allclose(two, [pv, 2 * pv], rtol=1e-12)


def test_macaulay_duration_of_level_annuity_closed_form() -> None:
    """Level annuity-immediate: D = (Ia)_n / a_n with (Ia)_n = (a-due_n - n v^n) / i
    (Kellison chapter 4 increasing annuity, chapter 11 duration)."""
    n, i = 20, 0.04
    v = 1 / (1 + i)
    a_n = (1 - v**n) / i
    a_due = (1 - v**n) / (i * v)
    ia = (a_due - n * v**n) / i
    t = np.arange(1.0, n + 1)
    assert macaulay_duration(np.ones(n), t, RateCurve.flat(i)) == pytest.approx(ia / a_n, rel=1e-12)
    assert modified_duration(np.ones(n), t, i) == pytest.approx(ia / a_n / (1 + i), rel=1e-12)


def test_zero_coupon_durations_and_sedr() -> None:
    """A single payment at T: Macaulay duration = T, and the single equivalent rate is the T-year spot
    rate (Kellison chapters 10 and 11)."""
    t = np.array([12.0])
    assert macaulay_duration([100.0], t, CURVE) == pytest.approx(12.0, rel=1e-12)
    assert single_equivalent_rate([100.0], t, CURVE) == pytest.approx(float(CURVE.spot(12.0)), abs=1e-12)


def test_effective_duration_equals_modified_duration_on_a_flat_curve() -> None:
    """On a flat curve -dPV/di / PV is the modified duration (Kellison chapter 11). A central difference
    is within (h^2 / 6) max|d3 PV / di3| of the derivative (Taylor's theorem), where
    d3 PV / di3 = -sum t(t+1)(t+2) v^(t+3) CF, largest in size at i - h."""
    i, h = 0.035, 1e-4
    t = np.arange(0.5, 40.5)
    cf = 1000.0 * np.exp(-0.05 * t)
    eff = effective_duration(cf, t, RateCurve.flat(i), h=h)
    pv = float(cf @ (1 + i) ** -t)
    third = float(cf @ (t * (t + 1) * (t + 2) * (1 + i - h) ** -(t + 3)))
    tol = h**2 / 6 * third / pv
    mod = modified_duration(cf, t, i)
    assert abs(eff - mod) <= tol
    assert abs(eff - mod) > 0.0  # the difference formula is an approximation, not the closed form


def test_effective_duration_sanity_25bp() -> None:
    """A typical pension obligation moves by about 2-4% for a 25 bp move (common practice)."""
    t = np.arange(1.0, 61.0)
    cf = np.where(t < 15, t, 15.0) * np.exp(-0.06 * np.maximum(t - 15.0, 0.0))
    eff = effective_duration(cf, t, CURVE, h=0.0025)
    assert 0.02 <= eff * 0.0025 <= 0.06


def test_sedr_reproduces_curve_pv() -> None:
    """IAS 19 para 83: the single rate giving the curve's PV of the same cash flows."""
    t = np.arange(1.0, 51.0)
    cf = 100.0 * np.exp(-0.04 * np.abs(t - 15.0))
    sedr = single_equivalent_rate(cf, t, CURVE)
    assert present_value(cf, t, RateCurve.flat(sedr)) == pytest.approx(present_value(cf, t, CURVE), rel=1e-11)
    assert 0.030 < sedr < 0.045
    assert single_equivalent_rate(cf, t, RateCurve.flat(0.0375)) == pytest.approx(0.0375, abs=1e-12)


def test_curve_errors_name_the_problem() -> None:
    with pytest.raises(BasisError, match=r"row 2, column 'terms': term 5 does not increase"):
        RateCurve.from_spot([1.0, 5.0, 5.0], [0.03, 0.04, 0.05])
    with pytest.raises(BasisError, match="3 terms and 2 rates"):
        RateCurve.from_spot([1.0, 5.0, 10.0], [0.03, 0.04])
    with pytest.raises(BasisError, match=r"spot rate -1\.5 at term 5"):
        RateCurve.from_spot([1.0, 5.0], [0.03, -1.5])
    with pytest.raises(BasisError, match="extrapolation"):
        RateCurve.from_spot([1.0], [0.03], extrapolation="linear")  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="all cash flows are zero"):
        single_equivalent_rate(np.zeros(3), np.arange(3.0), CURVE)
