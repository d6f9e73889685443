"""Annuities: annuities-certain, SULT life annuities, deferred / temporary / guaranteed / escalating,
monthly (exact and Woolhouse), joint life and reversionary.

Sources: DHW = Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed.
(chapter 5; section 5.11 Woolhouse; chapter 9 joint lives; Appendix D the SULT, also printed in the SOA
LTAM exam tables); Kellison, *The Theory of Interest*, 3rd ed. (chapters 3-4, annuities-certain).
"""

from __future__ import annotations

import numpy as np
import pytest

import tests.oracles as annuities_module
from tests.oracles import (
    annuity_certain,
    annuity_factor,
    joint_life_annuity_factor,
    life_annuity_from_survival,
    payment_times,
    reversionary_annuity_factor,
    tpx,
    woolhouse,
    woolhouse_two_term,
)
from valuation.discounting import RateCurve
from valuation.mortality.laws import SULT_LAW


def sult_q_row() -> np.ndarray:
    """SULT q rebuilt from its Makeham law (DHW Appendix D), ages 20..120, q = 1 at 120; ages below 20
    are never used and hold 0."""
    q = np.zeros(121)
    q[20:] = SULT_LAW.qx(np.arange(20, 121))
    q[120] = 1.0
    return q[None, :]


Q = sult_q_row()
FIVE = RateCurve.flat(0.05)
D5 = 0.05 / 1.05  # d at 5%


def a_due(x: float | list[float], curve: RateCurve = FIVE, **kw: object) -> np.ndarray:
    x = np.atleast_1d(np.asarray(x, dtype=float))
    return annuity_factor(Q, np.zeros(x.size, dtype=int), x, curve, **kw)  # type: ignore[arg-type]


# ---------------------------------------------------------------- annuities-certain


def test_payment_times() -> None:
    np.testing.assert_allclose(payment_times(1.5, 4, "advance"), [0, 0.25, 0.5, 0.75, 1.0, 1.25])
    np.testing.assert_allclose(payment_times(1.0, 2, "arrears"), [0.5, 1.0])


@pytest.mark.parametrize("m", [1, 2, 4, 12])
@pytest.mark.parametrize("timing", ["advance", "arrears"])
def test_annuity_certain_closed_form_equals_sum(m: int, timing: str) -> None:
    """a-due^(m)_n = (1 - v^n) / d^(m), a^(m)_n = (1 - v^n) / i^(m) (Kellison chapters 3-4) against
    the direct sum of (1/m) v^t over the payment times."""
    i, n = 0.045, 17.0
    t = payment_times(n, m, timing)  # type: ignore[arg-type]
    direct = np.sum((1 + i) ** -t) / m
    assert float(annuity_certain(n, i, m, timing)) == pytest.approx(direct, rel=1e-12)  # type: ignore[arg-type]


def test_annuity_certain_printed_values() -> None:
    """a_10 at 5% = 7.7217, a-due_10 at 5% = 8.1078 (compound interest tables, 4 dp; from memory, and
    equal to (1 - v^10)/i and (1 - v^10)/d); zero interest gives n."""
    assert float(annuity_certain(10, 0.05, 1, "arrears")) == pytest.approx(7.7217, abs=5e-5)
    assert float(annuity_certain(10, 0.05, 1, "advance")) == pytest.approx(8.1078, abs=5e-5)
    np.testing.assert_allclose(annuity_certain([5, 10], 0.0, 12), [5.0, 10.0])


# ---------------------------------------------------------------- SULT published values


def test_sult_published_annuities_at_5_percent() -> None:
    """DHW Appendix D (SULT at 5%; SOA LTAM tables): a-due_60 = 14.9041, a-due_65 = 13.5498 (4 dp),
    A_65 = 0.35477 (5 dp) with A_x = 1 - d a-due_x."""
    a = a_due([60.0, 65.0])
    assert a[0] == pytest.approx(14.9041, abs=5e-5)
    assert a[1] == pytest.approx(13.5498, abs=5e-5)
    assert 1 - D5 * a[1] == pytest.approx(0.35477, abs=5e-6)


def test_arrears_is_advance_minus_one() -> None:
    """a_x = a-due_x - 1 for annual payments (DHW chapter 5)."""
    x = [40.0, 65.0, 85.5]
    np.testing.assert_allclose(a_due(x, timing="arrears"), a_due(x) - 1.0, rtol=1e-12)


def test_deferred_temporary_guaranteed_identities() -> None:
    """DHW chapter 5: n|a-due_x = v^n np_x a-due_{x+n}; a-due_{x:n} = a-due_x - n|a-due_x;
    guaranteed n years: a-due_n(certain) + n|a-due_x."""
    x, n = 60.0, 10.0
    v_n = 1.05**-n
    np_x = float(tpx(Q, [0], [x], [n])[0, 0])
    deferred = a_due(x, deferral=n)[0]
    assert deferred == pytest.approx(v_n * np_x * a_due(x + n)[0], rel=1e-12)
    assert a_due(x, term=n)[0] == pytest.approx(a_due(x)[0] - deferred, rel=1e-12)
    guaranteed = a_due(x, guarantee=n)[0]
    assert guaranteed == pytest.approx(float(annuity_certain(n, 0.05)) + deferred, rel=1e-12)


def test_deferred_pension_with_guarantee_needs_survival_to_payment() -> None:
    """A deferred annuity guaranteed g years: n|a-due_x with the first g payments conditional only on
    surviving to n: v^n np_x (a-due_g + g|a-due_{x+n}) (DHW chapter 5, guaranteed annuities)."""
    x, n, g = 55.0, 10.0, 5.0
    np_x = float(tpx(Q, [0], [x], [n])[0, 0])
    expected = 1.05**-n * np_x * (float(annuity_certain(g, 0.05)) + a_due(x + n, deferral=g)[0])
    assert a_due(x, deferral=n, guarantee=g)[0] == pytest.approx(expected, rel=1e-12)


def test_temporary_child_pension_to_age_23() -> None:
    """A child aged 8.5 paid monthly to age 23 on a flat-zero-mortality row equals the annuity-certain
    a-due^(12)_{14.5} (Kellison chapter 4): with q = 0 below the closing age survival is 1."""
    q = np.zeros((1, 121))
    q[0, 120] = 1.0
    got = annuity_factor(q, [0], [8.5], RateCurve.flat(0.03), frequency=12, term=23.0 - 8.5)
    assert got[0] == pytest.approx(float(annuity_certain(14.5, 0.03, 12)), rel=1e-12)


def test_escalation_equals_adjusted_rate() -> None:
    """An annuity escalating at g valued at i equals the level annuity at (1 + i)/(1 + g) - 1
    (DHW chapter 5, increasing annuities; common practice)."""
    i, g = 0.05, 0.025
    x = [50.0, 65.0, 80.25]
    esc = a_due(x, RateCurve.flat(i), escalation=g)
    level = a_due(x, RateCurve.flat((1 + i) / (1 + g) - 1))
    np.testing.assert_allclose(esc, level, rtol=1e-12)
    # the same escalation given as an index path (growth factors of a flat 2.5% curve)
    via_index = a_due(x, RateCurve.flat(i), index_path=RateCurve.flat(g).growth_factors)
    np.testing.assert_allclose(via_index, esc, rtol=1e-12)


def test_spot_curve_matches_survival_grid_sum() -> None:
    """On a spot curve the factor is sum_k (1/m) v(t_k) tp_x(t_k) (DHW chapter 5, annuity as a sum of
    pure endowments), computed here from tpx and the curve separately."""
    curve = RateCurve.from_spot([1.0, 10.0, 30.0], [0.03, 0.04, 0.045])
    t = payment_times(121.0, 12, "advance")
    tp = tpx(Q, [0, 0], [62.0, 71.4], t)
    expected = life_annuity_from_survival(tp, t, curve, frequency=12)
    got = annuity_factor(Q, [0, 0], [62.0, 71.4], curve, frequency=12)
    np.testing.assert_allclose(got, expected, rtol=1e-12)


# ---------------------------------------------------------------- monthly: exact and Woolhouse


@pytest.mark.parametrize("x", [60.0, 65.0, 70.0, 80.0])
def test_woolhouse_close_to_exact_monthly(x: float) -> None:
    """DHW section 5.11: the three-term Woolhouse formula is within a few units in the 3rd decimal of
    the exact monthly annuity for the SULT at 5%; the two-term form is visibly worse at older ages."""
    exact = a_due(x, frequency=12)[0]
    annual = a_due(x)[0]
    three = float(woolhouse(annual, 12, SULT_LAW.force(x), np.log(1.05)))
    assert abs(three - exact) < 0.005
    two = float(woolhouse_two_term(annual, 12))
    assert abs(three - exact) < abs(two - exact)


def test_monthly_udd_equals_alpha_beta_formula() -> None:
    """Under UDD a-due^(12)_x = alpha(12) a-due_x - beta(12) exactly (DHW section 5.11, the UDD
    approach), with alpha(m) = i d / (i^(m) d^(m)), beta(m) = (i - i^(m)) / (i^(m) d^(m))."""
    i, m = 0.05, 12
    d = i / (1 + i)
    im = m * ((1 + i) ** (1 / m) - 1)
    dm = m * (1 - (1 + i) ** (-1 / m))
    alpha, beta = i * d / (im * dm), (i - im) / (im * dm)
    x = [45.0, 65.0, 90.0]
    np.testing.assert_allclose(a_due(x, frequency=m), alpha * a_due(x) - beta, rtol=1e-11)


# ---------------------------------------------------------------- joint life and reversionary


def test_reversionary_identity_and_direct_sum() -> None:
    """a_{x|y} = a_y - a_xy (DHW chapter 9), and equals sum v^t tp_y (1 - tp_x) on the payment grid."""
    x0, y0 = np.array([65.0, 70.5]), np.array([62.0, 74.0])
    rows = np.zeros(2, dtype=int)
    rev = reversionary_annuity_factor(Q, rows, x0, Q, rows, y0, FIVE, frequency=12)
    a_y = annuity_factor(Q, rows, y0, FIVE, frequency=12)
    a_xy = joint_life_annuity_factor(Q, rows, x0, Q, rows, y0, FIVE, frequency=12)
    np.testing.assert_allclose(rev, a_y - a_xy, rtol=1e-12)
    t = payment_times(121.0, 12, "advance")
    tp_x, tp_y = tpx(Q, rows, x0, t), tpx(Q, rows, y0, t)
    direct = life_annuity_from_survival(tp_y * (1 - tp_x), t, 1.05**-t, frequency=12)
    np.testing.assert_allclose(rev, direct, rtol=1e-12)
    # deferred 5 years: payments from t = 5 on, whenever x has died by t (before or after 5)
    deferred = reversionary_annuity_factor(Q, rows, x0, Q, rows, y0, FIVE, frequency=12, deferral=5.0)
    late = t >= 5.0
    direct_deferred = life_annuity_from_survival((tp_y * (1 - tp_x))[:, late], t[late], 1.05 ** -t[late],
                                                 frequency=12)
    np.testing.assert_allclose(deferred, direct_deferred, rtol=1e-12)
    with pytest.raises(ValueError, match="guarantee"):
        reversionary_annuity_factor(Q, rows, x0, Q, rows, y0, FIVE, guarantee=5.0)


def test_last_survivor_annuity_identity() -> None:
    """a_{xy-bar} = a_x + a_y - a_xy (DHW chapter 9): check a_xy against the last-survivor grid sum."""
    from tests.oracles import last_survivor

    rows = np.zeros(1, dtype=int)
    a_x = a_due(65.0)
    a_y = a_due(60.0)
    a_xy = joint_life_annuity_factor(Q, rows, [65.0], Q, rows, [60.0], FIVE)
    t = np.arange(0.0, 121.0)
    ls = last_survivor(tpx(Q, rows, [65.0], t), tpx(Q, rows, [60.0], t))
    a_ls = life_annuity_from_survival(ls, t, FIVE)
    np.testing.assert_allclose(a_x + a_y - a_xy, a_ls, rtol=1e-12)


# ---------------------------------------------------------------- vectorisation


def test_many_lives_in_chunks_match_one_by_one(monkeypatch: pytest.MonkeyPatch) -> None:
    """The chunked vector path equals the same lives valued one at a time (same-cases-every-path)."""
    rng = np.random.default_rng(1)
    x0 = rng.uniform(20.0, 100.0, 300)
    defer = rng.uniform(0.0, 10.0, 300)
    monkeypatch.setattr(annuities_module, "_CHUNK_CELLS", 5_000)  # force many chunks
    vec = annuity_factor(Q, np.zeros(300, dtype=int), x0, FIVE, frequency=4, deferral=defer)
    for k in [0, 17, 150, 299]:
        one = annuity_factor(Q, [0], [x0[k]], FIVE, frequency=4, deferral=defer[k])
        assert vec[k] == pytest.approx(one[0], rel=1e-12)
